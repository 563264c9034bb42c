//! No silent wrong answers: values whose arithmetic overflows, physically absurd values and
//! silently ignored combinations are refused up front through the real binary (exit 2, the key
//! named, nothing written), and a run whose mass, residual or field stops being a finite number
//! fails (exit 1) instead of finishing with NaN in its logs.

mod common;

use common::{root, tinct};
use std::path::Path;

/// Runs `tinct run` on a shipped scenario with `--set` overrides into `dir/results`.
fn run_set(dir: &Path, scenario: &str, sets: &[&str]) -> std::process::Output {
    let file = root().join("scenarios").join(scenario);
    let mut args = vec!["run", file.to_str().unwrap(), "--out", "results", "--quiet"];
    for s in sets {
        args.extend(["--set", s]);
    }
    tinct(&args, dir)
}

/// Each case is refused as bad input (exit 2) naming `key`, and no output folder appears.
fn assert_refused(scenario: &str, cases: &[(&[&str], &str)]) {
    let mut failures = Vec::new();
    for (sets, key) in cases {
        let tmp = tempfile::tempdir().unwrap();
        let out = run_set(tmp.path(), scenario, sets);
        let stderr = String::from_utf8_lossy(&out.stderr);
        if out.status.code() != Some(2) || !stderr.contains(key) || tmp.path().join("results").exists() {
            failures.push(format!(
                "--set {sets:?}: exit {:?}, expected 2 naming {key} and nothing written; stderr:\n{stderr}",
                out.status.code()
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// Item "NaN budget with exit 0": inputs whose products overflow (depth x cell area x
/// concentration, released mass per cell volume) used to run to the end with NaN mass in
/// budget.csv, `final_mass: null` and `max_abs_residual: 0.0`; they are refused up front.
#[test]
fn overflowing_products_are_refused_up_front() {
    assert_refused(
        "gaussian-puff.toml",
        &[
            (&["grid.depth=1e308"], "grid.depth"),
            (&["grid.dx=1e300"], "grid.dx"),
            (&["initial.kind=\"uniform\"", "initial.value=1e308"], "initial.value"),
            (&["source[0].mass=1e300"], "source[0].mass"),
        ],
    );
}

/// A run whose mass stops being finite (the cell volume overflows although every
/// concentration is finite) fails at step 0 naming the quantity; budget.csv is kept and
/// summary.json's largest residual is not a silent 0.
#[test]
fn a_non_finite_mass_is_a_failed_run() {
    let tmp = tempfile::tempdir().unwrap();
    let mut scn =
        tinct::scenario::load(&root().join("scenarios/gaussian-puff.toml"), &["run.frames=1".into()]).unwrap();
    // Past the scenario checks (a library user can build this): 1e200 m cells overflow h dA.
    scn.model.grid.dx = 1e200;
    scn.model.grid.dy = 1e200;
    let err = match tinct::run::execute(&scn, tmp.path(), &mut |_| {}, &mut |_| {}) {
        Err(tinct::run::RunFailure::Stopped { error, outcome }) => {
            let r = outcome.summary.max_abs_residual;
            assert!(r.is_nan() || r > 0.0, "max_abs_residual = {r}");
            error.to_string()
        }
        Err(e) => panic!("expected a stopped run, got {e}"),
        Ok(_) => panic!("a run with an infinite mass completed"),
    };
    assert!(
        err.contains("step 0") && err.contains("mass") && err.contains("cell"),
        "{err}"
    );
    assert!(tmp.path().join("gaussian-puff/budget.csv").is_file());
}

/// The summary's largest residual is NaN-aware: a NaN residual is never reported as 0.
#[test]
fn a_nan_residual_is_not_hidden_by_the_maximum() {
    let tmp = tempfile::tempdir().unwrap();
    let mut scn =
        tinct::scenario::load(&root().join("scenarios/gaussian-puff.toml"), &["run.frames=1".into()]).unwrap();
    scn.model.grid.dx = 1e200;
    scn.model.grid.dy = 1e200;
    if let Err(tinct::run::RunFailure::Stopped { outcome, .. }) =
        tinct::run::execute(&scn, tmp.path(), &mut |_| {}, &mut |_| {})
    {
        let text = std::fs::read_to_string(outcome.dir.join("summary.json")).unwrap();
        assert!(!text.contains("\"max_abs_residual\": 0.0"), "{text}");
    } else {
        panic!("the run did not stop");
    }
}

/// Item "physically absurd values": each used to pass validation and then fail obscurely
/// (dt = 0, NaN, a key the user never wrote, only "outside the grid"); each is refused naming
/// the key the user wrote. The ranges are the README's (scenario section).
#[test]
fn physically_absurd_values_are_refused_naming_the_key() {
    assert_refused(
        "gaussian-puff.toml",
        &[
            (&["tracer.diffusivity=1e308"], "tracer.diffusivity"),
            (&["tracer.diffusivity=[1.0, 2e6]"], "tracer.diffusivity[1]"),
            (&["grid.depth=5e-324"], "grid.depth"),
            (&["grid.depth=2e4"], "grid.depth"),
            (&["grid.dx=5e-324"], "grid.dx"),
            (&["grid.dx=1e-300"], "grid.dx"),
            (&["grid.dy=1e8"], "grid.dy"),
            (&["grid.origin=[1e308, 0.0]"], "grid.origin[0]"),
            (&["tracer.t90=5e-324"], "tracer.t90"),
            (&["tracer.t90=0.5"], "tracer.t90"),
            (&["grid.nx=1", "grid.ny=1"], "grid.nx"),
            (&["flow.tide={ period = 5e-324 }"], "flow.tide.period"),
        ],
    );
    assert_refused("rotating-cone.toml", &[(&["flow.period=5e-324"], "flow.period")]);
    assert_refused("swirl.toml", &[(&["flow.period=1e-9"], "flow.period")]);
}

/// A one-cell-wide grid is a valid 1D channel, but a point beyond it is reported with the
/// extent spelled out from grid.nx and grid.dx.
#[test]
fn a_point_outside_a_one_cell_grid_names_the_cell_count() {
    let tmp = tempfile::tempdir().unwrap();
    let out = run_set(tmp.path(), "gaussian-puff.toml", &["grid.nx=1"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("grid.nx = 1"), "{stderr}");
}

/// Messages print numbers with at most 4 significant digits (worked by hand: 1/3 m).
#[test]
fn range_messages_round_numbers() {
    let tmp = tempfile::tempdir().unwrap();
    let out = run_set(tmp.path(), "gaussian-puff.toml", &["grid.depth=0.000333333333333"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    let first = stderr.lines().next().unwrap_or("");
    let msg = first.split("(value from").next().unwrap_or(first);
    assert!(
        msg.contains("grid.depth") && msg.contains("3.333e-4") && !msg.contains("3.3333"),
        "{stderr}"
    );
}

/// Item "silent acceptances": a tide shorter than the step, both scheme.dt and
/// scheme.courant, an initial shape entirely outside the grid and duplicate source names used
/// to run with exit 0; each is refused naming the key(s).
#[test]
fn silent_acceptances_are_refused() {
    assert_refused(
        "gaussian-puff.toml",
        &[
            // 12.42 h typed as 12.42 s, against steps of about 10 s.
            (&["flow.tide={ period = 12.42 }"], "flow.tide.period"),
            (&["scheme.dt=1.0", "scheme.courant=0.3"], "scheme.courant"),
            (&["scheme.dt=1.0", "scheme.courant=0.3"], "scheme.dt"),
            (
                &["initial.kind=\"gaussian\"", "initial.centre=[-500.0, 300.0]", "initial.sigma=10.0"],
                "initial.centre",
            ),
            (
                &["initial.kind=\"cone\"", "initial.centre=[1000.0, 5000.0]", "initial.radius=100.0"],
                "initial.centre",
            ),
            (&["receptor[1].name=\"swimming-area\""], "receptor[1].name"),
            (
                &["source=[{ name = \"a\", at = [300.0, 300.0], mass = 1.0 }, { name = \"a\", at = [400.0, 300.0], mass = 1.0 }]"],
                "source[1].name",
            ),
        ],
    );
}
