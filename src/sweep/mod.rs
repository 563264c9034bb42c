//! Sweeps: one base scenario run many times with some keys changed (an ensemble).
//!
//! A sweep file names a base scenario and axes (scenario key paths in the `--set` syntax, each a
//! list of values or a range); its members are the Cartesian product of the axes or a Latin
//! hypercube sample over them ([`members`]). [`load`] reads the file ([`spec`]) and validates
//! every member up front by loading the base scenario with its overrides, so a bad axis is
//! refused before anything runs. Members run in this process ([`local`]) or as an array job of a
//! batch scheduler ([`scheduler`]); the gather ([`gather`]) reads only the sweep folder.
//!
//! Folder layout, `<sweep>` = `<out>/<name>/`: `members.csv` (index and the value text of each
//! axis), `members/<NNNN>/` (each member's run folder plus `exit_code` and, when that is not 0,
//! `stderr.log`), `logs/` (scheduler task logs), `array.sh` and `gather.sh` (scheduler scripts),
//! `gather/` and `report.html` (the gather).

pub mod gather;
pub mod local;
pub mod members;
pub mod scheduler;
pub mod spec;

use crate::output::{self, OutputError};
use std::fmt;
use std::path::{Path, PathBuf};

pub use local::{run_local, run_member, LocalOptions, LocalSummary, MemberEvent, MemberOutcome};

/// The file in each member's folder holding its exit code (decimal text and a newline).
pub const EXIT_CODE_FILE: &str = "exit_code";
/// The file in a failed member's folder holding its error message.
pub const STDERR_FILE: &str = "stderr.log";

/// A validated sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct Sweep {
    /// The sweep's name (folder name; default: the sweep file's stem).
    pub name: String,
    /// The sweep file, absolute.
    pub file: PathBuf,
    /// The base scenario, absolute.
    pub base: PathBuf,
    /// The sweep folder `<out>/<name>/`, absolute.
    pub root: PathBuf,
    /// The axes, in file order.
    pub axes: Vec<Axis>,
    /// The members, index from 0.
    pub members: Vec<Member>,
}

/// One axis of a sweep: a scenario key and how its values are chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// The scenario key path in the `--set` syntax, e.g. `source[0].start`.
    pub key: String,
    /// Its values.
    pub values: AxisValues,
}

/// How an axis's values are given.
#[derive(Debug, Clone, PartialEq)]
pub enum AxisValues {
    /// An explicit list, as `--set` value texts.
    List(Vec<String>),
    /// A range: `count` values from `from` to `to` (ends included) for a product, or a
    /// continuous range for a Latin hypercube (`count` then `None`); spaced evenly in the
    /// logarithm when `log`.
    Range {
        /// First value.
        from: f64,
        /// Last value.
        to: f64,
        /// Number of values (product sweeps only).
        count: Option<usize>,
        /// Logarithmic spacing (both ends > 0).
        log: bool,
    },
}

/// One member: its index and the `--set` value text of each axis, in axis order.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Member {
    /// Index from 0 (the array task id under a scheduler).
    pub index: usize,
    /// Value text per axis, as in `members.csv`.
    pub values: Vec<String>,
}

/// A sweep that cannot run as written: the file, the key and what is allowed (exit code 2).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SweepError {
    /// The sweep file.
    pub file: PathBuf,
    /// The key in the sweep file (`axes."tracer.diffusivity"`, `samples`, ...); empty for the
    /// file as a whole.
    pub key: String,
    /// What is wrong and what is allowed.
    pub message: String,
}

impl fmt::Display for SweepError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.key.is_empty() {
            write!(f, "{}: {}", self.file.display(), self.message)
        } else {
            write!(f, "{}: {}: {}", self.file.display(), self.key, self.message)
        }
    }
}

impl std::error::Error for SweepError {}

/// Reads the sweep file at `path` and validates it and every member; `out` is `--out` (else the
/// base scenario's `output.dir`), relative to the working directory. Nothing is written.
pub fn load(path: &Path, out: Option<&Path>) -> Result<Sweep, SweepError> {
    spec::load(path, out, None)
}

/// [`load`] validating member `index` only (a scheduler task runs one member of a sweep whose
/// members were all validated when its scripts were written).
pub fn load_member(path: &Path, out: Option<&Path>, index: usize) -> Result<Sweep, SweepError> {
    spec::load(path, out, Some(index))
}

impl Sweep {
    /// Width of the zero-padded member folder names: 4 digits, more above 10,000 members.
    pub fn index_width(&self) -> usize {
        let last = self.members.len().saturating_sub(1);
        last.to_string().len().max(4)
    }

    /// The member folder name of index `i` (`0007`).
    pub fn member_name(&self, i: usize) -> String {
        format!("{i:0w$}", w = self.index_width())
    }

    /// `<sweep>/members/<NNNN>/`, the run folder of member `i`.
    pub fn member_dir(&self, i: usize) -> PathBuf {
        self.members_dir().join(self.member_name(i))
    }

    /// `<sweep>/members/`, the output root the members' runs write under.
    pub fn members_dir(&self) -> PathBuf {
        self.root.join("members")
    }

    /// The `--set` overrides of member `i`: `<key>=<value>` per axis, then its name.
    pub fn overrides(&self, i: usize) -> Vec<String> {
        let mut sets: Vec<String> = self
            .axes
            .iter()
            .zip(&self.members[i].values)
            .map(|(a, v)| format!("{}={v}", a.key))
            .collect();
        // Quoted: `name=1000` would read as a number.
        sets.push(format!("name=\"{}\"", self.member_name(i)));
        sets
    }

    /// The text of `members.csv`: `index,<axis keys>` and one row per member.
    pub fn members_csv(&self) -> String {
        let mut w = csv::WriterBuilder::new().from_writer(Vec::new());
        let mut header = vec!["index".to_string()];
        header.extend(self.axes.iter().map(|a| a.key.clone()));
        let mut rows = vec![header];
        for m in &self.members {
            let mut row = vec![m.index.to_string()];
            row.extend(m.values.iter().cloned());
            rows.push(row);
        }
        for r in rows {
            // Writing into a Vec cannot fail.
            let _ = w.write_record(&r);
        }
        String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
    }

    /// Creates the sweep folder and writes `members.csv` atomically. A folder that already
    /// holds a different `members.csv` (another sweep, or this one edited) is refused, so
    /// members of two sweeps are never mixed.
    pub fn prepare(&self) -> Result<(), PrepareError> {
        let csv_path = self.root.join("members.csv");
        let text = self.members_csv();
        if let Ok(old) = std::fs::read_to_string(&csv_path) {
            if old != text {
                return Err(PrepareError::Different(csv_path));
            }
        }
        std::fs::create_dir_all(self.members_dir()).map_err(|e| OutputError::io(&self.root, e))?;
        output::write_atomic(&csv_path, text.as_bytes())?;
        Ok(())
    }

    /// Whether member `i` is complete: its `summary.json` says `completed` and `exit_code` 0.
    pub fn is_complete(&self, i: usize) -> bool {
        member_complete(&self.member_dir(i))
    }
}

/// Whether the member run folder `dir` is complete: `summary.json` has `"status":
/// "completed"` and `exit_code` says 0 (the sweep contract).
pub fn member_complete(dir: &Path) -> bool {
    let code_ok = std::fs::read_to_string(dir.join(EXIT_CODE_FILE)).is_ok_and(|t| t.trim() == "0");
    code_ok
        && std::fs::read(dir.join("summary.json"))
            .ok()
            .and_then(|b| serde_json::from_slice::<serde_json::Value>(&b).ok())
            .is_some_and(|v| v.get("status").and_then(|s| s.as_str()) == Some("completed"))
}

/// Why the sweep folder cannot be prepared.
#[derive(Debug, thiserror::Error)]
pub enum PrepareError {
    /// The folder or `members.csv` cannot be written.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// The folder holds the members of a different sweep.
    #[error("{} lists other members than this sweep file gives (another sweep, or this one edited); remove the sweep folder or choose another --out", .0.display())]
    Different(PathBuf),
}
