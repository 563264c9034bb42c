//! The harbour examples that read data files (marina: a land image; outfall: a land image and
//! a depth grid) through the real binary: `tinct example NAME --out DIR` writes a self-contained
//! set, and `tinct run` on it, from another working directory, completes with a closed budget.

use std::path::Path;
use std::process::{Command, Output};

fn tinct(args: &[&str], cwd: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tinct"))
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap()
}

/// The largest |residual| in budget.csv, by its header.
fn largest_residual(budget: &Path) -> f64 {
    let text = std::fs::read_to_string(budget).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = header.iter().position(|&h| h == "residual").expect("a residual column");
    let mut rows = 0;
    let mut worst = 0.0f64;
    for line in lines {
        let r: f64 = line.split(',').nth(col).unwrap().parse().unwrap();
        worst = worst.max(r.abs());
        rows += 1;
    }
    assert!(rows >= 2, "{}: {rows} rows", budget.display());
    worst
}

/// Writes the example into a folder of its own and runs it, shortened, from elsewhere.
fn write_and_run(name: &str, end: &str) {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("example");
    let out = tinct(&["example", name, "--out", dir.to_str().unwrap()], tmp.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let scenario = dir.join(format!("{name}.toml"));
    assert_eq!(
        std::fs::read_to_string(&scenario).unwrap(),
        tinct::scenario::example(name).unwrap()
    );
    for f in tinct::scenario::example_files(name).unwrap() {
        assert!(dir.join(f.name).is_file(), "{name}: {} not written", f.name);
    }
    let results = tmp.path().join("out");
    let set = format!("run.end={end}");
    let out = tinct(
        &[
            "run",
            scenario.to_str().unwrap(),
            "--quiet",
            "--out",
            results.to_str().unwrap(),
            "--set",
            &set,
        ],
        tmp.path(),
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{name}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let run = results.join(name);
    assert!(run.join("summary.json").is_file(), "{name}: summary.json missing");
    assert!(run.join("budget.csv").is_file(), "{name}: budget.csv missing");
    let worst = largest_residual(&run.join("budget.csv"));
    assert!(worst < 1e-10, "{name}: largest budget residual {worst}");
}

#[test]
fn marina_example_writes_its_land_image_and_runs() {
    write_and_run("marina", "3600.0");
}

#[test]
fn outfall_example_writes_its_land_image_and_depth_grid_and_runs() {
    write_and_run("outfall", "3600.0");
}

#[test]
fn example_out_refuses_an_unknown_name_and_overwrites_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tinct(&["example", "no-such-harbour", "--out", "x"], tmp.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(!tmp.path().join("x").exists());
    std::fs::write(tmp.path().join("marina-land.png"), b"mine").unwrap();
    let out = tinct(&["example", "marina", "--out", "."], tmp.path());
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("marina-land.png exists and differs"));
    assert_eq!(std::fs::read(tmp.path().join("marina-land.png")).unwrap(), b"mine");
    assert!(!tmp.path().join("marina.toml").exists());
}
