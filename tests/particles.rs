//! The particle run as users meet it: `tinct particles`, `run.particles`, and the Gaussian
//! puff checked against its exact solution with the grid run beside it.

mod common;

use common::{root, tinct};
use std::path::Path;
use tinct::particles::compare::{compare, Verdict};
use tinct::run::particles as rp;

/// The exact concentration of the `gaussian-puff` scenario at (x, y) and time t: an
/// instantaneous Gaussian release of initial radius s in uniform flow with anisotropic
/// diffusion and first-order decay (Crank 1975, The Mathematics of Diffusion, eq. 3.5b and
/// §1.3, the source image across the wall at y = 0 by the method of images, §3.2).
fn puff_exact(x: f64, y: f64, t: f64) -> f64 {
    let (m, h, u, kx, ky, s) = (1.0e13, 3.0, 0.15, 1.0, 0.3, 20.0);
    let lambda = std::f64::consts::LN_10 / 10_800.0;
    let (sx2, sy2) = (s * s + 2.0 * kx * t, s * s + 2.0 * ky * t);
    let g = m * (-lambda * t).exp() / (2.0 * std::f64::consts::PI * (sx2 * sy2).sqrt() * h);
    let ex = (-(x - 300.0 - u * t).powi(2) / (2.0 * sx2)).exp();
    let ey = (-(y - 300.0).powi(2) / (2.0 * sy2)).exp() + (-(y + 300.0).powi(2) / (2.0 * sy2)).exp();
    g * ex * ey
}

/// The exact peak over the run at the centre of the receptor's 10 m cell (sampled every 5 s).
fn exact_peak(x: f64, y: f64) -> (f64, f64) {
    let (cx, cy) = ((x / 10.0).floor() * 10.0 + 5.0, (y / 10.0).floor() * 10.0 + 5.0);
    (0..=1440)
        .map(|k| (puff_exact(cx, cy, 5.0 * k as f64), 5.0 * k as f64))
        .fold((0.0, 0.0), |a, b| if b.0 > a.0 { b } else { a })
}

#[test]
fn the_puff_peaks_match_the_exact_solution_and_upwind_is_shown_lower() {
    let path = root().join("scenarios/gaussian-puff.toml");
    let scn = tinct::scenario::load(&path, &[]).unwrap();
    let model = scn.build_model().unwrap();
    let (run, _) = rp::march_particles(&scn, &model, 300_000, 7, None, &mut |_| {}).unwrap();
    let upwind = tinct::scenario::load(&path, &["scheme.convection=upwind".into()]).unwrap();
    let grid = rp::grid_receptors(&upwind, None).unwrap();
    for (p, g) in run.receptors.iter().zip(grid.stats()) {
        let (exact, when) = exact_peak(p.at.0, p.at.1);
        let se = p.at_peak.std_error;
        // The particle peak is within 3 standard errors of the exact one (the test).
        assert!(
            (p.peak - exact).abs() <= 3.0 * se,
            "{}: particles {:.4e} ± {se:.2e} at {} s, exact {exact:.4e} at {when} s",
            p.name,
            p.peak,
            p.peak_time
        );
        // And the first-order upwind grid run (numerical diffusivity u dx (1 - C) / 2, larger
        // than K along the current; modified-equation analysis, common practice) is lower by
        // more than that.
        assert!(
            exact - g.peak > 3.0 * se,
            "{}: upwind {:.4e}, exact {exact:.4e}, 3 s.e. {:.2e}",
            p.name,
            g.peak,
            3.0 * se
        );
        assert_eq!(compare(g, p, 0.0, run.particles, "CFU/m3").verdict, Verdict::GridLower);
        // The series itself carries no bias: over the plume's passage (± 900 s about the exact
        // peak) the particle values average to the exact ones within 5 %.
        let (cx, cy) = (
            (p.at.0 / 10.0).floor() * 10.0 + 5.0,
            (p.at.1 / 10.0).floor() * 10.0 + 5.0,
        );
        let (mut sp, mut se_) = (0.0, 0.0);
        for (t, s) in run.times.iter().zip(&p.samples) {
            if (t - when).abs() <= 900.0 {
                sp += s.value;
                se_ += puff_exact(cx, cy, *t);
            }
        }
        assert!(
            (sp / se_ - 1.0).abs() < 0.05,
            "{}: passage mean ratio {}",
            p.name,
            sp / se_
        );
    }
    // The budget closes to round-off at every step.
    assert!(run.budget.iter().all(|b| b.residual.abs() < 1e-12));
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

#[test]
fn tinct_particles_writes_its_folder_and_refuses_bad_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/gaussian-puff.toml");
    let out = tinct(
        &[
            "particles",
            scn.to_str().unwrap(),
            "--particles",
            "20000",
            "--out",
            "o",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let dir = tmp.path().join("o/gaussian-puff/particles");
    for f in [
        "receptors.csv",
        "budget.csv",
        "comparison.csv",
        "particles.json",
        "comparison-00.png",
        "frames/00012.png",
    ] {
        assert!(dir.join(f).exists(), "{f} missing");
    }
    let summary: serde_json::Value = serde_json::from_str(&read(&dir.join("particles.json"))).unwrap();
    assert_eq!(summary["particles"], 20000);
    assert!(summary["max_abs_residual"].as_f64().unwrap() < 1e-12);
    assert_eq!(summary["receptors"].as_array().unwrap().len(), 2);
    assert!(summary["caution"].as_str().unwrap().contains("Screening"));
    let budget = read(&dir.join("budget.csv"));
    let last: Vec<f64> = budget
        .lines()
        .last()
        .unwrap()
        .split(',')
        .map(|v| v.parse().unwrap())
        .collect();
    // released = in water + out + decayed (columns 2, 3, 4..=7, 8).
    let (released, water, out_sum, decayed) = (last[2], last[3], last[4..8].iter().sum::<f64>(), last[8]);
    assert!((water + out_sum + decayed - released).abs() <= 1e-12 * released);
    assert_eq!(read(&dir.join("comparison.csv")).lines().count(), 3);
    // No grid run in the folder: nothing else was written beside the particle folder.
    assert!(!tmp.path().join("o/gaussian-puff/summary.json").exists());

    let bad = tinct(
        &["particles", scn.to_str().unwrap(), "--particles", "0", "--out", "o"],
        tmp.path(),
    );
    assert_eq!(bad.status.code(), Some(2));
    let bad = tinct(
        &[
            "particles",
            scn.to_str().unwrap(),
            "--set",
            "run.particles=-5",
            "--out",
            "o",
        ],
        tmp.path(),
    );
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("run.particles"));
}

#[test]
fn the_same_seed_gives_the_same_files_on_one_or_two_threads() {
    // One random stream per fixed chunk and sums in chunk order: the thread count cannot
    // change a result (common practice for reproducible parallel Monte Carlo).
    let tmp = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/gaussian-puff.toml");
    let run = |threads: &str, out: &str| {
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_tinct"))
            .args([
                "particles",
                scn.to_str().unwrap(),
                "--particles",
                "10000",
                "--seed",
                "3",
                "--out",
                out,
                "--quiet",
            ])
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(tmp.path())
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let d = tmp.path().join(out).join("gaussian-puff/particles");
        (read(&d.join("receptors.csv")), read(&d.join("budget.csv")))
    };
    assert_eq!(run("1", "one"), run("2", "two"));
}

#[test]
fn run_particles_puts_the_comparison_into_the_summary_and_the_report() {
    let tmp = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/gaussian-puff.toml");
    let out = tinct(
        &[
            "run",
            scn.to_str().unwrap(),
            "--set",
            "run.particles=20000",
            "--out",
            "o",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let dir = tmp.path().join("o/gaussian-puff");
    let summary: serde_json::Value = serde_json::from_str(&read(&dir.join("summary.json"))).unwrap();
    let p = &summary["particles"];
    assert_eq!(p["particles"], 20000);
    assert_eq!(p["receptors"][0]["name"], "swimming-area");
    assert!(p["receptors"][0]["sentence"].as_str().unwrap().len() > 20);
    let files: Vec<&str> = summary["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_str().unwrap())
        .collect();
    assert!(files.contains(&"particles/comparison.csv"));
    let report = read(&dir.join("report.html"));
    assert!(report.contains("Second opinion: random-walk particles"));

    // A later `tinct particles` on the same scenario updates that run's summary and report.
    let again = tinct(
        &[
            "particles",
            scn.to_str().unwrap(),
            "--particles",
            "12000",
            "--out",
            "o",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(again.status.success(), "{}", String::from_utf8_lossy(&again.stderr));
    assert!(String::from_utf8_lossy(&again.stdout).contains("added to the grid run's summary.json"));
    let summary: serde_json::Value = serde_json::from_str(&read(&dir.join("summary.json"))).unwrap();
    assert_eq!(summary["particles"]["particles"], 12000);
    assert!(read(&dir.join("report.html")).contains("12000 particles"));

    // A grid run without particles clears the particle folder's results.
    let plain = tinct(&["run", scn.to_str().unwrap(), "--out", "o", "--quiet"], tmp.path());
    assert!(plain.status.success());
    assert!(!dir.join("particles/particles.json").exists());
    assert!(!dir.join("particles/frames/00000.png").exists());
}
