//! A run stopped from outside, through the real binary: SIGINT finishes it like a stopped run
//! (exit 130, `summary.json` status `interrupted`, complete logs, the way to resume on stderr);
//! `kill -9` leaves the logs complete up to their last row and `summary.json` saying `running`,
//! and frees the folder for the next run; a second SIGINT ends it at once (exit 130), files complete.

mod common;

use common::root;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// Starts a puff run that would take far longer than the test (a 200-hour simulation, a budget
/// row every 5 steps) into `dir/o`.
fn start_long_run(dir: &Path) -> Child {
    let puff = root().join("scenarios/gaussian-puff.toml");
    Command::new(env!("CARGO_BIN_EXE_tinct"))
        .current_dir(dir)
        .args(["run", puff.to_str().unwrap(), "--out", "o", "--quiet"])
        .args([
            "--set",
            "run.end=720000",
            "--set",
            "run.frames=4",
            "--set",
            "run.log_every=5",
        ])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Waits until `csv` holds more than `rows` lines (its header and at least `rows` data rows).
fn wait_for_rows(csv: &Path, rows: usize, child: &mut Child) {
    let t0 = Instant::now();
    while std::fs::read_to_string(csv).map_or(0, |t| t.lines().count()) <= rows {
        assert!(
            child.try_wait().unwrap().is_none(),
            "the run ended before it was stopped"
        );
        assert!(t0.elapsed() < Duration::from_secs(20), "no log rows in 20 s");
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// Every line of a CSV file has the header's number of fields, all numbers, and the file ends
/// with a newline. Returns the data rows.
fn complete_rows(path: &Path) -> Vec<Vec<f64>> {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.ends_with('\n'), "{}: cut-off last line", path.display());
    let mut lines = text.lines();
    let n = lines.next().unwrap().split(',').count();
    lines
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|f| f.parse().unwrap()).collect();
            assert_eq!(v.len(), n, "{}: {l}", path.display());
            v
        })
        .collect()
}

fn summary(dir: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap()
}

#[test]
fn sigint_stops_the_run_with_complete_files_and_says_how_to_resume() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    let mut child = start_long_run(tmp.path());
    wait_for_rows(&dir.join("budget.csv"), 5, &mut child);
    let pid = libc::pid_t::try_from(child.id()).unwrap();
    // SAFETY: sends a signal to our own child.
    assert_eq!(unsafe { libc::kill(pid, libc::SIGINT) }, 0);
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(130), "{err}");
    assert!(
        err.contains("interrupted") && err.contains("gaussian-puff.toml --resume"),
        "{err}"
    );
    let s = summary(&dir);
    assert_eq!(s["status"], "interrupted", "{s}");
    let steps = s["steps"].as_u64().unwrap();
    assert!(steps > 0 && s["simulated_time"].as_f64().unwrap() < 720000.0, "{s}");
    // The budget ends at the step the run stopped at; receptors have a row per budget row.
    let budget = complete_rows(&dir.join("budget.csv"));
    assert_eq!(budget.last().unwrap()[1] as u64, steps);
    assert_eq!(complete_rows(&dir.join("receptors.csv")).len(), budget.len());
    assert!(dir.join("fields.nc").is_file() && dir.join("report.html").is_file());
    let frame = std::fs::read(dir.join("frames/00000.png")).unwrap();
    image::load_from_memory(&frame).unwrap();
}

#[test]
fn kill_9_keeps_the_logs_and_frees_the_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    let mut child = start_long_run(tmp.path());
    wait_for_rows(&dir.join("budget.csv"), 20, &mut child);
    child.kill().unwrap();
    child.wait().unwrap();
    let budget = complete_rows(&dir.join("budget.csv"));
    assert!(budget.len() >= 20, "waited for 20 data rows");
    let receptors = complete_rows(&dir.join("receptors.csv"));
    assert!(receptors.len() + 1 >= budget.len() && receptors.len() <= budget.len() + 1);
    assert_eq!(summary(&dir)["status"], "running");

    // The lock died with the process: the next run takes the folder over and clears the
    // dead run's temporary files.
    let out = Command::new(env!("CARGO_BIN_EXE_tinct"))
        .current_dir(tmp.path())
        .args(["run", root().join("scenarios/gaussian-puff.toml").to_str().unwrap()])
        .args(["--out", "o", "--quiet", "--set", "run.frames=2"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert_eq!(summary(&dir)["status"], "completed");
    for e in std::fs::read_dir(&dir).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.contains(".tmp-"), "{name}");
    }
}

#[test]
fn a_second_sigint_ends_the_run_at_once_with_complete_files() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    let mut child = start_long_run(tmp.path());
    wait_for_rows(&dir.join("budget.csv"), 5, &mut child);
    let pid = libc::pid_t::try_from(child.id()).unwrap();
    // SAFETY: sends signals to our own child.
    unsafe {
        assert_eq!(libc::kill(pid, libc::SIGINT), 0);
        assert_eq!(libc::kill(pid, libc::SIGINT), 0);
    }
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(130), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(
        complete_rows(&dir.join("budget.csv")).len() >= 5,
        "waited for 5 data rows"
    );
    complete_rows(&dir.join("receptors.csv"));
    let status = summary(&dir)["status"].as_str().unwrap().to_string();
    assert!(status == "running" || status == "interrupted", "{status}");
    for e in std::fs::read_dir(&dir).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        if !name.starts_with('.') && name.ends_with(".png") {
            image::load_from_memory(&std::fs::read(dir.join(&name)).unwrap()).unwrap();
        }
    }
}
