//! Solid-body rotation of a cone (Zalesak 1979 set-up) and a closed basin with an island: the
//! boundedness of TVD limiters (Sweby 1984), the ordering of their smearing, and the mass
//! budget closing to round-off on every step.

mod common;

use common::*;
use tinct::flow::FlowKind;
use tinct::grid::Grid;
use tinct::initial::Initial;
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::ops::sources::{Release, SourceSpec};

const PERIOD: f64 = 628.0;

struct Revolution {
    l1: f64,
    min: f64,
    max: f64,
    worst_residual: f64,
    outflow: f64,
}

/// One full revolution of a cone (radius 15 m, peak 1) in a 100 m square with open sides,
/// checked on every step.
fn cone_revolution(limiter: Limiter) -> Revolution {
    let grid = Grid::new(100, 100, 1.0, 1.0, 0.0, 0.0).unwrap();
    let cone = Initial::Cone {
        centre: (50.0, 75.0),
        radius: 15.0,
        peak: 1.0,
    };
    let sp = spec(
        grid,
        FlowKind::Rotation {
            centre: (50.0, 50.0),
            period: PERIOD,
        },
        Boundaries::uniform(SideKind::Open { value: 0.0 }),
    );
    let mut s = sim(sp, scheme(limiter, 2), |x, y| cone.value_at(x, y));
    let (mut min, mut max, mut worst) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
    run_to(&mut s, PERIOD, |s| {
        let row = s.budget_row();
        min = min.min(row.min);
        max = max.max(row.max);
        worst = worst.max(row.residual.abs());
    });
    let outflow = s.budget_row().outflow;
    Revolution {
        l1: l1_error(&s, |x, y| cone.value_at(x, y)),
        min,
        max,
        worst_residual: worst,
        outflow,
    }
}

#[test]
fn rotating_cone_bounded_limiters_stay_bounded_and_the_budget_closes() {
    let mut l1 = std::collections::HashMap::new();
    for lim in Limiter::ALL.into_iter().filter(|l| l.is_bounded()) {
        let r = cone_revolution(lim);
        eprintln!(
            "cone, {:<10} L1 {:.4} min {:.3e} max {:.6} residual {:.2e} outflow {:.3e}",
            lim.name(),
            r.l1,
            r.min,
            r.max,
            r.worst_residual,
            r.outflow
        );
        // Sweby (1984): TVD limiters create no new extrema.
        assert!(r.min >= -1e-12, "{lim}: min {}", r.min);
        assert!(r.max <= 1.0 + 1e-12, "{lim}: max {}", r.max);
        // Mass change net of what crossed the open sides stays at round-off.
        assert!(r.worst_residual <= 1e-12, "{lim}: residual {}", r.worst_residual);
        l1.insert(lim, r.l1);
    }
    // Smearing ordered by how compressive the limiter is (common practice; cf. Sweby 1984).
    assert!(
        l1[&Limiter::Upwind] > l1[&Limiter::Minmod] && l1[&Limiter::Minmod] > l1[&Limiter::VanLeer],
        "{l1:?}"
    );
}

#[test]
fn closed_basin_with_island_source_and_decay_closes_the_budget_every_step() {
    // Walls all round, an island in code, a rotating flow, a continuous outfall, an
    // instantaneous spill and decay by T90 = 2 h: nothing leaves, so every change of mass is
    // a release or decay, and the books must balance to round-off on every step.
    let grid = Grid::new(80, 60, 5.0, 5.0, 0.0, 0.0).unwrap();
    let mut sp = spec(
        grid,
        FlowKind::Rotation {
            centre: (200.0, 150.0),
            period: 3600.0,
        },
        Boundaries::walls(),
    );
    sp.mask = Some(island(&grid, (150.0, 190.0), (120.0, 170.0)));
    sp.kx = 0.5;
    sp.ky = 0.2;
    sp.depth = 4.0.into();
    sp.decay_rate = std::f64::consts::LN_10 / 7200.0;
    sp.sources = vec![
        SourceSpec {
            name: "outfall".into(),
            at: (260.0, 150.0),
            release: Release::Continuous {
                rate: 0.8,
                start: 100.0,
                stop: 1500.0,
            },
            spread: Some(7.5),
        },
        SourceSpec {
            name: "spill".into(),
            at: (100.0, 80.0),
            release: Release::Instant { mass: 40.0, at: 600.0 },
            spread: None,
        },
    ];
    let mut s = sim(sp, scheme(Limiter::VanLeer, 3), |_, _| 0.0);
    let mut worst = 0.0f64;
    let mut steps = 0;
    run_to(&mut s, 1800.0, |s| {
        worst = worst.max(s.budget_row().residual.abs());
        steps += 1;
    });
    let row = s.budget_row();
    eprintln!(
        "basin: {steps} steps, added {:.4}, decayed {:.4}, mass {:.4}, worst residual {worst:.2e}",
        row.added, row.decayed, row.mass
    );
    assert!((row.added - (0.8 * 1400.0 + 40.0)).abs() < 1e-9, "added {}", row.added);
    assert!(row.decayed > 0.0 && row.inflow == 0.0 && row.outflow == 0.0);
    assert!(worst <= 1e-12, "worst residual {worst}");
    // Nothing on the island.
    let f = s.field();
    for j in 0..grid.ny {
        for i in 0..grid.nx {
            if !s.model.mask.is_wet(i, j) {
                assert_eq!(f[[j, i]], 0.0);
            }
        }
    }
}
