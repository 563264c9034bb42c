//! `tinct sweep`: runs a sweep's members on this machine and gathers them, runs one member
//! (`--member`, as a scheduler task does), gathers (`--gather`), or writes and submits the
//! scheduler scripts (`--scheduler slurm [--submit]`).

use super::{bad_input, failed, run::stop_on_signals, Failure};
use std::path::PathBuf;
use tinct::sweep::scheduler::{self, Scheduler, ScriptOptions};
use tinct::sweep::{self, LocalOptions, MemberEvent, Sweep};

/// Arguments of `tinct sweep`.
#[derive(clap::Args)]
pub struct SweepArgs {
    /// The sweep file (TOML): `base`, `[axes]`, optional `name`, `samples`, `seed`.
    sweep: PathBuf,
    /// Output folder (default: the base scenario's `output.dir`, else `out`); the sweep goes
    /// to `<DIR>/<sweep name>/`, relative to the working directory.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Members run at once on this machine (default: as many as cores and memory allow).
    #[arg(long, value_name = "K", conflicts_with_all = ["member", "gather", "scheduler"])]
    jobs: Option<usize>,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    /// Run member I only (what each scheduler task does).
    #[arg(long, value_name = "I", conflicts_with_all = ["gather", "scheduler"])]
    member: Option<usize>,
    /// Gather the members' results only (`<sweep>/gather/`, `<sweep>/report.html`).
    #[arg(long, conflicts_with = "scheduler")]
    gather: bool,
    /// Write the scripts of an array job for this batch scheduler instead of running here.
    #[arg(long, value_name = "NAME", value_parser = ["slurm"])]
    scheduler: Option<String>,
    /// Scheduler partition (queue).
    #[arg(long, value_name = "P", requires = "scheduler")]
    partition: Option<String>,
    /// Time limit of each task, e.g. 30, 1:00:00 or 1-00:00:00.
    #[arg(long, value_name = "T", requires = "scheduler")]
    time: Option<String>,
    /// Most tasks running at once.
    #[arg(long, value_name = "K", requires = "scheduler")]
    max_parallel: Option<usize>,
    /// Submit the scripts (the array job, then the gather job after it).
    #[arg(long, requires = "scheduler")]
    submit: bool,
}

/// Runs `tinct sweep`.
pub fn main(a: SweepArgs) -> Result<(), Failure> {
    if a.jobs == Some(0) {
        return Err(bad_input("--jobs 0: allowed: 1 or more members at once"));
    }
    let out = a.out.as_deref();
    if let Some(i) = a.member {
        let sweep = sweep::load_member(&a.sweep, out, i).map_err(|e| bad_input(e.to_string()))?;
        return member(&sweep, i);
    }
    let sweep = sweep::load(&a.sweep, out).map_err(|e| bad_input(e.to_string()))?;
    if a.gather {
        return gather(&sweep);
    }
    if let Some(name) = &a.scheduler {
        let sched: Scheduler = name.parse().map_err(bad_input)?;
        let opts = ScriptOptions {
            partition: a.partition.clone(),
            time: a.time.clone(),
            max_parallel: a.max_parallel,
        };
        return scripts(&sweep, &a, sched, &opts);
    }
    local(&sweep, &a)
}

/// The command that names this sweep (file and `--out`), quoted for a shell.
fn command(a: &SweepArgs) -> String {
    let quote = |s: &str| {
        if !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || "/._-=+,:".contains(c)) {
            s.to_string()
        } else {
            format!("'{}'", s.replace('\'', "'\\''"))
        }
    };
    let mut cmd = format!("tinct sweep {}", quote(&a.sweep.to_string_lossy()));
    if let Some(o) = &a.out {
        cmd.push_str(&format!(" --out {}", quote(&o.to_string_lossy())));
    }
    cmd
}

/// `--member I`: one member, its exit code as the process's.
fn member(sweep: &Sweep, i: usize) -> Result<(), Failure> {
    let stop = stop_on_signals().map_err(|e| failed(format!("cannot handle interruption signals: {e}")))?;
    let o = sweep::run_member(sweep, i, Some(stop));
    let dir = sweep.member_dir(i);
    if o.code == 0 {
        let how = if o.skipped {
            "already complete, not run again"
        } else if o.resumed {
            "completed (continued from its checkpoint)"
        } else {
            "completed"
        };
        println!("member {i}: {how}, {:.1} s; results in {}", o.seconds, dir.display());
        Ok(())
    } else {
        Err(Failure {
            code: o.code,
            message: format!("member {i}: {}", o.message.unwrap_or_default()),
        })
    }
}

/// `--gather`: gathers and prints the answers (the library computes, this prints).
fn gather(sweep: &Sweep) -> Result<(), Failure> {
    use tinct::sweep::gather::{MemberState, Quantity};
    let s = tinct::sweep::gather::gather(&sweep.root).map_err(|e| Failure {
        code: u8::try_from(e.exit_code()).unwrap_or(1),
        message: e.to_string(),
    })?;
    println!("sweep {}: {}", s.name, s.finished_line());
    for m in &s.members {
        if let MemberState::Failed {
            exit_code,
            reason,
            stderr_tail,
        } = &m.state
        {
            let code = exit_code.map_or_else(|| "no exit code".to_string(), |c| format!("exit code {c}"));
            println!("  member {} ({}): {code}; {reason}", m.index, m.describe(&s.keys));
            if let Some(last) = stderr_tail.last() {
                println!("    stderr: {last}");
            }
        }
    }
    let units = &s.tracer.1;
    for r in &s.receptors {
        let peak = r.get(Quantity::Peak);
        if let Some(d) = peak.dist {
            println!(
                "  {}: peak 5/50/95 % {:.3e} / {:.3e} / {:.3e} {units} over {} member(s)",
                r.name, d.p5, d.p50, d.p95, r.members
            );
        }
        if let Some(t) = r.threshold {
            println!("    reached {t:e} {units} in {} of {} member(s)", r.reached, r.members);
        }
        if let Some(w) = &peak.worst {
            let at: Vec<String> = s
                .keys
                .iter()
                .zip(&w.values)
                .map(|(k, v)| format!("{k} = {v}"))
                .collect();
            println!(
                "    highest peak {:.3e} {units}: member {} ({})",
                w.value,
                w.member,
                at.join(", ")
            );
        }
    }
    for m in &s.maps {
        println!(
            "  probability of reaching {:e} {units}: {} cell(s) in some member, {} in every one ({})",
            m.threshold, m.cells_any, m.cells_all, m.png
        );
    }
    println!(
        "gathered: {} and {}",
        sweep.root.join("gather").display(),
        s.report.display()
    );
    Ok(())
}

/// `--scheduler NAME [--submit]`.
fn scripts(sweep: &Sweep, a: &SweepArgs, sched: Scheduler, opts: &ScriptOptions) -> Result<(), Failure> {
    let exe = std::env::current_exe().map_err(|e| failed(format!("cannot find the tinct executable: {e}")))?;
    let written = scheduler::write_scripts(sweep, sched, &exe, opts).map_err(|e| match e {
        scheduler::SchedulerError::BadOption(m) => bad_input(m),
        e => failed(e.to_string()),
    })?;
    let n = sweep.members.len();
    println!(
        "sweep {}: {n} members; wrote {} (an array of {n} tasks) and {} (the gather, after every task succeeded)",
        sweep.name,
        written.array.display(),
        written.gather.display()
    );
    if !a.submit {
        println!("submit them with:");
        println!(
            "  a=$(sbatch --parsable {}) && sbatch --dependency=afterok:$a {}",
            written.array.display(),
            written.gather.display()
        );
        println!("or run `{} --scheduler slurm --submit`", command(a));
        return Ok(());
    }
    let ids = scheduler::submit(sched, &written).map_err(|e| failed(e.to_string()))?;
    println!(
        "submitted: array job {} ({n} tasks), gather job {}",
        ids.array, ids.gather
    );
    println!("follow them with:");
    for c in scheduler::follow_commands(sched, &[&ids.array, &ids.gather]) {
        println!("  {c}");
    }
    println!(
        "task logs: {}/logs/<index>.out; members' results: {}/<NNNN>/",
        sweep.root.display(),
        sweep.members_dir().display()
    );
    println!(
        "results: {}/gather/ and {}/report.html once the gather job ends",
        sweep.root.display(),
        sweep.root.display()
    );
    println!(
        "if a member fails, the gather job does not start (it needs every task to exit 0); run `{} --gather` by hand then: it reports on the members that finished and lists the failed ones",
        command(a)
    );
    Ok(())
}

/// The local backend, then the gather.
fn local(sweep: &Sweep, a: &SweepArgs) -> Result<(), Failure> {
    use indicatif::{ProgressBar, ProgressStyle};
    let n = sweep.members.len();
    let complete = (0..n).filter(|&i| sweep.is_complete(i)).count();
    if !a.quiet {
        eprintln!(
            "tinct: sweep {}: {n} members, {} in {}",
            sweep.name,
            if complete > 0 {
                format!("{complete} already complete (not run again)")
            } else {
                "none run yet".into()
            },
            sweep.root.display()
        );
    }
    let stop = stop_on_signals().map_err(|e| failed(format!("cannot handle interruption signals: {e}")))?;
    let bar = if a.quiet {
        ProgressBar::hidden()
    } else {
        ProgressBar::new(n as u64)
    };
    bar.set_style(
        ProgressStyle::with_template(
            "{spinner} [{bar:32}] {pos}/{len} members {msg}  elapsed {elapsed}, about {eta} to go",
        )
        .expect("valid template")
        .progress_chars("=> "),
    );
    let failures = std::sync::atomic::AtomicUsize::new(0);
    let on_event = |e: &MemberEvent| {
        if let MemberEvent::Finished(o) = e {
            if o.code != 0 && o.code != sweep::local::INTERRUPTED {
                let f = failures.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                bar.set_message(format!("({f} failed)"));
            }
            if o.code != sweep::local::INTERRUPTED {
                bar.inc(1);
            }
        }
    };
    let options = LocalOptions {
        jobs: a.jobs,
        stop: Some(stop),
    };
    let s = sweep::run_local(sweep, &options, &on_event).map_err(|e| bad_input(e.to_string()))?;
    bar.finish_and_clear();
    let failed_members = s.failed();
    let real_failures: Vec<_> = failed_members
        .iter()
        .filter(|o| o.code != sweep::local::INTERRUPTED)
        .collect();
    println!(
        "sweep {}: ran {} members, skipped {} already complete, {} failed; {} at a time, {:.1} s wall",
        sweep.name,
        s.ran(),
        s.skipped(),
        real_failures.len(),
        s.jobs,
        s.wall_seconds
    );
    if let Some(r) = s.busy_ratio() {
        println!(
            "  members' own times sum to {:.1} s: wall / (sum / {}) = {r:.2} (1 = every worker busy all the time)",
            s.member_seconds(),
            s.jobs.min(s.ran())
        );
    }
    for o in &real_failures {
        let msg = o.message.as_deref().unwrap_or("").lines().next().unwrap_or("");
        println!("  member {} failed (exit {}): {msg}", o.index, o.code);
    }
    if s.interrupted {
        return Err(Failure {
            code: sweep::local::INTERRUPTED,
            message: format!(
                "sweep interrupted; the members under way stopped at a checkpoint and the finished ones are kept in {}\ncontinue the sweep with: {}",
                sweep.members_dir().display(),
                command(a)
            ),
        });
    }
    gather(sweep)?;
    if !real_failures.is_empty() {
        let list: Vec<String> = real_failures.iter().map(|o| o.index.to_string()).collect();
        return Err(failed(format!(
            "{} of {n} members failed ({}); their exit_code and stderr.log are in {}/<NNNN>/",
            real_failures.len(),
            list.join(", "),
            sweep.members_dir().display()
        )));
    }
    Ok(())
}
