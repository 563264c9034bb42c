//! `tinct run`: runs a scenario, with a progress bar, and prints the result table.

use super::{bad_input, failed, fmt_t, Failure};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

/// Exit code of a run stopped by SIGINT or SIGTERM (128 + SIGINT, as shells report it).
pub const INTERRUPTED: u8 = 130;

/// Arguments of `tinct run`.
#[derive(clap::Args)]
pub struct RunArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Output folder (default: the scenario's `output.dir`, else `out`); results go to
    /// `<DIR>/<name>/`. `--out` and `output.dir` are relative to the working directory (the
    /// folder tinct is started in), while the inputs a scenario names (`grid.land`,
    /// `grid.depth`, `flow.path`) are relative to the scenario file.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key, e.g. `--set scheme.convection=superbee` (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// No progress bar or warnings on stderr.
    #[arg(long)]
    quiet: bool,
    /// Run even with a fixed `scheme.dt` above the explicit stability limit (to demonstrate
    /// the instability; never for results).
    #[arg(long)]
    force: bool,
    /// Allow more frames than the run has steps (each frame then forces a step of its own and
    /// a picture).
    #[arg(long)]
    all_frames: bool,
    /// Continue an interrupted or killed run from `<DIR>/<name>/checkpoint.bin` (the same
    /// scenario, `--set` overrides and `--out` as the first run; the result is bit-identical
    /// to an uninterrupted run on the same machine).
    #[arg(long)]
    resume: bool,
}

/// Runs `tinct run`.
pub fn main(a: RunArgs) -> Result<(), Failure> {
    let RunArgs {
        scenario,
        out,
        sets,
        quiet,
        force,
        all_frames,
        resume,
    } = a;
    let path = scenario.as_path();
    let sets = &sets[..];
    use indicatif::{ProgressBar, ProgressStyle};
    use tinct::run::{execute_with, RunFailure, RunOptions};
    let options = tinct::scenario::LoadOptions {
        allow_unstable: force,
        many_frames: all_frames,
    };
    let scn = tinct::scenario::load_with(path, sets, options).map_err(|e| bad_input(e.to_string()))?;
    let out_arg = out.clone();
    let base = out.unwrap_or_else(|| scn.output.dir.clone());
    let bar = if quiet {
        ProgressBar::hidden()
    } else {
        ProgressBar::new(1000)
    };
    bar.set_style(
        ProgressStyle::with_template("{spinner} [{bar:32}] {msg}  elapsed {elapsed}, about {eta} to go")
            .expect("valid template")
            .progress_chars("=> "),
    );
    let mut last_draw = std::time::Instant::now();
    let mut progress = |p: tinct::run::Progress| {
        if last_draw.elapsed().as_millis() >= 100 || p.t >= p.end {
            last_draw = std::time::Instant::now();
            bar.set_position((p.t / p.end * 1000.0).round() as u64);
            bar.set_message(format!(
                "t = {} of {}, step {}, dt {:.3e} s",
                fmt_t(p.t),
                fmt_t(p.end),
                p.step,
                p.dt
            ));
        }
    };
    let mut on_start = |warnings: &[String]| {
        if !quiet {
            for w in warnings {
                bar.suspend(|| eprintln!("tinct: warning: {w}"));
            }
        }
    };
    if let Some(est) = tinct::diagnostics::regime::estimate_seconds(&scn) {
        if est > tinct::diagnostics::regime::LONG_WORK_SECONDS && !quiet {
            eprintln!(
                "tinct: this run will take about {} of wall time (estimated from a timed step; `tinct check` gives the detail); Ctrl-C stops it",
                fmt_t(est)
            );
        }
    }
    let stop = stop_on_signals().map_err(|e| failed(format!("cannot handle interruption signals: {e}")))?;
    let options = RunOptions {
        stop: Some(stop),
        resume,
    };
    let result = execute_with(&scn, &base, &options, &mut on_start, &mut progress);
    bar.finish_and_clear();
    match result {
        Ok(outcome) => {
            print_outcome(&outcome);
            Ok(())
        }
        Err(RunFailure::BadInput(m)) => Err(bad_input(m)),
        Err(e @ RunFailure::Folder(_)) => Err(bad_input(e.to_string())),
        Err(RunFailure::Interrupted(outcome)) => {
            print_outcome(&outcome);
            Err(Failure {
                code: INTERRUPTED,
                message: format!(
                    "interrupted at t = {}; the results up to then are in {}\ncontinue the run with: {}",
                    fmt_t(outcome.summary.simulated_time),
                    outcome.dir.display(),
                    resume_command(path, out_arg.as_deref(), sets)
                ),
            })
        }
        Err(RunFailure::Output(e)) => Err(failed(format!("writing results: {e}"))),
        Err(RunFailure::Stopped { error, outcome }) => {
            print_outcome(&outcome);
            Err(failed(format!(
                "{error}\nthe results up to that step are in {}",
                outcome.dir.display()
            )))
        }
    }
}

/// A stop flag raised by the first SIGINT or SIGTERM; a second one ends the process at once
/// with exit code 130 (every file in the folder is complete at any moment: logs are appended by
/// whole rows, the rest is written atomically).
pub fn stop_on_signals() -> std::io::Result<Arc<AtomicBool>> {
    use signal_hook::{consts::TERM_SIGNALS, flag};
    let stop = Arc::new(AtomicBool::new(false));
    for &sig in TERM_SIGNALS {
        // Registered first, so it sees the flag before the second handler raises it.
        flag::register_conditional_shutdown(sig, i32::from(INTERRUPTED), Arc::clone(&stop))?;
        flag::register(sig, Arc::clone(&stop))?;
    }
    Ok(stop)
}

/// The command that continues an interrupted run (the arguments that name its scenario and
/// folder).
fn resume_command(scenario: &Path, out: Option<&Path>, sets: &[String]) -> String {
    let quote = |s: &str| {
        if !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || "/._-=+,:".contains(c)) {
            s.to_string()
        } else {
            format!("'{}'", s.replace('\'', "'\\''"))
        }
    };
    let mut cmd = format!("tinct run {} --resume", quote(&scenario.to_string_lossy()));
    if let Some(o) = out {
        cmd.push_str(&format!(" --out {}", quote(&o.to_string_lossy())));
    }
    for s in sets {
        cmd.push_str(&format!(" --set {}", quote(s)));
    }
    cmd
}

fn print_outcome(o: &tinct::run::RunOutcome) {
    // A closed stdout (e.g. piped into `head`) is not an error of the run.
    let _ = write_outcome(o, &mut std::io::stdout().lock());
}

fn write_outcome(o: &tinct::run::RunOutcome, out: &mut impl std::io::Write) -> std::io::Result<()> {
    let s = &o.summary;
    writeln!(
        out,
        "{} ({}): {} steps to t = {}, dt {:.3e} to {:.3e} s, {:.1} s wall ({:.1} M cell updates/s)",
        s.scenario,
        s.status,
        s.steps,
        fmt_t(s.simulated_time),
        s.dt_min,
        s.dt_max,
        s.wall_seconds,
        s.cell_updates_per_second / 1e6
    )?;
    if let Some((step, t)) = o.resumed_from {
        writeln!(out, "  resumed from the checkpoint at step {step} (t = {})", fmt_t(t))?;
    }
    writeln!(out, "  mass: start {:.6e}, end {:.6e}; added {:.4e}, in {:.4e}, out {:.4e}, decayed {:.4e}; largest budget residual {:.1e}", s.initial_mass, s.final_mass, s.added, s.inflow, s.outflow, s.decayed, s.max_abs_residual)?;
    writeln!(out, "  concentration: min {:.4e}, max {:.4e}", s.min_ever, s.max_ever)?;
    for w in &s.warnings {
        writeln!(out, "  WARNING: {w}")?;
    }
    if let Some(f) = &s.flushing {
        writeln!(out, "  flushing: {}", f.note)?;
    }
    if !s.receptors.is_empty() {
        writeln!(
            out,
            "  {:<20} {:>12} {:>12} {:>14} {:>14}",
            "receptor", "peak", "peak at", "arrival", "above thr."
        )?;
        for r in &s.receptors {
            let arr = r.arrival_time.map(fmt_t).unwrap_or_else(|| "-".into());
            let above = r.time_above_threshold.map(fmt_t).unwrap_or_else(|| "-".into());
            writeln!(
                out,
                "  {:<20} {:>12.4e} {:>12} {:>14} {:>14}",
                r.name,
                r.peak,
                fmt_t(r.peak_time),
                arr,
                above
            )?;
        }
    }
    for e in &s.exceedance {
        let at = e
            .longest_at
            .map(|(x, y)| {
                format!(
                    " (longest {} at x = {x:.0} m, y = {y:.0} m)",
                    fmt_t(e.longest_time_above)
                )
            })
            .unwrap_or_default();
        writeln!(
            out,
            "  above {:e} ({}): largest area {:.4e} m2 at t = {}; ever above {:.4e} m2{at}",
            e.threshold,
            e.receptors.join(", "),
            e.largest_area,
            fmt_t(e.largest_area_time),
            e.area_ever_above,
        )?;
    }
    writeln!(
        out,
        "  results: {} (summary.json, budget.csv, receptors.csv, fields.nc, {} frames)",
        o.dir.display(),
        s.frames
    )?;
    writeln!(out, "  caution: {}", s.caution)?;
    Ok(())
}
