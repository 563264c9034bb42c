//! `tinct converge`: runs a scenario on refined grids and reports, per quantity, the
//! three-grid results of Celik et al. (2008); writes `<out>/<name>/converge/`.

use super::compare::study_failure;
use super::{bad_input, failed, fmt_t, Failure};
use std::path::PathBuf;
use tinct::studies::converge::{converge, write_converge, ConvergeOptions};

/// Arguments of `tinct converge`.
#[derive(clap::Args)]
pub struct ConvergeArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Number of grids (at least 3); level k has nx ratio^k by ny ratio^k cells.
    #[arg(long, default_value_t = 3)]
    levels: usize,
    /// Integer refinement ratio between successive grids.
    #[arg(long, default_value_t = 2)]
    ratio: usize,
    /// Quantities, comma-separated: l1, mass, max, peak:RECEPTOR, arrival:RECEPTOR (default:
    /// every one available).
    #[arg(long = "quantity", value_delimiter = ',')]
    quantities: Vec<String>,
    /// Output folder (default: the scenario's `output.dir`); results go to
    /// `<DIR>/<name>/converge/`.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key (repeatable), as for `tinct run`.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// No progress on stderr.
    #[arg(long)]
    quiet: bool,
}

fn opt(v: Option<f64>, f: impl Fn(f64) -> String) -> String {
    v.map_or_else(|| "-".into(), f)
}

/// Runs `tinct converge`.
pub fn main(a: ConvergeArgs) -> Result<(), Failure> {
    let scn = tinct::scenario::load(&a.scenario, &a.sets).map_err(|e| bad_input(e.to_string()))?;
    let opts = ConvergeOptions {
        levels: a.levels,
        ratio: a.ratio,
        quantities: a.quantities,
        ..ConvergeOptions::default()
    };
    let dir = super::compare::study_folder(a.out.clone(), &scn, "converge")?;
    let quiet = a.quiet;
    if let Some(est) = tinct::diagnostics::regime::estimate_seconds(&scn) {
        // Level k has ratio^k times the cells in each direction and steps.
        let r = (opts.ratio as f64).powi(3);
        let total: f64 = (0..opts.levels).map(|k| est * r.powi(k as i32)).sum();
        if total > tinct::diagnostics::regime::LONG_WORK_SECONDS && !quiet {
            eprintln!(
                "tinct: this study will take about {} of computing ({} levels, the coarsest about {}); Ctrl-C stops it",
                fmt_t(total),
                opts.levels,
                fmt_t(est)
            );
        }
    }
    let mut on_level = |k: usize, nx: usize, ny: usize| {
        if !quiet {
            eprintln!("tinct: level {k}: {nx} x {ny} cells");
        }
    };
    let report = converge(&scn, &opts, &mut on_level).map_err(study_failure)?;
    let mut written = write_converge(&report, &dir).map_err(study_failure)?;
    written.push(tinct::report::write_converge_report(&dir, &report, &scn).map_err(|e| failed(e.to_string()))?);
    println!("scenario {}", report.scenario);
    for n in &report.notes {
        println!("{n}");
    }
    for (k, l) in report.levels.iter().enumerate() {
        println!(
            "level {k}: {} x {} cells, h = {:.4e} m, {} steps, {:.2} s",
            l.nx, l.ny, l.h, l.steps, l.seconds
        );
    }
    println!(
        "{:<26} {:>13} {:>8} {:>14} {:>9} {:>9} {:>9}  convergence",
        "quantity (finest triple)", "f1 (finest)", "p", "extrapolated", "e_a21", "e_ext21", "GCI_fine"
    );
    let pct = |x: f64| format!("{:.3}%", 100.0 * x);
    for q in &report.quantities {
        match q.finest() {
            Some(g) => {
                println!(
                    "{:<26} {:>13.6e} {:>8} {:>14} {:>9} {:>9} {:>9}  {}",
                    q.name,
                    g.f[0],
                    opt(g.p, |p| format!("{p:.3}")),
                    opt(g.extrapolated, |e| format!("{e:.6e}")),
                    opt(g.e_a21, pct),
                    opt(g.e_ext21, pct),
                    opt(g.gci_fine21, pct),
                    g.convergence.word()
                );
                let why = g.convergence.explain();
                if !why.is_empty() {
                    println!("  {}: {why}", q.name);
                }
            }
            None => println!("{:<26} undefined on at least one grid of the finest triple", q.name),
        }
    }
    println!("procedure: Celik et al. (2008), J. Fluids Eng. 130, 078001");
    for p in written {
        println!("wrote {}", p.display());
    }
    println!("{}", tinct::run::CAUTION);
    Ok(())
}
