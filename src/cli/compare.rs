//! `tinct compare`: runs a scenario once per scheme and writes `<out>/<name>/compare/`
//! (panel, profiles, metrics), then prints the metrics sorted by L1 error.

use super::{bad_input, failed, fmt_t, parse_schemes, Failure};
use std::path::PathBuf;
use tinct::ops::limiter::Limiter;
use tinct::step::TimeScheme;
use tinct::studies::compare::{compare, write_compare, CompareOptions, Section};
use tinct::studies::StudyError;

/// Arguments of `tinct compare`.
#[derive(clap::Args)]
pub struct CompareArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Convection schemes, comma-separated (`all` for every one).
    #[arg(long, value_delimiter = ',', default_value = "upwind,minmod,van_leer,superbee")]
    schemes: Vec<String>,
    /// Time schemes, comma-separated (default: the scenario's); each scheme runs with each.
    #[arg(long = "time", value_delimiter = ',')]
    times: Vec<String>,
    /// Reference scheme where the scenario has no exact solution.
    #[arg(long, default_value = "van_leer")]
    reference_scheme: String,
    /// Refinement factor of the reference run.
    #[arg(long, default_value_t = 4)]
    reference_refine: usize,
    /// Section of the profile plot: `y=VALUE` (along x) or `x=VALUE` (along y), m; default
    /// along x through the reference peak.
    #[arg(long)]
    section: Option<String>,
    /// Output folder (default: the scenario's `output.dir`); results go to
    /// `<DIR>/<name>/compare/`.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key (repeatable), as for `tinct run`.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// No progress on stderr.
    #[arg(long)]
    quiet: bool,
}

/// Maps a study error to an exit code.
pub fn study_failure(e: StudyError) -> Failure {
    match e {
        StudyError::BadInput(m) => bad_input(m),
        other => failed(other.to_string()),
    }
}

/// Runs `tinct compare`.
/// `<out or output.dir>/<name>/<study>`, checked writable before any run.
pub(super) fn study_folder(
    out: Option<PathBuf>,
    scn: &tinct::scenario::Scenario,
    study: &str,
) -> Result<PathBuf, Failure> {
    let dir = out
        .unwrap_or_else(|| scn.output.dir.clone())
        .join(&scn.name)
        .join(study);
    tinct::output::atomic::ensure_writable(&dir)
        .map_err(|e| bad_input(format!("the output folder cannot be written, so nothing was run: {e}")))?;
    Ok(dir)
}

pub fn main(a: CompareArgs) -> Result<(), Failure> {
    let scn = tinct::scenario::load(&a.scenario, &a.sets).map_err(|e| bad_input(e.to_string()))?;
    let times = a
        .times
        .iter()
        .map(|t| t.parse::<TimeScheme>().map_err(|e| bad_input(format!("--time: {e}"))))
        .collect::<Result<Vec<_>, _>>()?;
    let reference_scheme = a
        .reference_scheme
        .parse::<Limiter>()
        .map_err(|e| bad_input(format!("--reference-scheme: {e}")))?;
    let section = a
        .section
        .as_deref()
        .map(|s| s.parse::<Section>().map_err(|e| bad_input(format!("--section: {e}"))))
        .transpose()?;
    let opts = CompareOptions {
        schemes: parse_schemes(&a.schemes)?,
        times,
        reference_scheme,
        reference_refine: a.reference_refine,
        section,
        memory: None,
    };
    let dir = study_folder(a.out.clone(), &scn, "compare")?;
    let quiet = a.quiet;
    if let Some(est) = tinct::diagnostics::regime::estimate_seconds(&scn) {
        // One run per scheme and time scheme, plus a reference refined r times in x, y and t
        // when there is no exact solution.
        let runs = (opts.schemes.len() * opts.times.len().max(1)) as f64;
        let r = opts.reference_refine as f64;
        let reference = if tinct::studies::exact::exact_solution(&scn).is_none() {
            r * r * r
        } else {
            0.0
        };
        let total = est * (runs + reference);
        if total > tinct::diagnostics::regime::LONG_WORK_SECONDS && !quiet {
            eprintln!(
                "tinct: this comparison will take about {} of computing ({} run(s) of about {} each{}); Ctrl-C stops it",
                fmt_t(total),
                runs,
                fmt_t(est),
                if reference > 0.0 { format!(", and a reference refined {r} times") } else { String::new() }
            );
        }
    }
    let on_done = move |label: &str| {
        if !quiet {
            eprintln!("tinct: finished {label}");
        }
    };
    let report = compare(&scn, &opts, &on_done).map_err(study_failure)?;
    let mut written = write_compare(&report, &dir).map_err(study_failure)?;
    written.push(tinct::report::write_compare_report(&dir, &report, &scn).map_err(|e| failed(e.to_string()))?);
    println!("scenario {}: {}", report.scenario, report.reference.description);
    if let Some(src) = report.reference.source {
        println!("exact solution: {src}");
    }
    println!(
        "{:<22} {:>10} {:>10} {:>10} {:>10} {:>11} {:>10} {:>11} {:>12} {:>8}",
        "scheme", "l1", "l2", "linf", "peak_ratio", "min", "max", "mass_error", "k_numerical", "seconds"
    );
    for r in report.sorted_by_l1() {
        let n = &r.norms;
        println!(
            "{:<22} {:>10.4e} {:>10.4e} {:>10.4e} {:>10.4} {:>11.3e} {:>10.4} {:>11.2e} {:>12} {:>8.2}",
            r.label,
            n.l1,
            n.l2,
            n.linf,
            n.peak_ratio,
            n.min,
            n.max,
            r.mass_error,
            r.k_mean().map_or_else(|| "-".into(), |k| format!("{k:.4e}")),
            r.seconds
        );
    }
    println!(
        "l1, l2, linf relative to the reference's norms; k_numerical = mean over x and y of (moment-growth diffusivity - physical K), m2/s; {} run(s) at a time, so wall seconds include sharing the cores",
        report.concurrent
    );
    let mut reasons: Vec<(String, Vec<&str>)> = Vec::new();
    for r in &report.rows {
        if let Some(why) = &r.k_numerical_reason {
            match reasons.iter_mut().find(|(w, _)| w == why) {
                Some((_, labels)) => labels.push(&r.label),
                None => reasons.push((why.clone(), vec![&r.label])),
            }
        }
    }
    for (why, labels) in &reasons {
        println!("k_numerical not given for {}: {why}", labels.join(", "));
    }
    for r in &report.rows {
        for w in &r.warnings {
            eprintln!("tinct: warning ({}): {w}", r.label);
        }
    }
    for p in written {
        println!("wrote {}", p.display());
    }
    println!("{}", tinct::run::CAUTION);
    Ok(())
}
