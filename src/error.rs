//! Typed library errors: bad model input ([`ModelError`]) and failed runs ([`RunError`]).
//!
//! Every variant carries the quantity or location it is about, so the binary can print one
//! clear cause and map it to an exit code (2 for bad input, 1 for a failed run).

/// A model could not be built from the values given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// A number is out of its allowed range (or not finite).
    #[error("{what} = {value} is not allowed: must be {allowed}")]
    InvalidValue {
        /// The quantity, e.g. `grid.dx`.
        what: String,
        /// The offending value as text.
        value: String,
        /// What is allowed, in words.
        allowed: String,
    },
    /// A periodic side without its opposite partner.
    #[error("boundary.{side} is periodic but boundary.{partner} is {other}: periodic sides come in pairs (west with east, south with north)")]
    UnpairedPeriodic {
        /// The periodic side.
        side: &'static str,
        /// The opposite side.
        partner: &'static str,
        /// What the opposite side is instead.
        other: String,
    },
    /// A point (source, receptor) lies outside the grid or on land.
    #[error("{what} at ({x}, {y}) m is {reason}")]
    OutsideWater {
        /// The item, e.g. `source[2]`.
        what: String,
        /// Easting of the point.
        x: f64,
        /// Northing of the point.
        y: f64,
        /// `outside the grid` or `on land`.
        reason: String,
    },
    /// A fixed time step above the explicit stability bound.
    #[error("fixed dt = {dt} s exceeds the explicit stability bound {bound:.6e} s ({reason}); use a smaller dt, an automatic one, or an implicit scheme")]
    UnstableDt {
        /// The requested step.
        dt: f64,
        /// The largest stable step.
        bound: f64,
        /// Which limit binds.
        reason: String,
    },
}

/// A run stopped before its end.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum RunError {
    /// A non-finite or runaway value appeared in the field.
    #[error(
        "the run diverged at step {step}, t = {time} s: cell (i = {i}, j = {j}) holds {value}; likely cause: {cause}"
    )]
    Diverged {
        /// Step number (1-based) in which it happened.
        step: u64,
        /// Simulated time at the end of that step, s.
        time: f64,
        /// Cell column.
        i: usize,
        /// Cell row.
        j: usize,
        /// The offending value.
        value: f64,
        /// The most likely cause, in words.
        cause: String,
    },
    /// A mass, budget total, residual or field value that is not a finite number (the
    /// arithmetic overflowed): the results would be meaningless.
    #[error(
        "the run failed at step {step}, t = {time} s: the {quantity} is {value}, not a finite number (cell i = {i}, j = {j} holds {cell_value}); likely cause: {cause}"
    )]
    NonFinite {
        /// Step number (0 for the initial state).
        step: u64,
        /// Simulated time, s.
        time: f64,
        /// The quantity, e.g. `mass` or `budget residual`.
        quantity: String,
        /// Its value.
        value: f64,
        /// Column of the cell that holds the first non-finite or the largest value.
        i: usize,
        /// Row of that cell.
        j: usize,
        /// That cell's value.
        cell_value: f64,
        /// The most likely cause, in words.
        cause: String,
    },
    /// An implicit step could not be solved to its tolerance.
    #[error("the {what} did not converge in step {step} (from t = {time} s): {detail}; advice: {advice}")]
    NotConverged {
        /// Step number (1-based).
        step: u64,
        /// Simulated time at the start of that step, s.
        time: f64,
        /// `linear solver` or `deferred correction`.
        what: String,
        /// Iterations and the residual or change reached.
        detail: String,
        /// What to try.
        advice: String,
    },
}

/// Shorthand for an [`ModelError::InvalidValue`].
pub(crate) fn invalid(what: impl Into<String>, value: impl ToString, allowed: impl Into<String>) -> ModelError {
    ModelError::InvalidValue {
        what: what.into(),
        value: value.to_string(),
        allowed: allowed.into(),
    }
}

/// Checks that `v` is finite and strictly positive.
pub(crate) fn positive(what: &str, v: f64) -> Result<f64, ModelError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(invalid(what, v, "a finite number > 0"))
    }
}

/// Checks that `v` is finite and not negative.
pub(crate) fn non_negative(what: &str, v: f64) -> Result<f64, ModelError> {
    if v.is_finite() && v >= 0.0 {
        Ok(v)
    } else {
        Err(invalid(what, v, "a finite number >= 0"))
    }
}

/// Checks that `v` is finite.
pub(crate) fn finite(what: &str, v: f64) -> Result<f64, ModelError> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(invalid(what, v, "a finite number"))
    }
}
