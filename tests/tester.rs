//! One tester for every configuration: each limiter by each SSP-RK stage count by each side
//! condition (and a land island), through the same checks: the budget closes to round-off on
//! every step, closed and periodic domains conserve mass, nothing turns non-finite, and
//! bounded limiters stay within the initial and boundary values where the flow is
//! divergence-free (common practice; Sweby 1984 for the TVD bound).

mod common;

use common::*;
use tinct::flow::FlowKind;
use tinct::grid::Grid;
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::RunError;

#[derive(Debug, Clone, Copy)]
enum Case {
    Walls,
    Open,
    Fixed,
    Periodic,
    IslandWalls,
}

fn boundaries(case: Case) -> Boundaries {
    match case {
        Case::Walls | Case::IslandWalls => Boundaries::walls(),
        Case::Open => Boundaries::uniform(SideKind::Open { value: 0.2 }),
        Case::Fixed => Boundaries::uniform(SideKind::Fixed { value: 0.3 }),
        Case::Periodic => Boundaries::periodic(),
    }
}

fn run_case(lim: Limiter, stages: u8, case: Case, rotating: bool) {
    let grid = Grid::new(36, 28, 2.0, 1.5, -10.0, 5.0).unwrap();
    let flow = if rotating {
        FlowKind::Rotation {
            centre: (26.0, 26.0),
            period: 400.0,
        }
    } else {
        FlowKind::Uniform { u: 0.3, v: -0.2 }
    };
    let mut sp = spec(grid, flow, boundaries(case));
    sp.kx = 0.1;
    sp.ky = 0.05;
    if let Case::IslandWalls = case {
        sp.mask = Some(island(&grid, (20.0, 30.0), (10.0, 18.0)));
    }
    let label = format!("{lim} x {stages} stage(s) x {case:?} (rotating {rotating})");
    let mut s = sim(sp, scheme(lim, stages), |x, y| {
        (-((x - 24.0).powi(2) + (y - 26.0).powi(2)) / 30.0).exp()
    });
    let m0 = s.mass();
    let (lo0, hi0) = (0.0f64, 1.0f64);
    let (mut lo, mut hi, mut worst) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
    let mut finite = true;
    let result = s.advance_to(60.0, |s| {
        let row = s.budget_row();
        lo = lo.min(row.min);
        hi = hi.max(row.max);
        worst = worst.max(row.residual.abs());
        finite &= s.field().iter().all(|c| c.is_finite());
        std::ops::ControlFlow::Continue(())
    });
    match result {
        Ok(()) => {}
        // Forward Euler with central or QUICK convection is unstable for convection-dominated
        // flow; that must be caught and explained, not produce garbage.
        Err(RunError::Diverged { cause, .. }) if !lim.is_bounded() && stages == 1 => {
            assert!(cause.contains("unbounded"), "{label}: {cause}");
            return;
        }
        Err(e) => panic!("{label}: {e}"),
    }
    assert!(finite, "{label}: non-finite value");
    assert!(worst <= 1e-12, "{label}: budget residual {worst:.3e}");
    if matches!(case, Case::Walls | Case::Periodic | Case::IslandWalls) {
        let m1 = s.mass();
        assert!((m1 - m0).abs() <= 1e-12 * m0, "{label}: mass {m0} -> {m1}");
    }
    let divergence_free = matches!(case, Case::Open | Case::Periodic) && !rotating || matches!(case, Case::Periodic);
    if lim.is_bounded() && divergence_free {
        let (blo, bhi) = match case {
            Case::Open => (lo0.min(0.2), hi0),
            _ => (lo0, hi0),
        };
        assert!(
            lo >= blo - 1e-12 && hi <= bhi + 1e-12,
            "{label}: range [{lo}, {hi}] outside [{blo}, {bhi}]"
        );
    }
}

#[test]
fn every_limiter_by_every_stage_count_by_every_side_condition() {
    let mut n = 0;
    for lim in Limiter::EVERY {
        for stages in 1..=3u8 {
            for case in [Case::Walls, Case::Open, Case::Fixed, Case::Periodic, Case::IslandWalls] {
                for rotating in [false, true] {
                    run_case(lim, stages, case, rotating);
                    n += 1;
                }
            }
        }
    }
    assert_eq!(n, 11 * 3 * 5 * 2);
}

#[test]
fn forward_euler_central_convection_blow_up_is_caught_with_step_time_cell_and_cause() {
    // Forward Euler with central differencing and no diffusion is unconditionally unstable
    // (von Neumann analysis; common practice): the run must stop within the step the values
    // run away, naming the step, the time, the cell and the unbounded scheme.
    let grid = Grid::new(64, 16, 1.0, 1.0, 0.0, 0.0).unwrap();
    let sp = spec(grid, FlowKind::Uniform { u: 1.0, v: 0.0 }, Boundaries::periodic());
    let mut s = sim(sp, scheme(Limiter::Central, 1), |x, _| {
        if (20.0..30.0).contains(&x) {
            1.0
        } else {
            0.0
        }
    });
    let err = s.advance_to(1e5, |_| std::ops::ControlFlow::Continue(())).unwrap_err();
    let RunError::Diverged {
        step,
        time,
        i,
        j,
        value,
        cause,
    } = err.clone()
    else {
        panic!("{err}")
    };
    assert!(step > 1 && time > 0.0 && i < 64 && j < 16, "{err}");
    assert!(!value.is_finite() || value.abs() > 1e3, "{err}");
    assert!(cause.contains("unbounded") && cause.contains("central"), "{err}");
    // Detected long before the values overflow: the field still holds finite numbers.
    assert!(s.field().iter().all(|c| c.is_finite()), "{err}");
    eprintln!("{err}");
}
