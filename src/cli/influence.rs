//! `tinct influence`: the influence map of one receptor from one backward (adjoint) run, its
//! files in `<dir>/<name>/influence/<receptor>/` and the ranked candidates printed.

use super::{bad_input, failed, fmt_t, Failure};
use std::path::PathBuf;
use tinct::adjoint::{self, AdjointError, Window};

/// Arguments of `tinct influence`.
#[derive(clap::Args)]
pub struct InfluenceArgs {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// The receptor (a `[[receptor]]` name of the scenario).
    #[arg(long)]
    receptor: String,
    /// When the receptor's concentration counts: `START,END` (s) integrates it over the
    /// window (the dose, default the whole run `0,END`); one time `T` takes it at T.
    #[arg(long, value_name = "START,END | T")]
    window: Option<String>,
    /// Release time(s) of the maps, s: one time, a comma-separated list, or `frames` (every
    /// frame time of the run before the window's end). Default: the run's start, 0.
    #[arg(long = "release-time", value_name = "T[,T...] | frames")]
    release_time: Option<String>,
    /// Output folder (default: the scenario's `output.dir`, else `out`); the maps go to
    /// `<DIR>/<name>/influence/<receptor>/`.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Override a scenario key, e.g. `--set scheme.convection=upwind` (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    sets: Vec<String>,
    /// Print nothing but errors.
    #[arg(long)]
    quiet: bool,
}

/// Parses a comma-separated list of numbers for `key`.
fn numbers(key: &str, text: &str, allowed: &str) -> Result<Vec<f64>, Failure> {
    text.split(',')
        .map(|s| {
            s.trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad_input(format!("{key}: \"{text}\" is not {allowed}")))
        })
        .collect()
}

/// Runs `tinct influence`.
pub fn main(a: InfluenceArgs) -> Result<(), Failure> {
    let scn = tinct::scenario::load(&a.scenario, &a.sets).map_err(|e| bad_input(e.to_string()))?;
    let file = a.scenario.display();
    let receptor = scn.receptors.iter().find(|r| r.name == a.receptor).ok_or_else(|| {
        let names: Vec<String> = scn.receptors.iter().map(|r| format!("\"{}\"", r.name)).collect();
        bad_input(if names.is_empty() {
            format!("--receptor: {file} has no [[receptor]] entries")
        } else {
            format!(
                "--receptor: \"{}\" is not a receptor of {file}; its receptors are {}",
                a.receptor,
                names.join(", ")
            )
        })
    })?;
    let end = scn.run.end;
    let window_allowed = format!("START,END (s, 0 <= START < END <= run.end = {end}) or one time T (0 < T <= {end})");
    let window = match a.window.as_deref() {
        None => Window::Span { start: 0.0, end },
        Some(w) => match numbers("--window", w, &window_allowed)?.as_slice() {
            [t] if *t > 0.0 && *t <= end => Window::At(*t),
            [s, e] if *s >= 0.0 && s < e && *e <= end => Window::Span { start: *s, end: *e },
            _ => return Err(bad_input(format!("--window: \"{w}\" is not {window_allowed}"))),
        },
    };
    let release_allowed = format!(
        "a time, a comma-separated list of times (s, from 0 to before the window's end {} s) or `frames`",
        window.end()
    );
    let releases = match a.release_time.as_deref() {
        None => vec![0.0],
        Some("frames") => {
            let n = scn.run.frames.max(1);
            (0..=n)
                .map(|k| k as f64 * end / n as f64)
                .filter(|&t| t < window.end())
                .collect()
        }
        Some(r) => numbers("--release-time", r, &release_allowed)?,
    };
    if let Some(t) = releases.iter().find(|&&t| !(t >= 0.0 && t < window.end())) {
        return Err(bad_input(format!("--release-time: {t} is not {release_allowed}")));
    }
    let model = scn.build_model().map_err(|e| bad_input(format!("{file}: {e}")))?;
    let t0 = std::time::Instant::now();
    let inf = adjoint::influence(&model, &scn.scheme, receptor.at, window, &releases).map_err(|e| match e {
        AdjointError::Input(e) => bad_input(format!("{file}: {e}")),
        e => failed(e.to_string()),
    })?;
    let seconds = t0.elapsed().as_secs_f64();
    let base = a.out.unwrap_or_else(|| scn.output.dir.clone());
    let run_dir = base.join(&scn.name);
    let _lock = tinct::run::folder::lock_folder(&run_dir)
        .map_err(|e| bad_input(format!("the output folder cannot be used: {e}")))?;
    let dir = adjoint::files::folder(&run_dir, &receptor.name);
    let ranked = adjoint::files::write(&dir, &scn, &receptor.name, receptor.threshold, &inf, seconds)
        .map_err(|e| failed(e.to_string()))?;
    // A completed run of the same scenario in the folder shows the map in its report.
    let refreshed = tinct::run::folder::refresh_report(&run_dir, &scn).map_err(|e| failed(e.to_string()))?;
    if a.quiet {
        return Ok(());
    }
    println!(
        "influence on receptor {} ({}), adjoint: {}, {} steps in {:.2} s",
        receptor.name,
        adjoint::files::window_words(window),
        inf.kind.label(),
        inf.steps,
        seconds
    );
    println!("units: {} per unit mass released", inf.units());
    for (k, t) in inf.release_times.iter().enumerate() {
        println!("release at {}:", fmt_t(*t));
        for (n, (i, j, v)) in inf.top_cells(k, 3).iter().enumerate() {
            let (x, y) = model.grid.centre(*i, *j);
            println!("  cell {} at ({x:.1}, {y:.1}) m: {v:.4e}", n + 1);
        }
        for (n, r) in ranked[k].iter().enumerate() {
            let mass = r.mass_to_threshold.map_or(String::new(), |m| {
                format!("; {m:.3e} released there reach the threshold (window mean)")
            });
            println!("  candidate {} {}: {:.4e}{mass}", n + 1, r.name, r.dose_per_mass);
        }
    }
    println!("files: {}", dir.display());
    if refreshed {
        println!("the run's report.html in {} now shows this map", run_dir.display());
    }
    println!("{}", tinct::run::CAUTION);
    Ok(())
}
