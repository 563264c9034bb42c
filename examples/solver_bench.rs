//! Prints the implicit-diffusion solver benchmark (`tinct::solve::bench`): backward Euler at
//! diffusion number 10 on 1024^2 and 2048^2 cells, zero-flux sides, relative residual 1e-10.
//!
//! `cargo run --release --example solver_bench [steps] [sizes...] [sweeps=K]` (`sweeps=K`:
//! K pre- and post-sweeps of the multigrid smoother instead of the default).

use tinct::solve::bench::implicit_diffusion;
use tinct::solve::SolverParams;

fn main() {
    let mut params = SolverParams::default();
    let mut args: Vec<String> = Vec::new();
    for a in std::env::args().skip(1) {
        match a.strip_prefix("sweeps=").map(str::parse::<usize>) {
            Some(Ok(k)) => {
                params.multigrid.pre_sweeps = k;
                params.multigrid.post_sweeps = k;
            }
            Some(Err(e)) => {
                eprintln!("bad {a}: {e}");
                std::process::exit(2);
            }
            None => args.push(a),
        }
    }
    let steps: usize = args.first().and_then(|s| s.parse().ok()).unwrap_or(10);
    let sizes: Vec<usize> = if args.len() > 1 {
        args[1..].iter().filter_map(|s| s.parse().ok()).collect()
    } else {
        vec![1024, 2048]
    };
    let mut medians = Vec::new();
    for &n in &sizes {
        match implicit_diffusion(n, steps, 10.0, params) {
            Ok(r) => {
                let worst = r.relative_residuals.iter().cloned().fold(0.0, f64::max);
                println!(
                    "N = {n:5}: {:.2} ms/step median (min {:.2}, max {:.2}) over {} steps, iterations {:?} \
                     (median {}), worst relative residual {worst:.2e}, setup {:.1} ms, {} levels, {} threads",
                    1e3 * r.median_seconds(),
                    1e3 * r.seconds.iter().cloned().fold(f64::INFINITY, f64::min),
                    1e3 * r.seconds.iter().cloned().fold(0.0, f64::max),
                    r.seconds.len(),
                    r.iterations,
                    r.median_iterations(),
                    1e3 * r.setup_seconds,
                    r.levels,
                    r.threads
                );
                medians.push((n, r.median_seconds()));
            }
            Err(e) => println!("N = {n}: {e}"),
        }
    }
    if medians.len() >= 2 {
        let (n0, t0) = medians[0];
        for &(n, t) in &medians[1..] {
            println!(
                "time ratio N = {n} / N = {n0}: {:.2} (cells ratio {:.1})",
                t / t0,
                (n * n) as f64 / (n0 * n0) as f64
            );
        }
    }
}
