//! From TOML text to a validated [`Scenario`]: one reader per section, each collecting its
//! problems, then the cross-checks (points on water, periodic pairs, releases within the run)
//! and the engine's own checks (the model and the stable step).

use super::reader::{check, list, suggestion, type_name, Problems, Section};
use super::{land, overrides, OutputSettings, Problem, Receptor, RunSettings, Scenario, TracerInfo};
use crate::error::ModelError;
use crate::flow::{FlowKind, FlowSpec, Tide};
use crate::grid::{Grid, Mask, MAX_CELLS};
use crate::initial::Initial;
use crate::model::{Model, ModelSpec};
use crate::ops::boundary::{Boundaries, Side, SideKind};
use crate::ops::limiter::Limiter;
use crate::ops::sources::{Release, SourceSpec};
use crate::output::colour::ColourScale;
use crate::step::{max_step, Scheme, TimeScheme};
use std::path::{Path, PathBuf};
use toml::{Table, Value};

/// Largest accepted `grid.nx` or `grid.ny`.
pub(super) const MAX_SIDE: i64 = 1 << 20;
/// Largest accepted `run.frames`.
pub(super) const MAX_FRAMES: i64 = 10_000;

/// Top-level keys.
pub(super) const TOP: &[&str] = &[
    "name", "grid", "tracer", "flow", "boundary", "initial", "source", "receptor", "scheme", "run", "output",
];
/// `[grid]` keys.
pub(super) const GRID: &[&str] = &["nx", "ny", "dx", "dy", "size", "origin", "depth", "land"];
/// `[tracer]` keys.
pub(super) const TRACER: &[&str] = &["name", "units", "diffusivity", "decay_rate", "t90"];
/// `[flow]` kinds available in this version.
pub(super) const FLOW_KINDS: &[&str] = &["uniform", "rotation", "swirl", "vortex"];
/// Every `[flow]` key of any kind.
pub(super) const FLOW_ALL: &[&str] = &["kind", "velocity", "centre", "period", "speed", "tide"];
/// `flow.tide` keys (amplitude is recognised only to say it is not available yet).
pub(super) const TIDE: &[&str] = &["period", "phase", "amplitude"];
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
pub(super) const RUN: &[&str] = &["end", "frames", "log_every"];
/// `[output]` keys.
pub(super) const OUTPUT: &[&str] = &["dir", "colour", "range"];

/// The allowed keys of the table at `parents` (names without indices), where known.
pub(super) fn schema(parents: &[&str]) -> Option<&'static [&'static str]> {
    Some(match parents {
        [] => TOP,
        ["grid"] => GRID,
        ["tracer"] => TRACER,
        ["flow"] => FLOW_ALL,
        ["flow", "tide"] => TIDE,
        ["boundary"] => SIDES,
        ["boundary", _] => SIDE,
        ["initial"] => INITIAL_ALL,
        ["source"] => SOURCE,
        ["receptor"] => RECEPTOR,
        ["scheme"] => SCHEME,
        ["run"] => RUN,
        ["output"] => OUTPUT,
        _ => return None,
    })
}

/// The grid section resolved.
struct GridOut {
    grid: Grid,
    mask: Option<Mask>,
    depth: f64,
    land: Option<PathBuf>,
}

/// Parses and validates; the error is every problem found. `allow_unstable` accepts a fixed
/// step above the explicit stability bound (`--force`).
pub(super) fn parse(text: &str, path: &Path, sets: &[String], allow_unstable: bool) -> Result<Scenario, Vec<Problem>> {
    let mut doc: Table = match toml::from_str(text) {
        Ok(t) => t,
        Err(e) => return Err(vec![syntax_problem(text, &e)]),
    };
    let mut p = Problems::default();
    let applied = overrides::apply(&mut doc, sets, &mut p);
    let root = Section::new("", &doc);
    root.check_keys(TOP, "at the top level", &mut p);

    let name = scenario_name(root, path, &mut p);
    let run = run_section(root, &mut p);
    let grid = grid_section(root, path, &mut p);
    let (tracer, kx, ky, decay_rate) = tracer_section(root, &mut p);
    let flow = flow_section(root, &mut p);
    let boundaries = boundary_section(root, &mut p);
    let initial = initial_section(root, &mut p);
    let sources = source_section(root, run.map(|r| r.end), grid.as_ref(), &mut p);
    let receptors = receptor_section(root, grid.as_ref(), &mut p);
    let scheme = scheme_section(root, &mut p);
    let output = output_section(root, &mut p);

    let result = match (name, run, grid, flow, boundaries, initial, sources, scheme, output) {
        (
            Some(name),
            Some(run),
            Some(g),
            Some(flow),
            Some(boundaries),
            Some(initial),
            Some(sources),
            Some(mut scheme),
            Some(output),
        ) if p.len() == 0 => {
            scheme.allow_unstable = allow_unstable;
            let model = ModelSpec {
                grid: g.grid,
                mask: g.mask,
                depth: g.depth,
                kx,
                ky,
                decay_rate,
                flow,
                boundaries,
                sources,
            };
            engine_checks(&model, &initial, &scheme, &mut p);
            Some(Scenario {
                name,
                path: path.to_path_buf(),
                model,
                initial,
                scheme,
                run,
                receptors,
                output,
                tracer,
                land: g.land,
            })
        }
        _ => None,
    };
    match result {
        Some(s) if p.len() == 0 => Ok(s),
        _ => {
            let mut problems = p.0;
            if problems.is_empty() {
                // Every failed section records a problem; this is a guard, not an expected path.
                problems.push(Problem {
                    key: String::new(),
                    message: "the scenario is incomplete".into(),
                });
            }
            overrides::annotate(&mut problems, &applied);
            // Report in the order of the sections in DESIGN §3 (malformed overrides first).
            problems.sort_by_key(|q| {
                let head = q.key.split(['.', '[']).next().unwrap_or("");
                TOP.iter().position(|k| *k == head).map_or(0, |i| i + 1)
            });
            Err(problems)
        }
    }
}

/// A TOML syntax error as one problem naming its line and column.
fn syntax_problem(text: &str, e: &toml::de::Error) -> Problem {
    let start = e.span().map_or(0, |s| s.start).min(text.len());
    let before = &text.as_bytes()[..start];
    let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
    let line_start = before.iter().rposition(|&b| b == b'\n').map_or(0, |k| k + 1);
    let column = String::from_utf8_lossy(&before[line_start..]).chars().count() + 1;
    Problem {
        key: format!("line {line}, column {column}"),
        message: format!("TOML syntax error: {}", e.message().trim()).replace(['\n', '\r'], " "),
    }
}

/// Maps an engine error to a problem keyed by the quantity it names.
fn engine_problem(e: &ModelError) -> Problem {
    let (key, message) = match e {
        ModelError::InvalidValue { what, value, allowed } => {
            (what.clone(), format!("{value} is not allowed: must be {allowed}"))
        }
        ModelError::UnpairedPeriodic { side, .. } => (format!("boundary.{side}"), e.to_string()),
        ModelError::OutsideWater { what, .. } => (format!("{what}.at"), e.to_string()),
        ModelError::UnstableDt { .. } => ("scheme.dt".into(), e.to_string()),
    };
    Problem { key, message }
}

/// The engine's checks: builds the model and its stable step.
fn engine_checks(spec: &ModelSpec, initial: &Initial, scheme: &Scheme, p: &mut Problems) {
    if let Err(e) = initial.validate() {
        p.0.push(engine_problem(&e));
    }
    match Model::new(spec.clone()) {
        Ok(model) => {
            if let Err(e) = max_step(&model, scheme) {
                p.0.push(engine_problem(&e));
            }
        }
        Err(e) => p.0.push(engine_problem(&e)),
    }
}

/// `name`, defaulting to the file stem; must be usable as a folder name.
fn scenario_name(root: Section, path: &Path, p: &mut Problems) -> Option<String> {
    let (name, from_file) = match root.string("name", p) {
        Some(n) => (n.to_string(), false),
        None if root.has("name") => return None,
        None => (
            path.file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default(),
            true,
        ),
    };
    let ok = !name.is_empty()
        && !name.starts_with('.')
        && name.len() <= 200
        && name.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c));
    if ok {
        Some(name)
    } else {
        let what = if from_file {
            format!("the file stem \"{name}\" (used when no name is given)")
        } else {
            format!("\"{name}\"")
        };
        p.add(
            "name",
            format!("{what} is not usable as an output folder name: use 1 to 200 ASCII letters, digits, '-', '_' or '.' (not first)"),
        );
        None
    }
}

/// A required top-level table.
fn required_table<'a>(root: Section<'a>, key: &'a str, p: &mut Problems) -> Option<Section<'a>> {
    if !root.has(key) {
        p.add(key, format!("missing: the [{key}] table is required"));
        return None;
    }
    root.table(key, p).map(|t| Section::new(key, t))
}

/// An optional top-level table (an empty one when absent).
fn optional_table<'a>(root: Section<'a>, key: &'a str, empty: &'a Table, p: &mut Problems) -> Option<Section<'a>> {
    if root.has(key) {
        root.table(key, p).map(|t| Section::new(key, t))
    } else {
        Some(Section::new(key, empty))
    }
}

fn positive(v: Option<f64>, key: &str, p: &mut Problems) -> Option<f64> {
    check(v, key, |x| x > 0.0, "a number > 0", p)
}

fn non_negative(v: Option<f64>, key: &str, p: &mut Problems) -> Option<f64> {
    check(v, key, |x| x >= 0.0, "a number >= 0", p)
}

/// `[run]`.
fn run_section(root: Section, p: &mut Problems) -> Option<RunSettings> {
    let s = required_table(root, "run", p)?;
    s.check_keys(RUN, "in [run]", p);
    let end = positive(s.req_num("end", "the end time in seconds", p), "run.end", p);
    let frames = if s.has("frames") {
        s.int("frames", 1, MAX_FRAMES, p)
    } else {
        Some(10)
    };
    let log_every = if s.has("log_every") {
        s.int("log_every", 1, i64::MAX, p)
    } else {
        Some(10)
    };
    Some(RunSettings {
        end: end?,
        frames: usize::try_from(frames?).ok()?,
        log_every: u64::try_from(log_every?).ok()?,
    })
}

/// `[grid]`, including the land image.
fn grid_section(root: Section, path: &Path, p: &mut Problems) -> Option<GridOut> {
    let s = required_table(root, "grid", p)?;
    s.check_keys(GRID, "in [grid]", p);
    let before = p.len();
    let int = |key: &str, p: &mut Problems| {
        if s.require(key, &format!("the number of cells {key}"), p) {
            s.int(key, 1, MAX_SIDE, p)
        } else {
            None
        }
    };
    let nx = int("nx", p);
    let ny = int("ny", p);
    let size = s.pair("size", p);
    if s.has("size") && (s.has("dx") || s.has("dy")) {
        p.add("grid.size", "give either size = [Lx, Ly] or dx (and dy), not both");
    }
    let size = size.and_then(|(lx, ly)| {
        Some((
            positive(Some(lx), "grid.size[0]", p)?,
            positive(Some(ly), "grid.size[1]", p)?,
        ))
    });
    let dx = positive(s.num("dx", p), "grid.dx", p);
    let dy = positive(s.num("dy", p), "grid.dy", p);
    if !s.has("size") && !s.has("dx") {
        p.add(
            "grid.dx",
            "missing: give the cell size dx (and dy, default dx) or size = [Lx, Ly]",
        );
    }
    let origin = if s.has("origin") {
        s.pair("origin", p)
    } else {
        Some((0.0, 0.0))
    };
    let depth = if s.has("depth") {
        positive(s.num("depth", p), "grid.depth", p)
    } else {
        Some(1.0)
    };
    let land = s.string("land", p);
    let (nx, ny) = (nx?, ny?);
    if nx.saturating_mul(ny) > MAX_CELLS as i64 {
        p.add(
            "grid",
            format!(
                "nx * ny = {} cells is above the limit of {MAX_CELLS}: use fewer cells",
                nx * ny
            ),
        );
        return None;
    }
    let (nx, ny) = (nx as usize, ny as usize);
    let (dx, dy) = match size {
        Some((lx, ly)) => (lx / nx as f64, ly / ny as f64),
        None => {
            let dx = dx?;
            (dx, if s.has("dy") { dy? } else { dx })
        }
    };
    if p.len() > before {
        return None;
    }
    let (x0, y0) = origin?;
    let grid = match Grid::new(nx, ny, dx, dy, x0, y0) {
        Ok(g) => g,
        Err(e) => {
            p.0.push(engine_problem(&e));
            return None;
        }
    };
    let (mask, land) = match land {
        None if s.has("land") => return None,
        None => (None, None),
        Some(rel) => {
            let joined = path.parent().unwrap_or(Path::new("")).join(rel);
            let file = std::path::absolute(&joined).unwrap_or(joined);
            match land::load_mask(&file, &grid) {
                Ok(m) => (Some(m), Some(file)),
                Err(msg) => {
                    p.add("grid.land", msg);
                    return None;
                }
            }
        }
    };
    Some(GridOut {
        grid,
        mask,
        depth: depth?,
        land,
    })
}

/// `[tracer]`: info, diffusivities and decay rate (defaults when bad; problems are recorded).
fn tracer_section(root: Section, p: &mut Problems) -> (TracerInfo, f64, f64, f64) {
    let empty = Table::new();
    let mut info = TracerInfo {
        name: "tracer".into(),
        units: "kg/m3".into(),
    };
    let Some(s) = optional_table(root, "tracer", &empty, p) else {
        return (info, 0.0, 0.0, 0.0);
    };
    s.check_keys(TRACER, "in [tracer]", p);
    if let Some(n) = s.string("name", p) {
        if n.trim().is_empty() {
            p.add("tracer.name", "must not be empty");
        }
        info.name = n.to_string();
    }
    if let Some(u) = s.string("units", p) {
        info.units = u.to_string();
    }
    let (mut kx, mut ky) = (0.0, 0.0);
    match s.table.get("diffusivity") {
        None => {}
        Some(Value::Array(_)) => {
            if let Some((a, b)) = s.pair("diffusivity", p) {
                kx = non_negative(Some(a), "tracer.diffusivity[0]", p).unwrap_or(0.0);
                ky = non_negative(Some(b), "tracer.diffusivity[1]", p).unwrap_or(0.0);
            }
        }
        Some(v @ (Value::Integer(_) | Value::Float(_))) => {
            let k = super::reader::number(v, "tracer.diffusivity", p);
            let k = non_negative(k, "tracer.diffusivity", p).unwrap_or(0.0);
            (kx, ky) = (k, k);
        }
        Some(other) => p.add(
            "tracer.diffusivity",
            format!("expected a number or [kx, ky] in m2/s, found {}", type_name(other)),
        ),
    }
    let rate = non_negative(s.num("decay_rate", p), "tracer.decay_rate", p);
    let t90 = positive(s.num("t90", p), "tracer.t90", p);
    let decay = if s.has("decay_rate") && s.has("t90") {
        p.add(
            "tracer.t90",
            "tracer.decay_rate is given too: give the decay as decay_rate (1/s) or as t90 (s), not both",
        );
        0.0
    } else {
        crate::ops::sources::decay_rate(rate, t90).unwrap_or(0.0)
    };
    (info, kx, ky, decay)
}

/// `[flow]` (still water when absent).
fn flow_section(root: Section, p: &mut Problems) -> Option<FlowSpec> {
    let empty = Table::new();
    let s = optional_table(root, "flow", &empty, p)?;
    let kind = match s.string("kind", p) {
        None if s.has("kind") => return None,
        None => "uniform",
        Some(k @ ("openings" | "file")) => {
            p.add(
                "flow.kind",
                format!(
                    "flow kind \"{k}\" is not available in this version; available kinds: {}",
                    list(FLOW_KINDS)
                ),
            );
            return None;
        }
        Some(k) if FLOW_KINDS.contains(&k) => k,
        Some(k) => {
            p.add(
                "flow.kind",
                format!(
                    "unknown flow kind \"{k}\"{}; allowed: {}",
                    suggestion(k, FLOW_KINDS),
                    list(FLOW_KINDS)
                ),
            );
            return None;
        }
    };
    let ctx = format!("for flow kind \"{kind}\"");
    let base = match kind {
        "uniform" => {
            s.check_keys(&["kind", "velocity", "tide"], &ctx, p);
            let (u, v) = if s.has("velocity") {
                s.pair("velocity", p)?
            } else {
                (0.0, 0.0)
            };
            FlowKind::Uniform { u, v }
        }
        "rotation" => {
            s.check_keys(&["kind", "centre", "period", "tide"], &ctx, p);
            let centre = s.req_pair("centre", "the centre of rotation [x, y]", p);
            let period = positive(
                s.req_num("period", "the period of one turn in seconds", p),
                "flow.period",
                p,
            );
            FlowKind::Rotation {
                centre: centre?,
                period: period?,
            }
        }
        "swirl" => {
            s.check_keys(&["kind", "period", "speed", "tide"], &ctx, p);
            let period = positive(
                s.req_num("period", "the reversal period in seconds", p),
                "flow.period",
                p,
            );
            let speed = if s.has("speed") { s.num("speed", p) } else { Some(1.0) };
            FlowKind::Swirl {
                period: period?,
                speed: speed?,
            }
        }
        _ => {
            s.check_keys(&["kind", "speed", "tide"], &ctx, p);
            let speed = if s.has("speed") { s.num("speed", p) } else { Some(1.0) };
            FlowKind::Vortex { speed: speed? }
        }
    };
    let tide = match s.table("tide", p) {
        None if s.has("tide") => return None,
        None => None,
        Some(t) => {
            let ts = Section::new("flow.tide", t);
            ts.check_keys(&["period", "phase"], "in flow.tide", p);
            if ts.has("amplitude") {
                // check_keys reported it as unknown; replace that with the precise reason.
                if let Some(last) = p.0.iter_mut().rev().find(|q| q.key == "flow.tide.amplitude") {
                    last.message =
                        "a tidal rise and fall of the level is not available in this version; allowed keys in flow.tide: `period`, `phase`"
                            .into();
                }
            }
            let period = positive(
                ts.req_num("period", "the tidal period in seconds", p),
                "flow.tide.period",
                p,
            );
            let phase = if ts.has("phase") { ts.num("phase", p) } else { Some(0.0) };
            Some(Tide {
                period: period?,
                phase: phase?,
            })
        }
    };
    Some(FlowSpec { kind: base, tide })
}

/// `[boundary]` (walls when absent), with the periodic pairing check.
fn boundary_section(root: Section, p: &mut Problems) -> Option<Boundaries> {
    let empty = Table::new();
    let s = optional_table(root, "boundary", &empty, p)?;
    s.check_keys(SIDES, "in [boundary]", p);
    let mut b = Boundaries::walls();
    let mut ok = true;
    for side in Side::ALL {
        let key = format!("boundary.{}", side.name());
        let kind = match s.table.get(side.name()) {
            None => Some(SideKind::Wall),
            Some(v) => side_kind(v, &key, p),
        };
        match kind {
            Some(k) => match side {
                Side::West => b.west = k,
                Side::East => b.east = k,
                Side::South => b.south = k,
                Side::North => b.north = k,
            },
            None => ok = false,
        }
    }
    if !ok {
        return None;
    }
    let mut paired = true;
    for side in Side::ALL {
        let other = b.get(side.opposite());
        if b.get(side) == SideKind::Periodic && other != SideKind::Periodic {
            p.add(
                format!("boundary.{}", side.name()),
                format!(
                    "is periodic but boundary.{} is {}: periodic sides come in pairs (west with east, south with north)",
                    side.opposite().name(),
                    other.name()
                ),
            );
            paired = false;
        }
    }
    paired.then_some(b)
}

/// One side: `"wall" | "open" | "periodic" | { kind = "open" | "fixed", value }`.
fn side_kind(v: &Value, key: &str, p: &mut Problems) -> Option<SideKind> {
    const NAMES: &[&str] = &["wall", "open", "periodic"];
    match v {
        Value::String(s) => match s.as_str() {
            "wall" => Some(SideKind::Wall),
            "open" => Some(SideKind::Open { value: 0.0 }),
            "periodic" => Some(SideKind::Periodic),
            "fixed" => {
                p.add(
                    key,
                    "a fixed side needs its value: write { kind = \"fixed\", value = 1.0 }",
                );
                None
            }
            other => {
                p.add(
                    key,
                    format!(
                        "unknown side kind \"{other}\"{}; allowed: {}, or {{ kind = \"open\" | \"fixed\", value = number }}",
                        suggestion(other, NAMES),
                        list(NAMES)
                    ),
                );
                None
            }
        },
        Value::Table(t) => {
            let s = Section::new(key, t);
            s.check_keys(SIDE, &format!("in {key}"), p);
            let kind = if s.require("kind", "the side kind (\"open\" or \"fixed\")", p) {
                s.choice("kind", &["open", "fixed"], p)
            } else {
                None
            };
            let value = match kind {
                Some("fixed") if !s.has("value") => {
                    p.add(format!("{key}.value"), "missing: a fixed side needs its value");
                    None
                }
                _ if s.has("value") => s.num("value", p),
                _ => Some(0.0),
            };
            match (kind?, value?) {
                ("fixed", value) => Some(SideKind::Fixed { value }),
                (_, value) => Some(SideKind::Open { value }),
            }
        }
        other => {
            p.add(
                key,
                format!(
                    "expected \"wall\", \"open\", \"periodic\" or {{ kind = \"open\" | \"fixed\", value = number }}, found {}",
                    type_name(other)
                ),
            );
            None
        }
    }
}

/// `[initial]` (zero when absent).
fn initial_section(root: Section, p: &mut Problems) -> Option<Initial> {
    let empty = Table::new();
    let s = optional_table(root, "initial", &empty, p)?;
    let kind = match s.table.get("kind") {
        None => "zero",
        Some(_) => s.choice("kind", INITIAL_KINDS, p)?,
    };
    let ctx = format!("for initial kind \"{kind}\"");
    let or_one = |key: &str, p: &mut Problems| if s.has(key) { s.num(key, p) } else { Some(1.0) };
    let pos = |key: &str, what: &str, p: &mut Problems| positive(s.req_num(key, what, p), &s.key(key), p);
    Some(match kind {
        "zero" => {
            s.check_keys(&["kind"], &ctx, p);
            Initial::Zero
        }
        "uniform" => {
            s.check_keys(&["kind", "value"], &ctx, p);
            Initial::Uniform {
                value: s.req_num("value", "the uniform value", p)?,
            }
        }
        "gaussian" => {
            s.check_keys(&["kind", "centre", "sigma", "peak"], &ctx, p);
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let sigma = pos("sigma", "the standard deviation sigma in m", p);
            let peak = or_one("peak", p);
            Initial::Gaussian {
                centre: centre?,
                sigma: sigma?,
                peak: peak?,
            }
        }
        "cone" => {
            s.check_keys(&["kind", "centre", "radius", "peak"], &ctx, p);
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let radius = pos("radius", "the base radius in m", p);
            let peak = or_one("peak", p);
            Initial::Cone {
                centre: centre?,
                radius: radius?,
                peak: peak?,
            }
        }
        _ => {
            s.check_keys(
                &["kind", "centre", "radius", "slot_width", "slot_length", "value"],
                &ctx,
                p,
            );
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let radius = pos("radius", "the disk radius in m", p);
            let slot_width = pos("slot_width", "the slot width in m", p);
            let slot_length = pos("slot_length", "the slot length in m", p);
            let value = or_one("value", p);
            Initial::SlottedDisk {
                centre: centre?,
                radius: radius?,
                slot_width: slot_width?,
                slot_length: slot_length?,
                value: value?,
            }
        }
    })
}

/// The tables of an array of tables `[[key]]`, with their labels `key[k]`.
fn table_array<'a>(root: Section<'a>, key: &str, p: &mut Problems) -> Option<Vec<(String, &'a Table)>> {
    match root.table.get(key) {
        None => Some(vec![]),
        Some(Value::Array(items)) => {
            let mut out = Vec::new();
            let mut ok = true;
            for (k, item) in items.iter().enumerate() {
                let label = format!("{key}[{k}]");
                match item {
                    Value::Table(t) => out.push((label, t)),
                    other => {
                        p.add(
                            label,
                            format!("expected a table ([[{key}]]), found {}", type_name(other)),
                        );
                        ok = false;
                    }
                }
            }
            ok.then_some(out)
        }
        Some(other) => {
            p.add(
                key,
                format!(
                    "expected an array of tables (write [[{key}]] for each), found {}",
                    type_name(other)
                ),
            );
            None
        }
    }
}

/// Reports a point outside the grid or on land.
fn check_point(key: &str, at: (f64, f64), grid: &GridOut, p: &mut Problems) {
    let g = &grid.grid;
    match g.cell_at(at.0, at.1) {
        None => p.add(
            key,
            format!(
                "({}, {}) m is outside the grid (x from {} to {}, y from {} to {})",
                at.0,
                at.1,
                g.x0,
                g.x0 + g.lx(),
                g.y0,
                g.y0 + g.ly()
            ),
        ),
        Some((i, j)) => {
            if grid.mask.as_ref().is_some_and(|m| !m.is_wet(i, j)) {
                p.add(
                    key,
                    format!("({}, {}) m is on land (cell i = {i}, j = {j} of grid.land)", at.0, at.1),
                );
            }
        }
    }
}

/// `[[source]]`.
fn source_section(
    root: Section,
    end: Option<f64>,
    grid: Option<&GridOut>,
    p: &mut Problems,
) -> Option<Vec<SourceSpec>> {
    let items = table_array(root, "source", p)?;
    let mut out = Vec::new();
    let before = p.len();
    for (label, t) in &items {
        let s = Section::new(label, t);
        s.check_keys(SOURCE, "in [[source]]", p);
        let name = s.string("name", p).map_or_else(|| label.clone(), str::to_string);
        let at = s.req_pair("at", "the release point [x, y]", p);
        if let (Some(at), Some(g)) = (at, grid) {
            check_point(&s.key("at"), at, g, p);
        }
        let start = if s.has("start") {
            non_negative(s.num("start", p), &s.key("start"), p)
        } else {
            Some(0.0)
        };
        if let (Some(t0), Some(end)) = (start, end) {
            if t0 > end {
                p.add(
                    s.key("start"),
                    format!("{t0} s is after the end of the run (run.end = {end} s): nothing would be released"),
                );
            }
        }
        let spread = s.num("spread", p).and_then(|r| positive(Some(r), &s.key("spread"), p));
        let release = match (s.has("mass"), s.has("rate")) {
            (true, true) => {
                p.add(
                    s.key("rate"),
                    "mass is given too: give mass (released at once at start) or rate (per second from start to stop), not both",
                );
                None
            }
            (false, false) => {
                p.add(
                    s.key("mass"),
                    "missing: give mass (released at once at start) or rate (per second from start to stop)",
                );
                None
            }
            (true, false) => {
                if s.has("stop") {
                    p.add(
                        s.key("stop"),
                        "applies to a continuous rate only; an instantaneous mass is released at start",
                    );
                }
                let mass = non_negative(s.num("mass", p), &s.key("mass"), p);
                Some(Release::Instant {
                    mass: mass?,
                    at: start?,
                })
            }
            (false, true) => {
                let rate = non_negative(s.num("rate", p), &s.key("rate"), p);
                let stop = if s.has("stop") {
                    s.num("stop", p)
                } else {
                    Some(f64::INFINITY)
                };
                if let (Some(t0), Some(t1)) = (start, stop) {
                    if t1 <= t0 {
                        p.add(s.key("stop"), format!("{t1} s is not after start = {t0} s"));
                    }
                }
                Some(Release::Continuous {
                    rate: rate?,
                    start: start?,
                    stop: stop?,
                })
            }
        };
        if let (Some(at), Some(release)) = (at, release) {
            out.push(SourceSpec {
                name,
                at,
                release,
                spread,
            });
        }
    }
    (p.len() == before).then_some(out)
}

/// `[[receptor]]` (positions are checked when the grid is valid).
fn receptor_section(root: Section, grid: Option<&GridOut>, p: &mut Problems) -> Vec<Receptor> {
    let Some(items) = table_array(root, "receptor", p) else {
        return vec![];
    };
    let mut out: Vec<Receptor> = Vec::new();
    for (label, t) in &items {
        let s = Section::new(label, t);
        s.check_keys(RECEPTOR, "in [[receptor]]", p);
        let name = s.string("name", p).map_or_else(|| label.clone(), str::to_string);
        if let Some(k) = out.iter().position(|r| r.name == name) {
            p.add(
                s.key("name"),
                format!("\"{name}\" is already the name of receptor[{k}]"),
            );
        }
        let at = s.req_pair("at", "the receptor position [x, y]", p);
        if let (Some(at), Some(g)) = (at, grid) {
            check_point(&s.key("at"), at, g, p);
        }
        let threshold = non_negative(s.num("threshold", p), &s.key("threshold"), p);
        if let Some(at) = at {
            out.push(Receptor { name, at, threshold });
        }
    }
    out
}

/// `[scheme]`.
fn scheme_section(root: Section, p: &mut Problems) -> Option<Scheme> {
    let empty = Table::new();
    let s = optional_table(root, "scheme", &empty, p)?;
    s.check_keys(SCHEME, "in [scheme]", p);
    let mut scheme = Scheme::default();
    let mut ok = true;
    if let Some(name) = s.string("convection", p) {
        match name.parse::<Limiter>() {
            Ok(l) => scheme.limiter = l,
            Err(e) => {
                let names: Vec<&str> = Limiter::EVERY.iter().map(|l| l.name()).collect();
                p.add("scheme.convection", format!("{e}{}", suggestion(name, &names)));
                ok = false;
            }
        }
    }
    if let Some(t) = s.string("time", p) {
        match t.parse::<TimeScheme>() {
            Ok(ts) => {
                scheme.time = ts;
                scheme.courant = ts.default_courant();
            }
            Err(e) => {
                let names: Vec<&str> = TimeScheme::ALL.iter().map(|t| t.name()).collect();
                p.add("scheme.time", format!("{e}{}", suggestion(t, &names)));
                ok = false;
            }
        }
    }
    if s.has("theta") {
        match check(
            s.num("theta", p),
            "scheme.theta",
            |t| (0.5..=1.0).contains(&t),
            "a number from 0.5 (Crank-Nicolson) to 1 (backward Euler)",
            p,
        ) {
            Some(t) if matches!(scheme.time, TimeScheme::CrankNicolson | TimeScheme::Imex) => scheme.theta = Some(t),
            Some(_) => {
                p.add(
                    "scheme.theta",
                    "applies only with time = \"crank_nicolson\" or \"imex\"",
                );
                ok = false;
            }
            None => ok = false,
        }
    }
    if s.has("tolerance") {
        match check(
            s.num("tolerance", p),
            "scheme.tolerance",
            |t| t > 0.0 && t < 1.0,
            "a number in (0, 1)",
            p,
        ) {
            Some(t) => scheme.tolerance = t,
            None => ok = false,
        }
    }
    if s.has("max_iterations") {
        match s.int("max_iterations", 1, 100_000, p) {
            Some(n) => scheme.max_iterations = n as usize,
            None => ok = false,
        }
    }
    if s.has("stages") {
        match s.int("stages", 1, 3, p) {
            Some(n) => scheme.stages = n as u8,
            None => ok = false,
        }
    }
    if s.has("courant") {
        let explicit_convection = !scheme.time.implicit_convection();
        let (cap, rule) = if explicit_convection {
            (
                1.0,
                "a number > 0 and at most 1 (the stability bound of explicit convection)",
            )
        } else {
            (1e6, "a number > 0 (implicit convection may exceed 1)")
        };
        match check(s.num("courant", p), "scheme.courant", |c| c > 0.0 && c <= cap, rule, p) {
            Some(c) => scheme.courant = c,
            None => ok = false,
        }
    }
    if s.has("dt") {
        match positive(s.num("dt", p), "scheme.dt", p) {
            Some(dt) => scheme.dt = Some(dt),
            None => ok = false,
        }
    }
    ok.then_some(scheme)
}

/// `[output]`.
fn output_section(root: Section, p: &mut Problems) -> Option<OutputSettings> {
    let empty = Table::new();
    let s = optional_table(root, "output", &empty, p)?;
    s.check_keys(OUTPUT, "in [output]", p);
    let before = p.len();
    let dir = s.string("dir", p).unwrap_or("out");
    if dir.trim().is_empty() {
        p.add("output.dir", "must not be empty (the default is \"out\")");
    }
    let colour = match s.table.get("colour") {
        None => ColourScale::Linear,
        Some(_) => match s.choice("colour", &["linear", "log"], p) {
            Some("log") => ColourScale::Log,
            _ => ColourScale::Linear,
        },
    };
    let range = s.pair("range", p);
    if let Some((lo, hi)) = range {
        if lo >= hi {
            p.add(
                "output.range",
                format!("[{lo}, {hi}] is not allowed: must be [lo, hi] with lo < hi"),
            );
        } else if colour == ColourScale::Log && lo <= 0.0 {
            p.add(
                "output.range[0]",
                format!("{lo} is not allowed with colour = \"log\": the low end must be > 0"),
            );
        }
    }
    (p.len() == before).then(|| OutputSettings {
        dir: PathBuf::from(dir),
        colour,
        range,
    })
}

#[cfg(test)]
mod tests {
    use super::super::reader::pair;
    use super::*;

    #[test]
    fn pair_helper_reports_indices() {
        let mut p = Problems::default();
        let v: Value = Value::Array(vec![Value::Float(1.0), Value::Float(f64::INFINITY)]);
        assert!(pair(&v, "grid.size", &mut p).is_none());
        assert_eq!(p.0[0].key, "grid.size[1]");
    }
}
