//! The scenario's allowed keys per table: the lists the reader checks tables against and
//! suggests from, and `schema`, which `--set` overrides use to check a key path before it is
//! applied (kept apart from the reader so the two do not import each other).

/// Top-level keys.
pub(super) const TOP: &[&str] = &[
    "name",
    "grid",
    "tracer",
    "flow",
    "boundary",
    "initial",
    "source",
    "receptor",
    "candidate",
    "scheme",
    "run",
    "output",
];
/// `[grid]` keys.
pub(super) const GRID: &[&str] = &["nx", "ny", "dx", "dy", "size", "origin", "depth", "depth_range", "land"];
/// `[tracer]` keys.
pub(super) const TRACER: &[&str] = &["name", "units", "diffusivity", "decay_rate", "t90"];
/// `[flow]` kinds available in this version.
pub(super) const FLOW_KINDS: &[&str] = &["uniform", "rotation", "swirl", "vortex", "openings", "file"];
/// Every `[flow]` key of any kind.
pub(super) const FLOW_ALL: &[&str] = &[
    "kind", "velocity", "centre", "period", "speed", "tide", "project", "opening", "path",
];
/// `flow.tide` keys.
pub(super) const TIDE: &[&str] = &["period", "phase", "amplitude", "return_flow"];
/// `[[flow.opening]]` keys.
pub(super) const OPENING: &[&str] = &["name", "side", "from", "to", "discharge", "share"];
/// `[boundary]` keys.
pub(super) const SIDES: &[&str] = &["west", "east", "south", "north"];
/// Keys of a side given as a table.
pub(super) const SIDE: &[&str] = &["kind", "value"];
/// `[initial]` kinds.
pub(super) const INITIAL_KINDS: &[&str] = &["zero", "uniform", "gaussian", "cone", "slotted_disk"];
/// Every `[initial]` key of any kind.
pub(super) const INITIAL_ALL: &[&str] = &[
    "kind",
    "value",
    "centre",
    "sigma",
    "peak",
    "radius",
    "slot_width",
    "slot_length",
];
/// `[[source]]` keys.
pub(super) const SOURCE: &[&str] = &["name", "at", "mass", "rate", "start", "stop", "spread"];
/// `[[receptor]]` keys.
pub(super) const RECEPTOR: &[&str] = &["name", "at", "threshold"];
/// `[[candidate]]` keys.
pub(super) const CANDIDATE: &[&str] = &["name", "at"];
/// `[scheme]` keys.
pub(super) const SCHEME: &[&str] = &[
    "convection",
    "time",
    "stages",
    "courant",
    "dt",
    "theta",
    "tolerance",
    "max_iterations",
];
/// `[run]` keys.
pub(super) const RUN: &[&str] = &["end", "frames", "log_every", "checkpoint_every", "particles"];
/// `[output]` keys.
pub(super) const OUTPUT: &[&str] = &["dir", "colour", "range", "animation"];

/// The allowed keys of the table at `parents` (names without indices), where known.
pub(super) fn schema(parents: &[&str]) -> Option<&'static [&'static str]> {
    Some(match parents {
        [] => TOP,
        ["grid"] => GRID,
        ["tracer"] => TRACER,
        ["flow"] => FLOW_ALL,
        ["flow", "tide"] => TIDE,
        ["flow", "opening"] => OPENING,
        ["boundary"] => SIDES,
        ["boundary", _] => SIDE,
        ["initial"] => INITIAL_ALL,
        ["source"] => SOURCE,
        ["receptor"] => RECEPTOR,
        ["candidate"] => CANDIDATE,
        ["scheme"] => SCHEME,
        ["run"] => RUN,
        ["output"] => OUTPUT,
        _ => return None,
    })
}
