//! What a run does with its folder when things go wrong, through the real binary: a folder that
//! cannot be created is refused before any step (exit 2) naming the path and the OS error; a
//! locked folder is refused naming the holder's PID; a new run leaves nothing of an earlier,
//! longer one; a write that fails mid-run (file size limit) is exit 1 naming the file and the OS
//! error, and leaves only complete files.

mod common;

use common::root;
use std::fs::OpenOptions;
use std::io::Write;
use std::path::Path;
use std::process::{Command, Output};

/// `tinct run <puff> --out OUT --quiet --set ...` in `dir`, with an optional file size limit.
fn run_puff(dir: &Path, out: &str, sets: &[&str], fsize: Option<u64>) -> Output {
    let puff = root().join("scenarios/gaussian-puff.toml");
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_tinct"));
    cmd.current_dir(dir)
        .args(["run", puff.to_str().unwrap(), "--out", out, "--quiet"]);
    for s in sets {
        cmd.args(["--set", s]);
    }
    if let Some(limit) = fsize {
        common::limit_file_size(&mut cmd, limit);
    }
    cmd.output().unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Every file under `dir` whose name does not start with a dot is complete: CSV files end with a
/// newline and every row has the header's fields, all numbers; JSON parses; PNGs decode; no
/// temporary file is left. Returns the names checked.
fn assert_complete(dir: &Path) -> Vec<String> {
    let mut seen = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().into_owned();
        let path = e.path();
        assert!(!name.contains(".tmp-"), "temporary file left: {}", path.display());
        if e.file_type().unwrap().is_dir() {
            seen.extend(assert_complete(&path).into_iter().map(|n| format!("{name}/{n}")));
            continue;
        }
        if name.starts_with('.') {
            continue;
        }
        let bytes = std::fs::read(&path).unwrap();
        if name.ends_with(".csv") {
            assert_csv_complete(&path);
        } else if name.ends_with(".json") {
            serde_json::from_slice::<serde_json::Value>(&bytes).unwrap_or_else(|e| panic!("{name}: {e}"));
        } else if name.ends_with(".png") {
            image::load_from_memory(&bytes).unwrap_or_else(|e| panic!("{name}: {e}"));
        } else if name.ends_with(".toml") {
            toml::from_str::<toml::Table>(std::str::from_utf8(&bytes).unwrap()).unwrap();
        }
        seen.push(name);
    }
    seen.sort();
    seen
}

/// A CSV file ends with a newline and every row has the header's number of fields, each a
/// number. Returns the data rows.
pub fn assert_csv_complete(path: &Path) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.ends_with('\n'), "{} does not end with a newline", path.display());
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let n = header.split(',').count();
    let mut rows = 0;
    for line in lines {
        let fields: Vec<&str> = line.split(',').collect();
        assert_eq!(fields.len(), n, "{}: {line}", path.display());
        for f in fields {
            f.parse::<f64>()
                .unwrap_or_else(|e| panic!("{}: {f}: {e}", path.display()));
        }
        rows += 1;
    }
    rows
}

#[test]
fn a_folder_that_cannot_be_created_is_refused_before_any_step() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("plain-file"), b"not a folder").unwrap();
    let o = run_puff(tmp.path(), "plain-file/sub", &[], None);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("plain-file/sub") && err.contains("Not a directory"),
        "{err}"
    );
    assert!(
        o.stdout.is_empty(),
        "nothing ran: {}",
        String::from_utf8_lossy(&o.stdout)
    );

    let o = run_puff(tmp.path(), "/proc/tinct-results", &[], None);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("/proc/tinct-results") && err.contains("os error"), "{err}");
}

#[test]
fn a_locked_folder_is_refused_naming_the_holder() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("budget.csv"), "an earlier run's log\n").unwrap();
    let mut lock = OpenOptions::new()
        .write(true)
        .create(true)
        .truncate(true)
        .open(dir.join(".lock"))
        .unwrap();
    lock.try_lock().unwrap();
    writeln!(lock, "{}", std::process::id()).unwrap();

    let o = run_puff(tmp.path(), "o", &["run.frames=2"], None);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains(&format!("process {}", std::process::id())), "{err}");
    // The refused run touched nothing.
    assert_eq!(
        std::fs::read_to_string(dir.join("budget.csv")).unwrap(),
        "an earlier run's log\n"
    );
    assert!(!dir.join("summary.json").exists());

    drop(lock);
    let o = run_puff(tmp.path(), "o", &["run.frames=2"], None);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(assert_csv_complete(&dir.join("budget.csv")) > 2);
}

#[test]
fn a_new_run_leaves_nothing_of_an_earlier_longer_one() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    let o = run_puff(tmp.path(), "o", &["run.frames=6", "output.animation=true"], None);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(dir.join("frames/00006.png").is_file() && dir.join("animation.gif").is_file());
    assert!(dir.join("exceedance.csv").is_file());
    // A temporary file of a writer that died, and a file of the user's.
    let dead = 4_194_304 + 99;
    std::fs::write(dir.join(format!(".report.html.tmp-{dead}-0")), b"half").unwrap();
    std::fs::write(dir.join("frames/notes.txt"), b"mine").unwrap();

    // The same scenario name, without thresholds (no exceedance), two frames, no animation.
    let text = std::fs::read_to_string(root().join("scenarios/gaussian-puff.toml"))
        .unwrap()
        .replace("threshold = 5.0e6", "");
    std::fs::write(tmp.path().join("puff.toml"), text).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_tinct"))
        .current_dir(tmp.path())
        .args(["run", "puff.toml", "--out", "o", "--quiet"])
        .args(["--set", "run.frames=2", "--set", "output.animation=false"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let files = assert_complete(&dir);
    let frames: Vec<&String> = files.iter().filter(|f| f.starts_with("frames/")).collect();
    assert_eq!(
        frames,
        [
            "frames/00000.png",
            "frames/00001.png",
            "frames/00002.png",
            "frames/notes.txt"
        ]
    );
    for gone in ["animation.gif", "exceedance.csv", "plots/exceedance.png"] {
        assert!(
            !files.iter().any(|f| f == gone),
            "{gone} of the earlier run is left: {files:?}"
        );
    }
    assert!(!dir.join(format!(".report.html.tmp-{dead}-0")).exists());
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["frames"], 3, "{summary}");
}

#[test]
fn a_write_that_fails_mid_run_is_exit_1_and_every_file_stays_complete() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("o/gaussian-puff");
    // Each variable of fields.nc is 160 kB (200 x 100 doubles): c_max, hours_above and the
    // first record fit under 600 kB, the second record (the first frame after steps) does not.
    let o = run_puff(tmp.path(), "o", &["run.log_every=1"], Some(600_000));
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("fields.nc") && err.contains("File too large"), "{err}");
    let files = assert_complete(&dir);
    for f in ["budget.csv", "receptors.csv", "summary.json", "scenario.toml"] {
        assert!(files.iter().any(|n| n == f), "{f} missing: {files:?}");
    }
    // The logs ran past the start: steps were taken before the write failed.
    assert!(assert_csv_complete(&dir.join("budget.csv")) > 10);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["status"], "failed", "{summary}");
    assert!(
        summary["error"].as_str().unwrap().contains("File too large"),
        "{summary}"
    );
}
