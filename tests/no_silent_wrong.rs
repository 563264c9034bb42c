//! Regression tests through the real binary for inputs that once panicked or gave a silent
//! wrong answer: colour ranges too narrow to draw.

mod common;

use common::{root, tinct};
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
