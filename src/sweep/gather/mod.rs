//! The gather of a sweep: reads the sweep folder only (`members.csv` and each member's
//! `summary.json`, `fields.nc`, `exit_code` and `stderr.log`), so it can run on another machine
//! or as a job of its own, and writes `<sweep>/gather/` and `<sweep>/report.html`.
//!
//! A member is finished when its `exit_code` says 0 and its `summary.json` has
//! `"status": "completed"`; any other member with a folder is failed (listed with its exit
//! code and the tail of its `stderr.log`), and a member without a folder was not run. The
//! statistics are over the finished members only, and every output says how many those are.
//!
//! - `stats`: quantiles (Hyndman & Fan 1996 type 7), per receptor distributions, worst cases.
//! - `maps`: per cell probability of reaching each receptor threshold and the ensemble maximum,
//!   read from the members' `fields.nc` in parallel; `ensemble.nc` and the map PNGs.
//! - `tables`: the CSV files.
//! - `plots`: the strip plots of the receptor quantities.
//! - `report`: `report.html`.
//! - `bench`: the gather benchmark (1,000 fabricated members).

pub mod bench;
pub mod maps;
mod plots;
mod report;
pub mod stats;
mod tables;
#[cfg(test)]
mod tests;

pub use maps::{threshold_token, ThresholdMap};
pub use stats::{quantile, Distribution, Quantity, QuantityGather, ReceptorGather, WorstCase};

use crate::run::receptors::ReceptorStats;
use std::path::{Path, PathBuf};

/// Name of the members table in the sweep folder.
pub const MEMBERS_CSV: &str = "members.csv";
/// Folder of the member runs in the sweep folder.
pub const MEMBERS_DIR: &str = "members";
/// Folder of the gather's files in the sweep folder.
pub const GATHER_DIR: &str = "gather";
/// Lines of `stderr.log` kept for a failed member.
pub const STDERR_TAIL: usize = 10;

/// Why a gather could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum GatherError {
    /// The sweep folder or its `members.csv` is missing or malformed (bad input).
    #[error("{path}: {message}")]
    Members {
        /// The file or folder.
        path: PathBuf,
        /// What is wrong and what is expected.
        message: String,
    },
    /// Writing an output failed.
    #[error(transparent)]
    Output(#[from] crate::output::OutputError),
}

impl GatherError {
    /// The process exit code for this error: 2 for bad input, 1 for a failed write.
    pub fn exit_code(&self) -> i32 {
        match self {
            GatherError::Members { .. } => 2,
            GatherError::Output(_) => 1,
        }
    }
}

/// How a member ended, as its folder tells.
#[derive(Debug, Clone, PartialEq)]
pub enum MemberState {
    /// `exit_code` 0 and a completed `summary.json`.
    Finished,
    /// A folder, but not finished.
    Failed {
        /// The exit code from `exit_code`, if the file holds one.
        exit_code: Option<i32>,
        /// Why it counts as failed, in words.
        reason: String,
        /// The last lines of `stderr.log` (empty when there is none).
        stderr_tail: Vec<String>,
    },
    /// No member folder at all.
    NotRun,
}

/// One member of the sweep and what its folder holds.
#[derive(Debug, Clone)]
pub struct MemberOutcome {
    /// Index (row of `members.csv`).
    pub index: usize,
    /// Axis values as in `members.csv`, in axis order.
    pub values: Vec<String>,
    /// The member's run folder.
    pub dir: PathBuf,
    /// How it ended.
    pub state: MemberState,
    /// Its receptor statistics (finished members only).
    pub receptors: Vec<ReceptorStats>,
}

impl MemberOutcome {
    /// `key = value, ...` for this member's axis values.
    pub fn describe(&self, keys: &[String]) -> String {
        keys.iter()
            .zip(&self.values)
            .map(|(k, v)| format!("{k} = {v}"))
            .collect::<Vec<_>>()
            .join(", ")
    }
}

/// What the gather found and wrote (what the command line prints).
#[derive(Debug, Clone)]
pub struct GatherSummary {
    /// The sweep folder.
    pub root: PathBuf,
    /// Sweep name (the folder's name).
    pub name: String,
    /// Axis keys, as in `members.csv`.
    pub keys: Vec<String>,
    /// Every member, in index order.
    pub members: Vec<MemberOutcome>,
    /// Members finished.
    pub finished: usize,
    /// Members with a folder that did not finish.
    pub failed: usize,
    /// Members without a folder.
    pub not_run: usize,
    /// Per receptor distributions and worst cases.
    pub receptors: Vec<ReceptorGather>,
    /// Per threshold probability maps (empty when no map could be made).
    pub maps: Vec<ThresholdMap>,
    /// Largest ensemble maximum over the water cells.
    pub c_max_peak: Option<f64>,
    /// Members in the per cell maps (finished members with a readable `fields.nc` on the
    /// first finished member's grid).
    pub map_members: usize,
    /// Notes about the maps (members left out and why).
    pub map_notes: Vec<String>,
    /// Tracer name and units from `fields.nc`.
    pub tracer: (String, String),
    /// Files written, relative to the sweep folder.
    pub files: Vec<String>,
    /// The report.
    pub report: PathBuf,
}

impl GatherSummary {
    /// `N of M members finished` (with the failed and not run counts when there are any).
    pub fn finished_line(&self) -> String {
        let mut s = format!("{} of {} members finished", self.finished, self.members.len());
        let mut extra = Vec::new();
        if self.failed > 0 {
            extra.push(format!("{} failed", self.failed));
        }
        if self.not_run > 0 {
            extra.push(format!("{} not run", self.not_run));
        }
        if !extra.is_empty() {
            s.push_str(&format!(" ({})", extra.join(", ")));
        }
        s
    }
}

/// The axis keys and rows of `members.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct MembersTable {
    /// Axis keys (the header after `index`).
    pub keys: Vec<String>,
    /// (index, values) per row.
    pub rows: Vec<(usize, Vec<String>)>,
}

/// Reads `<root>/members.csv`: header `index,<key>,...`, one row per member, indices 0.. in
/// order.
pub fn read_members(root: &Path) -> Result<MembersTable, GatherError> {
    let path = root.join(MEMBERS_CSV);
    let bad = |message: String| GatherError::Members {
        path: path.clone(),
        message,
    };
    let text = std::fs::read_to_string(&path).map_err(|e| bad(format!("cannot read the members table: {e}")))?;
    let mut rdr = csv::ReaderBuilder::new().has_headers(true).from_reader(text.as_bytes());
    let header = rdr.headers().map_err(|e| bad(format!("bad header: {e}")))?.clone();
    if header.get(0) != Some("index") {
        return Err(bad("the first column must be `index`".into()));
    }
    let keys: Vec<String> = header.iter().skip(1).map(str::to_string).collect();
    let mut rows = Vec::new();
    for (k, rec) in rdr.records().enumerate() {
        let rec = rec.map_err(|e| bad(format!("row {}: {e}", k + 1)))?;
        if rec.len() != keys.len() + 1 {
            return Err(bad(format!(
                "row {} has {} fields, the header {}",
                k + 1,
                rec.len(),
                keys.len() + 1
            )));
        }
        let index: usize = rec[0]
            .trim()
            .parse()
            .map_err(|_| bad(format!("row {}: index `{}` is not a whole number", k + 1, &rec[0])))?;
        if index != k {
            return Err(bad(format!(
                "row {}: index {index}, expected {k} (rows in order from 0)",
                k + 1
            )));
        }
        rows.push((index, rec.iter().skip(1).map(str::to_string).collect()));
    }
    if rows.is_empty() {
        return Err(bad("no members".into()));
    }
    Ok(MembersTable { keys, rows })
}

/// The folder of member `index` of `n`: `<root>/members/<NNNN>` with the index zero-padded
/// to 4 digits, or to the digits of `n - 1` when more.
pub fn member_dir(root: &Path, index: usize, n: usize) -> PathBuf {
    let width = n.saturating_sub(1).to_string().len().max(4);
    root.join(MEMBERS_DIR).join(format!("{index:0width$}"))
}

/// The parts of `summary.json` the gather reads.
#[derive(serde::Deserialize)]
struct SummaryPart {
    status: String,
    #[serde(default)]
    error: Option<String>,
    #[serde(default)]
    receptors: Vec<ReceptorStats>,
}

/// The last `n` lines of `path` (empty when it cannot be read).
fn tail(path: &Path, n: usize) -> Vec<String> {
    let Ok(bytes) = std::fs::read(path) else {
        return Vec::new();
    };
    let text = String::from_utf8_lossy(&bytes);
    let lines: Vec<&str> = text.lines().collect();
    lines[lines.len().saturating_sub(n)..]
        .iter()
        .map(|l| l.to_string())
        .collect()
}

/// Reads one member's folder.
pub fn read_member(dir: &Path, index: usize, values: Vec<String>) -> MemberOutcome {
    let mut out = MemberOutcome {
        index,
        values,
        dir: dir.to_path_buf(),
        state: MemberState::NotRun,
        receptors: Vec::new(),
    };
    if !dir.is_dir() {
        return out;
    }
    let code_text = std::fs::read_to_string(dir.join("exit_code")).ok();
    let exit_code = code_text.as_deref().and_then(|t| t.trim().parse::<i32>().ok());
    let summary: Result<SummaryPart, String> = std::fs::read(dir.join("summary.json"))
        .map_err(|e| format!("no summary.json ({e})"))
        .and_then(|b| serde_json::from_slice(&b).map_err(|e| format!("summary.json unreadable ({e})")));
    let stderr_tail = tail(&dir.join("stderr.log"), STDERR_TAIL);
    let reason = match (&code_text, exit_code, &summary) {
        (None, _, _) => Some("no exit_code (still running, or stopped before it was written)".to_string()),
        (Some(t), None, _) => Some(format!("exit_code holds `{}`, not a number", t.trim())),
        (_, Some(c), Ok(s)) if c != 0 && s.error.is_some() => Some(format!(
            "exited with code {c}; run status {}: {}",
            s.status,
            s.error.as_deref().unwrap_or_default()
        )),
        (_, Some(c), _) if c != 0 => Some(format!("exited with code {c}")),
        (_, _, Err(e)) => Some(e.clone()),
        (_, _, Ok(s)) if s.status != "completed" => Some(match &s.error {
            Some(e) => format!("run status {}: {e}", s.status),
            None => format!("run status {}", s.status),
        }),
        _ => None,
    };
    match reason {
        None => {
            out.state = MemberState::Finished;
            out.receptors = summary.map(|s| s.receptors).unwrap_or_default();
        }
        Some(reason) => {
            out.state = MemberState::Failed {
                exit_code,
                reason,
                stderr_tail,
            }
        }
    }
    out
}

/// Gathers the sweep in `root`: reads `members.csv` and every member folder, writes
/// `<root>/gather/` (`receptors.csv`, `members_receptors.csv`, `failed.csv`, `ensemble.nc`,
/// the receptor plots and the probability maps) and `<root>/report.html`.
pub fn gather(root: &Path) -> Result<GatherSummary, GatherError> {
    let table = read_members(root)?;
    let n = table.rows.len();
    let members: Vec<MemberOutcome> = {
        use rayon::prelude::*;
        table
            .rows
            .par_iter()
            .map(|(i, v)| read_member(&member_dir(root, *i, n), *i, v.clone()))
            .collect()
    };
    let out_dir = root.join(GATHER_DIR);
    std::fs::create_dir_all(&out_dir).map_err(|e| crate::output::OutputError::io(&out_dir, e))?;
    let finished: Vec<&MemberOutcome> = members.iter().filter(|m| m.state == MemberState::Finished).collect();
    let not_run = members.iter().filter(|m| m.state == MemberState::NotRun).count();
    let receptors = stats::gather_receptors(&finished);
    let ens = maps::ensemble(&finished);
    let name = root
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "sweep".into());
    let mut files = Vec::new();
    tables::write_all(&out_dir, &table.keys, &members, &receptors, &mut files)?;
    let mut maps_out = Vec::new();
    if let Some(e) = &ens.maps {
        maps_out = maps::write_maps(&out_dir, &name, e, &finished, &mut files)?;
    }
    let units = ens.maps.as_ref().map(|m| m.tracer.1.clone()).unwrap_or_default();
    plots::write_plots(&out_dir, &receptors, &units, &mut files)?;
    let mut summary = GatherSummary {
        root: root.to_path_buf(),
        name,
        keys: table.keys,
        finished: finished.len(),
        failed: n - finished.len() - not_run,
        not_run,
        receptors,
        maps: maps_out,
        c_max_peak: ens.maps.as_ref().and_then(|m| m.peak()),
        map_members: ens.maps.as_ref().map_or(0, |m| m.members),
        map_notes: ens.notes,
        tracer: ens.maps.as_ref().map(|m| m.tracer.clone()).unwrap_or_default(),
        files,
        report: root.join(crate::report::REPORT_FILE),
        members,
    };
    summary.report = report::write_report(root, &summary)?;
    Ok(summary)
}
