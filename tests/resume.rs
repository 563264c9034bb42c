//! Checkpoint and resume through the binary: a run killed with SIGKILL at several points and
//! resumed with `--resume` ends with the same files, byte for byte, as an uninterrupted run
//! (apart from the wall-time fields of `summary.json`), for explicit, implicit and IMEX
//! schemes; SIGINT stops a run with exit 130 and a resumable checkpoint; a checkpoint of
//! another scenario is refused with exit 2. (Common practice: a restart must reproduce the
//! uninterrupted run exactly.)

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn scenario(time: &str, log_every: u32) -> String {
    format!(
        r#"name = "berth"
[grid]
nx = 160
ny = 80
dx = 5.0
depth = 4.0
[tracer]
name = "dye"
units = "ug/L"
diffusivity = 0.5
decay_rate = 1e-5
[flow]
kind = "openings"
tide = {{ period = 44712.0, phase = 1.5708, amplitude = 0.8 }}
[[flow.opening]]
name = "sea"
side = "south"
from = 0.0
to = 800.0
[boundary]
west = "wall"
east = "wall"
south = "open"
north = "wall"
[[source]]
name = "berth"
at = [400.0, 250.0]
mass = 5.0e6
start = 0.0
spread = 10.0
[[receptor]]
name = "beach"
at = [100.0, 350.0]
threshold = 1.0
[scheme]
convection = "van_leer"
{time}
[run]
end = 20000.0
frames = 6
log_every = {log_every}
checkpoint_every = 300.0
"#
    )
}

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_tinct"))
}

fn run(dir: &Path, scn: &Path, out: &str, extra: &[&str]) -> std::process::Output {
    let mut args = vec!["run", scn.to_str().unwrap(), "--out", out, "--quiet"];
    args.extend_from_slice(extra);
    Command::new(bin()).args(&args).current_dir(dir).output().unwrap()
}

fn lines(p: &Path) -> usize {
    std::fs::read_to_string(p).map(|s| s.lines().count()).unwrap_or(0)
}

/// Starts a run and kills it with SIGKILL once `budget.csv` has `rows` data rows and a
/// checkpoint exists; returns false when the run ended first.
fn kill_at(dir: &Path, scn: &Path, out: &str, rows: usize) -> bool {
    let mut child = Command::new(bin())
        .args(["run", scn.to_str().unwrap(), "--out", out, "--quiet"])
        .current_dir(dir)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let folder = dir.join(out).join("berth");
    let t0 = Instant::now();
    loop {
        if let Ok(Some(_)) = child.try_wait() {
            return false;
        }
        if lines(&folder.join("budget.csv")) > rows && folder.join("checkpoint.bin").exists() {
            child.kill().unwrap(); // SIGKILL
            child.wait().unwrap();
            return true;
        }
        assert!(t0.elapsed() < Duration::from_secs(120), "the run did not progress");
        std::thread::sleep(Duration::from_millis(2));
    }
}

/// Every file of a finished run, relative path -> bytes (summary.json without its wall-time
/// fields; the checkpoint and lock files left out).
fn files(folder: &Path) -> Vec<(String, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![folder.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let p = e.path();
            let rel = p.strip_prefix(folder).unwrap().to_string_lossy().to_string();
            if p.is_dir() {
                stack.push(p);
                continue;
            }
            if rel.starts_with('.') || rel == "checkpoint.bin" || rel.ends_with(".lock") {
                continue;
            }
            let mut bytes = std::fs::read(&p).unwrap();
            if rel == "summary.json" {
                let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                for k in ["wall_seconds", "output_seconds", "cell_updates_per_second"] {
                    v.as_object_mut().unwrap().remove(k);
                }
                bytes = serde_json::to_vec_pretty(&v).unwrap();
            }
            if rel == "report.html" {
                // The report quotes the wall time: compare it without the numerical facts.
                let s = String::from_utf8(bytes).unwrap();
                bytes = s
                    .lines()
                    .filter(|l| !l.contains("Wall time"))
                    .collect::<Vec<_>>()
                    .join("\n")
                    .into_bytes();
            }
            out.push((rel, bytes));
        }
    }
    out.sort();
    out
}

/// A temporary folder with the scenario written into it and the files of its uninterrupted run
/// (into `whole/`).
fn with_reference(time: &str, log_every: u32) -> (tempfile::TempDir, PathBuf, Vec<(String, Vec<u8>)>) {
    let dir = tempfile::tempdir().unwrap();
    let scn = dir.path().join("berth.toml");
    std::fs::write(&scn, scenario(time, log_every)).unwrap();
    let o = run(dir.path(), &scn, "whole", &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let reference = files(&dir.path().join("whole/berth"));
    (dir, scn, reference)
}

fn check_resume(time: &str, log_every: u32, kill_rows: &[usize]) {
    let (dir, scn, reference) = with_reference(time, log_every);
    assert!(reference.iter().any(|(n, _)| n == "fields.nc"));
    for (k, &rows) in kill_rows.iter().enumerate() {
        let out = format!("cut{k}");
        assert!(kill_at(dir.path(), &scn, &out, rows), "the run ended before row {rows}");
        let folder = dir.path().join(&out).join("berth");
        let s: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(folder.join("summary.json")).unwrap()).unwrap();
        assert_eq!(s["status"], "running", "a killed run says it was running");
        let o = run(dir.path(), &scn, &out, &["--resume"]);
        assert!(o.status.success(), "resume: {}", String::from_utf8_lossy(&o.stderr));
        // It continued from the checkpoint, not from the start.
        let said = String::from_utf8_lossy(&o.stdout);
        let step: u64 = said
            .split("resumed from the checkpoint at step ")
            .nth(1)
            .and_then(|r| r.split_whitespace().next())
            .and_then(|n| n.parse().ok())
            .unwrap_or_else(|| panic!("no resume line in: {said}"));
        assert!(step > 0, "{said}");
        let resumed = files(&folder);
        let names: Vec<_> = resumed.iter().map(|(n, _)| n.clone()).collect();
        let want: Vec<_> = reference.iter().map(|(n, _)| n.clone()).collect();
        assert_eq!(names, want, "kill after {rows} rows: the files differ");
        for ((n, a), (_, b)) in resumed.iter().zip(&reference) {
            assert!(a == b, "kill after {rows} rows: {n} differs from the uninterrupted run");
        }
    }
}

#[test]
fn explicit_runs_resume_bit_identically() {
    check_resume("", 5, &[3, 20, 45, 80, 130]);
}

#[test]
fn implicit_runs_resume_bit_identically() {
    check_resume("time = \"implicit\"\ncourant = 1.5", 1, &[2, 9, 20]);
}

#[test]
fn imex_runs_resume_bit_identically() {
    check_resume("time = \"imex\"", 1, &[4, 30]);
}

#[test]
fn a_checkpoint_of_another_scenario_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let scn = dir.path().join("berth.toml");
    std::fs::write(&scn, scenario("", 5)).unwrap();
    assert!(kill_at(dir.path(), &scn, "out", 10));
    std::fs::write(&scn, scenario("", 5).replace("diffusivity = 0.5", "diffusivity = 0.6")).unwrap();
    let o = run(dir.path(), &scn, "out", &["--resume"]);
    assert_eq!(o.status.code(), Some(2), "{}", String::from_utf8_lossy(&o.stderr));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("scenario"), "{err}");
}

#[test]
fn sigint_stops_with_a_resumable_checkpoint() {
    let (dir, scn, reference) = with_reference("", 5);
    let child = Command::new(bin())
        .args(["run", scn.to_str().unwrap(), "--out", "cut", "--quiet"])
        .current_dir(dir.path())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let folder = dir.path().join("cut/berth");
    while lines(&folder.join("budget.csv")) < 15 {
        std::thread::sleep(Duration::from_millis(2));
    }
    unsafe { libc::kill(child.id() as i32, libc::SIGINT) };
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(130));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--resume"));
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(folder.join("summary.json")).unwrap()).unwrap();
    assert_eq!(s["status"], "interrupted");
    let o = run(dir.path(), &scn, "cut", &["--resume"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(files(&folder) == reference, "resumed after SIGINT differs");
}

#[test]
fn after_a_write_fault_the_last_good_checkpoint_resumes() {
    let (dir, scn, reference) = with_reference("", 5);
    // A file size limit that the first checkpoints fit under and a later one does not (the
    // checkpoint carries the frames written so far, so it grows): the run fails with exit 1.
    let limit: u64 = 620_000;
    let mut cmd = Command::new(bin());
    cmd.args(["run", scn.to_str().unwrap(), "--out", "cut", "--quiet"])
        .current_dir(dir.path());
    common::limit_file_size(&mut cmd, limit);
    let o = cmd.output().unwrap();
    assert_eq!(o.status.code(), Some(1), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stderr).contains("File too large"));
    let folder = dir.path().join("cut/berth");
    assert!(
        folder.join("checkpoint.bin").exists(),
        "an earlier checkpoint was written"
    );
    let o = run(dir.path(), &scn, "cut", &["--resume"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout).contains("resumed from the checkpoint at step"));
    assert!(files(&folder) == reference, "resumed after a write fault differs");
}

#[test]
fn a_diverging_run_leaves_a_checkpoint_that_diverges_the_same_way() {
    // A fixed step 16 times the explicit limit (forced): the run blows up at step 3. Its last
    // checkpoint is a finite state before that, which resumes (no exit 2) and diverges again at
    // the same step, time and cell (common practice: a restart reproduces the run).
    let dir = tempfile::tempdir().unwrap();
    let scn = common::root().join("scenarios/gaussian-puff.toml");
    let args = ["--force", "--set", "scheme.dt=600", "--set", "run.checkpoint_every=600"];
    let first = run(dir.path(), &scn, "o", &args);
    assert_eq!(
        first.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&first.stderr)
    );
    assert!(dir.path().join("o/gaussian-puff/checkpoint.bin").exists());
    let mut resumed_args = args.to_vec();
    resumed_args.push("--resume");
    let again = run(dir.path(), &scn, "o", &resumed_args);
    assert_eq!(
        again.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&again.stderr)
    );
    let what = |o: &std::process::Output| {
        let e = String::from_utf8_lossy(&o.stderr).to_string();
        e.lines()
            .find(|l| l.contains("diverged"))
            .map(str::to_string)
            .unwrap_or(e)
    };
    assert_eq!(what(&first), what(&again));
    assert!(what(&again).contains("step 3"), "{}", what(&again));
}
