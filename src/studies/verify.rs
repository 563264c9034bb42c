//! The built-in verification suite (`tinct verify`): the exact-solution cases of the test suite
//! at sizes that take seconds, each with its published source, the metric, the value, the
//! tolerance (the same as in the tests) and whether it passes.

use crate::diagnostics::gci::{gci, spacing_from_cells, GciParams};
use crate::flow::{FlowKind, FlowSpec};
use crate::grid::Grid;
use crate::initial::Initial;
use crate::model::{Model, ModelSpec};
use crate::ops::boundary::{Boundaries, SideKind};
use crate::ops::limiter::Limiter;
use crate::step::{Scheme, Simulation};
use rayon::prelude::*;
use std::f64::consts::PI;
use std::ops::ControlFlow;

/// One verification case's outcome.
#[derive(Debug, Clone, PartialEq)]
pub struct VerifyRow {
    /// The case.
    pub case: &'static str,
    /// Its published source.
    pub source: &'static str,
    /// What is measured.
    pub metric: &'static str,
    /// The measured value (`None` when the run failed; see `note`).
    pub value: Option<f64>,
    /// The acceptance rule, in words.
    pub tolerance: &'static str,
    /// Whether it passed.
    pub pass: bool,
    /// Extra detail (other checked numbers, or why a run failed).
    pub note: String,
}

fn base_spec(grid: Grid, flow: FlowKind, boundaries: Boundaries) -> ModelSpec {
    ModelSpec {
        grid,
        mask: None,
        depth: 1.0.into(),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec::steady(flow),
        boundaries,
        sources: vec![],
    }
}

fn scheme(limiter: Limiter, stages: u8) -> Scheme {
    Scheme {
        limiter,
        stages,
        ..Scheme::default()
    }
}

/// Builds and runs a simulation to `t`, calling `each` after every step.
fn march(
    spec: ModelSpec,
    sch: Scheme,
    f: impl Fn(f64, f64) -> f64,
    t: f64,
    mut each: impl FnMut(&Simulation) + Send,
) -> Result<Simulation, String> {
    let model = Model::new(spec).map_err(|e| e.to_string())?;
    let c0 = model.field_from(f);
    let mut s = Simulation::new(model, sch, c0).map_err(|e| e.to_string())?;
    s.advance_to(t, |s| {
        each(s);
        ControlFlow::Continue(())
    })
    .map_err(|e| e.to_string())?;
    Ok(s)
}

/// Relative L1 error of the interior against `exact` at cell centres.
fn l1(s: &Simulation, exact: impl Fn(f64, f64) -> f64) -> f64 {
    let g = &s.model.grid;
    let (mut num, mut den) = (0.0, 0.0);
    for ((j, i), &c) in s.field_view().indexed_iter() {
        let (x, y) = g.centre(i, j);
        let e = exact(x, y);
        num += (c - e).abs();
        den += e.abs();
    }
    num / den
}

fn row(
    case: &'static str,
    source: &'static str,
    metric: &'static str,
    tolerance: &'static str,
    result: Result<(f64, bool, String), String>,
) -> VerifyRow {
    match result {
        Ok((value, pass, note)) => VerifyRow {
            case,
            source,
            metric,
            value: Some(value),
            tolerance,
            pass,
            note,
        },
        Err(e) => VerifyRow {
            case,
            source,
            metric,
            value: None,
            tolerance,
            pass: false,
            note: format!("the run failed: {e}"),
        },
    }
}

fn celik() -> VerifyRow {
    let h = [18000.0, 8000.0, 4500.0].map(|n| spacing_from_cells(n, 2));
    let g = gci([6.063, 5.972, 5.863], h, &GciParams::default());
    let res = match (g.p, g.extrapolated, g.gci_fine21) {
        (Some(p), Some(e), Some(c)) => Ok((
            p,
            (p - 1.53).abs() < 0.01 && (e - 6.1685).abs() < 5e-4 && (c - 0.022).abs() < 5e-4,
            format!("extrapolated {e:.4} (6.1685), GCI_fine {:.2}% (2.2%)", 100.0 * c),
        )),
        _ => Err(g.convergence.explain()),
    };
    row(
        "GCI worked example",
        "Celik et al. (2008), J. Fluids Eng. 130, 078001, Table 1",
        "order p",
        "|p - 1.53| < 0.01, phi_ext and GCI within 5e-4",
        res,
    )
}

/// The Crank puff of the test suite: L1 error of `limiter` after 200 s on spacing `dx`.
fn puff_l1(dx: f64, limiter: Limiter) -> Result<f64, String> {
    let (m, u, v, kx, ky, h): (f64, f64, f64, f64, f64, f64) = (50.0, 0.5, 0.25, 0.1, 0.05, 2.0);
    let lambda = 2f64.ln() / 200.0;
    let (x0, y0) = (60.0 - u * 640.0, 50.0 - v * 640.0);
    let at = |x: f64, y: f64, t: f64| {
        let (a, b) = (x - x0 - u * t, y - y0 - v * t);
        m / (4.0 * PI * h * t * (kx * ky).sqrt())
            * (-a * a / (4.0 * kx * t) - b * b / (4.0 * ky * t) - lambda * t).exp()
    };
    let grid = Grid::new((240.0 / dx) as usize, (160.0 / dx) as usize, dx, dx, 0.0, 0.0).map_err(|e| e.to_string())?;
    let mut sp = base_spec(grid, FlowKind::Uniform { u, v }, Boundaries::periodic());
    (sp.kx, sp.ky, sp.depth, sp.decay_rate) = (kx, ky, h.into(), lambda);
    let s = march(sp, scheme(limiter, 3), |x, y| at(x, y, 640.0), 200.0, |_| {})?;
    Ok(l1(&s, |x, y| at(x, y, 840.0)))
}

fn puff() -> VerifyRow {
    let (a, b) = rayon::join(|| puff_l1(1.0, Limiter::VanLeer), || puff_l1(0.5, Limiter::VanLeer));
    let res = a.and_then(|e1| {
        b.map(|e2| {
            let p = (e1 / e2).ln() / 2f64.ln();
            (
                p,
                p >= 1.8 && e2 < 4e-3,
                format!("L1 {e1:.3e} (dx 1 m), {e2:.3e} (dx 0.5 m)"),
            )
        })
    });
    row(
        "Gaussian puff, van Leer",
        "Crank (1975), The Mathematics of Diffusion, §3.3",
        "observed order of L1",
        ">= 1.8, fine L1 < 4e-3",
        res,
    )
}

fn upwind_diffusivity() -> VerifyRow {
    let (u, v, dx, dy, dt) = (1.0, 0.5, 1.0, 2.0, 0.4);
    let res = (|| {
        let grid = Grid::new(400, 100, dx, dy, 0.0, 0.0).map_err(|e| e.to_string())?;
        let sch = Scheme {
            limiter: Limiter::Upwind,
            stages: 1,
            dt: Some(dt),
            ..Scheme::default()
        };
        let spec = base_spec(
            grid,
            FlowKind::Uniform { u, v },
            Boundaries::uniform(SideKind::Open { value: 0.0 }),
        );
        let f0 = |x: f64, y: f64| (-((x - 80.0).powi(2) + (y - 50.0).powi(2)) / 50.0).exp();
        let model = Model::new(spec.clone()).map_err(|e| e.to_string())?;
        let m0 = crate::diagnostics::moments::moments(&grid, model.field_from(f0).view(), None);
        let t = 160.0;
        let s = march(spec, sch, f0, t, |_| {})?;
        let m1 = crate::diagnostics::moments::moments(&grid, s.field_view(), None);
        let (Some(a), Some(b)) = (m0, m1) else {
            return Err("no mass to take moments of".to_string());
        };
        let (kx, ky) = crate::diagnostics::moments::effective_diffusivity(&a, &b, t);
        let tx = u * dx * (1.0 - u * dt / dx) / 2.0;
        let ty = v * dy * (1.0 - v * dt / dy) / 2.0;
        let (rx, ry) = (kx / tx, ky / ty);
        Ok((
            rx,
            (rx - 1.0).abs() < 0.05 && (ry - 1.0).abs() < 0.05,
            format!("Kx {kx:.4} vs {tx:.4}, Ky {ky:.4} vs {ty:.4} m2/s"),
        ))
    })();
    row(
        "upwind numerical diffusivity",
        "modified-equation analysis (LeVeque 2002, FVM for Hyperbolic Problems, §8.6)",
        "Kx measured / u dx (1 - C)/2",
        "within 5% (x and y)",
        res,
    )
}

/// Steady 1D convection-diffusion between phi(0) = 1 and phi(1) = 0, diffusivity 0.1.
fn steady_1d(n: usize, u: f64, limiter: Limiter) -> Result<Vec<f64>, String> {
    let dx = 1.0 / n as f64;
    let grid = Grid::new(n, 1, dx, dx, 0.0, 0.0).map_err(|e| e.to_string())?;
    let b = Boundaries {
        west: SideKind::Fixed { value: 1.0 },
        east: SideKind::Fixed { value: 0.0 },
        south: SideKind::Wall,
        north: SideKind::Wall,
    };
    let mut sp = base_spec(grid, FlowKind::Uniform { u, v: 0.0 }, b);
    (sp.kx, sp.ky) = (0.1, 0.1);
    Ok(march(sp, scheme(limiter, 3), |_, _| 0.0, 60.0, |_| {})?
        .field_view()
        .row(0)
        .to_vec())
}

fn versteeg() -> VerifyRow {
    let book = [0.9421, 0.8006, 0.6276, 0.4163, 0.1579];
    let res = steady_1d(5, 0.1, Limiter::Central).map(|got| {
        let worst = got.iter().zip(book).map(|(g, b)| (g - b).abs()).fold(0.0, f64::max);
        (
            worst,
            worst < 5e-5,
            "central differencing, 5 cells, u = 0.1".to_string(),
        )
    });
    row(
        "1D steady convection-diffusion",
        "Versteeg & Malalasekera (2007), Example 5.1 (i)",
        "largest difference from the book",
        "< 5e-5",
        res,
    )
}

fn patankar() -> VerifyRow {
    let exact = |x: f64| 1.0 - (x.exp() - 1.0) / (1f64.exp() - 1.0);
    let err = |n: usize| {
        steady_1d(n, 0.1, Limiter::Central).map(|f| {
            f.iter()
                .enumerate()
                .map(|(i, c)| (c - exact((i as f64 + 0.5) / n as f64)).abs())
                .sum::<f64>()
                / n as f64
        })
    };
    let res = (|| {
        let (a, b, c) = (err(10)?, err(20)?, err(40)?);
        let (p1, p2) = ((a / b).log2(), (b / c).log2());
        Ok((p1.min(p2), p1 >= 1.8 && p2 >= 1.8, format!("orders {p1:.3}, {p2:.3}")))
    })();
    row(
        "exponential steady profile, central",
        "Patankar (1980), Numerical Heat Transfer and Fluid Flow, §5.2",
        "observed order (10-20-40 cells)",
        ">= 1.8",
        res,
    )
}

fn ogata_banks() -> VerifyRow {
    let (u, d, t, len, n): (f64, f64, f64, f64, usize) = (0.1, 0.5, 400.0, 100.0, 400);
    let exact = |x: f64| {
        let s = 2.0 * (d * t).sqrt();
        0.5 * (libm::erfc((x - u * t) / s) + (u * x / d).exp() * libm::erfc((x + u * t) / s))
    };
    let res = (|| {
        let dx = len / n as f64;
        let grid = Grid::new(n, 1, dx, dx, 0.0, 0.0).map_err(|e| e.to_string())?;
        let b = Boundaries {
            west: SideKind::Fixed { value: 1.0 },
            east: SideKind::Open { value: 0.0 },
            south: SideKind::Wall,
            north: SideKind::Wall,
        };
        let mut sp = base_spec(grid, FlowKind::Uniform { u, v: 0.0 }, b);
        (sp.kx, sp.ky) = (d, d);
        let s = march(sp, scheme(Limiter::VanLeer, 2), |_, _| 0.0, t, |_| {})?;
        let worst = s
            .field()
            .iter()
            .enumerate()
            .map(|(i, c)| (c - exact((i as f64 + 0.5) * dx)).abs())
            .fold(0.0, f64::max);
        let r = s.budget_row().residual;
        Ok((
            worst,
            worst < 0.01 && r.abs() < 1e-12,
            format!("budget residual {r:.1e}"),
        ))
    })();
    row(
        "1D continuous injection",
        "Ogata & Banks (1961), USGS Prof. Paper 411-A",
        "largest difference / c0",
        "< 0.01, residual < 1e-12",
        res,
    )
}

/// One revolution of the cone of the test suite: (L1, min, max, worst residual).
fn cone(limiter: Limiter) -> Result<(f64, f64, f64, f64), String> {
    let period = 628.0;
    let grid = Grid::new(100, 100, 1.0, 1.0, 0.0, 0.0).map_err(|e| e.to_string())?;
    let c = Initial::Cone {
        centre: (50.0, 75.0),
        radius: 15.0,
        peak: 1.0,
    };
    let sp = base_spec(
        grid,
        FlowKind::Rotation {
            centre: (50.0, 50.0),
            period,
        },
        Boundaries::uniform(SideKind::Open { value: 0.0 }),
    );
    let (mut lo, mut hi, mut worst) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
    let s = march(
        sp,
        scheme(limiter, 2),
        |x, y| c.value_at(x, y),
        period,
        |s| {
            let r = s.budget_row();
            lo = lo.min(r.min);
            hi = hi.max(r.max);
            worst = worst.max(r.residual.abs());
        },
    )?;
    Ok((l1(&s, |x, y| c.value_at(x, y)), lo, hi, worst))
}

fn cone_rows() -> Vec<VerifyRow> {
    let lims: Vec<Limiter> = Limiter::ALL.into_iter().filter(|l| l.is_bounded()).collect();
    let runs: Vec<_> = lims.par_iter().map(|&l| (l, cone(l))).collect();
    let src = "Zalesak (1979), J. Comput. Phys. 31, 335; TVD bound: Sweby (1984)";
    let bounded = (|| {
        let (mut lo, mut hi, mut res) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
        for (_, r) in &runs {
            let (_, a, b, w) = r.clone()?;
            lo = lo.min(a);
            hi = hi.max(b);
            res = res.max(w);
        }
        Ok((
            lo,
            lo >= -1e-12 && hi <= 1.0 + 1e-12 && res <= 1e-12,
            format!("every bounded limiter; max {hi:.6}, worst residual {res:.1e}"),
        ))
    })();
    let order = (|| {
        let get = |l: Limiter| -> Result<f64, String> {
            runs.iter()
                .find(|(k, _)| *k == l)
                .ok_or_else(|| format!("{l} missing"))?
                .1
                .clone()
                .map(|r| r.0)
        };
        let (u, m, v) = (get(Limiter::Upwind)?, get(Limiter::Minmod)?, get(Limiter::VanLeer)?);
        Ok((
            v,
            u > m && m > v,
            format!("L1 upwind {u:.4}, minmod {m:.4}, van_leer {v:.4}"),
        ))
    })();
    vec![
        row(
            "rotating cone, boundedness",
            src,
            "smallest value over a revolution",
            ">= -1e-12, max <= 1 + 1e-12, residual <= 1e-12",
            bounded,
        ),
        row(
            "rotating cone, smearing order",
            "Zalesak (1979); ordering by limiter compressiveness (common practice, cf. Sweby 1984)",
            "L1 of van Leer after one turn",
            "L1 upwind > minmod > van Leer",
            order,
        ),
    ]
}

fn swirl() -> VerifyRow {
    let res = (|| {
        let text = crate::scenario::example("swirl").ok_or("the swirl example is missing")?;
        let s = crate::scenario::parse(text, std::path::Path::new("swirl.toml"), &[]).map_err(|e| e.to_string())?;
        let model = s.build_model().map_err(|e| e.to_string())?;
        let c0 = model.field_from(|x, y| s.initial.value_at(x, y));
        let first = c0.clone();
        let mut sim = Simulation::new(model, s.scheme, c0).map_err(|e| e.to_string())?;
        let dist = |sim: &Simulation| -> f64 { (&sim.field_view() - &first).mapv(f64::abs).sum() };
        sim.advance_to(0.5 * s.run.end, |_| ControlFlow::Continue(()))
            .map_err(|e| e.to_string())?;
        let mid = dist(&sim);
        sim.advance_to(s.run.end, |_| ControlFlow::Continue(()))
            .map_err(|e| e.to_string())?;
        let end = dist(&sim);
        let ratio = end / mid;
        Ok((
            ratio,
            ratio < 0.5,
            format!("L1 distance from home {end:.3} at T, {mid:.3} at T/2"),
        ))
    })();
    row(
        "time-reversing swirl returns home",
        "LeVeque (1996), SIAM J. Numer. Anal. 33, 627",
        "distance at T / distance at T/2",
        "< 0.5",
        res,
    )
}

/// Runs every case (in parallel where independent) and returns one row per case, in a fixed
/// order.
pub fn verify() -> Vec<VerifyRow> {
    let cases: Vec<fn() -> Vec<VerifyRow>> = vec![
        || vec![celik()],
        || vec![puff()],
        || vec![upwind_diffusivity()],
        || vec![versteeg()],
        || vec![patankar()],
        || vec![ogata_banks()],
        cone_rows,
        || vec![swirl()],
    ];
    cases.par_iter().flat_map(|c| c()).collect()
}
