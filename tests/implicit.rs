//! Implicit, Crank–Nicolson and IMEX time stepping against exact solutions and the explicit
//! path: temporal order by self-convergence, boundedness of implicit upwind at large Courant
//! numbers, deferred correction against explicit van Leer, IMEX on the decaying puff, and the
//! mass budget closing to the solver tolerance.

mod common;

use common::*;
use std::f64::consts::PI;
use tinct::flow::FlowKind;
use tinct::grid::Grid;
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::step::{Scheme, Simulation, TimeScheme};

/// Diffusing Gaussian of mass m from a point release t seconds ago at (x0, y0), depth 1
/// (Crank 1975, The Mathematics of Diffusion, instantaneous point source in 2D).
fn gauss(m: f64, x0: f64, y0: f64, k: f64, t: f64) -> impl Fn(f64, f64) -> f64 {
    move |x, y| m / (4.0 * PI * k * t) * (-((x - x0).powi(2) + (y - y0).powi(2)) / (4.0 * k * t)).exp()
}

fn implicit(time: TimeScheme, limiter: Limiter, dt: Option<f64>) -> Scheme {
    Scheme {
        limiter,
        time,
        dt,
        courant: time.default_courant(),
        ..Scheme::default()
    }
}

/// Pure diffusion of a Gaussian (sigma 8 cells at the start) on a closed 128 x 128 basin.
fn diffusion_run(scheme: Scheme) -> Simulation {
    let grid = Grid::new(128, 128, 1.0, 1.0, 0.0, 0.0).unwrap();
    let mut sp = spec(grid, FlowKind::Uniform { u: 0.0, v: 0.0 }, Boundaries::walls());
    sp.kx = 1.0;
    sp.ky = 1.0;
    let mut s = sim(sp, scheme, gauss(1e4, 64.0, 64.0, 1.0, 32.0));
    run_to(&mut s, 80.0, |_| {});
    s
}

fn diff_l1(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).sum::<f64>()
}

#[test]
fn temporal_order_at_diffusion_number_10_by_self_convergence() {
    // Three steps dt = 10, 5, 2.5 s (diffusion number K dt/dx^2 = 10, 5, 2.5 per direction);
    // the order is log2 of the ratio of successive differences (common practice, e.g.
    // Roache 1998, Verification and Validation in Computational Science and Engineering).
    let exact = gauss(1e4, 64.0, 64.0, 1.0, 112.0);
    let explicit = diffusion_run(Scheme {
        limiter: Limiter::Upwind,
        ..Scheme::default()
    });
    let e_explicit = l1_error(&explicit, &exact);
    // Backward Euler's first-order time error dominates at these steps, so only Crank–Nicolson
    // is held to the explicit run's spatial error at the finest step.
    for (time, lo, hi, factor) in [
        (TimeScheme::Implicit, 0.8, 1.2, f64::INFINITY),
        (TimeScheme::CrankNicolson, 1.8, 2.2, 1.5),
    ] {
        let runs: Vec<Simulation> = [10.0, 5.0, 2.5]
            .iter()
            .map(|&dt| diffusion_run(implicit(time, Limiter::Upwind, Some(dt))))
            .collect();
        let f: Vec<Vec<f64>> = runs.iter().map(|s| s.field().into_iter().collect()).collect();
        let p = (diff_l1(&f[0], &f[1]) / diff_l1(&f[1], &f[2])).log2();
        let e_fine = l1_error(&runs[2], &exact);
        eprintln!(
            "{}: observed order {p:.3}; L1 vs exact at dt 2.5 s {e_fine:.3e}, explicit {e_explicit:.3e}",
            time.name()
        );
        assert!((lo..=hi).contains(&p), "{}: order {p}", time.name());
        // At the finest step the error is at the level of the explicit run's spatial error.
        assert!(
            e_fine <= factor * e_explicit,
            "{}: {e_fine} vs explicit {e_explicit}",
            time.name()
        );
        // The budget closes to the solver tolerance.
        for s in &runs {
            assert!(
                s.budget_row().residual.abs() < 1e-9,
                "{}: residual {}",
                time.name(),
                s.budget_row().residual
            );
        }
    }
}

#[test]
fn implicit_upwind_at_courant_10_is_bounded_and_conserves_mass() {
    // Backward-Euler upwind gives an M-matrix: no new extrema at any step size (common
    // practice; Patankar 1980, the positive-coefficient rule).
    let grid = Grid::new(96, 64, 1.0, 1.0, 0.0, 0.0).unwrap();
    let sp = spec(grid, FlowKind::Uniform { u: 1.0, v: 0.5 }, Boundaries::periodic());
    let sch = implicit(TimeScheme::Implicit, Limiter::Upwind, Some(10.0 / 1.5));
    let mut s = sim(sp, sch, |x, y| {
        if (20.0..40.0).contains(&x) && (20.0..40.0).contains(&y) {
            1.0
        } else {
            0.0
        }
    });
    let m0 = s.mass();
    let (mut lo, mut hi, mut worst) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
    run_to(&mut s, 200.0, |s| {
        let r = s.budget_row();
        lo = lo.min(r.min);
        hi = hi.max(r.max);
        worst = worst.max(r.residual.abs());
    });
    let courant = s.state.last_courant;
    eprintln!(
        "implicit upwind: Courant {courant:.2}, range [{lo:.3e}, {hi:.6}], mass change {:.2e}, residual {worst:.2e}",
        (s.mass() - m0) / m0
    );
    assert!((courant - 10.0).abs() < 1e-9);
    assert!(lo >= -1e-10 && hi <= 1.0 + 1e-10, "[{lo}, {hi}]");
    assert!(((s.mass() - m0) / m0).abs() < 1e-9);
    assert!(worst < 1e-9);
}

/// The decaying, drifting puff of the explicit tests (Crank 1975) on a periodic 240 m x 160 m
/// domain, returning the L1 error at the end.
fn puff_error(scheme: Scheme) -> (f64, Vec<f64>, f64) {
    let (u, v, kx, ky, lambda): (f64, f64, f64, f64, f64) = (0.5, 0.25, 0.1, 0.05, 2f64.ln() / 200.0);
    let (t0, t1) = (640.0, 840.0);
    let (x0, y0) = (60.0 - u * t0, 50.0 - v * t0);
    let exact = move |x: f64, y: f64, t: f64| {
        let (dx, dy) = (x - x0 - u * t, y - y0 - v * t);
        50.0 / (4.0 * PI * 2.0 * t * (kx * ky).sqrt())
            * (-dx * dx / (4.0 * kx * t) - dy * dy / (4.0 * ky * t) - lambda * t).exp()
    };
    let grid = Grid::new(240, 160, 1.0, 1.0, 0.0, 0.0).unwrap();
    let mut sp = spec(grid, FlowKind::Uniform { u, v }, Boundaries::periodic());
    sp.kx = kx;
    sp.ky = ky;
    sp.depth = 2.0.into();
    sp.decay_rate = lambda;
    let mut s = sim(sp, scheme, move |x, y| exact(x, y, t0));
    let mut worst = 0.0f64;
    run_to(&mut s, t1 - t0, |s| worst = worst.max(s.budget_row().residual.abs()));
    (
        l1_error(&s, move |x, y| exact(x, y, t1)),
        s.field().into_iter().collect(),
        worst,
    )
}

#[test]
fn deferred_corrected_van_leer_agrees_with_explicit_van_leer() {
    // At Courant 0.5 the Crank–Nicolson deferred-corrected van Leer solution differs from the
    // explicit (SSP-RK3) van Leer solution by less than either differs from the exact puff.
    let (e_ex, f_ex, _) = puff_error(Scheme {
        stages: 3,
        ..Scheme::default()
    });
    let sch = Scheme {
        courant: 0.5,
        ..implicit(TimeScheme::CrankNicolson, Limiter::VanLeer, None)
    };
    let (e_dc, f_dc, worst) = puff_error(sch);
    let gap = diff_l1(&f_dc, &f_ex) / f_ex.iter().map(|x| x.abs()).sum::<f64>();
    eprintln!(
        "puff: explicit L1 {e_ex:.3e}, CN deferred correction L1 {e_dc:.3e}, gap {gap:.3e}, residual {worst:.2e}"
    );
    assert!(gap < e_ex, "gap {gap} vs discretisation error {e_ex}");
    assert!(e_dc < 1.5 * e_ex);
    assert!(worst < 1e-9);
}

#[test]
fn imex_matches_the_decaying_puff_as_well_as_the_explicit_run() {
    let (e_ex, _, _) = puff_error(Scheme {
        stages: 3,
        ..Scheme::default()
    });
    let (e_imex, _, worst) = puff_error(Scheme {
        stages: 3,
        ..implicit(TimeScheme::Imex, Limiter::VanLeer, None)
    });
    eprintln!("puff: explicit L1 {e_ex:.3e}, IMEX L1 {e_imex:.3e}, residual {worst:.2e}");
    assert!(e_imex <= 1.1 * e_ex, "IMEX {e_imex} vs explicit {e_ex}");
    assert!(worst < 1e-9);
}

#[test]
fn every_implicit_scheme_by_limiter_by_side_condition() {
    // The shared checks for the implicit paths: budget closes to the solver tolerance, closed
    // and periodic domains conserve mass, nothing turns non-finite, and backward-Euler upwind
    // stays within the data's range where the flow is divergence-free.
    let cases = [
        ("walls", Boundaries::walls(), false),
        ("open", Boundaries::uniform(SideKind::Open { value: 0.2 }), false),
        ("fixed", Boundaries::uniform(SideKind::Fixed { value: 0.3 }), false),
        ("periodic", Boundaries::periodic(), false),
        ("island", Boundaries::walls(), true),
    ];
    for time in [TimeScheme::Implicit, TimeScheme::CrankNicolson, TimeScheme::Imex] {
        for lim in [
            Limiter::Upwind,
            Limiter::VanLeer,
            Limiter::Superbee,
            Limiter::Quick,
            Limiter::Hybrid,
            Limiter::PowerLaw,
        ] {
            for (name, b, land) in &cases {
                let grid = Grid::new(36, 28, 2.0, 1.5, -10.0, 5.0).unwrap();
                let mut sp = spec(grid, FlowKind::Uniform { u: 0.3, v: -0.2 }, *b);
                sp.kx = 0.2;
                sp.ky = 0.1;
                if *land {
                    sp.mask = Some(island(&grid, (20.0, 30.0), (10.0, 18.0)));
                }
                let courant = if time == TimeScheme::Imex { 0.4 } else { 2.0 };
                let sch = Scheme {
                    courant,
                    ..implicit(time, lim, None)
                };
                let label = format!("{} x {} x {name}", time.name(), lim.name());
                let mut s = sim(sp, sch, |x, y| {
                    (-((x - 24.0).powi(2) + (y - 26.0).powi(2)) / 30.0).exp()
                });
                let m0 = s.mass();
                let (mut lo, mut hi, mut worst) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
                s.advance_to(60.0, |s| {
                    let r = s.budget_row();
                    lo = lo.min(r.min);
                    hi = hi.max(r.max);
                    worst = worst.max(r.residual.abs());
                    std::ops::ControlFlow::Continue(())
                })
                .unwrap_or_else(|e| panic!("{label}: {e}"));
                assert!(s.field().iter().all(|c| c.is_finite()), "{label}");
                assert!(worst < 1e-9, "{label}: residual {worst}");
                if matches!(*name, "walls" | "periodic" | "island") {
                    assert!(
                        ((s.mass() - m0) / m0).abs() < 1e-9,
                        "{label}: mass {m0} -> {}",
                        s.mass()
                    );
                }
                let positive = matches!(lim, Limiter::Upwind | Limiter::Hybrid | Limiter::PowerLaw);
                if time == TimeScheme::Implicit && positive && matches!(*name, "periodic" | "open") {
                    // Data range: initial values in [0, 1], inflow value 0.2.
                    assert!(lo >= -1e-10 && hi <= 1.0 + 1e-10, "{label}: [{lo}, {hi}]");
                }
            }
        }
    }
}
