//! Unit tests of the transposed step: the adjoint identity `<A x, y> = <x, A^T y>` (common
//! practice: the defining property of a transpose) on random vectors for every linear scheme,
//! stage count, side kind, land, depth field and tide; the march's steps against
//! `Simulation::advance_to`.

use super::transpose::Transposer;
use super::*;
use crate::ops::limiter::Limiter;
use crate::step::explicit::Explicit;
use crate::step::State;
use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use std::path::PathBuf;

fn load(name: &str, sets: &[&str]) -> crate::scenario::Scenario {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios").join(name);
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    crate::scenario::load(&path, &sets).unwrap_or_else(|e| panic!("{e}"))
}

/// `<A x, y>` and `<x, A^T y>` for one step of `dt` from `t` on random `x`, `y`.
fn both_sides(m: &Model, scheme: &Scheme, t: f64, dt: f64, seed: u64) -> (f64, f64) {
    let g = &m.grid;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut x = vec![0.0; g.padded_len()];
    let mut y = vec![0.0; g.padded_len()];
    for j in 0..g.ny {
        for i in 0..g.nx {
            let p = g.idx(i as isize, j as isize);
            x[p] = rng.random::<f64>() - 0.3;
            y[p] = rng.random::<f64>() - 0.3;
        }
    }
    let dot = |a: &[f64], b: &[f64]| {
        let mut s = crate::field::Neumaier::default();
        for j in 0..g.ny {
            let q = g.idx(0, j as isize);
            for p in q..q + g.nx {
                s.add(a[p] * b[p]);
            }
        }
        s.value()
    };
    let mut state = State {
        c: x.clone(),
        t,
        step: 0,
        last_dt: 0.0,
        last_courant: 0.0,
    };
    let decay = crate::ops::sources::decay_factor(m.decay_rate, dt);
    let mut ex = Explicit::new(m);
    ex.advance(m, scheme, &mut state, dt, decay, f64::INFINITY, 1.0);
    let lhs = dot(&state.c, &y);
    let mut tr = Transposer::new(m, scheme.limiter).unwrap();
    let mut lam = y;
    tr.step_back(m, scheme.stages, &mut lam, t, dt);
    (lhs, dot(&x, &lam))
}

#[test]
fn transposed_step_satisfies_the_adjoint_identity() {
    let cases: &[(&str, &[&str])] = &[
        // Open and wall sides, uniform depth, decay.
        ("gaussian-puff.toml", &[]),
        // Periodic x, fixed north, a diagonal flow.
        (
            "gaussian-puff.toml",
            &[
                "boundary.west=\"periodic\"",
                "boundary.east=\"periodic\"",
                "boundary.north={kind=\"fixed\",value=2.0}",
                "flow.velocity=[0.12,-0.05]",
            ],
        ),
        // Land, openings, a tide with a level (depth field, tidal filling).
        ("marina.toml", &[]),
        // A depth file and land.
        ("outfall.toml", &[]),
        // A flow that reverses in time, walls all round.
        ("swirl.toml", &[]),
    ];
    for (name, sets) in cases {
        for limiter in [Limiter::Upwind, Limiter::Central, Limiter::Quick] {
            for stages in 1..=3u8 {
                let scn = load(name, sets);
                let m = homogeneous(&scn.build_model().unwrap());
                let scheme = Scheme {
                    limiter,
                    stages,
                    ..scn.scheme
                };
                let dt = max_step(&m, &scheme).unwrap();
                let t = 0.37 * scn.run.end;
                let (a, b) = both_sides(&m, &scheme, t, dt, 7 + stages as u64);
                let rel = (a - b).abs() / a.abs().max(b.abs());
                assert!(
                    rel < 1e-12,
                    "{name} {sets:?} {limiter} {stages} stages: {a} vs {b} ({rel:e})"
                );
            }
        }
    }
}

#[test]
fn march_steps_are_those_of_advance_to() {
    let scn = load("gaussian-puff.toml", &[]);
    let m = scn.build_model().unwrap();
    let stops = [100.0, 1234.5, 3600.0];
    let dt_max = max_step(&m, &scn.scheme).unwrap();
    let steps = march_steps(0.0, &stops, dt_max);
    let mut sim = crate::step::Simulation::new(m.clone(), scn.scheme, m.zero_field()).unwrap();
    let mut got = Vec::new();
    for &s in &stops {
        let mut t_prev = sim.state.t;
        sim.advance_to(s, |x| {
            got.push(Step {
                t: t_prev,
                dt: x.state.last_dt,
                t1: x.state.t,
            });
            t_prev = x.state.t;
            std::ops::ControlFlow::Continue(())
        })
        .unwrap();
    }
    assert_eq!(steps, got);
}

#[test]
fn linear_coefficients_are_the_schemes_psi() {
    // psi = p0 + p1 r: upwind 0, central 1, QUICK (3 + r)/4 (Leonard 1979).
    assert_eq!(linear_coefficients(Limiter::Upwind), Some((0.0, 0.0)));
    assert_eq!(linear_coefficients(Limiter::Central), Some((1.0, 0.0)));
    assert_eq!(linear_coefficients(Limiter::Quick), Some((0.75, 0.25)));
    assert_eq!(linear_coefficients(Limiter::VanLeer), None);
}
