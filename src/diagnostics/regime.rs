//! Which term wins where: per-cell Peclet and Courant numbers, the flow regime of each cell,
//! the stable explicit steps and the numerical diffusivity first-order upwind would add, for a
//! model and the step a run will take. No time marching (except [`measure_cost`], which times
//! up to three real steps).
//!
//! Definitions (all at the base flow, i.e. the peak of a tidal or reversing flow):
//! - Cell-centre velocity: the mean of the two face velocities of the cell,
//!   `uc = (u_w + u_e)/2`, `vc = (v_s + v_n)/2`; speed `|(uc, vc)|`.
//! - Cell Peclet numbers `Pe_x = |uc| dx / Kx`, `Pe_y = |vc| dy / Ky`; infinite where K = 0
//!   and the water moves, 0 where it does not. The cell's Peclet number is the larger one.
//! - Regime of a wet cell: *convection-dominated* when its Peclet number exceeds
//!   [`PECLET_SWITCH`] = 2 (the cell-Peclet rule of central differencing, Patankar 1980);
//!   *near-stagnant* when it is not, and its speed is below [`STAGNANT_FRACTION`] (1%) of the
//!   largest wet-cell speed (or nothing moves and K = 0): still water where the tracer only
//!   creeps by diffusion; *diffusion-dominated* otherwise.
//! - Courant number of a cell: `max(|u_w|, |u_e|) dt/dx + max(|v_s|, |v_n|) dt/dy`, the
//!   quantity the engine bounds (the `courant` column of `budget.csv`).
//! - Upwind numerical diffusivity (modified-equation analysis; common practice):
//!   `|uc| dx f(Cx)/2` and `|vc| dy f(Cy)/2` with `C = |uc| dt/dx` and the time factor
//!   `f = 1 + (2 theta - 1) C` of the theta method: `1 - C` for forward Euler (one explicit
//!   stage), `1 + C` for backward Euler, 1 for Crank–Nicolson. Two- and three-stage SSP
//!   Runge–Kutta cancel the `C^2` term of forward Euler, so `f = 1` there (the leading error is
//!   dispersive); IMEX convection is explicit and follows its stages. Clamped at 0.
//! - Ratio map: the larger of `K_num,x / Kx` and `K_num,y / Ky` per cell (infinite where K = 0
//!   and K_num > 0).

use crate::model::Model;
use crate::step::{max_step, Scheme, Simulation, StepLimits, TimeScheme};
use std::time::Instant;

/// Cell Peclet number above which convection dominates (and central differencing oscillates).
pub const PECLET_SWITCH: f64 = 2.0;
/// Fraction of the largest wet-cell speed below which a cell that is not convection-dominated
/// counts as near-stagnant.
pub const STAGNANT_FRACTION: f64 = 0.01;

/// The regime of one cell.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Regime {
    /// Cell Peclet number above 2.
    ConvectionDominated,
    /// Cell Peclet number at most 2 with the water moving.
    DiffusionDominated,
    /// Cell Peclet number at most 2 and speed below 1% of the largest.
    NearStagnant,
    /// Not water.
    Land,
}

impl Regime {
    /// Every regime, in legend order.
    pub const ALL: [Regime; 4] = [
        Regime::ConvectionDominated,
        Regime::DiffusionDominated,
        Regime::NearStagnant,
        Regime::Land,
    ];

    /// The name used in `check.json`.
    pub fn name(self) -> &'static str {
        match self {
            Regime::ConvectionDominated => "convection_dominated",
            Regime::DiffusionDominated => "diffusion_dominated",
            Regime::NearStagnant => "near_stagnant",
            Regime::Land => "land",
        }
    }

    /// The legend text.
    pub fn label(self) -> &'static str {
        match self {
            Regime::ConvectionDominated => "convection-dominated (Pe > 2)",
            Regime::DiffusionDominated => "diffusion-dominated (Pe <= 2)",
            Regime::NearStagnant => "near-stagnant (speed < 1% of max)",
            Regime::Land => "land",
        }
    }

    /// Index in [`Regime::ALL`] (the code of the regime map).
    pub fn code(self) -> u8 {
        Regime::ALL.iter().position(|&r| r == self).unwrap_or(3) as u8
    }
}

/// Per-cell numbers, each `nx * ny` values row-major, row 0 south.
#[derive(Debug, Clone, PartialEq)]
pub struct CellMaps {
    /// Cells along x.
    pub nx: usize,
    /// Cells along y.
    pub ny: usize,
    /// Water flags.
    pub wet: Vec<bool>,
    /// Cell-centre speed, m/s.
    pub speed: Vec<f64>,
    /// `|uc| dx / Kx`.
    pub pe_x: Vec<f64>,
    /// `|vc| dy / Ky`.
    pub pe_y: Vec<f64>,
    /// The larger of the two.
    pub pe: Vec<f64>,
    /// Courant-number sum of the cell at the run's step.
    pub courant: Vec<f64>,
    /// Upwind numerical diffusivity along x, m2/s.
    pub k_num_x: Vec<f64>,
    /// Upwind numerical diffusivity along y, m2/s.
    pub k_num_y: Vec<f64>,
    /// Larger of `k_num_x / Kx` and `k_num_y / Ky`.
    pub ratio: Vec<f64>,
    /// Regime of each cell.
    pub regime: Vec<Regime>,
}

/// `a / b` with `x / 0` infinite for `x > 0` and `0 / 0 = 0`.
fn ratio(a: f64, b: f64) -> f64 {
    if b > 0.0 {
        a / b
    } else if a > 0.0 {
        f64::INFINITY
    } else {
        0.0
    }
}

/// The time factor `f(C)` of the upwind numerical diffusivity for `scheme` (module doc).
pub fn upwind_time_factor(scheme: &Scheme, courant: f64) -> f64 {
    let f = match scheme.time {
        TimeScheme::Explicit | TimeScheme::Imex if scheme.stages == 1 => 1.0 - courant,
        TimeScheme::Explicit | TimeScheme::Imex => 1.0,
        TimeScheme::Implicit | TimeScheme::CrankNicolson => 1.0 + (2.0 * scheme.effective_theta() - 1.0) * courant,
    };
    f.max(0.0)
}

/// Per-cell Peclet and Courant numbers, upwind numerical diffusivity and regimes of `model`
/// at step `dt` (an infinite `dt` means nothing moves).
pub fn cell_maps(model: &Model, scheme: &Scheme, dt: f64) -> CellMaps {
    let g = &model.grid;
    let (nx, ny, s) = (g.nx, g.ny, g.stride());
    let n = g.cells();
    let (u, v) = model.face_velocities();
    let dt = if dt.is_finite() { dt } else { 0.0 };
    let mut m = CellMaps {
        nx,
        ny,
        wet: model.mask.as_slice().to_vec(),
        speed: vec![0.0; n],
        pe_x: vec![0.0; n],
        pe_y: vec![0.0; n],
        pe: vec![0.0; n],
        courant: vec![0.0; n],
        k_num_x: vec![0.0; n],
        k_num_y: vec![0.0; n],
        ratio: vec![0.0; n],
        regime: vec![Regime::Land; n],
    };
    let mut vmax = 0.0f64;
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if !m.wet[k] {
                continue;
            }
            let p = g.idx(i as isize, j as isize);
            let uc = 0.5 * (u[p] + u[p + 1]).abs();
            let vc = 0.5 * (v[p] + v[p + s]).abs();
            m.speed[k] = uc.hypot(vc);
            vmax = vmax.max(m.speed[k]);
            m.pe_x[k] = ratio(uc * g.dx, model.kx);
            m.pe_y[k] = ratio(vc * g.dy, model.ky);
            m.pe[k] = m.pe_x[k].max(m.pe_y[k]);
            m.courant[k] = (u[p].abs().max(u[p + 1].abs()) / g.dx + v[p].abs().max(v[p + s].abs()) / g.dy) * dt;
            let (cx, cy) = (uc * dt / g.dx, vc * dt / g.dy);
            m.k_num_x[k] = 0.5 * uc * g.dx * upwind_time_factor(scheme, cx);
            m.k_num_y[k] = 0.5 * vc * g.dy * upwind_time_factor(scheme, cy);
            m.ratio[k] = ratio(m.k_num_x[k], model.kx).max(ratio(m.k_num_y[k], model.ky));
        }
    }
    let no_diffusion = model.kx == 0.0 && model.ky == 0.0;
    for k in 0..n {
        if !m.wet[k] {
            continue;
        }
        m.regime[k] = if m.pe[k] > PECLET_SWITCH {
            Regime::ConvectionDominated
        } else if (vmax > 0.0 && m.speed[k] < STAGNANT_FRACTION * vmax) || (vmax == 0.0 && no_diffusion) {
            Regime::NearStagnant
        } else {
            Regime::DiffusionDominated
        };
    }
    m
}

/// Serialises a number, writing infinities as `"infinity"` (JSON has no infinity).
fn num<S: serde::Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    if v.is_finite() {
        s.serialize_f64(*v)
    } else if v.is_nan() {
        s.serialize_none()
    } else if *v > 0.0 {
        s.serialize_str("infinity")
    } else {
        s.serialize_str("-infinity")
    }
}

/// Minimum, median, 95th percentile and maximum of a set of values (nearest-rank
/// percentiles).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Spread {
    /// Smallest.
    #[serde(serialize_with = "num")]
    pub min: f64,
    /// Median (nearest rank).
    #[serde(serialize_with = "num")]
    pub median: f64,
    /// 95th percentile (nearest rank).
    #[serde(serialize_with = "num")]
    pub p95: f64,
    /// Largest.
    #[serde(serialize_with = "num")]
    pub max: f64,
}

impl Spread {
    /// The spread of `values` over cells where `wet` is true (all NaN when there are none).
    pub fn of(values: &[f64], wet: &[bool]) -> Self {
        let mut v: Vec<f64> = values.iter().zip(wet).filter(|(_, &w)| w).map(|(&x, _)| x).collect();
        if v.is_empty() {
            return Self {
                min: f64::NAN,
                median: f64::NAN,
                p95: f64::NAN,
                max: f64::NAN,
            };
        }
        let n = v.len();
        let mut rank = |q: f64| {
            let r = ((q * n as f64).ceil() as usize).clamp(1, n) - 1;
            *v.select_nth_unstable_by(r, f64::total_cmp).1
        };
        let (median, p95) = (rank(0.5), rank(0.95));
        let (min, max) = (rank(0.0), rank(1.0));
        Self { min, median, p95, max }
    }
}

/// Share of wet cells (0 to 1) where `pred(value)` holds.
pub fn share(values: &[f64], wet: &[bool], pred: impl Fn(f64) -> bool) -> f64 {
    let (mut hit, mut all) = (0usize, 0usize);
    for (&x, &w) in values.iter().zip(wet) {
        if w {
            all += 1;
            hit += usize::from(pred(x));
        }
    }
    if all > 0 {
        hit as f64 / all as f64
    } else {
        0.0
    }
}

/// Stable explicit steps, s (`null`... written `"infinity"` where a process is absent).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Limits {
    /// Sum of Courant numbers <= 1 (one stage; the SSP coefficient of the 2- and 3-stage
    /// SSP Runge–Kutta schemes used is 1, so the same bound holds for them).
    #[serde(serialize_with = "num")]
    pub convection: f64,
    /// `Kx dt/dx^2 + Ky dt/dy^2 <= 1/2`.
    #[serde(serialize_with = "num")]
    pub diffusion: f64,
    /// Positivity of upwind with diffusion (every coefficient of forward Euler non-negative).
    #[serde(serialize_with = "num")]
    pub positivity: f64,
    /// The bound a fixed step of this time scheme must respect (the smaller of convection and
    /// diffusion for explicit, convection for IMEX, none for implicit and Crank–Nicolson).
    #[serde(serialize_with = "num")]
    pub binding: f64,
    /// The largest step at which the run's limiter with explicit convection makes no new
    /// extrema ([`StepLimits::no_new_extrema`]); `None` for unbounded schemes and implicit
    /// convection.
    pub no_new_extrema: Option<f64>,
    /// The Courant-number sum of that bound ([`crate::ops::limiter::Limiter::tvd_courant`]).
    pub tvd_courant: Option<f64>,
}

/// Everything `tinct check` reports, with every number.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RegimeReport {
    /// Cells along x and y.
    pub nx: usize,
    /// Cells along y.
    pub ny: usize,
    /// Cell size along x, m.
    pub dx: f64,
    /// Cell size along y, m.
    pub dy: f64,
    /// Water cells.
    pub wet_cells: usize,
    /// Physical diffusivity along x, m2/s.
    pub kx: f64,
    /// Physical diffusivity along y, m2/s.
    pub ky: f64,
    /// Extremes of the face velocities: [min u, max u, min v, max v], m/s.
    pub face_velocity_range: [f64; 4],
    /// Largest cell-centre speed, m/s.
    pub max_speed: f64,
    /// Largest discrete divergence of the base flow, 1/s.
    pub max_divergence: f64,
    /// Discharges, residence time, tidal prism, divergence and projection of the flow.
    pub flow: crate::flow::FlowReport,
    /// Shallowest and deepest still water, m.
    pub depth_range: (f64, f64),
    /// Cell Peclet numbers along x over wet cells.
    pub peclet_x: Spread,
    /// Cell Peclet numbers along y over wet cells.
    pub peclet_y: Spread,
    /// Share of wet cells with `Pe_x > 2`.
    pub share_peclet_x_above_2: f64,
    /// Share of wet cells with `Pe_y > 2`.
    pub share_peclet_y_above_2: f64,
    /// Share of wet cells with either above 2.
    pub share_peclet_above_2: f64,
    /// Share of all cells in each regime, in [`Regime::ALL`] order.
    pub regimes: Vec<(Regime, f64)>,
    /// Stable explicit steps.
    pub limits: Limits,
    /// The largest step the run takes, s (infinite when nothing moves).
    #[serde(serialize_with = "num")]
    pub dt: f64,
    /// Whether the step is fixed by `scheme.dt`.
    pub dt_fixed: bool,
    /// `dt` over the binding bound (0 when there is none).
    pub dt_over_bound: f64,
    /// Courant-number sums over wet cells at `dt`.
    pub courant: Spread,
    /// Diffusion number `Kx dt/dx^2 + Ky dt/dy^2`.
    #[serde(serialize_with = "num")]
    pub diffusion_number: f64,
    /// Upwind numerical diffusivity along x over wet cells, m2/s.
    pub numerical_kx: Spread,
    /// Upwind numerical diffusivity along y over wet cells, m2/s.
    pub numerical_ky: Spread,
    /// Ratio of numerical to physical diffusivity over wet cells.
    pub diffusion_ratio: Spread,
    /// Share of wet cells where the ratio exceeds 1.
    pub share_ratio_above_1: f64,
    /// Grid spacing along x (m) that would bring the upwind numerical diffusivity along x
    /// below Kx in 95% of the wet cells at the same Courant number (`None`: already there,
    /// or no diffusivity).
    pub suggested_dx: Option<f64>,
    /// The same along y.
    pub suggested_dy: Option<f64>,
}

/// Wall seconds a run of `scn` is expected to take (one real step timed; frames and logs not
/// included), or `None` when the scenario cannot be built. Commands print it before work that
/// will take more than [`LONG_WORK_SECONDS`].
pub fn estimate_seconds(scn: &crate::scenario::Scenario) -> Option<f64> {
    let model = scn.build_model().ok()?;
    let dt = run_step(&model, &scn.scheme).ok()?;
    let initial = model.field_from(|x, y| scn.initial.value_at(x, y));
    measure_cost(&model, &scn.scheme, initial, dt, scn.run.end, 1)
        .ok()
        .map(|c| c.run_seconds)
}

/// Work expected to last longer than this (s) is announced with its estimate first.
pub const LONG_WORK_SECONDS: f64 = 60.0;

/// The largest step a run of `model` with `scheme` takes, s, with a fixed step allowed above
/// the stability bound (so `check` can report on it).
pub fn run_step(model: &Model, scheme: &Scheme) -> Result<f64, crate::ModelError> {
    let forced = Scheme {
        allow_unstable: true,
        ..*scheme
    };
    max_step(model, &forced)
}

/// The step bound a fixed step of `scheme` must respect, s.
pub fn binding_bound(lim: &StepLimits, scheme: &Scheme) -> f64 {
    match scheme.time {
        TimeScheme::Explicit => lim.stable(),
        TimeScheme::Imex => lim.convection,
        TimeScheme::Implicit | TimeScheme::CrankNicolson => f64::INFINITY,
    }
}

/// The regime report of `model` with `scheme` at step `dt`, and the maps behind it.
pub fn analyse(model: &Model, scheme: &Scheme, dt: f64) -> (CellMaps, RegimeReport) {
    let maps = cell_maps(model, scheme, dt);
    let g = &model.grid;
    let w = &maps.wet;
    let lim = StepLimits::of(model);
    let bound = binding_bound(&lim, scheme);
    let mut fr = [f64::INFINITY, f64::NEG_INFINITY, f64::INFINITY, f64::NEG_INFINITY];
    let (fu, fv) = model.face_velocities();
    for j in 0..g.ny as isize {
        for i in 0..=g.nx as isize {
            let x = fu[g.idx(i, j)];
            fr[0] = fr[0].min(x);
            fr[1] = fr[1].max(x);
        }
    }
    for j in 0..=g.ny as isize {
        for i in 0..g.nx as isize {
            let x = fv[g.idx(i, j)];
            fr[2] = fr[2].min(x);
            fr[3] = fr[3].max(x);
        }
    }
    let above = |x: f64| x > PECLET_SWITCH;
    let ratio_x: Vec<f64> = maps.k_num_x.iter().map(|&k| ratio(k, model.kx)).collect();
    let ratio_y: Vec<f64> = maps.k_num_y.iter().map(|&k| ratio(k, model.ky)).collect();
    // At a fixed Courant number the numerical diffusivity scales with the spacing.
    let suggest = |r: &[f64], h: f64, k: f64| {
        let p = Spread::of(r, w).p95;
        (k > 0.0 && p > 1.0 && p.is_finite()).then(|| h / p)
    };
    let all = g.cells() as f64;
    let report = RegimeReport {
        nx: g.nx,
        ny: g.ny,
        dx: g.dx,
        dy: g.dy,
        wet_cells: model.mask.wet_count(),
        kx: model.kx,
        ky: model.ky,
        face_velocity_range: fr,
        max_speed: maps.speed.iter().copied().fold(0.0, f64::max),
        max_divergence: model.flow.max_divergence(),
        flow: model.flow.report().clone(),
        depth_range: model
            .depth_field
            .as_ref()
            .map_or((model.depth, model.depth), |d| d.range),
        peclet_x: Spread::of(&maps.pe_x, w),
        peclet_y: Spread::of(&maps.pe_y, w),
        share_peclet_x_above_2: share(&maps.pe_x, w, above),
        share_peclet_y_above_2: share(&maps.pe_y, w, above),
        share_peclet_above_2: share(&maps.pe, w, above),
        regimes: Regime::ALL
            .iter()
            .map(|&r| (r, maps.regime.iter().filter(|&&x| x == r).count() as f64 / all))
            .collect(),
        limits: Limits {
            convection: lim.convection,
            diffusion: lim.diffusion,
            positivity: lim.positivity,
            binding: bound,
            no_new_extrema: (!scheme.time.implicit_convection())
                .then(|| StepLimits::no_new_extrema(model, scheme.limiter, scheme.time == TimeScheme::Explicit))
                .flatten()
                .filter(|b| b.is_finite()),
            tvd_courant: scheme.limiter.tvd_courant(),
        },
        dt,
        dt_fixed: scheme.dt.is_some(),
        dt_over_bound: if bound.is_finite() && dt.is_finite() {
            dt / bound
        } else {
            0.0
        },
        courant: Spread::of(&maps.courant, w),
        diffusion_number: if dt.is_finite() {
            model.diffusion_rate() * dt
        } else {
            0.0
        },
        numerical_kx: Spread::of(&maps.k_num_x, w),
        numerical_ky: Spread::of(&maps.k_num_y, w),
        diffusion_ratio: Spread::of(&maps.ratio, w),
        share_ratio_above_1: share(&maps.ratio, w, |r| r > 1.0),
        suggested_dx: suggest(&ratio_x, g.dx, model.kx),
        suggested_dy: suggest(&ratio_y, g.dy, model.ky),
    };
    (maps, report)
}

/// Memory and run-time estimate of a run.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Cost {
    /// Estimated memory of the fields the stepper and the model hold, bytes.
    pub memory_bytes: f64,
    /// Steps to the end time (frame times add at most one step each).
    pub steps: f64,
    /// Set-up time of the stepper (implicit: operator and solver), s.
    pub setup_seconds: f64,
    /// Measured wall time of one step (the fastest of the steps timed), s.
    pub step_seconds: f64,
    /// Steps timed.
    pub steps_timed: usize,
    /// `setup + steps * step`, s (frames and logs not included).
    pub run_seconds: f64,
}

/// Memory estimate, bytes: the padded fields and face velocities every run holds (state,
/// `u`, `v`, wet flags), the explicit stepper's two stage fields, and for implicit schemes the
/// assembled five-point operator, its multigrid hierarchy (about a third more) and the
/// solver's and correction's work vectors (an estimate, counted from the buffers they
/// allocate).
pub fn memory_estimate(model: &Model, scheme: &Scheme) -> f64 {
    let (p, n) = (model.grid.padded_len() as f64, model.grid.cells() as f64);
    let base = 3.0 * 8.0 * p + p + 2.0 * n;
    let stepper = match scheme.time {
        TimeScheme::Explicit => 2.0 * 8.0 * p,
        t => {
            let explicit = if t == TimeScheme::Imex { 2.0 * 8.0 * p } else { 0.0 };
            // rhs, iterate, hi, lo (padded); b, x, prev, bc, ho + 5 extra (cells); stencil
            // 5 coefficients + land with a multigrid hierarchy; about 6 Krylov vectors.
            explicit + 4.0 * 8.0 * p + 10.0 * 8.0 * n + (5.0 * 8.0 + 1.0) * n * 4.0 / 3.0 + 6.0 * 8.0 * n
        }
    };
    base + stepper
}

/// Times up to `max_steps` (1 to 3) real steps of `dt` from `initial` (an interior field) and
/// estimates the run's cost to `end` seconds. Grids above four million cells take one step.
pub fn measure_cost(
    model: &Model,
    scheme: &Scheme,
    initial: ndarray::Array2<f64>,
    dt: f64,
    end: f64,
    max_steps: usize,
) -> Result<Cost, crate::ModelError> {
    let memory_bytes = memory_estimate(model, scheme);
    let steps = if dt.is_finite() && dt > 0.0 {
        (end / dt).ceil()
    } else {
        1.0
    };
    let forced = Scheme {
        allow_unstable: true,
        ..*scheme
    };
    let t0 = Instant::now();
    let mut sim = Simulation::new(model.clone(), forced, initial)?;
    let setup_seconds = t0.elapsed().as_secs_f64();
    let cap = if model.grid.cells() > 1 << 22 { 1 } else { 3 };
    let n = max_steps.clamp(1, cap);
    let h = if dt.is_finite() { dt.min(end) } else { end };
    let mut best = f64::INFINITY;
    let mut timed = 0;
    for _ in 0..n {
        let t = Instant::now();
        let ok = sim.step(h).is_ok();
        best = best.min(t.elapsed().as_secs_f64());
        timed += 1;
        if !ok {
            break;
        }
    }
    Ok(Cost {
        memory_bytes,
        steps,
        setup_seconds,
        step_seconds: best,
        steps_timed: timed,
        run_seconds: setup_seconds + steps * best,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::flow::FlowSpec;
    use crate::grid::{Grid, Mask};
    use crate::model::ModelSpec;
    use crate::ops::boundary::{Boundaries, SideKind};

    #[test]
    fn spread_by_nearest_rank() {
        let v = [5.0, 1.0, 4.0, 2.0, 3.0, 100.0];
        let w = [true, true, true, true, true, false];
        let s = Spread::of(&v, &w);
        // Five wet values 1..5: median rank ceil(2.5) = 3 -> 3; p95 rank ceil(4.75) = 5 -> 5.
        assert_eq!((s.min, s.median, s.p95, s.max), (1.0, 3.0, 5.0, 5.0));
        assert_eq!(share(&v, &w, |x| x > 2.0), 0.6);
        assert!(Spread::of(&v, &[false; 6]).median.is_nan());
    }

    #[test]
    fn time_factor_of_the_theta_method() {
        let mut s = Scheme {
            stages: 1,
            ..Scheme::default()
        };
        assert_eq!(upwind_time_factor(&s, 0.25), 0.75);
        s.stages = 2;
        assert_eq!(upwind_time_factor(&s, 0.25), 1.0);
        s.time = TimeScheme::Implicit;
        assert_eq!(upwind_time_factor(&s, 0.25), 1.25);
        s.time = TimeScheme::CrankNicolson;
        assert_eq!(upwind_time_factor(&s, 0.25), 1.0);
    }

    #[test]
    fn no_flow_and_no_diffusion_is_stagnant_and_infinite_peclet_without_k() {
        let g = Grid::new(3, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let spec = |u: f64, k: f64| ModelSpec {
            grid: g,
            mask: Some(Mask::all_water(&g)),
            depth: 1.0.into(),
            kx: k,
            ky: k,
            decay_rate: 0.0,
            flow: FlowSpec::uniform(u, 0.0),
            boundaries: Boundaries::uniform(SideKind::Open { value: 0.0 }),
            sources: vec![],
        };
        let m = Model::new(spec(0.0, 0.0)).unwrap();
        let c = cell_maps(&m, &Scheme::default(), f64::INFINITY);
        assert!(c.regime.iter().all(|&r| r == Regime::NearStagnant));
        let m = Model::new(spec(0.5, 0.0)).unwrap();
        let c = cell_maps(&m, &Scheme::default(), 1.0);
        assert!(c.pe_x.iter().all(|p| p.is_infinite()) && c.pe_y.iter().all(|&p| p == 0.0));
        assert!(c.regime.iter().all(|&r| r == Regime::ConvectionDominated));
        assert!(c.ratio.iter().all(|r| r.is_infinite()));
        let json = serde_json::to_string(&analyse(&m, &Scheme::default(), 1.0).1).unwrap();
        assert!(json.contains("\"infinity\""), "{json}");
    }
}
