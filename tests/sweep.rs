//! `tinct sweep` through the binary: bad sweep files refused before anything runs, members and
//! `members.csv` as the sweep file gives them, and a killed local sweep continued without
//! rerunning its finished members.

mod common;

use common::{tinct, write_sweep_base};
use std::path::Path;
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

/// A local sweep runs its members, then the gather; both must succeed.
fn assert_sweep_ok(o: &Output) {
    assert!(
        o.status.success(),
        "{:?}\nstdout: {}\nstderr: {}",
        o.status,
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    std::fs::write(dir.join(name), text).unwrap();
    name.to_string()
}

// Common practice (the project's rule for bad input): every mistake in a sweep file is exit 2
// naming the sweep file and the key, before anything is written.
#[test]
fn bad_sweep_files_exit_2_and_write_nothing() {
    let dir = tempfile::tempdir().unwrap();
    write_sweep_base(dir.path(), 40, 600.0);
    let cases: &[(&str, &str)] = &[
        ("[axes]\n\"tracer.difusivity\" = [0.1, 0.2]", "tracer.difusivity"),
        ("[axes]\n\"tracer.diffusivity\" = [0.1, -1.0]", "tracer.diffusivity"),
        ("[axes]\n\"source[3].start\" = [0, 60]", "source[3].start"),
        ("[axes]\n\"tracer.diffusivity\" = []", "empty list"),
        (
            "[axes]\n\"tracer.diffusivity\" = { from = 0.1, to = 0.2, count = 0 }",
            "count",
        ),
        (
            "[axes]\n\"tracer.diffusivity\" = { from = 0.0, to = 0.2, count = 3, log = true }",
            "from > 0",
        ),
        ("[axes]\n\"tracer.diffusivity\" = { from = 0.1, to = 0.2 }", "count"),
        (
            "[axes]\n\"tracer.diffusivity\" = { from = 0.1, to = 0.2, count = 2, step = 1 }",
            "step",
        ),
        ("[axes]\n\"tracer.diffusivity\" = 0.1", "tracer.diffusivity"),
        ("colour = 1\n[axes]\n\"tracer.diffusivity\" = [0.1]", "colour"),
        (
            "samples = 0\n[axes]\n\"tracer.diffusivity\" = { from = 0.1, to = 0.2 }",
            "samples",
        ),
        ("seed = 3\n[axes]\n\"tracer.diffusivity\" = [0.1]", "seed"),
        ("[axes]\n", "axes"),
    ];
    for (k, (body, key)) in cases.iter().enumerate() {
        let file = write(
            dir.path(),
            &format!("bad{k}.toml"),
            &format!("base = \"base.toml\"\n{body}\n"),
        );
        let o = tinct(&["sweep", &file, "--out", "out"], dir.path());
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "case {k}: {err}");
        assert!(err.contains(&file) && err.contains(key), "case {k}: {err}");
        assert!(!dir.path().join("out").exists(), "case {k} wrote something");
    }
    // A missing base is named too.
    let file = write(
        dir.path(),
        "nobase.toml",
        "base = \"missing.toml\"\n[axes]\n\"run.end\" = [60]\n",
    );
    let o = tinct(&["sweep", &file], dir.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("missing.toml"));
}

// Common practice: the members are the product of the axes in file order (last axis fastest),
// each run with its values, and members.csv lists them.
#[test]
fn product_sweep_runs_every_member_with_its_values() {
    let dir = tempfile::tempdir().unwrap();
    write_sweep_base(dir.path(), 40, 600.0);
    let file = write(
        dir.path(),
        "s.toml",
        "base = \"base.toml\"\n[axes]\n\"tracer.diffusivity\" = [0.5, 1.0]\n\"source[0].start\" = { from = 0, to = 120, count = 3 }\n",
    );
    let o = tinct(&["sweep", &file, "--out", "out", "--quiet"], dir.path());
    assert_sweep_ok(&o);
    let root = dir.path().join("out/s");
    let csv = std::fs::read_to_string(root.join("members.csv")).unwrap();
    assert_eq!(
        csv,
        "index,tracer.diffusivity,source[0].start\n0,0.5,0\n1,0.5,60\n2,0.5,120\n3,1,0\n4,1,60\n5,1,120\n"
    );
    for i in 0..6 {
        let m = root.join(format!("members/{i:04}"));
        assert_eq!(std::fs::read_to_string(m.join("exit_code")).unwrap(), "0\n");
        let scn = std::fs::read_to_string(m.join("scenario.toml")).unwrap();
        let start = [0, 60, 120][i % 3];
        assert!(scn.contains(&format!("name = \"{i:04}\"")), "{scn}");
        assert!(scn.contains(&format!("start = {start}")), "member {i}: {scn}");
    }
}

fn member_done(root: &Path, i: usize) -> bool {
    std::fs::read_to_string(root.join(format!("members/{i:04}/exit_code"))).is_ok_and(|t| t == "0\n")
}

// Common practice: a sweep killed with SIGKILL (no chance to clean up) continues where it
// stopped: the members that finished are not run again (their summary.json is untouched) and
// the others are.
#[test]
fn killed_sweep_reruns_only_unfinished_members() {
    let dir = tempfile::tempdir().unwrap();
    write_sweep_base(dir.path(), 120, 20000.0);
    let n = 12;
    let file = write(
        dir.path(),
        "s.toml",
        &format!(
            "base = \"base.toml\"\n[axes]\n\"source[0].start\" = {{ from = 0, to = {}, count = {n} }}\n",
            (n - 1) * 10
        ),
    );
    let root = dir.path().join("out/s");
    let mut child = Command::new(env!("CARGO_BIN_EXE_tinct"))
        .args(["sweep", &file, "--out", "out", "--jobs", "1", "--quiet"])
        .current_dir(dir.path())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let t0 = Instant::now();
    while (0..n).filter(|&i| member_done(&root, i)).count() < 3 {
        assert!(t0.elapsed() < Duration::from_secs(120), "no members finished");
        assert!(
            child.try_wait().unwrap().is_none(),
            "the sweep ended before it could be killed"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    let done: Vec<usize> = (0..n).filter(|&i| member_done(&root, i)).collect();
    assert!(
        done.len() < n,
        "every member finished before the kill; make the members longer"
    );
    let mtime = |i: usize| {
        std::fs::metadata(root.join(format!("members/{i:04}/summary.json")))
            .unwrap()
            .modified()
            .unwrap()
    };
    let before: Vec<_> = done.iter().map(|&i| mtime(i)).collect();
    let o = tinct(&["sweep", &file, "--out", "out", "--quiet"], dir.path());
    assert_sweep_ok(&o);
    let out = String::from_utf8_lossy(&o.stdout);
    let expect = format!(
        "ran {} members, skipped {} already complete, 0 failed",
        n - done.len(),
        done.len()
    );
    assert!(out.contains(&expect), "expected \"{expect}\" in {out}");
    for (k, &i) in done.iter().enumerate() {
        assert_eq!(mtime(i), before[k], "member {i} was run again");
    }
    assert!((0..n).all(|i| member_done(&root, i)));
}

// Common practice: the shipped sweep loads, every member validated, axes in file order.
#[test]
fn shipped_marina_sweep_loads() {
    let s = tinct::sweep::load(
        &common::root().join("scenarios/marina-sweep.toml"),
        Some(Path::new("/tmp/x")),
    )
    .unwrap();
    assert_eq!(s.members.len(), 32);
    let keys: Vec<&str> = s.axes.iter().map(|a| a.key.as_str()).collect();
    assert_eq!(
        keys,
        [
            "source[0].start",
            "tracer.diffusivity",
            "run.end",
            "receptor[0].threshold"
        ]
    );
    assert_eq!(s.members[1].values, ["0", "0.15", "89424", "15"]);
    assert_eq!(s.root, Path::new("/tmp/x/marina-sweep"));
    assert_eq!(s.member_dir(31), Path::new("/tmp/x/marina-sweep/members/0031"));
}
