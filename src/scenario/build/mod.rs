//! From TOML text to a validated [`Scenario`]: one reader per section, each collecting its
//! problems, then the cross-checks (points on water, periodic pairs, releases within the run)
//! and the engine's own checks (the model and the stable step).
//!
//! This file holds the entry point [`parse`] and the helpers shared by the section readers (the
//! allowed keys per table are in `super::schema`); each section is read in its own file: `grid.rs`
//! (`[grid]`), `tracer.rs` (`[tracer]`), `flow.rs` (`[flow]`, `[boundary]`), `sources.rs`
//! (`[initial]`, `[[source]]`, `[[receptor]]`) and `scheme.rs` (`[scheme]`, `[run]`, `[output]`);
//! `limits.rs` holds the checks of sizes across sections (amounts that would overflow).

mod flow;
mod grid;
mod limits;
mod scheme;
mod sources;
mod tracer;

use self::flow::{boundary_section, flow_section};
use self::grid::grid_section;
use self::scheme::{output_section, run_section, scheme_section};
use self::sources::{candidate_section, initial_section, receptor_section, source_section};
use self::tracer::tracer_section;
use super::reader::{check, type_name, Problems, Section};
// The allowed keys (`TOP`, `GRID`, ... and `schema`), shared with the `--set` overrides.
use super::schema::*;
use super::{overrides, Problem, Scenario};
use crate::diagnostics::advice::sig;
use crate::error::ModelError;
use crate::grid::{Grid, Mask};
use crate::initial::Initial;
use crate::model::{Model, ModelSpec};
use crate::step::{max_step, Scheme};
use std::path::{Path, PathBuf};
use toml::{Table, Value};

/// Largest accepted `grid.nx` or `grid.ny`.
pub(super) const MAX_SIDE: i64 = 1 << 20;
/// Largest accepted `run.frames`.
pub(super) const MAX_FRAMES: i64 = 10_000;
/// Most particles of a particle run (32 bytes each: 1.6 GB).
pub(super) const MAX_PARTICLES: i64 = 50_000_000;

/// The grid section resolved.
struct GridOut {
    grid: Grid,
    mask: Option<Mask>,
    depth: crate::depth::Depth,
    /// The depth file (absolute) and its grey-level range, when the depth is read from one.
    depth_file: Option<(PathBuf, Option<(f64, f64)>)>,
    land: Option<PathBuf>,
}

/// Parses and validates; the error is every problem found. `allow_unstable` accepts a fixed
/// step above the explicit stability bound (`--force`).
pub(super) fn parse(
    text: &str,
    path: &Path,
    sets: &[String],
    options: super::LoadOptions,
) -> Result<Scenario, Vec<Problem>> {
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
    let flow = flow_section(root, path, grid.as_ref(), run.map(|r| r.end), &mut p);
    let boundaries = boundary_section(root, &mut p);
    let initial = initial_section(root, &mut p);
    let sources = source_section(root, run.map(|r| r.end), grid.as_ref(), &mut p);
    let receptors = receptor_section(root, grid.as_ref(), &mut p);
    let candidates = candidate_section(root, grid.as_ref(), &mut p);
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
            scheme.allow_unstable = options.allow_unstable;
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
            limits::amounts(&model, &initial, run.end, &mut p);
            limits::initial_on_grid(&initial, &model.grid, &mut p);
            if p.len() == 0 {
                engine_checks(&model, &initial, &scheme, (&run, options.many_frames), &mut p);
            }
            Some(Scenario {
                name,
                path: path.to_path_buf(),
                model,
                initial,
                scheme,
                run,
                receptors,
                candidates,
                output,
                tracer,
                land: g.land,
                depth_file: g.depth_file,
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
fn engine_checks(
    spec: &ModelSpec,
    initial: &Initial,
    scheme: &Scheme,
    (run, many_frames): (&super::RunSettings, bool),
    p: &mut Problems,
) {
    if let Err(e) = initial.validate() {
        p.0.push(engine_problem(&e));
    }
    match Model::new(spec.clone()) {
        Ok(model) => match max_step(&model, scheme) {
            Err(e) => p.0.push(engine_problem(&e)),
            Ok(dt) => {
                // Frames land on their times: more frames than steps would force a step per
                // frame and a picture each (when nothing moves, any step is exact).
                let steps = (run.end / dt).ceil();
                if dt.is_finite() && steps > limits::MAX_STEPS {
                    p.add(
                        "run.end",
                        format!(
                            "{} s at steps of dt = {} s is {} steps, more than {}: the run would never end (the step is set by the flow, the diffusivity and the grid); shorten the run or check the speeds and cell sizes",
                            sig(run.end, 4),
                            sig(dt, 4),
                            sig(steps, 4),
                            sig(limits::MAX_STEPS, 4)
                        ),
                    );
                    return;
                }
                if dt.is_finite() && run.frames as f64 > steps && !many_frames {
                    p.add(
                        "run.frames",
                        format!(
                            "{} frames is more than the {} step(s) the run needs (dt = {} s): every frame would force a step of its own and write {} pictures; use at most {} frames, or pass --all-frames to run tinct anyway",
                            run.frames,
                            steps,
                            sig(dt, 4),
                            run.frames + 1,
                            steps
                        ),
                    );
                }
                // Fewer than two steps per tidal period cannot represent the cycle at all (it
                // aliases): most likely hours typed as seconds.
                if let Some(tide) = spec.flow.tide.filter(|t| t.period < 2.0 * dt) {
                    p.add(
                        "flow.tide.period",
                        format!(
                            "{} s is shorter than two time steps (dt = {} s): the tide cannot be resolved; give the period in seconds (12.42 h = 44712 s) or a smaller scheme.dt",
                            sig(tide.period, 4),
                            sig(dt, 4)
                        ),
                    );
                }
            }
        },
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
                "({}, {}) m is outside the grid: x from {} to {} m (grid.nx = {} cells of grid.dx = {} m), y from {} to {} m (grid.ny = {} cells of grid.dy = {} m)",
                sig(at.0, 4),
                sig(at.1, 4),
                sig(g.x0, 4),
                sig(g.x0 + g.lx(), 4),
                g.nx,
                sig(g.dx, 4),
                sig(g.y0, 4),
                sig(g.y0 + g.ly(), 4),
                g.ny,
                sig(g.dy, 4)
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

#[cfg(test)]
mod tests {
    use super::super::reader::pair;
    use super::*;

    /// The keys of the problems of `text` with `sets`.
    fn keys(text: &str, sets: &[&str]) -> Vec<String> {
        let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
        let opts = super::super::LoadOptions::default();
        match parse(text, Path::new("t.toml"), &sets, opts) {
            Ok(_) => vec![],
            Err(problems) => problems.into_iter().map(|q| q.key).collect(),
        }
    }

    /// Values the bad-input corpus (`tests/bad_corpus/`) found accepted: speeds, centres,
    /// discharges and amplitudes of 1e308, and a run of 1e308 s (each would make the step
    /// vanish or the run never end); each is refused naming its key.
    #[test]
    fn absurd_flow_values_and_endless_runs_are_refused() {
        let base = "[grid]\nnx = 20\nny = 10\ndx = 1.0\n[run]\nend = 10.0\n";
        assert!(keys(base, &[]).is_empty());
        for (sets, key) in [
            (&["flow.velocity=[1e308, 0.0]"][..], "flow.velocity[0]"),
            (&["flow.velocity=[0.0, -2e3]"], "flow.velocity[1]"),
            (
                &["flow.kind=\"swirl\"", "flow.period=10", "flow.speed=1e308"],
                "flow.speed",
            ),
            (&["flow.kind=\"vortex\"", "flow.speed=-1e308"], "flow.speed"),
            (
                &["flow.kind=\"rotation\"", "flow.period=10", "flow.centre=[1e308, 0]"],
                "flow.centre[0]",
            ),
        ] {
            assert_eq!(keys(base, sets), [key], "{sets:?}");
        }
        // Worked by hand: diffusivity 1 m2/s on 1 m cells in still water steps between 0.1 s
        // (the target 0.4 over twice the diffusion rate 2 /s) and 0.225 s (0.9 of the explicit
        // limit 1/(2 (1 + 1)), common practice): 1e9 s is at most 1e10 steps and runs, 1e13 s
        // is at least 4.4e13 steps and does not.
        let diffusive = format!("{base}[tracer]\ndiffusivity = 1.0\n");
        assert!(keys(&diffusive, &["run.end=1e9", "run.frames=1"]).is_empty());
        assert_eq!(keys(&diffusive, &["run.end=1e13", "run.frames=1"]), ["run.end"]);
        assert_eq!(keys(&diffusive, &["run.end=1e308", "run.frames=1"]), ["run.end"]);
        let openings = "[grid]\nnx = 20\nny = 10\ndx = 1.0\n[run]\nend = 10.0\n[boundary]\nwest = \"open\"\n\
            [flow]\nkind = \"openings\"\n[[flow.opening]]\nside = \"west\"\nfrom = 0.0\nto = 10.0\n";
        assert!(keys(openings, &[]).is_empty());
        for (set, key) in [
            ("flow.opening[0].discharge=1e308", "flow.opening[0].discharge"),
            ("flow.opening[0].to=1e308", "flow.opening[0].to"),
            ("flow.opening[0].from=-1e308", "flow.opening[0].from"),
            ("flow.tide={ period = 100.0, amplitude = 1e308 }", "flow.tide.amplitude"),
        ] {
            assert_eq!(keys(openings, &[set]), [key], "{set}");
        }
    }

    /// Found by the bad-input corpus: empty names were accepted (an empty receptors.csv
    /// column, a blank map label); each is refused naming its key, and a missing name is not.
    #[test]
    fn blank_names_are_refused() {
        let base = "[grid]\nnx = 20\nny = 10\ndx = 1.0\n[run]\nend = 10.0\n[boundary]\nwest = \"open\"\n\
            [flow]\nkind = \"openings\"\n[[flow.opening]]\nside = \"west\"\nfrom = 0.0\nto = 10.0\n\
            [[source]]\nat = [5.0, 5.0]\nmass = 1.0\n[[receptor]]\nat = [8.0, 5.0]\n";
        assert!(keys(base, &[]).is_empty());
        for key in ["source[0].name", "receptor[0].name", "flow.opening[0].name"] {
            for blank in ["\"\"", "\"  \""] {
                assert_eq!(keys(base, &[&format!("{key}={blank}")]), [key], "{key} = {blank}");
            }
        }
    }

    #[test]
    fn pair_helper_reports_indices() {
        let mut p = Problems::default();
        let v: Value = Value::Array(vec![Value::Float(1.0), Value::Float(f64::INFINITY)]);
        assert!(pair(&v, "grid.size", &mut p).is_none());
        assert_eq!(p.0[0].key, "grid.size[1]");
    }
}
