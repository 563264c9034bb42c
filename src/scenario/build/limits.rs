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

/// Cell sizes `grid.dx`, `grid.dy` (and `grid.size / grid.nx`), m: from a micrometre (below
/// it a laboratory, not a harbour) to 10,000 km (about a quarter of the Earth's circumference).
pub(super) const CELL_SIZE: (f64, f64) = (1e-6, 1e7);
/// Uniform water depth `grid.depth`, m: from a millimetre film to 12,000 m (deeper than the
/// deepest ocean trench).
pub(super) const DEPTH: (f64, f64) = (1e-3, 1.2e4);
/// Largest `|grid.origin|`, m: a million kilometres, beyond any map projection's coordinates.
pub(super) const MAX_ORIGIN: f64 = 1e9;
/// Diffusivities `tracer.diffusivity`, m2/s: up to 1e6 (ocean-basin eddy diffusivities are
/// below about 1e4).
pub(super) const DIFFUSIVITY: (f64, f64) = (0.0, 1e6);
/// Largest speed (`flow.velocity` components, `flow.speed`), m/s: a thousand, about three times
/// the speed of sound in air; the fastest tidal races run at about 10 m/s.
pub(super) const MAX_SPEED: f64 = 1e3;
/// Largest `|flow.opening.discharge|`, m3/s: a billion, some five times the transport of the
/// Antarctic Circumpolar Current (about 1.5e8 m3/s), the largest current on Earth.
pub(super) const MAX_DISCHARGE: f64 = 1e9;
/// Largest number of steps a run may take. Far below 2^53 (about 9e15), where `t + dt` stops
/// differing from `t` in double precision and a run would never reach its end; at a billion
/// cell updates per second, 1e12 steps take over half an hour on the smallest grid (two cells)
/// and eight months on 200 by 100 cells.
pub(super) const MAX_STEPS: f64 = 1e12;
/// Shortest period (`flow.period`, `flow.tide.period`), s: a microsecond.
pub(super) const MIN_PERIOD: f64 = 1e-6;
/// Shortest `tracer.t90`, s: one second.
pub(super) const MIN_T90: f64 = 1.0;
/// Largest `tracer.decay_rate`, 1/s: ln 10 / [`MIN_T90`], the same bound as the T90's.
pub(super) const MAX_DECAY_RATE: f64 = std::f64::consts::LN_10 / MIN_T90;

/// Checks that `v` is a finite number in `[lo, hi]` (`hi` infinite: no upper bound), with a
/// message giving the value and the range in `unit` to 4 significant digits and `why`.
pub(super) fn within(
    v: Option<f64>,
    key: &str,
    (lo, hi): (f64, f64),
    unit: &str,
    why: &str,
    p: &mut Problems,
) -> Option<f64> {
    let x = v?;
    if x.is_finite() && x >= lo && x <= hi {
        return Some(x);
    }
    let range = if hi.is_infinite() {
        format!("a number >= {} {unit}", sig(lo, 4))
    } else {
        format!("from {} to {} {unit}", sig(lo, 4), sig(hi, 4))
    };
    p.add(
        key,
        format!("{} {unit} is not allowed: must be {range} ({why})", sig(x, 4)),
    );
    None
}

/// How far (m) an initial shape reaches from its centre: a cone's or disk's radius, five
/// standard deviations for a Gaussian (beyond them it is below 4e-6 of its peak).
fn reach(initial: &Initial) -> Option<((f64, f64), f64, &'static str)> {
    match *initial {
        Initial::Gaussian { centre, sigma, .. } => {
            Some((centre, 5.0 * sigma, "five standard deviations (5 initial.sigma)"))
        }
        Initial::Cone { centre, radius, .. } => Some((centre, radius, "initial.radius")),
        Initial::SlottedDisk { centre, radius, .. } => Some((centre, radius, "initial.radius")),
        Initial::Zero | Initial::Uniform { .. } => None,
    }
}

/// Refuses an initial cone, Gaussian or slotted disk lying entirely outside the grid (the run
/// would start from an empty field without saying so).
pub(super) fn initial_on_grid(initial: &Initial, g: &crate::grid::Grid, p: &mut Problems) {
    let Some(((cx, cy), r, what)) = reach(initial) else {
        return;
    };
    let (x1, y1) = (g.x0 + g.lx(), g.y0 + g.ly());
    let ox = (g.x0 - cx).max(cx - x1).max(0.0);
    let oy = (g.y0 - cy).max(cy - y1).max(0.0);
    let distance = ox.hypot(oy);
    if distance >= r {
        p.add(
            "initial.centre",
            format!(
                "({}, {}) m puts the initial shape entirely outside the grid (x from {} to {} m, y from {} to {} m): it is {} m from the grid, beyond its reach of {} m ({what}); move the centre onto the grid",
                sig(cx, 4),
                sig(cy, 4),
                sig(g.x0, 4),
                sig(x1, 4),
                sig(g.y0, 4),
                sig(y1, 4),
                sig(distance, 4),
                sig(r, 4)
            ),
        );
    }
}
