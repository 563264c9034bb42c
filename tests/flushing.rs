//! Flushing time in `summary.json`: a well-mixed basin flushed by clean water (continuously
//! stirred tank, common practice: mass falls as exp(-Q t / V)) and a closed basin with
//! first-order decay only (mass falls as exp(-lambda t); the e-folding time is 1/lambda).

mod common;

use common::tinct;

fn run(dir: &std::path::Path, text: &str) -> serde_json::Value {
    let scn = dir.join("basin.toml");
    std::fs::write(&scn, text).unwrap();
    let o = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], dir);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let s = std::fs::read_to_string(dir.join("out/basin/summary.json")).unwrap();
    // A measured flushing time comes with its chart (common practice: a valid PNG at least
    // the chart's default size).
    let chart = dir.join("out/basin/plots/flushing.png");
    let img = image::open(&chart).unwrap_or_else(|e| panic!("{}: {e}", chart.display()));
    assert!(img.width() >= 900 && img.height() >= 560);
    serde_json::from_str(&s).unwrap()
}

#[test]
fn a_well_mixed_basin_flushes_in_v_over_q() {
    let dir = tempfile::tempdir().unwrap();
    let s = run(
        dir.path(),
        r#"name = "basin"
[grid]
nx = 20
ny = 10
dx = 10.0
depth = 2.0
[tracer]
diffusivity = 50.0
[flow]
kind = "openings"
[[flow.opening]]
side = "west"
from = 0.0
to = 30.0
discharge = 4.0
[[flow.opening]]
side = "east"
from = 70.0
to = 100.0
discharge = -4.0
[boundary]
west = "open"
east = "open"
[initial]
kind = "uniform"
value = 1.0
[scheme]
time = "imex"
[run]
end = 15000.0
frames = 3
log_every = 5
"#,
    );
    let v_over_q = s["flow"]["residence"].as_f64().unwrap();
    assert!((v_over_q - 10000.0).abs() < 1e-6, "{v_over_q}");
    let t = s["flushing"]["e_folding_time"].as_f64().unwrap();
    assert!((t / v_over_q - 1.0).abs() < 0.02, "e-folding {t} s vs V/Q {v_over_q} s");
}

#[test]
fn decay_alone_gives_an_e_folding_time_of_one_over_lambda() {
    let dir = tempfile::tempdir().unwrap();
    // T90 = 3600 s: lambda = ln 10 / 3600, 1/lambda = 1563.5 s.
    let s = run(
        dir.path(),
        r#"name = "basin"
[grid]
nx = 10
ny = 10
dx = 10.0
[tracer]
t90 = 3600.0
diffusivity = 0.5
[initial]
kind = "gaussian"
centre = [50.0, 50.0]
sigma = 15.0
peak = 2.0
[run]
end = 3000.0
frames = 3
log_every = 7
"#,
    );
    let want = 3600.0 / std::f64::consts::LN_10;
    let t = s["flushing"]["e_folding_time"].as_f64().unwrap();
    assert!((t / want - 1.0).abs() < 1e-6, "{t} vs {want}");
    let r2 = s["flushing"]["fit_r2"].as_f64().unwrap();
    assert!((r2 - 1.0).abs() < 1e-9, "{r2}");
}
