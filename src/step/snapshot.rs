//! Everything a [`Simulation`] changes as it marches, as one serialisable value, so a run
//! restored into a simulation freshly built from the same scenario continues bit for bit.
//!
//! What is kept and why:
//! - the padded field with its halo (the halo is refilled before it is read, but keeping it
//!   whole makes the restored state identical, not merely equivalent);
//! - time, step count, last step and last Courant number (the next step starts from `t`; the
//!   others go into the next budget row if it is taken before a step);
//! - the budget's running totals as Neumaier pairs (sum and compensation: the value alone would
//!   round the next additions differently);
//! - the implicit stepper's counters (`unsettled_steps` feeds the end-of-run warning; the last
//!   iteration counts are what `last_iterations` reports).
//!
//! What is not kept, because it is rebuilt identically or overwritten before it is read:
//! - sources: a release in (t, t + dt] is a function of time alone, so "already deposited" is
//!   decided by `t`;
//! - the flow's factor and tidal level are functions of time;
//! - the explicit scratch (stage buffers, face rows, formed faces): every value a stage reads
//!   was written earlier in the same step;
//! - the implicit stepper's matrix, solver factors and multigrid hierarchy: a restored stepper
//!   assembles at its first step (the cached key is empty) from the same step size, factor
//!   and level, which gives the same coefficients; the solve starts from the field each step
//!   (no guess is carried between steps) and the deferred-correction iterate and its
//!   under-relaxed high-order term are reset at the first correction of every step.

use super::{Simulation, Stepper};
use crate::budget::Budget;

/// The marching state of a [`Simulation`] (see the module documentation).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SimState {
    /// Concentration, padded layout (halo included).
    pub c: Vec<f64>,
    /// Simulated time, s.
    pub t: f64,
    /// Steps taken.
    pub step: u64,
    /// The last step, s.
    pub last_dt: f64,
    /// Largest per-cell Courant-number sum of the last step.
    pub last_courant: f64,
    /// The mass budget's running totals.
    pub budget: Budget,
    /// The largest step of the run, s: derived from the scenario, kept to refuse a restore
    /// into a simulation built from something else.
    pub dt_max: f64,
    /// The implicit stepper's counters (`None` for explicit runs).
    pub implicit: Option<ImplicitCounters>,
}

/// Counters of the implicit stepper that outlive a step.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct ImplicitCounters {
    /// Linear-solver iterations of the last step.
    pub last_iterations: usize,
    /// Deferred corrections of the last step.
    pub last_corrections: usize,
    /// Steps whose correction stalled above its tolerance.
    pub unsettled_steps: usize,
}

impl Simulation {
    /// The state this simulation has marched to.
    pub fn snapshot(&self) -> SimState {
        let s = &self.state;
        SimState {
            c: s.c.clone(),
            t: s.t,
            step: s.step,
            last_dt: s.last_dt,
            last_courant: s.last_courant,
            budget: self.budget.clone(),
            dt_max: self.dt_max,
            implicit: match &self.stepper {
                Stepper::Explicit(_) => None,
                Stepper::Implicit(imp) => Some(ImplicitCounters {
                    last_iterations: imp.last_iterations,
                    last_corrections: imp.last_corrections,
                    unsettled_steps: imp.unsettled_steps,
                }),
            },
        }
    }

    /// Puts `snap` into this simulation, which must have been built from the same scenario
    /// (same grid, scheme and largest step); the next [`Simulation::step`] then does exactly
    /// what the snapshotted simulation's next step did. Refuses (and changes nothing) when the
    /// snapshot does not fit: another grid size, another largest step, another kind of
    /// stepper, or a time, step or field value that is not finite.
    pub fn restore(&mut self, snap: SimState) -> Result<(), String> {
        let len = self.model.grid.padded_len();
        if snap.c.len() != len {
            return Err(format!(
                "the saved field has {} values, this grid {len} (padded): another grid",
                snap.c.len()
            ));
        }
        if snap.dt_max.to_bits() != self.dt_max.to_bits() {
            return Err(format!(
                "the saved run's largest step is {} s, this one's {} s: another scenario or scheme",
                snap.dt_max, self.dt_max
            ));
        }
        let stepper_fits = matches!(
            (&self.stepper, &snap.implicit),
            (Stepper::Explicit(_), None) | (Stepper::Implicit(_), Some(_))
        );
        if !stepper_fits {
            return Err("the saved run used another time scheme (explicit against implicit)".into());
        }
        if !(snap.t.is_finite() && snap.t >= 0.0 && snap.last_dt.is_finite()) {
            return Err(format!(
                "the saved time {} s or last step {} s is not a finite, non-negative number",
                snap.t, snap.last_dt
            ));
        }
        // Halo corners may hold the NaN of never-written scratch; the cells may not.
        let g = &self.model.grid;
        for j in 0..g.ny {
            for i in 0..g.nx {
                let v = snap.c[g.idx(i as isize, j as isize)];
                if !v.is_finite() {
                    return Err(format!("the saved field holds {v} at cell ({i}, {j})"));
                }
            }
        }
        // Copy into the existing buffer: it keeps the huge-page backing the stepper swaps with.
        self.state.c.copy_from_slice(&snap.c);
        self.state.t = snap.t;
        self.state.step = snap.step;
        self.state.last_dt = snap.last_dt;
        self.state.last_courant = snap.last_courant;
        self.budget = snap.budget;
        if let (Stepper::Implicit(imp), Some(k)) = (&mut self.stepper, snap.implicit) {
            imp.last_iterations = k.last_iterations;
            imp.last_corrections = k.last_corrections;
            imp.unsettled_steps = k.unsettled_steps;
        }
        Ok(())
    }
}
