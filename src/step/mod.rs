//! Time stepping: the scheme choice, step-size control and the simulation driver.
//!
//! [`Simulation`] owns the model, the state, the stepper's scratch (allocated once) and the mass
//! budget, and advances to requested times with steps that land on them exactly. The explicit
//! stepper is the SSP Runge–Kutta family of Shu & Osher (1988) with 1, 2 or 3 stages, each stage
//! one fused sweep of the `kernel` module.

pub(crate) mod explicit;
mod implicit;
pub(crate) mod kernel;
mod snapshot;
pub mod tide_bench;

use crate::budget::{Budget, BudgetRow};
use crate::diagnostics::advice::sig;
use crate::error::{invalid, positive, ModelError, RunError};
use crate::model::Model;
use crate::ops::boundary::{Side, SideKind};
use crate::ops::limiter::Limiter;
use crate::ops::sources::decay_factor;
use explicit::Explicit;
use implicit::{Implicit, ImplicitFailure};
use ndarray::{Array2, ArrayView2, CowArray, Ix2};
pub use snapshot::{ImplicitCounters, SimState};
use std::ops::ControlFlow;

/// How time is advanced (DESIGN §2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum TimeScheme {
    /// SSP Runge–Kutta with 1, 2 or 3 stages (Shu & Osher 1988).
    #[default]
    Explicit,
    /// Backward Euler for convection and diffusion; convection's limiter enters as a deferred
    /// correction (Khosla & Rubin 1974).
    Implicit,
    /// The theta method with theta = 0.5 by default (Crank & Nicolson 1947), deferred correction
    /// as for `Implicit`.
    CrankNicolson,
    /// Explicit SSP Runge–Kutta convection, then implicit (theta-method, backward Euler by
    /// default) diffusion.
    Imex,
}

impl TimeScheme {
    /// Every time scheme.
    pub const ALL: [TimeScheme; 4] = [
        TimeScheme::Explicit,
        TimeScheme::Implicit,
        TimeScheme::CrankNicolson,
        TimeScheme::Imex,
    ];

    /// The scenario-file name.
    pub fn name(self) -> &'static str {
        match self {
            TimeScheme::Explicit => "explicit",
            TimeScheme::Implicit => "implicit",
            TimeScheme::CrankNicolson => "crank_nicolson",
            TimeScheme::Imex => "imex",
        }
    }

    /// Whether any operator is solved implicitly (a linear solve per step).
    pub fn is_implicit(self) -> bool {
        self != TimeScheme::Explicit
    }

    /// Whether convection is treated implicitly (no Courant limit).
    pub fn implicit_convection(self) -> bool {
        matches!(self, TimeScheme::Implicit | TimeScheme::CrankNicolson)
    }

    /// The default target Courant number: 0.4 where convection is explicit, 5 where it is not.
    pub fn default_courant(self) -> f64 {
        if self.implicit_convection() {
            5.0
        } else {
            0.4
        }
    }
}

impl std::str::FromStr for TimeScheme {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Self::ALL.iter().copied().find(|t| t.name() == s).ok_or_else(|| {
            let names: Vec<&str> = Self::ALL.iter().map(|t| t.name()).collect();
            format!("unknown time scheme '{s}': allowed are {}", names.join(", "))
        })
    }
}

/// Numerical choices of a run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scheme {
    /// Convection scheme.
    pub limiter: Limiter,
    /// Time scheme.
    pub time: TimeScheme,
    /// SSP Runge–Kutta stages, 1 to 3 (explicit convection).
    pub stages: u8,
    /// Target Courant number (sum over directions) for the automatic step.
    pub courant: f64,
    /// A fixed step, s, instead of the automatic one.
    pub dt: Option<f64>,
    /// Safety factor on the explicit diffusion limit for the automatic step.
    pub diffusion_safety: f64,
    /// Implicit weight of the theta method (0.5 to 1); `None`: 0.5 for Crank–Nicolson, 1 for
    /// IMEX diffusion. Backward Euler is always 1.
    pub theta: Option<f64>,
    /// Relative residual at which a linear solve stops.
    pub tolerance: f64,
    /// Iteration cap of a linear solve.
    pub max_iterations: usize,
    /// Deferred-correction iterations stop when the largest change is below this fraction of
    /// the largest value.
    pub correction_tolerance: f64,
    /// Cap on deferred-correction iterations per step.
    pub max_corrections: usize,
    /// Accept a fixed `dt` above the explicit stability bound (`--force`: for demonstrating
    /// instability, never for results).
    pub allow_unstable: bool,
}

impl Default for Scheme {
    fn default() -> Self {
        Self {
            limiter: Limiter::VanLeer,
            time: TimeScheme::Explicit,
            stages: 2,
            courant: 0.4,
            dt: None,
            diffusion_safety: 0.9,
            theta: None,
            tolerance: 1e-10,
            max_iterations: 100,
            correction_tolerance: 1e-6,
            max_corrections: 50,
            allow_unstable: false,
        }
    }
}

impl Scheme {
    /// The implicit weight actually used (1 for backward Euler; 0 for explicit).
    pub fn effective_theta(&self) -> f64 {
        match self.time {
            TimeScheme::Explicit => 0.0,
            TimeScheme::Implicit => 1.0,
            TimeScheme::CrankNicolson => self.theta.unwrap_or(0.5),
            TimeScheme::Imex => self.theta.unwrap_or(1.0),
        }
    }
}

/// Stable explicit step sizes of a model, s.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StepLimits {
    /// Sum of Courant numbers <= 1 (forward Euler upwind; the SSP coefficient of the 1-, 2- and
    /// 3-stage schemes used here is 1, so the same bound holds for each).
    pub convection: f64,
    /// `(Kx/dx^2 + Ky/dy^2) dt <= 1/2`.
    pub diffusion: f64,
    /// Positivity of upwind with diffusion: `sum C + 2 (dx + dy) diffusion numbers <= 1`.
    pub positivity: f64,
}

impl StepLimits {
    /// The limits of `model` (infinite where a process is absent).
    pub fn of(model: &Model) -> Self {
        let conv = model.flow.courant_rate() * model.flow.max_factor();
        let diff = model.diffusion_rate();
        let inv = |r: f64| if r > 0.0 { 1.0 / r } else { f64::INFINITY };
        Self {
            convection: inv(conv),
            diffusion: if diff > 0.0 { 0.5 / diff } else { f64::INFINITY },
            positivity: inv(conv + 2.0 * diff),
        }
    }

    /// The stability bound a fixed explicit step must respect: convection and diffusion
    /// together, `sum C + 2 (dx + dy) diffusion numbers <= 1` (the von Neumann condition of
    /// forward-Euler upwind with central diffusion for the grid's shortest wave, which the
    /// SSP Runge-Kutta stages keep; Hirsch 2007, section 8.3, from memory). Either limit alone
    /// lets a step with Courant 1 and any diffusion through, which grows without bound.
    pub fn stable(&self) -> f64 {
        self.positivity
    }

    /// The largest step at which explicit convection with `limiter` makes no new extrema:
    /// `(C (1 + sup psi(r)/r / 2) + 2 D) <= 1` with C the Courant-number sum and D the
    /// diffusion number per unit step, the diffusion only when it is explicit
    /// ([`Limiter::tvd_courant`]); `None` for the unbounded schemes, infinite when nothing
    /// moves.
    pub fn no_new_extrema(model: &Model, limiter: Limiter, explicit_diffusion: bool) -> Option<f64> {
        let s = limiter.slope_bound()?;
        let conv = model.flow.courant_rate() * model.flow.max_factor();
        let diff = if explicit_diffusion {
            model.diffusion_rate()
        } else {
            0.0
        };
        let rate = conv * (1.0 + 0.5 * s) + 2.0 * diff;
        Some(if rate > 0.0 { 1.0 / rate } else { f64::INFINITY })
    }
}

/// The largest step of a run. A fixed `dt` is checked against the stability bound of the
/// explicit parts (none for implicit and Crank–Nicolson; the convection bound for IMEX). The
/// automatic step is, for explicit runs, `courant / (Courant rate + 2 diffusion rate)` capped
/// by the diffusion limit times the safety factor (so convection-dominated runs meet the target
/// Courant number and every automatic step keeps upwind with diffusion positive); otherwise
/// `courant / Courant rate`, or `courant / (2 diffusion rate)` when nothing flows.
pub fn max_step(model: &Model, scheme: &Scheme) -> Result<f64, ModelError> {
    if !(1..=3).contains(&scheme.stages) {
        return Err(invalid("scheme.stages", scheme.stages, "1, 2 or 3"));
    }
    if let Some(th) = scheme.theta {
        if !(0.5..=1.0).contains(&th) {
            return Err(invalid(
                "scheme.theta",
                th,
                "a number from 0.5 (Crank-Nicolson) to 1 (backward Euler)",
            ));
        }
    }
    if !(scheme.tolerance > 0.0 && scheme.tolerance < 1.0) {
        return Err(invalid("scheme.tolerance", scheme.tolerance, "a number in (0, 1)"));
    }
    if scheme.max_iterations == 0 {
        return Err(invalid(
            "scheme.max_iterations",
            scheme.max_iterations,
            "an integer >= 1",
        ));
    }
    if !(scheme.correction_tolerance > 0.0 && scheme.correction_tolerance < 1.0) {
        return Err(invalid(
            "scheme.correction_tolerance",
            scheme.correction_tolerance,
            "a number in (0, 1)",
        ));
    }
    let lim = StepLimits::of(model);
    let conv = model.flow.courant_rate() * model.flow.max_factor();
    let diff = model.diffusion_rate();
    if let Some(dt) = scheme.dt {
        positive("scheme.dt", dt)?;
        let bound = match scheme.time {
            TimeScheme::Explicit => lim.stable(),
            TimeScheme::Imex => lim.convection,
            TimeScheme::Implicit | TimeScheme::CrankNicolson => f64::INFINITY,
        };
        if dt > bound * (1.0 + 1e-12) && !scheme.allow_unstable {
            let reason = if scheme.time == TimeScheme::Imex {
                format!(
                    "sum of Courant numbers {:.3} > 1 with explicit convection",
                    dt / lim.convection
                )
            } else {
                format!(
                    "sum of Courant numbers {:.3} + 2 x diffusion number (Kx dt/dx^2 + Ky dt/dy^2) {:.3} = {:.3} > 1",
                    conv * dt,
                    diff * dt,
                    dt / lim.positivity
                )
            };
            return Err(ModelError::UnstableDt { dt, bound, reason });
        }
        return Ok(dt);
    }
    positive("scheme.courant", scheme.courant)?;
    if !(scheme.diffusion_safety > 0.0 && scheme.diffusion_safety <= 1.0) {
        return Err(invalid(
            "scheme.diffusion_safety",
            scheme.diffusion_safety,
            "a number in (0, 1]",
        ));
    }
    let dt = match scheme.time {
        TimeScheme::Explicit => (scheme.courant / (conv + 2.0 * diff)).min(scheme.diffusion_safety * lim.diffusion),
        // Without flow, the target applies to twice the diffusion number.
        _ if conv > 0.0 => scheme.courant / conv,
        _ => scheme.courant / (2.0 * diff),
    };
    // Bounded limiters with explicit convection: never above the no-new-extrema step.
    let dt = match scheme.time {
        TimeScheme::Explicit | TimeScheme::Imex => {
            let explicit_diffusion = scheme.time == TimeScheme::Explicit;
            StepLimits::no_new_extrema(model, scheme.limiter, explicit_diffusion).map_or(dt, |b| dt.min(b))
        }
        _ => dt,
    };
    if scheme.time == TimeScheme::Imex && scheme.courant > 1.0 && conv > 0.0 {
        return Err(invalid(
            "scheme.courant",
            scheme.courant,
            "at most 1 with explicit (imex) convection",
        ));
    }
    if !dt.is_finite() {
        // Nothing moves: no flow and no diffusion. Any step is exact; use one per output.
        return Ok(f64::INFINITY);
    }
    Ok(dt)
}

/// Warnings about the numerical choices of a run at step `dt` (words for the user; empty when
/// nothing stands out). Crank–Nicolson (theta < 1) keeps positivity only while
/// `2 (1 - theta) (Kx dt/dx^2 + Ky dt/dy^2) <= 1` for diffusion and `(1 - theta) C <= 1` for
/// upwind convection (positive-coefficient analysis of the theta method; common practice):
/// beyond that it rings on sharp fronts.
pub fn scheme_warnings(model: &Model, scheme: &Scheme, dt: f64) -> Vec<String> {
    let mut w = Vec::new();
    if !dt.is_finite() {
        return w;
    }
    let th = scheme.effective_theta();
    let d = model.diffusion_rate() * dt;
    let c = model.flow.courant_rate() * model.flow.max_factor() * dt;
    if scheme.time.is_implicit() && th < 1.0 {
        if 2.0 * (1.0 - th) * d > 1.0 {
            w.push(format!(
                "{} with theta = {th} at diffusion number {d:.3} (Kx dt/dx^2 + Ky dt/dy^2): above {:.3} it is not positivity-preserving and rings on sharp fronts; use theta closer to 1, time = \"implicit\", or a smaller step",
                scheme.time.name(),
                1.0 / (2.0 * (1.0 - th))
            ));
        }
        if scheme.time.implicit_convection() && (1.0 - th) * c > 1.0 {
            w.push(format!(
                "{} with theta = {th} at Courant number {c:.3}: above {:.3} convection is not positivity-preserving and fronts ring; use theta closer to 1 or a smaller step",
                scheme.time.name(),
                1.0 / (1.0 - th)
            ));
        }
    }
    if !scheme.time.implicit_convection() {
        let explicit_diffusion = scheme.time == TimeScheme::Explicit;
        if let (Some(bound), Some(courant)) = (
            StepLimits::no_new_extrema(model, scheme.limiter, explicit_diffusion),
            scheme.limiter.tvd_courant(),
        ) {
            let name = scheme.limiter.name();
            if dt > bound * (1.0 + 1e-9) {
                w.push(format!(
                    "the step {} s is above the no-new-extrema step of '{name}', {} s (Courant-number sum {} at most, times (1 + 2 diffusion numbers) with explicit diffusion: C (1 + sup psi(r)/r / 2) <= 1); the results can overshoot or undershoot; it is stable, but a smaller step or the automatic one keeps the limiter's bounds",
                    sig(dt, 4),
                    sig(bound, 4),
                    sig(courant, 4)
                ));
            } else if scheme.dt.is_none() && scheme.courant > courant * (1.0 + 1e-9) && c > 0.0 {
                w.push(format!(
                    "scheme.courant = {} is above the no-new-extrema Courant-number sum of '{name}', {}: the automatic step was capped there (Courant sum {})",
                    sig(scheme.courant, 4),
                    sig(courant, 4),
                    sig(c, 3)
                ));
            }
        }
    }
    if scheme.time.implicit_convection()
        && scheme.limiter.is_bounded()
        && scheme.limiter != Limiter::Upwind
        && !scheme.limiter.is_peclet_switched()
    {
        w.push(format!(
            "'{}' with implicit convection is bounded only to the deferred-correction tolerance: the corrected solution can dip slightly below the smallest or above the largest value (measured: up to 1e-5 of the peak with superbee at Courant 2 and 1e-4 at Courant 5, 2e-8 with van_leer and 3e-14 with minmod at Courant 2, on the rotating cone and slotted disk); where strict bounds matter use upwind (bounded at any step) or explicit convection",
            scheme.limiter.name()
        ));
    }
    if scheme.time.implicit_convection() && scheme.limiter != Limiter::Upwind && c > 2.0 {
        w.push(format!(
            "deferred correction of '{}' at Courant number {c:.3} needs many corrections per step; a Courant number of 1 to 2, or upwind convection, is cheaper",
            scheme.limiter.name()
        ));
    }
    w
}

/// The marched state.
#[derive(Debug, Clone)]
pub struct State {
    /// Concentration, padded layout.
    pub c: Vec<f64>,
    /// Simulated time, s.
    pub t: f64,
    /// Steps taken.
    pub step: u64,
    /// The last step, s.
    pub last_dt: f64,
    /// Largest per-cell Courant-number sum of the last step.
    pub last_courant: f64,
}

/// The report of an implicit step that did not converge.
fn not_converged(f: ImplicitFailure, step: u64, time: f64) -> RunError {
    match f {
        ImplicitFailure::Solver(e) => RunError::NotConverged {
            step,
            time,
            what: "linear solver".into(),
            detail: e.to_string(),
            advice:
                "raise scheme.max_iterations or scheme.tolerance, or take a smaller step (scheme.courant or scheme.dt)"
                    .into(),
        },
        ImplicitFailure::Correction { iterations, change } => RunError::NotConverged {
            step,
            time,
            what: "deferred correction".into(),
            detail: format!(
                "after {iterations} corrections the field still changes by {change:.3e} of its largest value"
            ),
            advice:
                "take a smaller step (scheme.courant about 1 to 2 suits deferred correction), or use upwind convection"
                    .into(),
        },
    }
}

/// The stepper of a run, chosen once from the time scheme.
#[derive(Debug)]
enum Stepper {
    Explicit(Explicit),
    Implicit(Box<Implicit>),
}

/// Mass that instantaneous and continuous sources may release in (t, t + dt].
fn max_release(m: &Model, t: f64, dt: f64) -> f64 {
    m.sources.iter().map(|s| s.mass_between(t, t + dt)).sum()
}

/// A model, its state, stepper and budget.
#[derive(Debug)]
pub struct Simulation {
    /// The model.
    pub model: Model,
    /// The numerical choices.
    pub scheme: Scheme,
    /// The state.
    pub state: State,
    /// The mass budget.
    pub budget: Budget,
    stepper: Stepper,
    dt_max: f64,
    scale: f64,
}

impl Simulation {
    /// Starts a run at t = 0 from the `initial` interior field (shape (ny, nx), (y, x) order,
    /// row 0 south; an owned array or a view; land cells are zeroed); instantaneous releases
    /// at t <= 0 are applied at once and booked as added mass. Another shape or a non-finite
    /// water value is a [`ModelError`].
    pub fn new<'a>(
        model: Model,
        scheme: Scheme,
        initial: impl Into<CowArray<'a, f64, Ix2>>,
    ) -> Result<Self, ModelError> {
        let initial = initial.into();
        // The state swaps buffers with the stepper every step: `padded_from` gives it the
        // same huge-page backing as the stepper's own.
        let padded = model.grid.padded_from("initial field", initial.view())?;
        Self::from_padded(model, scheme, padded)
    }

    /// Starts a run from a padded field of this grid (from `Grid::padded_from`), as `new`.
    fn from_padded(model: Model, scheme: Scheme, mut initial: Vec<f64>) -> Result<Self, ModelError> {
        let dt_max = max_step(&model, &scheme)?;
        let mut c = model.grid.interior_view_mut(&mut initial);
        for ((j, i), v) in c.indexed_iter_mut() {
            if !model.mask.is_wet(i, j) {
                *v = 0.0;
            } else if !v.is_finite() {
                return Err(invalid(
                    format!("initial value at cell ({i}, {j})"),
                    *v,
                    "a finite number",
                ));
            }
        }
        let mass0 = model.mass(&initial, 0.0);
        let mut budget = Budget::new(mass0);
        for s in &model.sources {
            let m = s.mass_at_start(0.0);
            if m > 0.0 {
                model.deposit(s, &mut initial, m, 0.0);
                budget.add_released(m);
            }
        }
        let mut scale = crate::field::wet_min_max(&model.grid, &model.mask, &initial);
        for side in Side::ALL {
            if let SideKind::Open { value } | SideKind::Fixed { value } = model.boundaries.get(side) {
                scale.0 = scale.0.min(value);
                scale.1 = scale.1.max(value);
            }
        }
        let stepper = if scheme.time.is_implicit() {
            let imp = Implicit::new(&model, &scheme, dt_max)
                .map_err(|e| invalid("scheme (implicit solver set-up)", e, "a solvable operator"))?;
            Stepper::Implicit(Box::new(imp))
        } else {
            Stepper::Explicit(Explicit::new(&model))
        };
        let scale = scale.0.abs().max(scale.1.abs());
        Ok(Self {
            state: State {
                c: initial,
                t: 0.0,
                step: 0,
                last_dt: 0.0,
                last_courant: 0.0,
            },
            model,
            scheme,
            budget,
            stepper,
            dt_max,
            scale,
        })
    }

    /// The largest step this run takes, s (infinite when nothing moves).
    pub fn dt_max(&self) -> f64 {
        self.dt_max
    }

    /// Advances to `target` in equal steps no larger than [`Self::dt_max`], landing on it
    /// exactly. `after_step` runs after every step; returning `Break` stops early.
    pub fn advance_to(
        &mut self,
        target: f64,
        mut after_step: impl FnMut(&Simulation) -> ControlFlow<()> + Send,
    ) -> Result<(), RunError> {
        crate::par::in_pool(|| self.advance_in_pool(target, &mut after_step))
    }

    /// [`Self::advance_to`] once on a pool thread.
    fn advance_in_pool(
        &mut self,
        target: f64,
        after_step: &mut (impl FnMut(&Simulation) -> ControlFlow<()> + Send),
    ) -> Result<(), RunError> {
        while self.state.t < target {
            let remaining = target - self.state.t;
            let n = if self.dt_max.is_finite() {
                (remaining / self.dt_max * (1.0 - 1e-12)).ceil().max(1.0)
            } else {
                1.0
            };
            let dt = remaining / n;
            let last = n <= 1.0;
            self.step_in_pool(dt)?;
            if last {
                self.state.t = target;
            }
            if after_step(self).is_break() {
                break;
            }
        }
        Ok(())
    }

    /// One step of `dt` seconds: convection and diffusion, decay, then sources.
    pub fn step(&mut self, dt: f64) -> Result<(), RunError> {
        crate::par::in_pool(|| self.step_in_pool(dt))
    }

    /// [`Self::step`] on a pool thread.
    fn step_in_pool(&mut self, dt: f64) -> Result<(), RunError> {
        let Self {
            model,
            scheme,
            state,
            budget,
            stepper,
            scale,
            ..
        } = self;
        let m = &*model;
        let decay = decay_factor(m.decay_rate, dt);
        // Values beyond a thousand times the largest the data can explain are a blow-up.
        let limit = 1e3 * (*scale + (budget.added() + max_release(m, state.t, dt)) / m.cell_volume());
        let out = match stepper {
            Stepper::Explicit(ex) => ex.advance(m, scheme, state, dt, decay, limit, 1.0),
            Stepper::Implicit(imp) => match imp.advance(m, scheme, state, dt, decay, limit) {
                Ok(o) => o,
                Err(f) => return Err(not_converged(f, state.step + 1, state.t)),
            },
        };
        for side in Side::ALL {
            let [i, o] = out.side_mass[side.index()];
            if i != 0.0 || o != 0.0 {
                budget.add_side(side, i, o);
            }
        }
        if decay != 1.0 {
            budget.add_decayed((1.0 - decay) * out.transported * m.mass_factor());
        }
        if out.flushed != 0.0 {
            // Values set to zero below the kernel's floor leave the water as decay does.
            budget.add_decayed(out.flushed * m.mass_factor());
        }
        let t1 = state.t + dt;
        for s in &m.sources {
            let mass = s.mass_between(state.t, t1);
            if mass > 0.0 {
                m.deposit(s, &mut state.c, mass, t1);
                budget.add_released(mass);
            }
        }
        state.t = t1;
        state.step += 1;
        state.last_dt = dt;
        state.last_courant = m.flow.courant_rate() * out.max_factor * dt;
        if out.bad {
            return Err(self.diverged());
        }
        Ok(())
    }

    /// The linear solver of the implicit steps (`None` for explicit runs).
    pub fn linear_solver(&self) -> Option<crate::solve::Method> {
        match &self.stepper {
            Stepper::Explicit(_) => None,
            Stepper::Implicit(imp) => Some(imp.solver_method()),
        }
    }

    /// Linear-solver iterations and deferred corrections of the last step (0 for explicit).
    pub fn last_iterations(&self) -> (usize, usize) {
        match &self.stepper {
            Stepper::Explicit(_) => (0, 0),
            Stepper::Implicit(imp) => (imp.last_iterations, imp.last_corrections),
        }
    }

    /// Warnings about this run's numerical choices at its largest step, and about steps whose
    /// deferred correction stalled.
    pub fn warnings(&self) -> Vec<String> {
        let mut w = scheme_warnings(&self.model, &self.scheme, self.dt_max);
        let f = self.model.flow.report();
        if f.divergence > crate::flow::DIVERGENCE_TOLERANCE && !f.projected {
            w.push(format!(
                "the flow is not divergence-free (a cell's net discharge reaches {} of the largest face discharge) and flow.project = false: the flow creates or removes water there, so concentrations can pile up or reach new extremes",
                crate::diagnostics::advice::sig(f.divergence, 2)
            ));
        }
        if let Stepper::Implicit(imp) = &self.stepper {
            if imp.unsettled_steps > 0 {
                w.push(format!(
                    "in {} step(s) the deferred correction of '{}' stalled above its tolerance {:.0e} (but changed the field by less than {:.0e} of its largest value); a smaller Courant number settles it",
                    imp.unsettled_steps,
                    self.scheme.limiter.name(),
                    self.scheme.correction_tolerance,
                    implicit::STALL_LIMIT
                ));
            }
        }
        w
    }

    /// Builds the divergence report: the worst cell and the likely cause.
    fn diverged(&self) -> RunError {
        let (wi, wj, wv) = self.worst_cell();
        let dt = self.state.last_dt;
        let lim = StepLimits::of(&self.model);
        let c = dt / lim.convection;
        let d = 0.5 * dt / lim.diffusion;
        let lname = self.scheme.limiter.name();
        let cause = if c > 1.0 || d > 0.5 {
            format!("time step too large: dt = {dt:.4e} s gives a Courant-number sum of {c:.3} (limit 1) and a diffusion number of {d:.3} (limit 0.5)")
        } else if !self.scheme.limiter.is_bounded() {
            format!(
                "the unbounded '{lname}' convection scheme ({} stage(s)): it oscillates where the cell Peclet number exceeds 2 and forward Euler with it is unstable for pure convection; use a bounded limiter such as van_leer, or more stages",
                self.scheme.stages
            )
        } else {
            format!("an instability at this cell with dt = {dt:.4e} s (Courant-number sum {c:.3}, diffusion number {d:.3}); check boundary values and sources")
        };
        RunError::Diverged {
            step: self.state.step,
            time: self.state.t,
            i: wi,
            j: wj,
            value: wv,
            cause,
        }
    }

    /// The first cell holding a non-finite value, else the one with the largest magnitude.
    fn worst_cell(&self) -> (usize, usize, f64) {
        let g = &self.model.grid;
        let (mut wi, mut wj, mut wv) = (0, 0, 0.0f64);
        for j in 0..g.ny {
            for i in 0..g.nx {
                let v = self.state.c[g.idx(i as isize, j as isize)];
                if !v.is_finite() {
                    return (i, j, v);
                }
                if v.abs() > wv.abs() {
                    (wi, wj, wv) = (i, j, v);
                }
            }
        }
        (wi, wj, wv)
    }

    /// Checks a budget row of this simulation: a mass, total, residual or extreme that is not
    /// a finite number fails the run, naming the quantity, the step and the worst cell.
    pub fn check_row(&self, row: &BudgetRow) -> Result<(), RunError> {
        let quantities = [
            ("mass", row.mass),
            ("mass added by sources", row.added),
            ("mass carried in", row.inflow),
            ("mass carried out", row.outflow),
            ("mass removed by decay", row.decayed),
            ("budget residual", row.residual),
            ("smallest concentration", row.min),
            ("largest concentration", row.max),
        ];
        let Some((quantity, value)) = quantities.into_iter().find(|(_, v)| !v.is_finite()) else {
            return Ok(());
        };
        let (i, j, cell_value) = self.worst_cell();
        let cause = if cell_value.is_finite() {
            "the concentrations are finite but their mass (concentration x depth x cell area, summed) overflows double precision: check the sizes of grid.depth, grid.dx, grid.dy, the initial field and the source masses"
        } else {
            "a concentration overflowed: check the sizes of the initial field and the source masses against grid.depth, grid.dx and grid.dy, and the time step"
        };
        Err(RunError::NonFinite {
            step: row.step,
            time: row.time,
            quantity: quantity.into(),
            value,
            i,
            j,
            cell_value,
            cause: cause.into(),
        })
    }

    /// The mass in the domain now.
    pub fn mass(&self) -> f64 {
        self.model.mass(&self.state.c, self.state.t)
    }

    /// Measures mass, min and max now and builds a budget row.
    pub fn budget_row(&self) -> BudgetRow {
        let mass = self.mass();
        let (lo, hi) = crate::field::wet_min_max(&self.model.grid, &self.model.mask, &self.state.c);
        let s = &self.state;
        self.budget.row(s.t, s.step, s.last_dt, mass, lo, hi, s.last_courant)
    }

    /// The field's interior as a zero-copy view of shape (ny, nx), (y, x) order, row 0 south
    /// (`view[[j, i]]` is cell (i, j), as in `fields.nc`).
    pub fn field_view(&self) -> ArrayView2<'_, f64> {
        self.model.grid.interior_view(&self.state.c)
    }

    /// A copy of the field's interior, shape (ny, nx), as [`Self::field_view`].
    pub fn field(&self) -> Array2<f64> {
        self.field_view().to_owned()
    }

    /// Concentration of the cell containing (x, y), if inside the grid.
    pub fn value_at(&self, x: f64, y: f64) -> Option<f64> {
        let (i, j) = self.model.grid.cell_at(x, y)?;
        Some(self.state.c[self.model.grid.idx(i as isize, j as isize)])
    }
}
