//! Regression tests through the real binary for inputs that once panicked or gave a silent
//! wrong answer: colour ranges too narrow to draw, and `tinct gci` with non-finite values or
//! grids out of order.

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
