//! Scenario files: one TOML file (DESIGN §3) plus `--set key.path=value` overrides, turned into
//! validated engine inputs.
//!
//! [`load`] reads the file, [`parse`] does the rest: TOML syntax, overrides, unknown keys and
//! types, ranges, cross-checks (periodic pairs, points on water, the land image) and finally the
//! engine's own checks (building the [`Model`] and its stable step). Every problem names the
//! file and the key path as a user would write it, and all the problems found are reported
//! together in one [`ScenarioError`]. Nothing here panics on user input.
//!
//! ```
//! use std::path::Path;
//! let text = tinct::scenario::example("gaussian-puff").unwrap();
//! let s = tinct::scenario::parse(text, Path::new("puff.toml"), &["run.end=600".into()]).unwrap();
//! assert_eq!(s.run.end, 600.0);
//! let again = tinct::scenario::parse(&s.resolved_toml(), Path::new("puff.toml"), &[]).unwrap();
//! assert_eq!(again, s);
//! ```

mod build;
mod depth;
mod examples;
mod land;
mod overrides;
mod reader;
mod resolved;
mod schema;

pub use examples::{example_files, write_example, ExampleFile};

use crate::initial::Initial;
use crate::model::{Model, ModelSpec};
use crate::output::colour::ColourScale;
use crate::step::Scheme;
use std::fmt;
use std::path::{Path, PathBuf};

/// A validated scenario, ready to run.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// Output folder name (default: the file stem).
    pub name: String,
    /// The scenario file.
    pub path: PathBuf,
    /// The physics: grid, mask, depth, diffusivity, decay, flow, boundaries, sources.
    pub model: ModelSpec,
    /// The initial field.
    pub initial: Initial,
    /// Numerical choices.
    pub scheme: Scheme,
    /// Length of the run and its outputs' cadence.
    pub run: RunSettings,
    /// Points where the concentration is recorded.
    pub receptors: Vec<Receptor>,
    /// Candidate release points ranked by influence maps (`tinct influence`).
    pub candidates: Vec<Candidate>,
    /// Where and how results are written.
    pub output: OutputSettings,
    /// The tracer's name and units.
    pub tracer: TracerInfo,
    /// The land image as resolved against the scenario file (absolute), if any.
    pub land: Option<PathBuf>,
    /// The depth file as resolved against the scenario file (absolute) and its grey-level
    /// `depth_range`, when `grid.depth` names one.
    pub depth_file: Option<(PathBuf, Option<(f64, f64)>)>,
}

/// `[run]`: end time and output cadence.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RunSettings {
    /// End of the run, s (> 0).
    pub end: f64,
    /// Number of frame intervals: frames are written at t = k end / frames, k = 0..=frames.
    pub frames: usize,
    /// Steps between budget log rows (>= 1).
    pub log_every: u64,
    /// Simulated seconds between checkpoints (`checkpoint.bin`); `None` = about every 60 s of
    /// wall time. A checkpoint is always written at the end and on interruption.
    pub checkpoint_every: Option<f64>,
    /// Particles of a random-walk particle run beside the grid run (`<dir>/<name>/particles/`);
    /// `None` = no particle run.
    pub particles: Option<usize>,
}

/// `[[receptor]]`: a point where the concentration is recorded.
#[derive(Debug, Clone, PartialEq)]
pub struct Receptor {
    /// Name (a column of `receptors.csv`).
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// Concentration above which time is counted, in the tracer's units.
    pub threshold: Option<f64>,
}

/// `[[candidate]]`: a candidate release point (a berth, outfall or slipway), ranked by its
/// influence on a receptor (`tinct influence`).
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// Name (a row of `candidates.csv`).
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
}

/// `[output]`: folder and colour mapping of frames.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSettings {
    /// Results go to `<dir>/<name>/`; relative to the working directory (default `out`).
    pub dir: PathBuf,
    /// Linear or logarithmic colour mapping.
    pub colour: ColourScale,
    /// Fixed colour range `(lo, hi)`; `None` follows the data.
    pub range: Option<(f64, f64)>,
    /// Also write the frames as `animation.gif` (about ten seconds of play).
    pub animation: bool,
}

/// `[tracer]`: what is being carried (the physics of the tracer lives in [`ModelSpec`]).
#[derive(Debug, Clone, PartialEq)]
pub struct TracerInfo {
    /// Name, e.g. `dye` (default `tracer`).
    pub name: String,
    /// Concentration units (default `kg/m3`).
    pub units: String,
}

/// One thing wrong with a scenario.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// Key path as a user would write it (`grid.dx`, `source[2].rate`), `line L, column C` for
    /// syntax errors, `--set ...` for a malformed override, empty for the file as a whole.
    pub key: String,
    /// What is wrong and what is allowed.
    pub message: String,
}

/// Everything wrong with a scenario file; displays one line per problem,
/// `<file>: <key.path>: <message>`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ScenarioError {
    /// The scenario file.
    pub file: PathBuf,
    /// The problems, in file order where possible.
    pub problems: Vec<Problem>,
}

impl fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (k, p) in self.problems.iter().enumerate() {
            if k > 0 {
                writeln!(f)?;
            }
            if p.key.is_empty() {
                write!(f, "{}: {}", self.file.display(), p.message)?;
            } else {
                write!(f, "{}: {}: {}", self.file.display(), p.key, p.message)?;
            }
        }
        Ok(())
    }
}

impl std::error::Error for ScenarioError {}

/// How a scenario is loaded.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct LoadOptions {
    /// Accept a fixed `scheme.dt` above the explicit stability bound (sets
    /// [`Scheme::allow_unstable`]; `--force`, for demonstrating instability only).
    pub allow_unstable: bool,
    /// Accept more frames than the run has steps (each frame then forces a step of its own;
    /// `--all-frames`).
    pub many_frames: bool,
}

/// Reads and validates the scenario file at `path` with `overrides` (`key.path=value`).
pub fn load(path: &Path, overrides: &[String]) -> Result<Scenario, ScenarioError> {
    load_with(path, overrides, LoadOptions::default())
}

/// [`load`] with options.
pub fn load_with(path: &Path, overrides: &[String], options: LoadOptions) -> Result<Scenario, ScenarioError> {
    match std::fs::read(path) {
        Ok(bytes) => match String::from_utf8(bytes) {
            Ok(text) => parse_with(&text, path, overrides, options),
            Err(e) => Err(ScenarioError {
                file: path.to_path_buf(),
                problems: vec![Problem {
                    key: String::new(),
                    message: format!(
                        "not UTF-8 text (invalid byte at offset {}); save the file as UTF-8",
                        e.utf8_error().valid_up_to()
                    ),
                }],
            }),
        },
        Err(e) => Err(ScenarioError {
            file: path.to_path_buf(),
            problems: vec![Problem {
                key: String::new(),
                message: format!("cannot read the scenario file: {e}"),
            }],
        }),
    }
}

/// Validates scenario `text`; `path` names the file in messages and anchors relative paths.
pub fn parse(text: &str, path: &Path, overrides: &[String]) -> Result<Scenario, ScenarioError> {
    parse_with(text, path, overrides, LoadOptions::default())
}

/// [`parse`] with options.
pub fn parse_with(
    text: &str,
    path: &Path,
    overrides: &[String],
    options: LoadOptions,
) -> Result<Scenario, ScenarioError> {
    build::parse(text, path, overrides, options).map_err(|problems| ScenarioError {
        file: path.to_path_buf(),
        problems,
    })
}

impl Scenario {
    /// The scenario as run, every default filled in, as TOML; parsing it (with the same path)
    /// gives an equal scenario.
    pub fn resolved_toml(&self) -> String {
        resolved::write(self)
    }

    /// Builds the engine model (already validated by [`parse`], so this only fails on a
    /// scenario edited after loading).
    pub fn build_model(&self) -> Result<Model, crate::ModelError> {
        Model::new(self.model.clone())
    }
}

impl PartialEq for Scenario {
    fn eq(&self, o: &Self) -> bool {
        let (a, b) = (&self.model, &o.model);
        let model_eq = a.grid == b.grid
            && a.mask == b.mask
            && a.depth == b.depth
            && a.kx == b.kx
            && a.ky == b.ky
            && a.decay_rate == b.decay_rate
            && a.flow == b.flow
            && a.boundaries == b.boundaries
            && a.sources == b.sources;
        model_eq
            && self.name == o.name
            && self.path == o.path
            && self.initial == o.initial
            && self.scheme == o.scheme
            && self.run == o.run
            && self.receptors == o.receptors
            && self.candidates == o.candidates
            && self.output == o.output
            && self.tracer == o.tracer
            && self.land == o.land
            && self.depth_file == o.depth_file
    }
}

/// Names of the shipped example scenarios (`tinct example NAME`).
pub const EXAMPLES: &[&str] = &[
    "rotating-cone",
    "slotted-disk",
    "swirl",
    "gaussian-puff",
    "marina",
    "outfall",
];

/// The text of the shipped example scenario `name`, if there is one. Some examples read data
/// files next to them ([`example_files`]; [`write_example`] writes the whole set).
pub fn example(name: &str) -> Option<&'static str> {
    match name {
        "rotating-cone" => Some(include_str!("../../scenarios/rotating-cone.toml")),
        "slotted-disk" => Some(include_str!("../../scenarios/slotted-disk.toml")),
        "swirl" => Some(include_str!("../../scenarios/swirl.toml")),
        "gaussian-puff" => Some(include_str!("../../scenarios/gaussian-puff.toml")),
        "marina" => Some(include_str!("../../scenarios/marina.toml")),
        "outfall" => Some(include_str!("../../scenarios/outfall.toml")),
        _ => None,
    }
}
