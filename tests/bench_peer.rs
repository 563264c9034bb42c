//! `tinct bench --peer DIR`: a missing peer folder is bad input naming the path; with the
//! explicit-step peer next to the repository and a C compiler, a tiny side-by-side run prints
//! the table's columns (skipped, with a message, where either is absent, as in CI).

mod common;

use common::{root, tinct};
use std::process::Command;

#[test]
fn a_missing_peer_folder_exits_2_naming_it() {
    let out = tinct(&["bench", "--peer", "/nonexistent"], &root());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("/nonexistent"), "{err}");
    assert!(out.stdout.is_empty());
}

#[test]
fn a_tiny_side_by_side_run_prints_the_table() {
    let peer = root().join("../shared/peers/explicit-step");
    if !peer.join("src/advect.c").is_file() {
        eprintln!("skipped: no peer at {}", peer.display());
        return;
    }
    if Command::new("cc").arg("--version").output().is_err() {
        eprintln!("skipped: no C compiler `cc`");
        return;
    }
    let dir = peer.to_string_lossy().into_owned();
    let out = tinct(
        &[
            "bench",
            "--peer",
            &dir,
            "--sizes",
            "64",
            "--reps",
            "1",
            "--seconds",
            "0.05",
        ],
        &root(),
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{text}{}", String::from_utf8_lossy(&out.stderr));
    assert!(
        text.contains("| N | C fused | C fused+prefetch | tinct | tinct / best C |"),
        "{text}"
    );
    assert!(text.lines().any(|l| l.starts_with("| 64 | ")), "{text}");
    assert!(text.lines().any(|l| l.starts_with("| 200x100 ")), "{text}");
}
