//! The `tinct` binary: parses arguments, calls the library, prints, and maps errors to exit
//! codes (0 success, 1 the run failed, 2 bad input).

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;
use tinct::ops::limiter::Limiter;

#[derive(Parser)]
#[command(name = "tinct", version, about = "2D transient scalar transport on structured grids")]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run a scenario and write frames, logs, fields and a summary to `<dir>/<name>/`.
    Run {
        /// The scenario file (TOML).
        scenario: PathBuf,
        /// Output folder (default: the scenario's `output.dir`, else `out`); results go to
        /// `<DIR>/<name>/`.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Override a scenario key, e.g. `--set scheme.convection=superbee` (repeatable).
        #[arg(long = "set", value_name = "KEY=VALUE")]
        sets: Vec<String>,
        /// No progress bar or warnings on stderr.
        #[arg(long)]
        quiet: bool,
    },
    /// Print a ready-to-run example scenario.
    Example {
        /// Example name; omit to list them.
        name: Option<String>,
    },
    /// Throughput of the explicit step (million cell updates per second) on the shared
    /// benchmark problem, checked against its reference values first.
    Bench {
        /// Grid sizes (cells per side).
        #[arg(long, value_delimiter = ',', default_value = "512,1024,2048")]
        sizes: Vec<usize>,
        /// Convection schemes; `all` for every one.
        #[arg(long, value_delimiter = ',', default_value = "all")]
        schemes: Vec<String>,
        /// Repetitions per configuration (the median is reported).
        #[arg(long, default_value_t = 7)]
        reps: usize,
        /// Seconds per repetition.
        #[arg(long, default_value_t = 0.3)]
        seconds: f64,
        /// The peers' reference values (checked after 10 steps when present).
        #[arg(long, default_value = "../shared/peers/explicit-step/results/reference_values.json")]
        reference: PathBuf,
        /// Threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
    },
}

/// An error with its exit code.
struct Failure {
    code: u8,
    message: String,
}

fn bad_input(message: impl Into<String>) -> Failure {
    Failure {
        code: 2,
        message: message.into(),
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Run {
            scenario,
            out,
            sets,
            quiet,
        } => run(&scenario, out, &sets, quiet),
        Command::Example { name } => example(name.as_deref()),
        Command::Bench {
            sizes,
            schemes,
            reps,
            seconds,
            reference,
            threads,
        } => bench(sizes, schemes, reps, seconds, reference, threads),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(f) => {
            eprintln!("tinct: {}", f.message);
            ExitCode::from(f.code)
        }
    }
}

fn parse_schemes(names: &[String]) -> Result<Vec<Limiter>, Failure> {
    if names.iter().any(|n| n == "all") {
        return Ok(Limiter::ALL.to_vec());
    }
    names
        .iter()
        .map(|n| n.parse::<Limiter>().map_err(|e| bad_input(format!("--schemes: {e}"))))
        .collect()
}

fn bench(
    sizes: Vec<usize>,
    schemes: Vec<String>,
    reps: usize,
    seconds: f64,
    reference: PathBuf,
    threads: Option<usize>,
) -> Result<(), Failure> {
    let schemes = parse_schemes(&schemes)?;
    if let Some(t) = threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(t)
            .build_global()
            .map_err(|e| bad_input(format!("--threads: {e}")))?;
    }
    let refs = std::fs::read_to_string(&reference).ok();
    println!(
        "explicit step, periodic vortex, K = h/10, one forward-Euler stage; {} thread(s)",
        rayon::current_num_threads()
    );
    for &n in &sizes {
        if n < 16 {
            return Err(bad_input(format!("--sizes: {n} is too small (at least 16)")));
        }
        match &refs {
            Some(json) => {
                let (mut sim, setup) =
                    tinct::bench::peer_simulation(n, Limiter::VanLeer).map_err(|e| bad_input(e.to_string()))?;
                for _ in 0..10 {
                    sim.step(setup.dt).map_err(|e| Failure {
                        code: 1,
                        message: e.to_string(),
                    })?;
                }
                let d = tinct::bench::peer_diagnostics(&sim);
                match tinct::bench::compare_with_reference(json, n, "step10", &d) {
                    Ok(e) if e <= 1e-12 => println!(
                        "N = {n}: van_leer after 10 steps matches the reference values (largest difference {e:.1e})"
                    ),
                    Ok(e) => {
                        return Err(Failure {
                            code: 1,
                            message: format!(
                            "N = {n}: van_leer after 10 steps differs from the reference values by {e:.3e} (> 1e-12)"
                        ),
                        })
                    }
                    Err(e) => println!("N = {n}: not checked ({e})"),
                }
            }
            None => println!(
                "N = {n}: reference values not found at {}; not checked",
                reference.display()
            ),
        }
    }
    println!(
        "{:<12} {:>6} {:>12} {:>12} {:>12} {:>7}",
        "scheme", "N", "Mcell/s", "min", "max", "steps"
    );
    for &n in &sizes {
        for &lim in &schemes {
            let t = tinct::bench::measure(n, lim, reps, seconds).map_err(|e| bad_input(e.to_string()))?;
            println!(
                "{:<12} {:>6} {:>12.1} {:>12.1} {:>12.1} {:>7}",
                t.scheme, t.n, t.median, t.min, t.max, t.steps
            );
        }
    }
    Ok(())
}

fn example(name: Option<&str>) -> Result<(), Failure> {
    let names = tinct::scenario::EXAMPLES.join(", ");
    match name {
        None => {
            println!("examples: {names}");
            Ok(())
        }
        Some(n) => match tinct::scenario::example(n) {
            Some(text) => {
                print!("{text}");
                Ok(())
            }
            None => Err(bad_input(format!("unknown example '{n}': allowed are {names}"))),
        },
    }
}

fn run(path: &std::path::Path, out: Option<PathBuf>, sets: &[String], quiet: bool) -> Result<(), Failure> {
    use indicatif::{ProgressBar, ProgressStyle};
    use tinct::run::{execute, RunFailure};
    let scn = tinct::scenario::load(path, sets).map_err(|e| bad_input(e.to_string()))?;
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
    let result = execute(&scn, &base, &mut on_start, &mut progress);
    bar.finish_and_clear();
    match result {
        Ok(outcome) => {
            print_outcome(&outcome);
            Ok(())
        }
        Err(RunFailure::BadInput(m)) => Err(bad_input(m)),
        Err(RunFailure::Output(e)) => Err(Failure {
            code: 1,
            message: format!("writing results: {e}"),
        }),
        Err(RunFailure::Stopped { error, outcome }) => {
            print_outcome(&outcome);
            Err(Failure {
                code: 1,
                message: format!("{error}\nthe results up to that step are in {}", outcome.dir.display()),
            })
        }
    }
}

fn fmt_t(t: f64) -> String {
    tinct::output::format_time(t)
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
    writeln!(out, "  mass: start {:.6e}, end {:.6e}; added {:.4e}, in {:.4e}, out {:.4e}, decayed {:.4e}; largest budget residual {:.1e}", s.initial_mass, s.final_mass, s.added, s.inflow, s.outflow, s.decayed, s.max_abs_residual)?;
    writeln!(out, "  concentration: min {:.4e}, max {:.4e}", s.min_ever, s.max_ever)?;
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
    writeln!(
        out,
        "  results: {} (summary.json, budget.csv, receptors.csv, fields.nc, {} frames)",
        o.dir.display(),
        s.frames
    )?;
    writeln!(out, "  caution: {}", s.caution)?;
    Ok(())
}
