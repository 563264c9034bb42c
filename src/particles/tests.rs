//! Tests of the particle stepper against analytic moments, the well-mixed condition, the
//! budget and thread-count independence.

use super::*;
use crate::depth::Depth;
use crate::flow::FlowSpec;
use crate::grid::{Grid, Mask};
use crate::model::ModelSpec;
use crate::ops::boundary::{Boundaries, SideKind};
use crate::ops::sources::{Release, SourceSpec};

fn open_water(u: f64, v: f64, k: f64) -> Model {
    let grid = Grid::new(200, 100, 1.0, 1.0, 0.0, 0.0).unwrap();
    Model::new(ModelSpec {
        grid,
        mask: None,
        depth: 2.0.into(),
        kx: k,
        ky: k,
        decay_rate: 0.0,
        flow: FlowSpec::uniform(u, v),
        boundaries: Boundaries::uniform(SideKind::Open { value: 0.0 }),
        sources: vec![SourceSpec {
            name: "puff".into(),
            at: (60.5, 50.5),
            release: Release::Instant { mass: 1.0, at: 0.0 },
            spread: None,
        }],
    })
    .unwrap()
}

fn config(count: usize, seed: u64) -> ParticleConfig {
    ParticleConfig {
        count,
        seed,
        t0: 0.0,
        t_end: 1e6,
    }
}

fn moments(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, var)
}

#[test]
fn a_cloud_moves_with_the_flow_and_spreads_as_2kt() {
    // A random walk of diffusivity K: the centroid moves with u t and the variance grows by
    // 2 K t per axis (Einstein 1905; Crank 1975, The Mathematics of Diffusion, ch. 2).
    let (u, v, k) = (0.1, -0.05, 0.05);
    let model = open_water(u, v, k);
    let n = 20_000;
    let mut s = ParticleStepper::new(&model, model.zero_field().view(), config(n, 7)).unwrap();
    let (mx0, vx0) = moments(&s.particles().x);
    let (my0, vy0) = moments(&s.particles().y);
    let (dt, steps) = (2.0, 200);
    for _ in 0..steps {
        s.step(dt);
    }
    let t = dt * steps as f64;
    let p = s.particles();
    assert!(p.x.iter().all(|x| x.is_finite()), "no particle reaches a side");
    let (mx, vx) = moments(&p.x);
    let (my, vy) = moments(&p.y);
    let nf = n as f64;
    for (name, mean, mean0, var, var0, vel) in [("x", mx, mx0, vx, vx0, u), ("y", my, my0, vy, vy0, v)] {
        let se_mean = (var / nf).sqrt();
        assert!(
            (mean - mean0 - vel * t).abs() < 3.0 * se_mean,
            "{name}: centroid moved {} for u t = {}",
            mean - mean0,
            vel * t
        );
        // Standard error of a sample variance of a Gaussian: var sqrt(2 / (n - 1)).
        let se_var = var * (2.0 / (nf - 1.0)).sqrt();
        assert!(
            (var - var0 - 2.0 * k * t).abs() < 3.0 * se_var,
            "{name}: variance grew {} for 2 K t = {}",
            var - var0,
            2.0 * k * t
        );
    }
    let b = s.budget();
    assert!((b.released - 1.0).abs() < 1e-12 && b.out_total() == 0.0);
}

fn island_basin(decay: f64) -> Model {
    let grid = Grid::new(40, 30, 5.0, 5.0, 0.0, 0.0).unwrap();
    let mask = Mask::all_water(&grid)
        .with_land(&grid, |x, y| (80.0..120.0).contains(&x) && (50.0..100.0).contains(&y))
        .unwrap();
    let mut b = Boundaries::walls();
    b.east = SideKind::Open { value: 0.0 };
    Model::new(ModelSpec {
        grid,
        mask: Some(mask),
        depth: 3.0.into(),
        kx: 0.5,
        ky: 0.5,
        decay_rate: decay,
        flow: FlowSpec::uniform(0.3, 0.1),
        boundaries: b,
        sources: vec![SourceSpec {
            name: "outfall".into(),
            at: (40.0, 75.0),
            release: Release::Continuous {
                rate: 2.0,
                start: 10.0,
                stop: 200.0,
            },
            spread: Some(6.0),
        }],
    })
    .unwrap()
}

#[test]
fn land_reflects_and_the_budget_closes_to_round_off() {
    // Reflection keeps every particle in water; the budget in water + out + decayed =
    // released holds by construction (common practice for particle mass accounts).
    let model = island_basin(1e-3);
    let c0 = model.field_from(|x, _| if !(60.0..180.0).contains(&x) { 0.5 } else { 0.0 });
    let mut s = ParticleStepper::new(&model, c0.view(), config(30_000, 3)).unwrap();
    for step in 0..150 {
        s.step(2.0);
        let p = s.particles();
        for k in 0..s.released() {
            if p.x[k].is_nan() {
                assert_eq!(p.mass[k], 0.0);
                continue;
            }
            let (i, j) = model.grid.cell_at(p.x[k], p.y[k]).expect("inside the grid");
            assert!(
                model.mask.is_wet(i, j),
                "step {step}: particle {k} on land at ({i}, {j})"
            );
        }
        let b = s.budget();
        let total = s.mass_in_water() + b.out_total() + b.decayed;
        assert!(
            (total - b.released).abs() <= 1e-12 * b.released,
            "step {step}: {total} vs {}",
            b.released
        );
    }
    let b = s.budget();
    assert!(b.out[Side::East.index()] > 0.0 && b.decayed > 0.0, "{b:?}");
    assert_eq!(b.out[Side::West.index()], 0.0, "walls let nothing out");
    // The continuous release is fully represented by 300 s: 2 x 190 = 380 plus the initial
    // field's c h dA.
    let initial: f64 = c0.sum() * 3.0 * 25.0;
    assert!((b.released - (380.0 + initial)).abs() < 1e-9 * b.released);
}

use crate::ops::boundary::Side;

#[test]
fn the_same_seed_gives_the_same_particles_on_one_or_two_threads() {
    // One random stream per fixed chunk of particles: the thread count cannot change the draws
    // (common practice for reproducible parallel random walks).
    let model = island_basin(1e-3);
    let c0 = model.field_from(|_, _| 1.0);
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        pool.install(|| {
            let mut s = ParticleStepper::new(&model, c0.view(), config(3 * CHUNK + 123, 11)).unwrap();
            for _ in 0..50 {
                s.step(2.0);
            }
            (s.particles().clone(), s.budget())
        })
    };
    let (a, ba) = run(1);
    let (b, bb) = run(2);
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&a.x), bits(&b.x));
    assert_eq!(bits(&a.y), bits(&b.y));
    assert_eq!(bits(&a.mass), bits(&b.mass));
    assert_eq!(ba, bb);
    // A different seed gives different positions.
    let other = {
        let mut s = ParticleStepper::new(&model, c0.view(), config(3 * CHUNK + 123, 12)).unwrap();
        s.step(2.0);
        s.particles().x.clone()
    };
    assert_ne!(bits(&other), bits(&a.x));
}

/// A walled basin of 20 x 4 cells of 10 m with depth rising linearly from 1.1 m to 4.9 m
/// along x, still water, K = 1 m2/s.
fn sloping_basin() -> Model {
    let grid = Grid::new(20, 4, 10.0, 10.0, 0.0, 0.0).unwrap();
    let depth: Vec<f64> = (0..4).flat_map(|_| (0..20).map(|i| 1.1 + 0.2 * i as f64)).collect();
    Model::new(ModelSpec {
        grid,
        mask: None,
        depth: Depth::Field(depth),
        kx: 1.0,
        ky: 1.0,
        decay_rate: 0.0,
        flow: FlowSpec::uniform(0.0, 0.0),
        boundaries: Boundaries::walls(),
        sources: vec![],
    })
    .unwrap()
}

/// Pearson's chi-square of the particle counts per column against counts proportional to the
/// column volumes (a well-mixed tracer).
fn column_chi_square(s: &ParticleStepper, model: &Model) -> f64 {
    let tally = s.tally();
    let n = s.released() as f64;
    let vol: f64 = tally.volume.sum();
    (0..model.grid.nx)
        .map(|i| {
            let count: u32 = tally.count.column(i).sum();
            let expect = n * tally.volume.column(i).sum() / vol;
            (count as f64 - expect).powi(2) / expect
        })
        .sum()
}

#[test]
fn a_well_mixed_tracer_stays_mixed_over_a_sloping_bed_only_with_the_drift() {
    // The well-mixed condition (Visser 1997, Mar. Ecol. Prog. Ser. 158, 275; from memory):
    // particles started at a uniform concentration over a varying depth must stay uniform;
    // without the drift K grad(h)/h they gather in shallow water. K is constant per axis in
    // tinct, so the varying term here is the depth.
    let model = sloping_basin();
    let c0 = model.field_from(|_, _| 1.0);
    let run = |drift: bool| {
        let mut s = ParticleStepper::new(&model, c0.view(), config(20_000, 5)).unwrap();
        s.set_drift(drift);
        // 4000 steps of 5 s: 20,000 s, half the mixing time L^2/K over the 200 m basin; the
        // undrifted walk has long since flattened its area density by then.
        for _ in 0..4000 {
            s.step(5.0);
        }
        column_chi_square(&s, &model)
    };
    let (with, without) = (run(true), run(false));
    // 99.9 % point of chi-square with 19 degrees of freedom: 43.8 (handbook tables; from
    // memory).
    assert!(with < 43.8, "with drift: chi2 = {with}");
    assert!(without > 10.0 * 43.8, "without drift: chi2 = {without}");
}

#[test]
fn a_move_mirrors_at_land_wraps_at_periodic_sides_and_leaves_through_open_ones() {
    let wet = |k: isize| k != 3;
    let wall = (SideKind::Wall, SideKind::Wall);
    // From 2.5 by +1: the face at 3 mirrors the last half cell back to 2.5.
    assert!(matches!(walk_move(2.5, 1.0, 5, wall, wet), Some(p) if (p - 2.5).abs() < 1e-15));
    // From 0.5 by -1.0 against the west wall: mirrored to 0.5.
    assert!(matches!(walk_move(0.5, -1.0, 5, wall, |_| true), Some(p) if (p - 0.5).abs() < 1e-15));
    // Periodic: from 4.5 by +1 to 0.5.
    let per = (SideKind::Periodic, SideKind::Periodic);
    assert!(matches!(walk_move(4.5, 1.0, 5, per, |_| true), Some(p) if (p - 0.5).abs() < 1e-15));
    // Open: out.
    let open = (SideKind::Wall, SideKind::Open { value: 0.0 });
    assert!(walk_move(4.5, 1.0, 5, open, |_| true).is_none());
}

fn walk_move(pos: f64, d: f64, n: usize, sides: (SideKind, SideKind), wet: impl Fn(isize) -> bool) -> Option<f64> {
    walk::move_for_tests(pos, d, n, sides, wet)
}

#[test]
fn a_uniform_tracer_stays_uniform_in_a_divergence_free_flow() {
    // Incompressibility: a divergence-free flow keeps a uniform concentration uniform
    // (Liouville; common practice). Each velocity component is linear along its own axis
    // inside a cell (Pollock 1988; from memory), so the particle flow has the grid flow's
    // zero divergence in every cell; a blend across rows would not. The steady vortex fills a
    // walled basin (its normal velocity is zero on the sides), no diffusion.
    let grid = Grid::new(32, 32, 10.0, 10.0, 0.0, 0.0).unwrap();
    let model = Model::new(ModelSpec {
        grid,
        mask: None,
        depth: 2.0.into(),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec::steady(crate::flow::FlowKind::Vortex { speed: 0.5 }),
        boundaries: Boundaries::walls(),
        sources: vec![],
    })
    .unwrap();
    let c0 = model.field_from(|_, _| 1.0);
    let n = 102_400;
    let mut s = ParticleStepper::new(&model, c0.view(), config(n, 9)).unwrap();
    // 400 steps of 4 s: at most 0.2 cells a step, about two turns of the outer ring.
    for _ in 0..400 {
        s.step(4.0);
    }
    let tally = s.tally();
    let expect = n as f64 / 1024.0;
    let chi2: f64 = tally.count.iter().map(|&c| (c as f64 - expect).powi(2) / expect).sum();
    // 1023 degrees of freedom: mean 1023, standard deviation sqrt(2 * 1023) = 45; allow the
    // mean plus five standard deviations (normal approximation of chi-square, common practice).
    assert!(chi2 < 1023.0 + 5.0 * 45.2, "chi2 = {chi2}");
}
