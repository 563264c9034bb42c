//! `tinct particles`: the scenario's releases followed by random-walk particles, compared with
//! the grid run at each receptor.

use super::run::{stop_on_signals, INTERRUPTED};
use super::{bad_input, failed, fmt_t, Failure};
use std::path::PathBuf;
use tinct::run::particles as rp;
use tinct::run::RunFailure;

/// Arguments of `tinct particles`.
#[derive(clap::Args)]
pub struct ParticlesArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Particles, spread over the releases and the initial field by mass (default:
    /// `run.particles`, else 200000).
    #[arg(long, value_parser = clap::value_parser!(u64).range(1..=50_000_000))]
    particles: Option<u64>,
    /// Seed of the random streams (the same seed gives the same particles on any number of
    /// threads).
    #[arg(long, default_value_t = rp::DEFAULT_SEED)]
    seed: u64,
    /// Output folder (default: the scenario's `output.dir`, else `out`); the particle files go
    /// to `<DIR>/<name>/particles/`.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key, e.g. `--set tracer.diffusivity=2` (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// No progress bar on stderr.
    #[arg(long)]
    quiet: bool,
}

/// Runs `tinct particles`.
pub fn main(a: ParticlesArgs) -> Result<(), Failure> {
    use indicatif::{ProgressBar, ProgressStyle};
    let scn =
        tinct::scenario::load_with(&a.scenario, &a.sets, Default::default()).map_err(|e| bad_input(e.to_string()))?;
    let count = a
        .particles
        .map(|n| n as usize)
        .or(scn.run.particles)
        .unwrap_or(rp::DEFAULT_COUNT);
    let base = a.out.clone().unwrap_or_else(|| scn.output.dir.clone());
    let run_dir = base.join(&scn.name);
    let as_failure = |e: RunFailure| match e {
        RunFailure::BadInput(m) => bad_input(m),
        RunFailure::Folder(e) => bad_input(format!("the output folder cannot be used: {e}")),
        other => failed(other.to_string()),
    };
    let model = scn
        .build_model()
        .map_err(|e| bad_input(format!("{}: {e}", scn.path.display())))?;
    let _lock = tinct::run::folder::lock_folder(&run_dir)
        .map_err(|e| bad_input(format!("the output folder cannot be used: {e}")))?;
    let stop = stop_on_signals().map_err(|e| failed(format!("cannot handle interruption signals: {e}")))?;
    let bar = if a.quiet {
        ProgressBar::hidden()
    } else {
        ProgressBar::new(1000)
    };
    bar.set_style(
        ProgressStyle::with_template("{spinner} [{bar:32}] {msg}  elapsed {elapsed}")
            .expect("valid template")
            .progress_chars("=> "),
    );
    bar.set_message("the grid run, for the comparison");
    let grid = rp::grid_receptors(&scn, Some(&stop)).map_err(as_failure)?;
    let end = scn.run.end;
    let mut last = std::time::Instant::now();
    let mut tell = |t: f64| {
        if last.elapsed().as_millis() >= 100 || t >= end {
            last = std::time::Instant::now();
            bar.set_position((t / end * 1000.0).round() as u64);
            bar.set_message(format!("{count} particles, t = {} of {}", fmt_t(t), fmt_t(end)));
        }
    };
    let (run, wall) = rp::march_particles(&scn, &model, count, a.seed, Some(&stop), &mut tell).map_err(as_failure)?;
    bar.finish_and_clear();
    let summary = rp::write_particle_outputs(&run_dir, &scn, &model, &run, &grid, wall)
        .map_err(|e| failed(format!("writing results: {e}")))?;
    let attached = rp::attach_to_run(&run_dir, &scn, &summary).map_err(|e| failed(format!("writing results: {e}")))?;
    print_summary(&summary, &run_dir, attached, &scn.tracer.units);
    if run.interrupted {
        return Err(Failure {
            code: INTERRUPTED,
            message: format!(
                "interrupted at particle time t = {}; the results up to then are in {}",
                fmt_t(summary.simulated_time),
                run_dir.join(rp::FOLDER).display()
            ),
        });
    }
    Ok(())
}

fn print_summary(s: &rp::ParticleSummary, dir: &std::path::Path, attached: bool, units: &str) {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    let _ = (|| -> std::io::Result<()> {
        writeln!(
            out,
            "particles ({}): {} particles, {} steps of {:.3e} s to t = {}, {:.2} s wall ({:.1} M particle steps/s)",
            s.status,
            s.particles,
            s.steps,
            s.dt,
            fmt_t(s.simulated_time),
            s.wall_seconds,
            s.particle_steps_per_second / 1e6
        )?;
        writeln!(
            out,
            "  mass: released {:.6e}, in water {:.6e}, out {:.4e}, decayed {:.4e}; largest budget residual {:.1e}",
            s.released, s.in_water, s.outflow, s.decayed, s.max_abs_residual
        )?;
        if !s.receptors.is_empty() {
            writeln!(
                out,
                "  {:<20} {:>12} {:>24} {:>10}  verdict",
                "receptor",
                format!("grid [{units}]"),
                "particles ± s.e.",
                "in cell"
            )?;
            for r in &s.receptors {
                let verdict = r.verdict.as_str();
                writeln!(
                    out,
                    "  {:<20} {:>12.4e} {:>24} {:>10}  {verdict}",
                    r.name,
                    r.grid_peak,
                    format!("{:.4e} ± {:.2e}", r.particle_peak, r.particle_std_error),
                    r.particle_count
                )?;
            }
            for r in &s.receptors {
                writeln!(out, "  {}: {}", r.name, r.sentence)?;
            }
        }
        writeln!(out, "  results: {}", dir.join(rp::FOLDER).display())?;
        if attached {
            writeln!(
                out,
                "  added to the grid run's summary.json and report.html in {}",
                dir.display()
            )?;
        }
        writeln!(out, "  caution: {}", s.caution)
    })();
}
