//! `tinct bench`: throughput of the explicit step on the shared benchmark problem.

use super::{bad_input, failed, parse_schemes, Failure};
use std::path::PathBuf;
use tinct::ops::limiter::Limiter;

/// Arguments of `tinct bench`.
#[derive(clap::Args)]
pub struct BenchArgs {
    /// Grid sizes (cells per side; default 512,1024,2048, with `--peer` 256,512,1024,2048).
    #[arg(long, value_delimiter = ',')]
    sizes: Option<Vec<usize>>,
    /// Convection schemes; `all` for every one.
    #[arg(long, value_delimiter = ',', default_value = "all")]
    schemes: Vec<String>,
    /// Repetitions per configuration (the median is reported; default 7, with `--peer` 5 rounds).
    #[arg(long)]
    reps: Option<usize>,
    /// Seconds per repetition.
    #[arg(long, default_value_t = 0.3)]
    seconds: f64,
    /// The peers' reference values (checked after 10 steps when present).
    #[arg(long, default_value = "../shared/peers/explicit-step/results/reference_values.json")]
    reference: PathBuf,
    /// Threads (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// Instead of the explicit step, time the implicit backward-Euler diffusion step (diffusion
    /// number 10, zero-flux sides, relative residual 1e-10, previous step as initial guess).
    #[arg(long)]
    implicit: bool,
    /// Instead, time backward-Euler steps on a harbour with a tide against the same harbour
    /// with the tide removed (steady stream), interleaved in rounds, for upwind and van Leer
    /// (or `--schemes`) at `--sizes` cells across (default 400; the grid is N by N/2), and
    /// print the ratio tidal / steady per step.
    #[arg(long)]
    implicit_tide: bool,
    /// Timed steps per size for `--implicit` and per variant for `--implicit-tide` (the median
    /// is reported).
    #[arg(long, default_value_t = 16)]
    steps: usize,
    /// Solvers for `--implicit`: `transform` (what `auto` picks on this problem) and
    /// `multigrid_cg` (what runs with land or periodic sides use).
    #[arg(long, value_delimiter = ',', default_value = "transform,multigrid_cg")]
    solvers: Vec<String>,
    /// Instead of the step, measure what writing a run's outputs adds to its wall time: the
    /// built-in 200 x 100 dock-basin scenario (12 frames, receptors, animation; or `--scenario`)
    /// marched bare and run in full, alternately, `--reps` times.
    #[arg(long)]
    outputs: bool,
    /// The scenario for `--outputs` (default: the built-in dock basin).
    #[arg(long)]
    scenario: Option<PathBuf>,
    /// Instead, run the explicit van Leer step side by side with the C peer in this folder
    /// (built from `DIR/src/advect.c` with `cc`), interleaved in `--reps` rounds.
    #[arg(long, value_name = "DIR")]
    peer: Option<PathBuf>,
    /// Instead, time the gather of a sweep: fabricate this many members of the built-in
    /// 200 x 100 grid in a temporary folder and gather them `--reps` times (default 3).
    #[arg(long, value_name = "MEMBERS")]
    gather: Option<usize>,
    /// Instead, time the particle stepper: this many particles started uniformly over the
    /// built-in 200 x 100 tidal basin with an island and decay, 200 steps of 10 s, `--reps`
    /// times (default 5); prints each rate and the median in particle steps per second.
    #[arg(long, value_name = "COUNT")]
    particles: Option<usize>,
    /// Instead, time one influence map (the first receptor over the whole run, release at 0)
    /// against one forward run of the same scenario (default `scenarios/gaussian-puff.toml`),
    /// interleaved `--reps` times (default 3); prints the medians and their ratio.
    #[arg(long, value_name = "SCENARIO", num_args = 0..=1, default_missing_value = "scenarios/gaussian-puff.toml")]
    influence: Option<PathBuf>,
}

/// Runs `tinct bench`.
pub fn main(a: BenchArgs) -> Result<(), Failure> {
    let BenchArgs {
        sizes,
        schemes,
        reps,
        seconds,
        reference,
        threads,
        implicit,
        implicit_tide,
        steps,
        solvers,
        outputs,
        scenario,
        peer,
        gather,
        particles,
        influence,
    } = a;
    let all_schemes = schemes.iter().any(|n| n == "all");
    let schemes = parse_schemes(&schemes)?;
    if let Some(t) = threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(t)
            .build_global()
            .map_err(|e| bad_input(format!("--threads: {e}")))?;
    }
    if let Some(count) = particles {
        return particle_bench(count, reps.unwrap_or(5));
    }
    if let Some(path) = influence {
        return influence_bench(&path, reps.unwrap_or(3));
    }
    if let Some(members) = gather {
        return gather_bench(members, reps.unwrap_or(3));
    }
    if let Some(dir) = peer {
        let sizes = sizes.unwrap_or_else(|| vec![256, 512, 1024, 2048]);
        return super::bench_peer::main(&dir, &sizes, reps.unwrap_or(5), seconds);
    }
    if implicit_tide {
        let limiters = if all_schemes {
            vec![Limiter::Upwind, Limiter::VanLeer]
        } else {
            schemes
        };
        return implicit_tide_bench(&sizes.unwrap_or_else(|| vec![400]), steps, &limiters);
    }
    let sizes = sizes.unwrap_or_else(|| vec![512, 1024, 2048]);
    let reps = reps.unwrap_or(7);
    if implicit {
        return implicit_bench(&sizes, steps, &solvers);
    }
    if outputs {
        return outputs_bench(scenario.as_deref(), reps);
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
                    sim.step(setup.dt).map_err(|e| failed(e.to_string()))?;
                }
                let d = tinct::bench::peer_diagnostics(&sim);
                match tinct::bench::compare_with_reference(json, n, "step10", &d) {
                    Ok(e) if e <= 1e-12 => println!(
                        "N = {n}: van_leer after 10 steps matches the reference values (largest difference {e:.1e})"
                    ),
                    Ok(e) => {
                        return Err(failed(format!(
                            "N = {n}: van_leer after 10 steps differs from the reference values by {e:.3e} (> 1e-12)"
                        )))
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

/// The implicit diffusion step: median milliseconds per step, iterations and set-up per size,
/// and the time ratio between consecutive sizes, for the solver `Method::Auto` picks on this
/// problem (the exact transform solver) and for multigrid-preconditioned conjugate gradients
/// (what runs with land or periodic sides use). The sizes' steps are interleaved, so the
/// ratio is also given step by step (the median of the per-step ratios), which a drifting
/// machine load affects least.
fn implicit_bench(sizes: &[usize], steps: usize, solvers: &[String]) -> Result<(), Failure> {
    use tinct::solve::bench::{implicit_diffusion_sizes, median_step_ratio};
    use tinct::solve::{Method, SolverParams};
    if let Some(n) = sizes.iter().find(|&&n| n < 16) {
        return Err(bad_input(format!("--sizes: {n} is too small (at least 16)")));
    }
    let methods = solvers
        .iter()
        .map(|s| match s.trim() {
            "transform" => Ok(Method::Auto),
            "multigrid_cg" => Ok(Method::Cg),
            other => Err(bad_input(format!(
                "--solvers: unknown solver `{other}` (allowed: transform, multigrid_cg)"
            ))),
        })
        .collect::<Result<Vec<_>, _>>()?;
    println!(
        "implicit backward-Euler diffusion, diffusion number 10, zero-flux sides, rtol 1e-10; {} thread(s); sizes interleaved in rounds",
        rayon::current_num_threads()
    );
    println!(
        "{:>14} {:>6} {:>12} {:>10} {:>10} {:>11} {:>14}",
        "solver", "N", "ms/step", "min", "max", "iterations", "setup ms"
    );
    for method in methods {
        let params = SolverParams {
            method,
            ..SolverParams::default()
        };
        let runs = implicit_diffusion_sizes(sizes, steps.max(1), 10.0, params).map_err(|e| failed(e.to_string()))?;
        let ms = |v: f64| 1e3 * v;
        for (k, r) in runs.iter().enumerate() {
            let lo = r.seconds.iter().cloned().fold(f64::INFINITY, f64::min);
            let hi = r.seconds.iter().cloned().fold(0.0, f64::max);
            println!(
                "{:>14} {:>6} {:>12.2} {:>10.2} {:>10.2} {:>11.1} {:>14.1}",
                r.method.name(),
                r.n,
                ms(r.median_seconds()),
                ms(lo),
                ms(hi),
                r.median_iterations(),
                ms(r.setup_seconds)
            );
            if k > 0 {
                let p = &runs[k - 1];
                println!(
                    "{:>14} time ratio N = {} / N = {}: {:.2} (medians), {:.2} (median of per-step ratios)",
                    "",
                    r.n,
                    p.n,
                    r.median_seconds() / p.median_seconds(),
                    median_step_ratio(p, r)
                );
            }
        }
    }
    Ok(())
}

/// Tidal against steady implicit steps on the harbour: per limiter and size the median
/// milliseconds per step of each, their median iterations, and the ratio tidal / steady as a
/// ratio of medians and as the median of per-step ratios (steps of the same round).
fn implicit_tide_bench(sizes: &[usize], steps: usize, limiters: &[Limiter]) -> Result<(), Failure> {
    use tinct::step::tide_bench::tide_vs_steady;
    if let Some(n) = sizes.iter().find(|&&n| n < 40) {
        return Err(bad_input(format!("--sizes: {n} is too small (at least 40)")));
    }
    println!(
        "implicit (backward Euler) steps, harbour with a tide vs the same harbour with a steady stream; {} thread(s); variants interleaved in rounds",
        rayon::current_num_threads()
    );
    println!(
        "{:<10} {:>10} {:>8} {:>12} {:>12} {:>9} {:>9} {:>14} {:>14}",
        "scheme", "grid", "dt s", "tidal ms", "steady ms", "it tidal", "it steady", "ratio medians", "median ratio"
    );
    for &n in sizes {
        for &lim in limiters {
            let r = tide_vs_steady(n, lim, steps.max(1)).map_err(failed)?;
            let (it_t, it_s) = r.median_iterations();
            println!(
                "{:<10} {:>10} {:>8.1} {:>12.2} {:>12.2} {:>9.1} {:>9.1} {:>14.2} {:>14.2}",
                lim.name(),
                format!("{}x{}", r.nx, r.nx / 2),
                r.dt,
                1e3 * r.tidal_median(),
                1e3 * r.steady_median(),
                it_t,
                it_s,
                r.tidal_median() / r.steady_median(),
                r.median_ratio()
            );
        }
    }
    Ok(())
}

/// Output cost: the median wall time of the bare march and of the full run, their ratio (and
/// the median of the per-repetition ratios, which drifting load affects least), and the part
/// `execute` counted as writing.
fn outputs_bench(scenario: Option<&std::path::Path>, reps: usize) -> Result<(), Failure> {
    use tinct::run::cost::{measure, median, BENCH_SCENARIO};
    let scn = match scenario {
        Some(p) => tinct::scenario::load(p, &[]),
        None => tinct::scenario::parse(BENCH_SCENARIO, std::path::Path::new("dock-basin.toml"), &[]),
    }
    .map_err(|e| bad_input(e.to_string()))?;
    let out = std::env::temp_dir().join(format!("tinct-bench-outputs-{}", std::process::id()));
    let cost = measure(&scn, &out, reps);
    let _ = std::fs::remove_dir_all(&out);
    let cost = cost.map_err(failed)?;
    let g = &scn.model.grid;
    println!(
        "output cost: {} ({} x {} cells, {} frames{}); {} repetition(s), bare and full alternately; {} thread(s)",
        scn.name,
        g.nx,
        g.ny,
        scn.run.frames,
        if scn.output.animation { ", animation" } else { "" },
        cost.bare.len(),
        rayon::current_num_threads()
    );
    let ratios: Vec<f64> = cost.full.iter().zip(&cost.bare).map(|(f, b)| f / b).collect();
    let (b, f, w) = (median(&cost.bare), median(&cost.full), median(&cost.writing));
    println!("  bare march  {b:>8.3} s (median)");
    println!("  full run    {f:>8.3} s (median); of which writing {w:.3} s");
    println!(
        "  full / bare {:>8.3} (medians), {:.3} (median of per-repetition ratios): outputs add {:.1}%",
        f / b,
        median(&ratios),
        100.0 * (median(&ratios) - 1.0)
    );
    Ok(())
}

/// `--gather MEMBERS`: fabricated members gathered `reps` times; the median is the figure.
fn gather_bench(members: usize, reps: usize) -> Result<(), Failure> {
    if members == 0 || reps == 0 {
        return Err(bad_input("--gather and --reps: at least 1"));
    }
    let dir = std::env::temp_dir().join(format!("tinct-gather-bench-{}", std::process::id()));
    let r = tinct::sweep::gather::bench::run(&dir, members, reps);
    let _ = std::fs::remove_dir_all(&dir);
    let r = r.map_err(failed)?;
    println!(
        "gather of {} members x {} cells ({} thread(s)): fabricated in {:.1} s; gathers {} s; median {:.2} s",
        r.members,
        r.cells,
        rayon::current_num_threads(),
        r.fabricate_seconds,
        r.seconds
            .iter()
            .map(|s| format!("{s:.2}"))
            .collect::<Vec<_>>()
            .join(", "),
        r.median()
    );
    Ok(())
}

/// `tinct bench --particles COUNT`: particle steps per second, median of `reps`.
fn particle_bench(count: usize, reps: usize) -> Result<(), Failure> {
    if count == 0 {
        return Err(bad_input("--particles: at least 1"));
    }
    println!(
        "particle steps, {count} particles on a 200 x 100 tidal basin with an island and decay, 200 steps of 10 s; {} thread(s), {} bytes a particle",
        rayon::current_num_threads(),
        tinct::particles::BYTES_PER_PARTICLE
    );
    let mut rates = Vec::new();
    for r in 0..reps.max(1) {
        let rate = tinct::particles::bench::particle_steps_per_second(count, 200, 1 + r as u64)
            .map_err(|e| failed(e.to_string()))?;
        println!("  round {}: {:.1} M particle steps/s", r + 1, rate / 1e6);
        rates.push(rate);
    }
    println!(
        "median: {:.1} M particle steps/s",
        tinct::run::cost::median(&rates) / 1e6
    );
    Ok(())
}

/// `tinct bench --influence`: one influence map against one forward run, interleaved.
fn influence_bench(path: &std::path::Path, reps: usize) -> Result<(), Failure> {
    let scn = tinct::scenario::load(path, &[]).map_err(|e| bad_input(e.to_string()))?;
    let tmp = tempfile_dir()?;
    let b = tinct::adjoint::bench::influence_vs_forward(&scn, &tmp, reps.max(3)).map_err(super::failed);
    let _ = std::fs::remove_dir_all(&tmp);
    let b = b?;
    use tinct::adjoint::bench::median;
    println!(
        "{}: influence map ({}, {} steps) against a forward run (every output), {} interleaved reps, {} thread(s)",
        scn.name,
        b.kind.label(),
        b.steps,
        b.forward.len(),
        rayon::current_num_threads()
    );
    let list = |xs: &[f64]| xs.iter().map(|x| format!("{x:.3}")).collect::<Vec<_>>().join(", ");
    println!(
        "  forward run   s: {}  median {:.3}",
        list(&b.forward),
        median(&b.forward)
    );
    println!(
        "  influence map s: {}  median {:.3}",
        list(&b.influence),
        median(&b.influence)
    );
    println!(
        "  ratio influence / forward: {:.3} (ratio of medians), {:.3} (median of per-rep ratios); target <= 1.2",
        median(&b.influence) / median(&b.forward),
        b.median_ratio()
    );
    Ok(())
}

/// A fresh folder under the system's temporary directory for the forward runs.
fn tempfile_dir() -> Result<PathBuf, Failure> {
    let d = std::env::temp_dir().join(format!("tinct-bench-influence-{}", std::process::id()));
    std::fs::create_dir_all(&d).map_err(|e| super::failed(format!("{}: {e}", d.display())))?;
    Ok(d)
}
