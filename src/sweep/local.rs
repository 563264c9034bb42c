//! The local backend: members run in this process, several at once, each on a one-thread rayon
//! pool (so its numbers are the same bits as under a scheduler, where each task is one process).
//!
//! How many at once: `--jobs K`, else the number of cores, lowered so that the members running
//! together fit in 80% of the memory Linux reports available (`MemAvailable` in
//! `/proc/meminfo`). A member's memory is estimated as `8 bytes x cells x (48 + frames + 1) +
//! 32 MiB`: about 48 full-size arrays of f64 for the field with its halo, the stage buffers, the
//! face velocities, depth, envelope and exceedance maps, plus the field of every frame (a
//! checkpoint carries them), plus a fixed allowance for the pictures and the program. It is
//! deliberately generous; a member is never refused for it (one always runs).
//!
//! Resume: a complete member (`summary.json` completed, `exit_code` 0, and its `scenario.toml`
//! equal to the member's scenario) is skipped; one with a `checkpoint.bin` continues from it; any
//! other is run afresh. The stop flag (Ctrl-C in the CLI) stops the members under way, which
//! write their checkpoint and exit code 130, and no new member starts.

use super::{PrepareError, Sweep, EXIT_CODE_FILE, STDERR_FILE};
use crate::output;
use crate::run::{execute_with, RunFailure, RunOptions};
use crate::scenario::{self, LoadOptions};
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

/// Exit code of a member stopped by the stop flag.
pub const INTERRUPTED: u8 = 130;

/// How the local backend runs.
#[derive(Debug, Clone, Default)]
pub struct LocalOptions {
    /// Members at once (`--jobs`); `None` = as many as cores and memory allow ([`auto_jobs`]).
    pub jobs: Option<usize>,
    /// Raised to stop the sweep: running members checkpoint and stop, no new one starts.
    pub stop: Option<Arc<AtomicBool>>,
}

/// What became of one member.
#[derive(Debug, Clone, PartialEq)]
pub struct MemberOutcome {
    /// The member's index.
    pub index: usize,
    /// Its exit code: 0 ok, 1 run failed, 2 bad input, 130 interrupted.
    pub code: u8,
    /// The error message when `code` is not 0.
    pub message: Option<String>,
    /// Wall seconds this time (0 when skipped).
    pub seconds: f64,
    /// It was complete already and was not run again.
    pub skipped: bool,
    /// It continued from its checkpoint.
    pub resumed: bool,
}

/// Progress of a local sweep, for the caller's progress bar.
#[derive(Debug, Clone, PartialEq)]
pub enum MemberEvent {
    /// A member started.
    Started(usize),
    /// A member ended (or was found complete).
    Finished(MemberOutcome),
}

/// The result of a local sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalSummary {
    /// Every member that was looked at, by index (all of them unless interrupted).
    pub outcomes: Vec<MemberOutcome>,
    /// Members run at once.
    pub jobs: usize,
    /// Wall seconds of the whole sweep.
    pub wall_seconds: f64,
    /// The stop flag ended the sweep early.
    pub interrupted: bool,
}

impl LocalSummary {
    /// Members run this time (not skipped).
    pub fn ran(&self) -> usize {
        self.outcomes.iter().filter(|o| !o.skipped).count()
    }

    /// Members found complete and skipped.
    pub fn skipped(&self) -> usize {
        self.outcomes.iter().filter(|o| o.skipped).count()
    }

    /// Members whose exit code is not 0.
    pub fn failed(&self) -> Vec<&MemberOutcome> {
        self.outcomes.iter().filter(|o| o.code != 0).collect()
    }

    /// Sum of the wall seconds of the members run.
    pub fn member_seconds(&self) -> f64 {
        self.outcomes.iter().map(|o| o.seconds).sum()
    }

    /// Sweep wall time over the ideal `member_seconds / jobs` (1 = every worker busy all the
    /// time); `None` when nothing ran.
    pub fn busy_ratio(&self) -> Option<f64> {
        let ideal = self.member_seconds() / self.jobs.min(self.ran()).max(1) as f64;
        (self.ran() > 0 && ideal > 0.0).then(|| self.wall_seconds / ideal)
    }
}

/// Estimated bytes of one run of `cells` cells and `frames` frame intervals (module doc).
pub fn member_bytes(cells: usize, frames: usize) -> u64 {
    8 * cells as u64 * (48 + frames as u64 + 1) + (32 << 20)
}

/// Bytes Linux reports available (`MemAvailable`), if readable.
pub fn mem_available() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

/// Members at once by the rule of the module doc: cores, lowered to what fits in 80% of
/// `available` bytes at `per_member` bytes each, at least 1.
pub fn auto_jobs(cores: usize, per_member: u64, available: Option<u64>) -> usize {
    let by_memory = available.map_or(usize::MAX, |a| ((a as f64 * 0.8) / per_member.max(1) as f64) as usize);
    cores.min(by_memory).max(1)
}

/// The largest member's estimated bytes: the base's size, or every member's when an axis can
/// change the grid or the frames.
fn largest_member_bytes(sweep: &Sweep) -> u64 {
    let size = |sets: &[String]| {
        scenario::load(&sweep.base, sets)
            .map(|s| member_bytes(s.model.grid.nx * s.model.grid.ny, s.run.frames))
            .unwrap_or(0)
    };
    if sweep
        .axes
        .iter()
        .any(|a| a.key.starts_with("grid") || a.key.starts_with("run"))
    {
        (0..sweep.members.len())
            .map(|i| size(&sweep.overrides(i)))
            .max()
            .unwrap_or(0)
    } else {
        size(&[])
    }
}

/// Runs every member of `sweep` that is not complete, `jobs` at a time, after writing
/// `members.csv`; `on_event` hears each start and end (from the worker threads). A member that
/// fails does not stop the others.
pub fn run_local(
    sweep: &Sweep,
    options: &LocalOptions,
    on_event: &(dyn Fn(&MemberEvent) + Sync),
) -> Result<LocalSummary, PrepareError> {
    sweep.prepare()?;
    let t0 = Instant::now();
    let n = sweep.members.len();
    let jobs = options
        .jobs
        .unwrap_or_else(|| {
            let cores = std::thread::available_parallelism().map_or(1, |c| c.get());
            auto_jobs(cores, largest_member_bytes(sweep), mem_available())
        })
        .clamp(1, n.max(1));
    let next = AtomicUsize::new(0);
    let outcomes = Mutex::new(Vec::with_capacity(n));
    let stopped = || options.stop.as_ref().is_some_and(|s| s.load(Ordering::Relaxed));
    std::thread::scope(|scope| {
        for _ in 0..jobs {
            scope.spawn(|| loop {
                if stopped() {
                    break;
                }
                let i = next.fetch_add(1, Ordering::Relaxed);
                if i >= n {
                    break;
                }
                on_event(&MemberEvent::Started(i));
                let o = run_member(sweep, i, options.stop.clone());
                on_event(&MemberEvent::Finished(o.clone()));
                outcomes.lock().unwrap_or_else(|e| e.into_inner()).push(o);
            });
        }
    });
    let mut outcomes = outcomes.into_inner().unwrap_or_else(|e| e.into_inner());
    outcomes.sort_by_key(|o| o.index);
    Ok(LocalSummary {
        interrupted: stopped() || outcomes.iter().any(|o| o.code == INTERRUPTED),
        outcomes,
        jobs,
        wall_seconds: t0.elapsed().as_secs_f64(),
    })
}

/// Runs member `i` on a one-thread rayon pool into `<sweep>/members/<NNNN>/` and writes its
/// `exit_code` (and `stderr.log` when that is not 0); skips a complete member and continues
/// one with a checkpoint. Nothing is printed.
pub fn run_member(sweep: &Sweep, i: usize, stop: Option<Arc<AtomicBool>>) -> MemberOutcome {
    let t0 = Instant::now();
    let dir = sweep.member_dir(i);
    let mut outcome = MemberOutcome {
        index: i,
        code: 0,
        message: None,
        seconds: 0.0,
        skipped: false,
        resumed: false,
    };
    let (code, message) = match scenario::load_with(&sweep.base, &sweep.overrides(i), LoadOptions::default()) {
        Err(e) => (2, Some(e.to_string())),
        Ok(scn) => {
            let as_run = std::fs::read_to_string(dir.join("scenario.toml")).ok();
            if super::member_complete(&dir) && as_run.as_deref() == Some(scn.resolved_toml().as_str()) {
                outcome.skipped = true;
                return outcome;
            }
            for f in [EXIT_CODE_FILE, STDERR_FILE] {
                let _ = std::fs::remove_file(dir.join(f));
            }
            let resume = dir.join(crate::run::checkpoint::FILE).is_file();
            let mut r = execute_one(&scn, &sweep.members_dir(), resume, stop.clone());
            if resume && matches!(&r, Err(RunFailure::BadInput(m)) if m.starts_with("--resume")) {
                // A checkpoint this member cannot continue from (another scenario or tinct
                // version, a damaged file): run it afresh.
                r = execute_one(&scn, &sweep.members_dir(), false, stop);
            } else {
                outcome.resumed = resume && r.is_ok();
            }
            match r {
                Ok(_) => (0, None),
                Err(e @ (RunFailure::BadInput(_) | RunFailure::Folder(_))) => (2, Some(e.to_string())),
                Err(e @ RunFailure::Interrupted(_)) => (INTERRUPTED, Some(e.to_string())),
                Err(e) => (1, Some(e.to_string())),
            }
        }
    };
    outcome.code = code;
    if let Err(e) = write_exit(&dir, code, message.as_deref()) {
        outcome.code = outcome.code.max(1);
        outcome.message = Some(format!("{}; writing the exit code: {e}", message.unwrap_or_default()));
    } else {
        outcome.message = message;
    }
    outcome.seconds = t0.elapsed().as_secs_f64();
    outcome
}

/// One run of `scn` under `<members>/` on its own one-thread pool, quiet.
fn execute_one(
    scn: &scenario::Scenario,
    members: &Path,
    resume: bool,
    stop: Option<Arc<AtomicBool>>,
) -> Result<crate::run::RunOutcome, RunFailure> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .map_err(|e| RunFailure::BadInput(format!("cannot start a thread for the member: {e}")))?;
    let options = RunOptions { stop, resume };
    pool.install(|| execute_with(scn, members, &options, &mut |_| {}, &mut |_| {}))
}

/// Writes `exit_code` and, when it is not 0, `stderr.log` into the member folder `dir`.
pub fn write_exit(dir: &Path, code: u8, message: Option<&str>) -> Result<(), output::OutputError> {
    std::fs::create_dir_all(dir).map_err(|e| output::OutputError::io(dir, e))?;
    if code != 0 {
        let text = format!("{}\n", message.unwrap_or("failed"));
        output::write_atomic(&dir.join(STDERR_FILE), text.as_bytes())?;
    }
    output::write_atomic(&dir.join(EXIT_CODE_FILE), format!("{code}\n").as_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;

    // Common practice: the memory rule by hand. 1e6 cells, 12 frames: 8 x 1e6 x 61 B + 32 MiB.
    #[test]
    fn memory_rule() {
        assert_eq!(member_bytes(1_000_000, 12), 488_000_000 + 33_554_432);
        let per = member_bytes(1_000_000, 12);
        assert_eq!(auto_jobs(2, per, Some(100 << 30)), 2);
        // 1 GB available: 0.8 GB / 0.52 GB = 1 member.
        assert_eq!(auto_jobs(8, per, Some(1_000_000_000)), 1);
        assert_eq!(auto_jobs(8, per, Some(0)), 1);
        assert_eq!(auto_jobs(3, per, None), 3);
    }
}
