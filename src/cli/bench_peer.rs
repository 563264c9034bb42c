//! `tinct bench --peer DIR`: tinct's explicit van Leer step side by side with the hand-written C
//! peer (`DIR/src/advect.c`, variants `fused` and `fusedp`) on the same normative problem.
//!
//! The peer is compiled with the system C compiler (`cc -O3 -march=native -fopenmp`, the flags
//! of its `run_all.sh`) into a temporary folder. Every round runs, per size, one sample of each
//! of the three (in an order that rotates from round to round), so that a drifting machine load
//! affects all three alike; medians and ranges over the rounds are printed as a Markdown table.
//! tinct is also measured alone on the 200 x 100 grid of the `gaussian-puff` example.

use super::{bad_input, failed, Failure};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;
use tinct::ops::limiter::Limiter;
use tinct::step::Simulation;

/// The peer's variants, as passed on its command line, and their column titles.
const VARIANTS: [(&str, &str); 2] = [("fused", "C fused"), ("fusedp", "C fused+prefetch")];

/// Parses the JSON line `advect bench` prints and returns its median Mcell/s.
pub fn parse_peer_line(line: &str) -> Option<f64> {
    let v: serde_json::Value = serde_json::from_str(line.trim()).ok()?;
    let m = v.get("mcells_median")?.as_f64()?;
    (m.is_finite() && m > 0.0).then_some(m)
}

/// A temporary folder removed when dropped.
struct TempDir(PathBuf);

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Compiles `DIR/src/advect.c` into `tmp`; returns the binary's path.
fn build_peer(dir: &Path, tmp: &Path) -> Result<PathBuf, Failure> {
    if !dir.is_dir() {
        return Err(bad_input(format!("--peer: {} is not a directory", dir.display())));
    }
    let src = dir.join("src").join("advect.c");
    if !src.is_file() {
        return Err(bad_input(format!(
            "--peer: {} has no src/advect.c (expected the explicit-step peer)",
            dir.display()
        )));
    }
    std::fs::create_dir_all(tmp).map_err(|e| failed(format!("{}: {e}", tmp.display())))?;
    let bin = tmp.join("advect");
    let out = Command::new("cc")
        .args(["-O3", "-march=native", "-fopenmp", "-Wall", "-o"])
        .arg(&bin)
        .arg(&src)
        .arg("-lm")
        .output()
        .map_err(|e| bad_input(format!("--peer: cannot run the C compiler `cc` ({e}); install gcc")))?;
    if !out.status.success() {
        return Err(failed(format!(
            "--peer: `cc` failed to build {}:\n{}",
            src.display(),
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    Ok(bin)
}

/// One sample of the peer: `advect bench N VARIANT 1 SECONDS` with `threads` OpenMP threads.
fn peer_sample(bin: &Path, n: usize, variant: &str, seconds: f64, threads: usize) -> Result<f64, Failure> {
    let out = Command::new(bin)
        .args(["bench", &n.to_string(), variant, "1", &seconds.to_string()])
        .env("OMP_NUM_THREADS", threads.to_string())
        .env("OMP_PROC_BIND", "close")
        .env("OMP_PLACES", "cores")
        .output()
        .map_err(|e| failed(format!("peer: cannot run {}: {e}", bin.display())))?;
    let text = String::from_utf8_lossy(&out.stdout);
    match text.lines().find_map(parse_peer_line) {
        Some(m) if out.status.success() => Ok(m),
        _ => Err(failed(format!(
            "peer: `advect bench {n} {variant}` failed ({}): {}{}",
            out.status,
            text.trim(),
            String::from_utf8_lossy(&out.stderr).trim()
        ))),
    }
}

/// The `gaussian-puff` example's model (200 x 100) with van Leer in one forward-Euler stage,
/// and its cell count.
fn puff_simulation() -> Result<(Simulation, usize), Failure> {
    let text =
        tinct::scenario::example("gaussian-puff").ok_or_else(|| failed("the gaussian-puff example is missing"))?;
    let mut scn =
        tinct::scenario::parse(text, Path::new("gaussian-puff.toml"), &[]).map_err(|e| failed(e.to_string()))?;
    scn.scheme.limiter = Limiter::VanLeer;
    scn.scheme.stages = 1;
    let cells = scn.model.grid.nx * scn.model.grid.ny;
    let model = scn.build_model().map_err(|e| failed(e.to_string()))?;
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    let sim = Simulation::new(model, scn.scheme, c0).map_err(|e| failed(e.to_string()))?;
    Ok((sim, cells))
}

/// One sample on the puff grid: as many steps of the largest stable step as fill `seconds`.
fn puff_sample(sim: &mut Simulation, cells: usize, seconds: f64) -> Result<f64, Failure> {
    let dt = sim.dt_max();
    let mut run = |k: usize| -> Result<f64, Failure> {
        let t = Instant::now();
        // On a pool thread, as a run marches (`Simulation::advance_to`).
        tinct::par::in_pool(|| (0..k).try_for_each(|_| sim.step(dt))).map_err(|e| failed(e.to_string()))?;
        Ok(t.elapsed().as_secs_f64())
    };
    run(2)?;
    let one = run(1)?.max(1e-7);
    let k = ((seconds / one).round() as usize).clamp(1, 1_000_000);
    Ok((cells * k) as f64 / run(k)?.max(1e-9) / 1e6)
}

/// Busy CPU seconds of the whole machine (`/proc/stat`: user, nice, system, irq, softirq and
/// steal) and of this process with its waited-for children, when the system gives both.
fn cpu_seconds() -> Option<(f64, f64)> {
    let stat = std::fs::read_to_string("/proc/stat").ok()?;
    let f: Vec<f64> = stat
        .lines()
        .next()?
        .split_whitespace()
        .skip(1)
        .map_while(|x| x.parse().ok())
        .collect();
    let busy = [0, 1, 2, 5, 6, 7]
        .iter()
        .map(|&k| f.get(k).copied().unwrap_or(0.0))
        .sum::<f64>();
    // SAFETY: sysconf and getrusage only write into the zeroed struct passed to them.
    let (tick, own) = unsafe {
        let tick = libc::sysconf(libc::_SC_CLK_TCK) as f64;
        let mut own = 0.0;
        for who in [libc::RUSAGE_SELF, libc::RUSAGE_CHILDREN] {
            let mut r: libc::rusage = std::mem::zeroed();
            if libc::getrusage(who, &mut r) != 0 {
                return None;
            }
            for t in [r.ru_utime, r.ru_stime] {
                own += t.tv_sec as f64 + 1e-6 * t.tv_usec as f64;
            }
        }
        (tick, own)
    };
    (tick > 0.0).then_some((busy / tick, own))
}

/// CPUs' worth of other work between two [`cpu_seconds`] readings `wall` seconds apart.
fn background_cpus(before: Option<(f64, f64)>, after: Option<(f64, f64)>, wall: f64) -> String {
    match (before, after) {
        (Some((b0, o0)), Some((b1, o1))) if wall > 0.0 => {
            format!("{:.2}", (((b1 - b0) - (o1 - o0)) / wall).max(0.0))
        }
        _ => "n/a".to_string(),
    }
}

/// Median, min and max of the samples (sorted in place).
fn stats(v: &mut [f64]) -> (f64, f64, f64) {
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    let med = if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    };
    (med, v[0], v[v.len() - 1])
}

/// A table cell: `median [min-max]`, or the median alone for one sample.
fn cell(v: &mut [f64]) -> String {
    let (m, lo, hi) = stats(v);
    if v.len() > 1 {
        format!("{m:.0} [{lo:.0}-{hi:.0}]")
    } else {
        format!("{m:.0}")
    }
}

/// Runs `tinct bench --peer DIR`.
pub fn main(dir: &Path, sizes: &[usize], reps: usize, seconds: f64) -> Result<(), Failure> {
    if let Some(n) = sizes.iter().find(|&&n| n < 16) {
        return Err(bad_input(format!("--sizes: {n} is too small (at least 16)")));
    }
    if reps == 0 {
        return Err(bad_input("--reps: at least 1"));
    }
    if !(seconds.is_finite() && seconds > 0.0 && seconds <= 60.0) {
        return Err(bad_input(format!("--seconds: {seconds} is not in (0, 60]")));
    }
    let tmp = TempDir(std::env::temp_dir().join(format!("tinct-bench-peer-{}", std::process::id())));
    let bin = build_peer(dir, &tmp.0)?;
    let threads = rayon::current_num_threads();
    let (cpu_before, t0) = (cpu_seconds(), Instant::now());
    // samples[size][0..2] C variants, [2] tinct.
    let mut samples = vec![[Vec::new(), Vec::new(), Vec::new()]; sizes.len()];
    let (mut puff, puff_cells) = puff_simulation()?;
    let mut puff_rates = Vec::new();
    for round in 0..reps {
        for (s, &n) in sizes.iter().enumerate() {
            for k in 0..3 {
                let which = (round + k) % 3;
                let rate = match VARIANTS.get(which) {
                    Some((v, _)) => peer_sample(&bin, n, v, seconds, threads)?,
                    None => {
                        tinct::bench::measure(n, Limiter::VanLeer, 1, seconds)
                            .map_err(|e| bad_input(e.to_string()))?
                            .median
                    }
                };
                samples[s][which].push(rate);
            }
        }
        puff_rates.push(puff_sample(&mut puff, puff_cells, seconds)?);
    }
    println!(
        "explicit van Leer step, periodic vortex (the peer's normative problem), Mcell/s, median [min-max] over {reps} round(s) of ~{seconds} s each; {threads} thread(s) for both; peer built with cc -O3 -march=native -fopenmp"
    );
    println!(
        "other work during the rounds: {} CPUs' worth (machine busy time minus this process and its children; above ~0.1 the ratios are unreliable)",
        background_cpus(cpu_before, cpu_seconds(), t0.elapsed().as_secs_f64())
    );
    println!();
    println!("| N | {} | {} | tinct | tinct / best C |", VARIANTS[0].1, VARIANTS[1].1);
    println!("|---|---|---|---|---|");
    for (s, &n) in sizes.iter().enumerate() {
        let [f, p, t] = &mut samples[s];
        let best = stats(f).0.max(stats(p).0);
        let ratio = stats(t).0 / best;
        println!("| {n} | {} | {} | {} | {ratio:.2} |", cell(f), cell(p), cell(t));
    }
    println!(
        "| 200x100 (gaussian-puff grid: uniform flow, open and wall sides) | n/a | n/a | {} | n/a |",
        cell(&mut puff_rates)
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_the_peer_line() {
        let line = "{\"bench\": \"explicit\", \"impl\": \"c\", \"variant\": \"fusedp\", \"N\": 512, \"threads\": 2, \
                    \"steps_per_rep\": 1500, \"reps\": 5, \"step_s_median\": 1.970000e-04, \"step_s_min\": 1.800000e-04, \
                    \"step_s_max\": 2.100000e-04, \"mcells_median\": 1330.712, \"mcells_min\": 1248.305, \"mcells_max\": 1456.355}\n";
        assert_eq!(parse_peer_line(line), Some(1330.712));
        assert_eq!(parse_peer_line("N=512 variant=fused threads=2"), None);
        assert_eq!(parse_peer_line("{\"mcells_median\": \"fast\"}"), None);
        assert_eq!(parse_peer_line("{\"mcells_median\": 0}"), None);
    }

    #[test]
    fn stats_and_cells() {
        let mut v = vec![3.0, 1.0, 2.0];
        assert_eq!(stats(&mut v), (2.0, 1.0, 3.0));
        assert_eq!(cell(&mut [1934.2, 2351.0, 2000.0]), "2000 [1934-2351]");
        assert_eq!(cell(&mut [812.4]), "812");
    }
}
