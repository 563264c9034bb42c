//! Checks of sizes across sections: concentrations and masses whose products with the cell
//! volume (depth x cell area) would overflow double precision are refused up front, naming the
//! keys involved, instead of running to NaN.
//!
//! The bound is [`MAX_AMOUNT`]: every concentration the run can hold (initial values, a
//! source's mass over the smallest cell volume) and every mass (water volume times the largest
//! initial value, a source's total release) must stay below 1e100 in magnitude. That leaves
//! some 200 orders of magnitude of headroom below the largest double (about 1.8e308) for the
//! products a run forms (squares in error norms, concentration times position squared in
//! moments, fluxes times steps), and is far above any physical amount.

use super::super::reader::Problems;
use crate::depth::Depth;
use crate::diagnostics::advice::sig;
use crate::initial::Initial;
use crate::model::ModelSpec;
use crate::ops::sources::Release;

/// Largest magnitude accepted for a concentration or a mass (see the module documentation).
pub(super) const MAX_AMOUNT: f64 = 1e100;

/// Whether `x` is a finite amount within [`MAX_AMOUNT`].
fn fits(x: f64) -> bool {
    x.abs() <= MAX_AMOUNT
}

/// The shallowest and deepest water depth (m), the tide's range included.
fn depth_range(spec: &ModelSpec) -> (f64, f64) {
    let amp = spec.flow.amplitude();
    let (lo, hi) = match &spec.depth {
        Depth::Uniform(h) => (*h, *h),
        Depth::Field(v) => v
            .iter()
            .filter(|h| h.is_finite() && **h > 0.0)
            .fold((f64::INFINITY, 0.0f64), |(lo, hi), h| (lo.min(*h), hi.max(*h))),
    };
    ((lo - amp).max(0.0), hi + amp)
}

/// Refuses amounts whose products with the cell volume overflow: the water volume, the initial
/// field's mass and each source's release per cell volume.
pub(super) fn amounts(spec: &ModelSpec, initial: &Initial, end: f64, p: &mut Problems) {
    let g = &spec.grid;
    let (h_min, h_max) = depth_range(spec);
    let cell = g.dx * g.dy;
    let volume = h_max * cell * g.cells() as f64;
    if !fits(volume) {
        p.add(
            "grid.depth",
            format!(
                "the water volume grid.depth x grid.dx x grid.dy x cells = {} x {} x {} x {} m3 = {} m3 is beyond {} m3: the masses of the run would overflow; use physical sizes",
                sig(h_max, 4),
                sig(g.dx, 4),
                sig(g.dy, 4),
                g.cells(),
                sig(volume, 4),
                sig(MAX_AMOUNT, 4)
            ),
        );
        return;
    }
    let (key, peak) = match *initial {
        Initial::Zero => ("initial.value", 0.0),
        Initial::Uniform { value } => ("initial.value", value),
        Initial::Gaussian { peak, .. } | Initial::Cone { peak, .. } => ("initial.peak", peak),
        Initial::SlottedDisk { value, .. } => ("initial.value", value),
    };
    if !fits(peak) || !fits(peak * volume) {
        p.add(
            key,
            format!(
                "{} is not allowed: the initial mass ({key} x the water volume grid.depth x grid.dx x grid.dy x cells = {} m3) must stay within {} (beyond that the run's sums overflow)",
                sig(peak, 4),
                sig(volume, 4),
                sig(MAX_AMOUNT, 4)
            ),
        );
    }
    let smallest = h_min * cell;
    for (k, s) in spec.sources.iter().enumerate() {
        let (key, total) = match s.release {
            Release::Instant { mass, .. } => (format!("source[{k}].mass"), mass),
            Release::Continuous { rate, start, stop } => (format!("source[{k}].rate"), rate * (stop.min(end) - start)),
        };
        if !fits(total) || !fits(total / smallest) {
            p.add(
                key,
                format!(
                    "releases {} in all, which over the smallest cell volume grid.depth x grid.dx x grid.dy = {} m3 is beyond {}: the concentrations would overflow; use physical amounts",
                    sig(total, 4),
                    sig(smallest, 4),
                    sig(MAX_AMOUNT, 4)
                ),
            );
        }
    }
}
