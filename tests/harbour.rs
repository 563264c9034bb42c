//! Harbour basins: flow through openings, depth fields, tidal filling and the projection of
//! divergent flows around land, checked against continuity, the continuously stirred tank and
//! the tidal prism (each check names its source or says "common practice").

mod common;

use common::run_to;
use std::f64::consts::PI;
use tinct::depth::Depth;
use tinct::flow::{FlowKind, FlowSpec, Opening, Tide};
use tinct::grid::{Grid, Mask};
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::{Boundaries, Side, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::step::{Scheme, Simulation, TimeScheme};

fn opening(side: Side, from: f64, to: f64, discharge: f64) -> Opening {
    Opening {
        name: format!("{}-{from}", side.name()),
        side,
        from,
        to,
        discharge,
        share: None,
    }
}

fn openings_spec(grid: Grid, mask: Option<Mask>, depth: Depth, list: Vec<Opening>, tide: Option<Tide>) -> ModelSpec {
    let open = SideKind::Open { value: 0.0 };
    let mut b = Boundaries::walls();
    for o in &list {
        match o.side {
            Side::West => b.west = open,
            Side::East => b.east = open,
            Side::South => b.south = open,
            Side::North => b.north = open,
        }
    }
    ModelSpec {
        grid,
        mask,
        depth,
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec {
            kind: FlowKind::Openings(list),
            tide,
            project: true,
        },
        boundaries: b,
        sources: vec![],
    }
}

/// Net discharge out of every wet cell (m3/s) from the model's face arrays.
fn cell_outflows(m: &Model) -> Vec<f64> {
    let g = &m.grid;
    let s = g.stride();
    let mut out = Vec::new();
    for j in 0..g.ny {
        for i in 0..g.nx {
            if !m.mask.is_wet(i, j) {
                continue;
            }
            let p = g.idx(i as isize, j as isize);
            // Face arrays hold velocities (uniform depth: times h) or transports.
            let (hw, he, hs, hn) = match &m.depth_field {
                None => (m.depth, m.depth, m.depth, m.depth),
                Some(_) => (1.0, 1.0, 1.0, 1.0),
            };
            let q = (m.flow.u[p + 1] * he - m.flow.u[p] * hw) * g.dy + (m.flow.v[p + s] * hn - m.flow.v[p] * hs) * g.dx;
            out.push(q);
        }
    }
    out
}

/// A basin with a jetty: 40 x 24 cells of 5 m, land in a pier from the south wall.
fn jetty_mask(g: &Grid) -> Mask {
    Mask::all_water(g)
        .with_land(g, |x, y| (95.0..110.0).contains(&x) && y < 70.0)
        .unwrap()
}

#[test]
fn openings_flow_is_divergence_free_and_closed_at_land_and_walls() {
    // Continuity (common practice): what enters through one opening leaves through the other,
    // every wet cell balances, land and walls pass nothing.
    let g = Grid::new(40, 24, 5.0, 5.0, 0.0, 0.0).unwrap();
    let q = 6.0;
    let spec = openings_spec(
        g,
        Some(jetty_mask(&g)),
        Depth::Uniform(3.0),
        vec![
            opening(Side::West, 80.0, 120.0, q),
            opening(Side::North, 150.0, 200.0, -q),
        ],
        None,
    );
    let m = Model::new(spec).unwrap();
    let worst = cell_outflows(&m).iter().fold(0.0f64, |a, d| a.max(d.abs()));
    assert!(worst < 1e-9 * q, "worst cell imbalance {worst:e} m3/s");
    assert!(m.flow.report().imbalance < 1e-9);
    // No flux through land or walls.
    let s = g.stride();
    for j in 0..g.ny {
        for i in 0..g.nx {
            let p = g.idx(i as isize, j as isize);
            let wet = |i: isize, j: isize| {
                i >= 0 && j >= 0 && (i as usize) < g.nx && (j as usize) < g.ny && m.mask.is_wet(i as usize, j as usize)
            };
            if !(wet(i as isize - 1, j as isize) && wet(i as isize, j as isize)) && i > 0 {
                assert_eq!(m.flow.u[p], 0.0, "x-face ({i}, {j}) beside land");
            }
            if !(wet(i as isize, j as isize - 1) && wet(i as isize, j as isize)) && j > 0 {
                assert_eq!(m.flow.v[p], 0.0, "y-face ({i}, {j}) beside land");
            }
            let _ = s;
        }
    }
    // Side faces: only the openings pass water; inflow equals outflow.
    let (mut inflow, mut outflow) = (0.0, 0.0);
    for j in 0..g.ny {
        let yc = g.centre(0, j).1;
        let w = m.flow.u[g.idx(0, j as isize)];
        let e = m.flow.u[g.idx(g.nx as isize, j as isize)];
        assert_eq!(e, 0.0);
        if !(80.0..=120.0).contains(&yc) {
            assert_eq!(w, 0.0, "west wall at row {j}");
        }
        inflow += w * 3.0 * g.dy;
    }
    for i in 0..g.nx {
        let xc = g.centre(i, 0).0;
        let n = m.flow.v[g.idx(i as isize, g.ny as isize)];
        assert_eq!(m.flow.v[g.idx(i as isize, 0)], 0.0);
        if !(150.0..=200.0).contains(&xc) {
            assert_eq!(n, 0.0, "north wall at column {i}");
        }
        outflow += n * 3.0 * g.dx;
    }
    assert!(
        (inflow - q).abs() < 1e-12 * q && (outflow - q).abs() < 1e-9 * q,
        "{inflow} {outflow}"
    );
}

#[test]
fn straight_channel_has_uniform_speed_q_over_h_w() {
    // Continuity in a straight channel (common practice): u = Q / (h W) everywhere.
    let g = Grid::new(50, 8, 4.0, 2.5, 0.0, 0.0).unwrap();
    let (q, h, w) = (2.0, 1.5, 20.0);
    let spec = openings_spec(
        g,
        None,
        Depth::Uniform(h),
        vec![opening(Side::West, 0.0, w, q), opening(Side::East, 0.0, w, -q)],
        None,
    );
    let m = Model::new(spec).unwrap();
    let u = q / (h * w);
    for j in 0..g.ny {
        for i in 0..=g.nx {
            let p = g.idx(i as isize, j as isize);
            assert!((m.flow.u[p] - u).abs() < 1e-9 * u, "u({i}, {j}) = {}", m.flow.u[p]);
        }
        for i in 0..g.nx {
            assert!(m.flow.v[g.idx(i as isize, j as isize)].abs() < 1e-9 * u);
        }
    }
    let r = m.flow.report();
    assert!((r.speed.0 - u).abs() < 1e-9 * u && (r.speed.1 - u).abs() < 1e-9 * u);
    assert!((r.residence.unwrap() - 50.0 * 4.0 * w * h / q).abs() < 1e-9 * 1000.0);
}

#[test]
fn unbalanced_discharges_are_refused_with_the_imbalance() {
    let g = Grid::new(20, 10, 5.0, 5.0, 0.0, 0.0).unwrap();
    let spec = openings_spec(
        g,
        None,
        Depth::Uniform(2.0),
        vec![
            opening(Side::West, 0.0, 50.0, 3.0),
            opening(Side::East, 0.0, 50.0, -2.5),
        ],
        None,
    );
    let e = Model::new(spec).unwrap_err().to_string();
    assert!(e.contains("net inflow of 0.5 m3/s"), "{e}");
}

#[test]
fn well_mixed_basin_flushes_as_a_stirred_tank() {
    // Continuously stirred tank (common practice): with clean water in and mixed water out,
    // mass decays as exp(-Q t / V); the e-folding time equals V/Q.
    let g = Grid::new(20, 10, 10.0, 10.0, 0.0, 0.0).unwrap();
    let (q, h) = (4.0, 2.0);
    let mut spec = openings_spec(
        g,
        None,
        Depth::Uniform(h),
        vec![opening(Side::West, 0.0, 30.0, q), opening(Side::East, 70.0, 100.0, -q)],
        None,
    );
    (spec.kx, spec.ky) = (50.0, 50.0);
    let model = Model::new(spec).unwrap();
    let v_over_q = model.flow.report().residence.unwrap();
    assert!((v_over_q - 200.0 * 100.0 * h / q).abs() < 1e-6);
    let c0 = model.field_from(|_, _| 1.0);
    let scheme = Scheme {
        limiter: Limiter::VanLeer,
        time: TimeScheme::Imex,
        ..Scheme::default()
    };
    let mut s = Simulation::new(model, scheme, c0).unwrap();
    run_to(&mut s, 2000.0, |_| {});
    let (t1, m1) = (s.state.t, s.mass());
    run_to(&mut s, 22000.0, |_| {});
    let (t2, m2) = (s.state.t, s.mass());
    let tau = (t2 - t1) / (m1 / m2).ln();
    assert!(
        (tau / v_over_q - 1.0).abs() < 0.02,
        "e-folding {tau} s vs V/Q {v_over_q} s"
    );
    let row = s.budget_row();
    assert!(row.residual.abs() < 1e-9, "{}", row.residual);
}

/// A single-entrance basin: 24 x 16 cells of 10 m, depth 3 m, the entrance in the south side.
fn tidal_basin(time: TimeScheme, amplitude: f64, limiter: Limiter, stages: u8) -> (Simulation, f64) {
    let g = Grid::new(24, 16, 10.0, 10.0, 0.0, 0.0).unwrap();
    let mask = Mask::all_water(&g)
        .with_land(&g, |x, y| y < 60.0 && !(80.0..=120.0).contains(&x))
        .unwrap();
    let period = 3600.0;
    let tide = Tide {
        period,
        // Low water at t = 0: eta = a sin(2 pi t/T - pi/2).
        phase: -PI / 2.0,
        amplitude,
        return_flow: 0.0,
    };
    let mut spec = openings_spec(
        g,
        Some(mask),
        Depth::Uniform(3.0),
        vec![opening(Side::South, 80.0, 120.0, 0.0)],
        Some(tide),
    );
    spec.boundaries.south = SideKind::Open { value: 1.0 };
    (spec.kx, spec.ky) = (0.5, 0.5);
    let model = Model::new(spec).unwrap();
    let c0 = model.field_from(|_, _| 1.0);
    let scheme = Scheme {
        limiter,
        time,
        stages,
        tolerance: 1e-13,
        ..Scheme::default()
    };
    (Simulation::new(model, scheme, c0).unwrap(), period)
}

#[test]
fn a_tide_filling_a_basin_keeps_a_uniform_tracer_uniform_and_closes_the_budget() {
    // Consistency with continuity (Gross, Bonaventura & Rosatti 2002, Int. J. Numer. Meth.
    // Fluids 38, 307; from memory): a uniform tracer, with inflow at the same concentration,
    // stays exactly uniform while the cell volumes change.
    for (time, tol_c, tol_budget) in [
        (TimeScheme::Explicit, 1e-12, 1e-12),
        (TimeScheme::Implicit, 1e-9, 1e-9),
        (TimeScheme::CrankNicolson, 1e-9, 1e-9),
        (TimeScheme::Imex, 1e-9, 1e-9),
    ] {
        let (mut s, period) = tidal_basin(time, 0.8, Limiter::Superbee, 3);
        let mut worst = (0.0f64, 0.0f64);
        run_to(&mut s, period, |s| {
            let r = s.budget_row();
            worst.0 = worst.0.max((r.min - 1.0).abs()).max((r.max - 1.0).abs());
            worst.1 = worst.1.max(r.residual.abs());
        });
        assert!(worst.0 < tol_c, "{time:?}: uniform field moved by {:e}", worst.0);
        assert!(worst.1 < tol_budget, "{time:?}: budget residual {:e}", worst.1);
        // Over a whole cycle the basin takes in and gives back the same water.
        let (i, o) = (s.budget.inflow(), s.budget.outflow());
        assert!((i - o).abs() < 1e-9 * i, "{time:?}: in {i}, out {o}");
    }
}

#[test]
fn the_flood_brings_in_the_tidal_prism() {
    // Tidal prism (common practice): from low to high water a basin of area A takes in 2 a A.
    let a = 0.8;
    let (mut s, period) = tidal_basin(TimeScheme::Explicit, a, Limiter::Superbee, 3);
    let area = s.model.mask.wet_count() as f64 * 100.0;
    let prism = s.model.flow.report().prism.unwrap();
    assert!((prism - 2.0 * a * area).abs() < 1e-9 * prism);
    run_to(&mut s, period / 2.0, |_| {});
    // The tracer is 1 everywhere, so the mass carried in is the volume.
    let inflow = s.budget.inflow();
    assert!(
        (inflow / prism - 1.0).abs() < 1e-9,
        "flood volume {inflow} vs prism {prism}"
    );
    assert!(s.budget.outflow() < 1e-9 * prism);
}

#[test]
fn a_tide_that_would_dry_a_cell_is_refused_naming_it() {
    let g = Grid::new(10, 6, 10.0, 10.0, 0.0, 0.0).unwrap();
    let mut depth = vec![3.0; g.cells()];
    depth[2 * 10 + 7] = 0.6;
    let tide = Tide {
        period: 3600.0,
        phase: 0.0,
        amplitude: 0.7,
        return_flow: 0.0,
    };
    let spec = openings_spec(
        g,
        None,
        Depth::Field(depth),
        vec![opening(Side::South, 0.0, 100.0, 0.0)],
        Some(tide),
    );
    let e = Model::new(spec).unwrap_err().to_string();
    assert!(
        e.contains("flow.tide.amplitude") && e.contains("cell (7, 2)") && e.contains("0.6") && e.contains("-0.7"),
        "{e}"
    );
}

#[test]
fn a_channel_twice_as_deep_downstream_halves_the_speed_and_keeps_a_tracer_uniform() {
    // Continuity (common practice): constant discharge through a depth that doubles along x
    // halves the speed; a uniform tracer with inflow at the same value stays uniform.
    let g = Grid::new(40, 6, 5.0, 5.0, 0.0, 0.0).unwrap();
    let depth: Vec<f64> = (0..g.cells())
        .map(|k| 2.0 + 2.0 * ((k % 40) as f64 + 0.5) / 40.0)
        .collect();
    let q = 3.0;
    let mut spec = openings_spec(
        g,
        None,
        Depth::Field(depth),
        vec![opening(Side::West, 0.0, 30.0, q), opening(Side::East, 0.0, 30.0, -q)],
        None,
    );
    spec.boundaries.west = SideKind::Open { value: 1.0 };
    (spec.kx, spec.ky) = (0.2, 0.2);
    let model = Model::new(spec).unwrap();
    let f = model.depth_field.as_ref().unwrap();
    for j in 0..6 {
        let (pw, pe) = (g.idx(0, j), g.idx(40, j));
        let (uw, ue) = (model.flow.u[pw] / f.fx[pw], model.flow.u[pe] / f.fx[pe]);
        // h at the west face 2.025 m, at the east face 3.975 m; speed Q / (h W).
        assert!((uw - q / (2.025 * 30.0)).abs() < 1e-9 * uw, "{uw}");
        assert!((ue / uw - 2.025 / 3.975).abs() < 1e-9, "{}", ue / uw);
    }
    let c0 = model.field_from(|_, _| 1.0);
    let mut s = Simulation::new(model, Scheme::default(), c0).unwrap();
    let mut worst = 0.0f64;
    run_to(&mut s, 1500.0, |s| {
        let r = s.budget_row();
        worst = worst.max((r.min - 1.0).abs()).max((r.max - 1.0).abs());
    });
    assert!(worst < 1e-13, "uniform tracer moved by {worst:e}");
}

#[test]
fn a_puff_in_a_basin_of_sloping_depth_conserves_its_mass() {
    // Conservation (common practice): in a closed basin, sum c h dA is constant to round-off,
    // with convection by a projected vortex and diffusion through faces of varying depth.
    let g = Grid::new(48, 32, 5.0, 5.0, 0.0, 0.0).unwrap();
    let depth: Vec<f64> = (0..g.cells()).map(|k| 1.0 + 0.25 * (k % 48) as f64).collect();
    let spec = ModelSpec {
        grid: g,
        mask: Some(jetty_mask(&Grid::new(48, 32, 5.0, 5.0, 0.0, 0.0).unwrap())),
        depth: Depth::Field(depth),
        kx: 0.3,
        ky: 0.1,
        decay_rate: 0.0,
        flow: FlowSpec::steady(FlowKind::Vortex { speed: 0.3 }),
        boundaries: Boundaries::walls(),
        sources: vec![],
    };
    let model = Model::new(spec).unwrap();
    assert!(
        model.flow.report().projected,
        "the vortex's transport over sloping depth is projected"
    );
    assert!(model.flow.report().imbalance < 1e-9);
    let c0 = model.field_from(|x, y| (-((x - 60.0).powi(2) + (y - 100.0).powi(2)) / 200.0).exp());
    for time in [TimeScheme::Explicit, TimeScheme::Implicit] {
        let scheme = Scheme {
            time,
            tolerance: 1e-13,
            ..Scheme::default()
        };
        let mut s = Simulation::new(model.clone(), scheme, c0.clone()).unwrap();
        let m0 = s.mass();
        let mut lo = 0.0f64;
        run_to(&mut s, 600.0, |s| lo = lo.min(s.budget_row().min));
        let drift = ((s.mass() - m0) / m0).abs();
        let tol = if time == TimeScheme::Explicit { 1e-13 } else { 1e-10 };
        assert!(drift < tol, "{time:?}: mass drift {drift:e}");
        if time == TimeScheme::Explicit {
            assert!(lo > -1e-12, "van Leer undershoot {lo:e}");
        }
    }
}

#[test]
fn a_current_past_a_jetty_is_projected_and_stays_bounded() {
    // A uniform current cut by land is not divergence-free; projected around the jetty, a TVD
    // limiter keeps the plume within its initial bounds (Sweby 1984); unprojected, the closed
    // faces pile the tracer up against the jetty.
    let g = Grid::new(40, 24, 5.0, 5.0, 0.0, 0.0).unwrap();
    let open = SideKind::Open { value: 0.0 };
    let spec = |project: bool| ModelSpec {
        grid: g,
        mask: Some(jetty_mask(&g)),
        depth: Depth::Uniform(3.0),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec {
            project,
            ..FlowSpec::uniform(0.2, 0.05)
        },
        boundaries: Boundaries {
            west: open,
            east: open,
            south: SideKind::Wall,
            north: open,
        },
        sources: vec![],
    };
    let peak = |project: bool| {
        let model = Model::new(spec(project)).unwrap();
        let c0 = model.field_from(|x, y| 0.37 * (-((x - 60.0).powi(2) + (y - 40.0).powi(2)) / 300.0).exp());
        let mut s = Simulation::new(model, Scheme::default(), c0).unwrap();
        let (mut lo, mut hi) = (0.0f64, 0.0f64);
        run_to(&mut s, 600.0, |s| {
            let r = s.budget_row();
            (lo, hi) = (lo.min(r.min), hi.max(r.max));
        });
        (lo, hi, s.model.flow.report().clone())
    };
    let (lo, hi, r) = peak(true);
    assert!(r.projected && r.divergence > 1e-3 && r.imbalance < 1e-9, "{r:?}");
    assert!(lo > -1e-14 && hi <= 0.37 * (1.0 + 1e-12), "projected: [{lo}, {hi}]");
    let (_, hi_raw, r) = peak(false);
    assert!(!r.projected && r.divergence > 1e-3);
    assert!(hi_raw > 0.5, "the unprojected current piles the tracer up: {hi_raw}");
}

#[test]
fn every_scheme_keeps_a_uniform_tracer_uniform_while_the_basin_fills() {
    // The same continuity check (common practice) through every limiter's depth kernel, with
    // 1 to 3 SSP stages and the implicit schemes, over a quarter of a tidal cycle with land.
    for limiter in Limiter::EVERY {
        for (time, stages) in [
            (TimeScheme::Explicit, 1),
            (TimeScheme::Explicit, 2),
            (TimeScheme::Explicit, 3),
            (TimeScheme::Implicit, 2),
            (TimeScheme::Imex, 2),
        ] {
            let (mut s, period) = tidal_basin(time, 0.5, limiter, stages);
            let mut worst = (0.0f64, 0.0f64);
            run_to(&mut s, period / 4.0, |s| {
                let r = s.budget_row();
                worst.0 = worst.0.max((r.min - 1.0).abs()).max((r.max - 1.0).abs());
                worst.1 = worst.1.max(r.residual.abs());
            });
            let tol = if time == TimeScheme::Explicit { 1e-12 } else { 1e-9 };
            assert!(
                worst.0 < tol && worst.1 < tol,
                "{limiter:?} {time:?} {stages}: field {:e}, budget {:e}",
                worst.0,
                worst.1
            );
        }
    }
}
