//! Regression tests through the real binary for inputs that once panicked or gave a silent
//! wrong answer: colour ranges too narrow to draw, `tinct gci` with non-finite values or grids
//! out of order, `receptors.csv` ignoring `run.log_every`, and `tinct run --help` saying what
//! `--out` is relative to.

mod common;

use common::{root, tinct};
use std::path::Path;
use std::process::Output;

fn text(o: &Output) -> String {
    format!(
        "{}\n{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

fn scenario(name: &str) -> String {
    root().join("scenarios").join(name).to_string_lossy().into_owned()
}

/// Exit 0, or a clean exit 2 whose message names `key`; never a panic (exit 101).
fn clean(o: &Output, key: &str) {
    let all = text(o);
    assert!(!all.contains("panicked"), "{all}");
    match o.status.code() {
        Some(0) => {}
        Some(2) => assert!(all.contains(key), "exit 2 without naming {key}: {all}"),
        other => panic!("exit {other:?}: {all}"),
    }
}

#[test]
fn a_subnormal_colour_range_or_peak_never_panics() {
    // Worked by hand: before the fix both commands panicked with "capacity overflow" in the
    // colour-bar ticks (a tick step of 0 from the span 5e-324).
    let dir = tempfile::tempdir().unwrap();
    let puff = scenario("gaussian-puff.toml");
    let o = tinct(
        &[
            "run",
            &puff,
            "--out",
            "results",
            "--quiet",
            "--set",
            "output.range=[0,5e-324]",
            "--set",
            "output.colour=linear",
        ],
        dir.path(),
    );
    clean(&o, "output.range");
    // The choice documented in the README: such a range is refused as bad input.
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(!dir.path().join("results").exists(), "nothing is written on bad input");

    let cone = scenario("rotating-cone.toml");
    let o = tinct(
        &[
            "run",
            &cone,
            "--out",
            "results",
            "--quiet",
            "--set",
            "initial.peak=5e-324",
        ],
        dir.path(),
    );
    clean(&o, "initial.peak");
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    assert!(dir.path().join("results/rotating-cone/frames/00012.png").is_file());
}

/// `tinct gci` with the given arguments must exit 2 and mention every word of `expect`.
fn gci_refuses(args: &[&str], expect: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let mut all = vec!["gci"];
    all.extend_from_slice(args);
    let o = tinct(&all, dir.path());
    let out = text(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {out}");
    for e in expect {
        assert!(out.contains(e), "{args:?}: no '{e}' in {out}");
    }
}

#[test]
fn gci_refuses_non_finite_values_and_grids_out_of_order() {
    // Worked by hand: before the fix each of these printed "degenerate" and exited 0.
    gci_refuses(&["--values", "1,NaN,1.5", "--spacing", "1,2,4"], &["--values", "NaN"]);
    gci_refuses(
        &["--values", "1,1.2,inf", "--spacing", "1,2,4"],
        &["--values", "infinite"],
    );
    gci_refuses(
        &["--values", "1,1.2,1.3", "--spacing", "1,inf,4"],
        &["--spacing", "infinite"],
    );
    gci_refuses(
        &["--values", "1,1.2,1.3", "--spacing", "4,2,1"],
        &["--spacing", "finest first", "4"],
    );
    gci_refuses(
        &["--values", "6.063,5.972,5.863", "--cells", "4500,8000,18000"],
        &["--cells", "finest first", "4500"],
    );
    gci_refuses(&["--values", "1,1.2,1.3", "--cells", "0,8000,4500"], &["--cells", "0"]);
    gci_refuses(
        &["--values", "1,1.2,1.3", "--spacing", "1,1,4"],
        &["--spacing", "finest first"],
    );
    // The worked example still passes (Celik et al. 2008, Table 1).
    let dir = tempfile::tempdir().unwrap();
    let o = tinct(
        &["gci", "--values", "6.063,5.972,5.863", "--cells", "18000,8000,4500"],
        dir.path(),
    );
    assert!(o.status.success() && text(&o).contains("monotonic"), "{}", text(&o));
}

fn csv_rows(path: &Path) -> Vec<Vec<f64>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records()
        .map(|rec| rec.unwrap().iter().map(|v| v.parse::<f64>().unwrap()).collect())
        .collect()
}

fn receptor_peaks(dir: &Path) -> Vec<(f64, f64, Option<f64>, Option<f64>)> {
    let text = std::fs::read_to_string(dir.join("summary.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v["receptors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["peak"].as_f64().unwrap(),
                r["peak_time"].as_f64().unwrap(),
                r["arrival_time"].as_f64(),
                r["time_above_threshold"].as_f64(),
            )
        })
        .collect()
}

#[test]
fn receptors_csv_follows_log_every_and_the_statistics_use_every_step() {
    // Worked by hand: before the fix receptors.csv had a row after every step whatever
    // run.log_every said.
    let dir = tempfile::tempdir().unwrap();
    let puff = scenario("gaussian-puff.toml");
    let run = |log_every: &str, out: &str| {
        let o = tinct(
            &[
                "run",
                &puff,
                "--out",
                out,
                "--quiet",
                "--set",
                &format!("run.log_every={log_every}"),
            ],
            dir.path(),
        );
        assert!(o.status.success(), "{}", text(&o));
        dir.path().join(out).join("gaussian-puff")
    };
    let coarse = run("10", "every10");
    let fine = run("1", "every1");
    let steps = csv_rows(&fine.join("budget.csv")).len() - 1;
    let budget = csv_rows(&coarse.join("budget.csv"));
    let receptors = csv_rows(&coarse.join("receptors.csv"));
    assert_eq!(receptors.len(), budget.len());
    assert!(
        receptors.len() <= steps / 10 + 14,
        "{} rows for {steps} steps",
        receptors.len()
    );
    assert!(
        receptors.len() >= steps / 10,
        "{} rows for {steps} steps",
        receptors.len()
    );
    // The same times as the budget rows, the first and the last included.
    for (r, b) in receptors.iter().zip(&budget) {
        assert_eq!(r[0], b[0]);
    }
    assert_eq!(receptors[0][0], 0.0);
    assert_eq!(receptors.last().unwrap()[0], 7200.0);
    assert_eq!(csv_rows(&fine.join("receptors.csv")).len(), steps + 1);
    // Peaks, peak times, arrival and time above threshold do not depend on the log interval.
    assert_eq!(receptor_peaks(&coarse), receptor_peaks(&fine));
}

#[test]
fn run_help_says_what_out_is_relative_to() {
    let dir = tempfile::tempdir().unwrap();
    let o = tinct(&["run", "--help"], dir.path());
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("working directory"), "{out}");
    assert!(out.contains("relative to the scenario file"), "{out}");
}

#[test]
fn more_frames_than_steps_are_refused_unless_asked() {
    // Regression: run.frames = 10000 on a 738-step run forced 10,000 steps and 10,001 PNGs
    // without a word.
    let dir = tempfile::tempdir().unwrap();
    let puff = scenario("gaussian-puff.toml");
    let args = [
        "run",
        puff.as_str(),
        "--out",
        "out",
        "--quiet",
        "--set",
        "run.end=200",
        "--set",
        "run.frames=40",
    ];
    let o = tinct(&args, dir.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(
        text(&o).contains("run.frames") && text(&o).contains("--all-frames"),
        "{}",
        text(&o)
    );
    assert!(!dir.path().join("out").exists());
    let mut asked = args.to_vec();
    asked.push("--all-frames");
    let o = tinct(&asked, dir.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let frames = std::fs::read_dir(dir.path().join("out/gaussian-puff/frames"))
        .unwrap()
        .count();
    assert_eq!(frames, 41);
}

#[test]
fn a_long_run_announces_its_estimate_before_it_starts() {
    // Regression: run.end = 1e12 started silently although check estimated weeks.
    use std::io::{BufRead, BufReader};
    let dir = tempfile::tempdir().unwrap();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_tinct"))
        .args([
            "run",
            &scenario("gaussian-puff.toml"),
            "--out",
            "out",
            "--set",
            "run.end=1e9",
        ])
        .current_dir(dir.path())
        .stderr(std::process::Stdio::piped())
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stderr.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    child.kill().unwrap();
    child.wait().unwrap();
    assert!(first.contains("will take about"), "{first}");
}

#[test]
fn studies_check_their_output_folder_before_any_run() {
    // Regression: compare and converge failed on an unwritable folder only after their runs.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("blocker"), "a file, not a folder").unwrap();
    let cone = scenario("rotating-cone.toml");
    for args in [
        vec![
            "compare",
            cone.as_str(),
            "--schemes",
            "upwind",
            "--out",
            "blocker/out",
            "--quiet",
        ],
        vec!["converge", cone.as_str(), "--out", "blocker/out", "--quiet"],
    ] {
        let o = tinct(&args, dir.path());
        assert_eq!(o.status.code(), Some(2), "{}", text(&o));
        assert!(text(&o).contains("nothing was run"), "{}", text(&o));
    }
}

/// A fixed explicit step at Courant number 1 with diffusion (Courant 1 + 2 x diffusion number
/// 0.2 = 1.4): each limit alone allowed it, and the run grew without bound while staying under
/// the blow-up limit, ending "completed". The combined bound `C + 2 D <= 1` (von Neumann
/// analysis of forward-Euler upwind with central diffusion, shortest wave: amplification
/// 1 - 2 (C + 2 D); common practice) refuses it, and `--force` shows why.
#[test]
fn a_fixed_step_over_the_combined_limit_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.toml");
    std::fs::write(
        &path,
        r#"name = "s"
[grid]
nx = 60
ny = 20
dx = 10.0
depth = 2.0
[tracer]
diffusivity = 1.0
[flow]
kind = "uniform"
velocity = [1.0, 0.0]
[boundary]
west = "periodic"
east = "periodic"
south = "periodic"
north = "periodic"
[initial]
kind = "gaussian"
centre = [300.0, 100.0]
sigma = 30.0
peak = 1.0
[scheme]
convection = "upwind"
stages = 1
dt = 10.0
[run]
end = 3000.0
frames = 1
"#,
    )
    .unwrap();
    let p = path.to_string_lossy().into_owned();
    let o = tinct(&["run", &p, "--quiet"], dir.path());
    let all = text(&o);
    assert_eq!(o.status.code(), Some(2), "{all}");
    assert!(all.contains("scheme.dt") || all.contains("dt"), "{all}");
    assert!(all.contains("1.400"), "the message gives C + 2 D: {all}");
    // The same with --force: the shortest wave grows by |1 - 2 x 1.4| = 1.8 per step.
    let o = tinct(&["run", &p, "--quiet", "--force"], dir.path());
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out/s/summary.json")).unwrap()).unwrap();
    let max_ever = s["max_ever"].as_f64().or_else(|| s["max"].as_f64());
    assert!(
        o.status.code() == Some(1) || max_ever.is_some_and(|m| m > 1.5),
        "{}\n{s}",
        text(&o)
    );
}
