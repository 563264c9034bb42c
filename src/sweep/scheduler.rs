//! The scheduler backend: everything specific to a batch scheduler is in this file.
//!
//! For Slurm it writes `<sweep>/array.sh`, an array job with one task per member that runs
//! `tinct sweep FILE --out OUT --member $SLURM_ARRAY_TASK_ID`, and `<sweep>/gather.sh`, a job
//! that runs `tinct sweep FILE --out OUT --gather`; [`submit`] hands them to `sbatch`, the
//! gather with `--dependency=afterok:<array job>` (it starts only when every task exited 0).
//! Members write into their own folders, so the sweep folder must be on a file system the
//! compute nodes share. To add another scheduler: a variant of [`Scheduler`], its two scripts in
//! [`write_scripts`] and its submit commands in [`submit`]; nothing else in tinct changes.

use super::{PrepareError, Sweep};
use crate::output::{self, OutputError};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::str::FromStr;

/// A batch scheduler tinct can write scripts for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scheduler {
    /// Slurm (`sbatch --array`).
    Slurm,
}

impl FromStr for Scheduler {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "slurm" => Ok(Self::Slurm),
            _ => Err(format!("\"{s}\" is not a known scheduler; allowed: slurm")),
        }
    }
}

/// Options of the scheduler scripts.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScriptOptions {
    /// Partition (queue) to submit to.
    pub partition: Option<String>,
    /// Time limit of each task, in the scheduler's syntax (Slurm: `MM`, `HH:MM:SS`, `D-HH:MM`).
    pub time: Option<String>,
    /// Most tasks running at once (`%K` of the array).
    pub max_parallel: Option<usize>,
}

/// The scripts written.
#[derive(Debug, Clone, PartialEq)]
pub struct Scripts {
    /// `<sweep>/array.sh`.
    pub array: PathBuf,
    /// `<sweep>/gather.sh`.
    pub gather: PathBuf,
}

/// Job ids of a submission.
#[derive(Debug, Clone, PartialEq)]
pub struct Submitted {
    /// The array job.
    pub array: String,
    /// The gather job (runs after every task succeeded).
    pub gather: String,
}

/// Why scripts cannot be written or submitted.
#[derive(Debug, thiserror::Error)]
pub enum SchedulerError {
    /// An option the scheduler would refuse (exit code 2).
    #[error("{0}")]
    BadOption(String),
    /// The sweep folder cannot be prepared.
    #[error(transparent)]
    Prepare(#[from] PrepareError),
    /// A script cannot be written.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// `sbatch` failed or cannot be started.
    #[error("{0}")]
    Submit(String),
}

/// Checks the options: a partition name without spaces or quotes, a time limit in Slurm's
/// syntax, at least one task at once.
pub fn check_options(o: &ScriptOptions) -> Result<(), SchedulerError> {
    if let Some(p) = &o.partition {
        if p.is_empty() || !p.chars().all(|c| c.is_ascii_alphanumeric() || "_-.,".contains(c)) {
            return Err(SchedulerError::BadOption(format!(
                "--partition \"{p}\": allowed: letters, digits and _ - . , (a partition name or a comma-separated list)"
            )));
        }
    }
    if let Some(t) = &o.time {
        if !valid_time(t) {
            return Err(SchedulerError::BadOption(format!(
                "--time \"{t}\": allowed: MM, MM:SS, HH:MM:SS, D-HH, D-HH:MM or D-HH:MM:SS (whole numbers)"
            )));
        }
    }
    if o.max_parallel == Some(0) {
        return Err(SchedulerError::BadOption(
            "--max-parallel 0: allowed: 1 or more tasks at once".into(),
        ));
    }
    Ok(())
}

/// Slurm's time formats: `M`, `M:S`, `H:M:S`, `D-H`, `D-H:M`, `D-H:M:S`.
fn valid_time(t: &str) -> bool {
    let num = |s: &str| !s.is_empty() && s.len() <= 6 && s.chars().all(|c| c.is_ascii_digit());
    let (days, rest) = match t.split_once('-') {
        Some((d, r)) => (Some(d), r),
        None => (None, t),
    };
    let parts: Vec<&str> = rest.split(':').collect();
    days.is_none_or(num) && parts.iter().all(|p| num(p)) && parts.len() <= 3
}

/// A word for a shell script, single-quoted.
fn quote(s: &str) -> String {
    format!("'{}'", s.replace('\'', "'\\''"))
}

/// The job name: the sweep's name with anything unusual replaced.
fn job_name(name: &str) -> String {
    let n: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || "_-.".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect();
    format!("tinct-{n}")
}

/// Writes `members.csv`, `array.sh` and `gather.sh` for `scheduler`; the tasks run the tinct
/// executable `exe` (absolute) on the sweep file with `--out` the sweep folder's parent.
pub fn write_scripts(
    sweep: &Sweep,
    scheduler: Scheduler,
    exe: &Path,
    o: &ScriptOptions,
) -> Result<Scripts, SchedulerError> {
    check_options(o)?;
    sweep.prepare()?;
    let logs = sweep.root.join("logs");
    std::fs::create_dir_all(&logs).map_err(|e| OutputError::io(&logs, e))?;
    let out = sweep.root.parent().unwrap_or(&sweep.root);
    let tinct = format!(
        "{} sweep {} --out {}",
        quote(&exe.to_string_lossy()),
        quote(&sweep.file.to_string_lossy()),
        quote(&out.to_string_lossy())
    );
    let n = sweep.members.len();
    let root = quote(&sweep.root.to_string_lossy());
    let (array, gather) = match scheduler {
        Scheduler::Slurm => {
            let mut head = String::from("#!/bin/bash\n");
            let sb = |h: &mut String, s: String| h.push_str(&format!("#SBATCH {s}\n"));
            let throttle = o.max_parallel.map(|k| format!("%{k}")).unwrap_or_default();
            sb(&mut head, format!("--job-name={}", job_name(&sweep.name)));
            if let Some(p) = &o.partition {
                sb(&mut head, format!("--partition={p}"));
            }
            if let Some(t) = &o.time {
                sb(&mut head, format!("--time={t}"));
            }
            let mut array = head.clone();
            sb(&mut array, format!("--array=0-{}{throttle}", n - 1));
            sb(&mut array, format!("--output={}/logs/%a.out", sweep.root.display()));
            array.push_str(&format!(
                r#"# One member of the sweep "{name}" per array task, written by `tinct sweep --scheduler slurm`.
# The member's stderr is appended to its stderr.log when it fails; exit_code is written even
# when tinct could not write it; the task exits with tinct's code.
echo "tinct sweep task: SLURM_ARRAY_JOB_ID=$SLURM_ARRAY_JOB_ID SLURM_ARRAY_TASK_ID=$SLURM_ARRAY_TASK_ID SLURM_JOB_ID=$SLURM_JOB_ID host=$(hostname)"
i=$SLURM_ARRAY_TASK_ID
root={root}
dir="$root/members/$(printf '%0{w}d' "$i")"
err="$root/logs/$i.err"
{tinct} --member "$i" 2>"$err"
code=$?
cat "$err" >&2
if [ "$code" -ne 0 ]; then
    mkdir -p "$dir"
    cat "$err" >>"$dir/stderr.log"
    echo "$code" >"$dir/exit_code"
fi
rm -f "$err"
exit "$code"
"#,
                name = sweep.name.replace('\n', " "),
                w = sweep.index_width(),
            ));
            let mut gather = head;
            sb(
                &mut gather,
                format!("--output={}/logs/gather.out", sweep.root.display()),
            );
            gather.push_str(&format!(
                "# Gathers the sweep \"{}\" once every member succeeded (submitted with --dependency=afterok).\n{tinct} --gather\n",
                sweep.name.replace('\n', " ")
            ));
            (array, gather)
        }
    };
    let scripts = Scripts {
        array: sweep.root.join("array.sh"),
        gather: sweep.root.join("gather.sh"),
    };
    output::write_atomic(&scripts.array, array.as_bytes())?;
    output::write_atomic(&scripts.gather, gather.as_bytes())?;
    Ok(scripts)
}

/// Submits the array job, then the gather job after it (`afterok`), and returns their ids.
pub fn submit(scheduler: Scheduler, scripts: &Scripts) -> Result<Submitted, SchedulerError> {
    match scheduler {
        Scheduler::Slurm => {
            let array = sbatch(&[], &scripts.array)?;
            let gather = sbatch(&[format!("--dependency=afterok:{array}")], &scripts.gather)?;
            Ok(Submitted { array, gather })
        }
    }
}

/// `sbatch --parsable [args] script`: the job id (before any `;cluster`).
fn sbatch(args: &[String], script: &Path) -> Result<String, SchedulerError> {
    let out = Command::new("sbatch")
        .arg("--parsable")
        .args(args)
        .arg(script)
        .output()
        .map_err(|e| SchedulerError::Submit(format!("cannot start sbatch: {e} (is Slurm installed and on PATH?)")))?;
    let stdout = String::from_utf8_lossy(&out.stdout);
    let id = stdout.trim().split(';').next().unwrap_or("").to_string();
    if !out.status.success() || id.is_empty() || !id.chars().all(|c| c.is_ascii_digit()) {
        return Err(SchedulerError::Submit(format!(
            "sbatch {} failed ({}): {}{}",
            script.display(),
            out.status,
            stdout.trim(),
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    Ok(id)
}

/// Commands to follow jobs `ids` (`squeue`, `sacct`).
pub fn follow_commands(scheduler: Scheduler, ids: &[&str]) -> Vec<String> {
    match scheduler {
        Scheduler::Slurm => {
            let list = ids.join(",");
            vec![format!("squeue -j {list}"), format!("sacct -j {list}")]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Slurm's documented --time formats (sbatch manual, from memory).
    #[test]
    fn time_formats() {
        for t in ["30", "30:00", "1:30:00", "2-0", "2-12:00", "2-12:00:00"] {
            assert!(valid_time(t), "{t}");
        }
        for t in ["", "1h", "1:2:3:4", "-5", "1-", "1-2:3:4:5", "a:b"] {
            assert!(!valid_time(t), "{t}");
        }
    }

    #[test]
    fn quoting_survives_quotes() {
        assert_eq!(quote("a b'c"), "'a b'\\''c'");
        assert_eq!(job_name("my sweep/1"), "tinct-my_sweep_1");
    }
}
