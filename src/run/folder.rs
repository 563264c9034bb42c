//! The run's folder `<dir>/<name>/` before the first step: created, locked against a second
//! run, cleared of what an earlier run left (so it never mixes two runs), and marked as running
//! in `summary.json`.
//!
//! Earlier results are removed, not moved aside: the folder holds one run, the scenario that
//! made it is in `scenario.toml`, and a copy kept on every run would fill the disk of a user who
//! reruns a scenario while tuning it.

use crate::output::{self, OutputError};
use crate::scenario::Scenario;
use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, Write};
use std::path::{Path, PathBuf};

/// The lock file in the run's folder (hidden). It holds the PID of the run that has it.
pub const LOCK_FILE: &str = ".lock";

/// Files an earlier run leaves in the folder that this run rewrites or that would be stale.
/// `frames/NNNNN.png` and `plots/*.png` are cleared besides these.
pub const RESULT_FILES: [&str; 10] = [
    "animation.gif",
    "exceedance.csv",
    "report.html",
    "envelope.png",
    "fields.nc",
    "summary.json",
    "budget.csv",
    "receptors.csv",
    "checkpoint.bin",
    "scenario.toml",
];

/// What a resumed run continues from, and so keeps: the checkpoint, the logs (cut back to the
/// checkpoint when resuming), the fields, the frames written so far and the scenario as run.
const KEPT_ON_RESUME: [&str; 6] = [
    "checkpoint.bin",
    "budget.csv",
    "receptors.csv",
    "exceedance.csv",
    "fields.nc",
    "scenario.toml",
];

/// Why the folder cannot take the run.
#[derive(Debug, thiserror::Error)]
pub enum FolderError {
    /// The folder (or a file in it) cannot be created, written or cleared.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Another run holds the folder's lock.
    #[error("{} is in use by another tinct run (process {pid}, lock file {}); wait for it to finish or choose another --out", .dir.display(), .lock.display())]
    Locked {
        /// The run's folder.
        dir: PathBuf,
        /// The lock file.
        lock: PathBuf,
        /// The holder's PID as written in the lock file (`unknown` when it is unreadable).
        pid: String,
    },
}

/// The folder's lock, held until this value is dropped (or the process ends, however it ends:
/// the operating system releases it, so a lock file left by a killed run is simply taken over).
#[derive(Debug)]
pub struct FolderLock {
    _file: File,
}

/// Creates `dir` and takes its lock, writing this process's PID into the lock file.
pub fn lock_folder(dir: &Path) -> Result<FolderLock, FolderError> {
    std::fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
    let path = dir.join(LOCK_FILE);
    let io = |e| OutputError::io(&path, e);
    let mut file = OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(false)
        .open(&path)
        .map_err(io)?;
    match file.try_lock() {
        Ok(()) => {}
        Err(TryLockError::WouldBlock) => {
            let mut text = String::new();
            let _ = file.read_to_string(&mut text);
            let pid = match text.trim() {
                "" => "unknown".to_string(),
                t => t.to_string(),
            };
            return Err(FolderError::Locked {
                dir: dir.to_path_buf(),
                lock: path.clone(),
                pid,
            });
        }
        Err(TryLockError::Error(e)) => return Err(io(e).into()),
    }
    file.set_len(0).map_err(io)?;
    file.rewind().map_err(io)?;
    writeln!(file, "{}", std::process::id()).map_err(io)?;
    file.flush().map_err(io)?;
    Ok(FolderLock { _file: file })
}

/// Clears what an earlier run left in `dir` (see [`RESULT_FILES`]): its frames, charts and
/// result files, and the temporary files of writers that died (`.NAME.tmp-PID-N` of a process
/// that no longer exists). With `resume`, the checkpoint, logs, fields and frames are kept for
/// the run to continue. Call it holding the folder's lock. Files the user put there are left.
pub fn prepare_folder(dir: &Path, resume: bool) -> Result<(), OutputError> {
    for name in RESULT_FILES {
        if !(resume && KEPT_ON_RESUME.contains(&name)) {
            remove(&dir.join(name))?;
        }
    }
    let frames = dir.join("frames");
    if !resume {
        remove_matching(&frames, |n| {
            n.strip_suffix(".png")
                .is_some_and(|s| s.len() == 5 && s.bytes().all(|b| b.is_ascii_digit()))
        })?;
    }
    remove_matching(&dir.join("plots"), |n| n.ends_with(".png"))?;
    if !resume {
        super::particles::clear_folder(dir)?;
        // Influence maps of an earlier scenario would be stale.
        if let Ok(entries) = std::fs::read_dir(dir.join("influence")) {
            for e in entries.flatten() {
                remove_matching(&e.path(), |n| crate::adjoint::files::RESULT_FILES.contains(&n))?;
            }
        }
    }
    for d in [dir.to_path_buf(), frames, dir.join("plots")] {
        remove_matching(&d, |n| stale_temporary(n).is_some())?;
    }
    Ok(())
}

/// The PID in a temporary file's name `.NAME.tmp-PID-N` when that process no longer runs.
fn stale_temporary(name: &str) -> Option<u32> {
    let rest = name.strip_prefix('.')?;
    let (_, tail) = rest.rsplit_once(".tmp-")?;
    let (pid, n) = tail.split_once('-')?;
    n.parse::<u64>().ok()?;
    let pid: u32 = pid.parse().ok()?;
    (!process_alive(pid)).then_some(pid)
}

/// Whether a process with this PID exists.
fn process_alive(pid: u32) -> bool {
    if pid == std::process::id() {
        return true;
    }
    #[cfg(unix)]
    {
        let Ok(p) = libc::pid_t::try_from(pid) else {
            return false;
        };
        // Signal 0 checks for existence only; EPERM means it exists under another user.
        // SAFETY: kill with signal 0 sends nothing.
        let r = unsafe { libc::kill(p, 0) };
        r == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
    }
    #[cfg(not(unix))]
    true
}

fn remove(path: &Path) -> Result<(), OutputError> {
    match std::fs::remove_file(path) {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(OutputError::io(path, e)),
        _ => Ok(()),
    }
}

/// Removes the files of `dir` whose name passes `pick` (nothing when `dir` does not exist).
fn remove_matching(dir: &Path, pick: impl Fn(&str) -> bool) -> Result<(), OutputError> {
    let entries = match std::fs::read_dir(dir) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(()),
        Err(e) => return Err(OutputError::io(dir, e)),
    };
    for e in entries {
        let e = e.map_err(|e| OutputError::io(dir, e))?;
        let is_file = e.file_type().is_ok_and(|t| t.is_file());
        if is_file && e.file_name().to_str().is_some_and(&pick) {
            remove(&e.path())?;
        }
    }
    Ok(())
}

/// The summary of the completed run of `scn` in `run_dir`, when the folder holds one: its
/// `scenario.toml` equals `scn`'s resolved form (the `run.particles` line aside) and its
/// `summary.json` reads back with status `completed`.
pub fn completed_run_summary(run_dir: &Path, scn: &Scenario) -> Option<super::RunSummary> {
    let strip = |t: &str| -> String {
        t.lines()
            .filter(|l| !(l.starts_with("particles =") || l.starts_with("# particles:")))
            .collect::<Vec<_>>()
            .join("\n")
    };
    let written = std::fs::read_to_string(run_dir.join("scenario.toml")).ok()?;
    if strip(&written) != strip(&scn.resolved_toml()) {
        return None;
    }
    let text = std::fs::read_to_string(run_dir.join("summary.json")).ok()?;
    let summary: super::RunSummary = serde_json::from_str(&text).ok()?;
    (summary.status == "completed").then_some(summary)
}

/// Rewrites `report.html` of the completed run of `scn` in `run_dir` (so that it shows what
/// other commands added to the folder, such as influence maps); returns whether there was
/// such a run. Call it holding the folder's lock.
pub fn refresh_report(run_dir: &Path, scn: &Scenario) -> Result<bool, OutputError> {
    match completed_run_summary(run_dir, scn) {
        Some(summary) => crate::report::write_run_report(run_dir, scn, &summary).map(|_| true),
        None => Ok(false),
    }
}

/// `summary.json` while the run is under way (status `running`), and what it says when the run
/// fails writing its outputs (status `failed`): a killed run leaves this one.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct StartSummary {
    /// Program and version.
    pub program: String,
    /// Scenario name.
    pub scenario: String,
    /// `running`, or `failed` when an output could not be written.
    pub status: String,
    /// Why the run failed, if it did.
    pub error: Option<String>,
    /// When the run started, UTC (RFC 3339).
    pub started: String,
    /// The process that runs it.
    pub pid: u32,
    /// The caution of every summary.
    pub caution: String,
}

impl StartSummary {
    /// A run of `scn` starting now in this process.
    pub fn new(scn: &Scenario) -> Self {
        let secs = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.as_secs());
        StartSummary {
            program: format!("tinct {}", env!("CARGO_PKG_VERSION")),
            scenario: scn.name.clone(),
            status: "running".into(),
            error: None,
            started: rfc3339(secs),
            pid: std::process::id(),
            caution: super::CAUTION.into(),
        }
    }

    /// Writes it (atomically) as `dir/summary.json`.
    pub fn write(&self, dir: &Path) -> Result<(), OutputError> {
        let json = serde_json::to_string_pretty(self).map_err(|e| OutputError::invalid(dir, e.to_string()))?;
        output::write_atomic(&dir.join("summary.json"), json.as_bytes())
    }
}

/// `YYYY-MM-DDThh:mm:ssZ` for seconds since 1970 (civil-from-days, proleptic Gregorian).
pub fn rfc3339(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let s = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        s / 3600,
        s % 3600 / 60,
        s % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_are_civil() {
        assert_eq!(rfc3339(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339(1_798_761_599), "2026-12-31T23:59:59Z");
    }

    #[test]
    fn a_second_lock_is_refused_with_the_holders_pid() {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path().join("run");
        let held = lock_folder(&dir).unwrap();
        let err = lock_folder(&dir).unwrap_err().to_string();
        assert!(
            err.contains(&std::process::id().to_string()) && err.contains(".lock"),
            "{err}"
        );
        drop(held);
        let again = lock_folder(&dir).unwrap();
        drop(again);
        assert!(dir.join(LOCK_FILE).is_file(), "the lock file is kept");
    }

    #[test]
    fn clearing_keeps_user_files_and_live_temporaries() {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path();
        std::fs::create_dir_all(dir.join("frames")).unwrap();
        std::fs::create_dir_all(dir.join("plots")).unwrap();
        let me = std::process::id();
        // A PID above Linux's largest possible one belongs to no process.
        let dead = 4_194_304 + 17;
        for f in [
            "summary.json",
            "budget.csv",
            "animation.gif",
            "checkpoint.bin",
            "frames/00000.png",
            "frames/00012.png",
            "frames/notes.png",
            "plots/budget.png",
            "notes.txt",
        ] {
            std::fs::write(dir.join(f), b"x").unwrap();
        }
        let stale = format!(".fields.nc.tmp-{dead}-0");
        let live = format!(".fields.nc.tmp-{me}-3");
        std::fs::write(dir.join(&stale), b"x").unwrap();
        std::fs::write(dir.join(&live), b"x").unwrap();
        std::fs::write(dir.join(format!("frames/.00001.png.tmp-{dead}-2")), b"x").unwrap();

        prepare_folder(dir, true).unwrap();
        assert!(dir.join("budget.csv").exists() && dir.join("checkpoint.bin").exists());
        assert!(dir.join("frames/00012.png").exists());
        assert!(!dir.join("summary.json").exists() && !dir.join("plots/budget.png").exists());
        assert!(!dir.join(&stale).exists() && dir.join(&live).exists());
        assert!(!dir.join(format!("frames/.00001.png.tmp-{dead}-2")).exists());

        prepare_folder(dir, false).unwrap();
        for gone in [
            "budget.csv",
            "checkpoint.bin",
            "animation.gif",
            "frames/00000.png",
            "frames/00012.png",
        ] {
            assert!(!dir.join(gone).exists(), "{gone}");
        }
        for kept in ["notes.txt", "frames/notes.png"] {
            assert!(dir.join(kept).exists(), "{kept}");
        }
    }
}
