//! Exceedance outputs of `tinct run`: `hours_above(threshold, y, x)` in `fields.nc`,
//! `exceedance.csv` and the summary figures, checked against a run whose frames fall on every
//! step (so `fields.nc` holds every state and the time above can be counted directly; common
//! practice: time above a level of a sampled series is the sum of the sample intervals it is
//! above). Also: frames share one colour range for the whole run.

mod common;

use common::tinct;

const CONE: &str = r#"name = "cone"
[grid]
nx = 24
ny = 20
dx = 2.0
dy = 1.0
[flow]
kind = "rotation"
centre = [24.0, 10.0]
period = 240.0
[boundary]
west = "open"
east = "open"
south = "open"
north = "open"
[initial]
kind = "cone"
centre = [24.0, 15.0]
radius = 8.0
peak = 1.0
[scheme]
convection = "upwind"
dt = 1.0
[run]
end = 30.0
frames = 30
log_every = 1
[[receptor]]
name = "pier"
at = [24.0, 15.0]
threshold = 0.5
[[receptor]]
name = "beach"
at = [10.0, 5.0]
threshold = 0.2
[[receptor]]
name = "jetty"
at = [30.0, 5.0]
threshold = 0.5
"#;

#[test]
fn time_above_matches_the_steps_and_the_area_series() {
    let dir = tempfile::tempdir().unwrap();
    let scn = dir.path().join("cone.toml");
    std::fs::write(&scn, CONE).unwrap();
    let o = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], dir.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let run = dir.path().join("out/cone");
    let mut r = netcdf3::FileReader::open(run.join("fields.nc")).unwrap();
    assert_eq!(r.data_set().dim_size("threshold"), Some(2));
    assert_eq!(r.read_var_f64("threshold").unwrap(), [0.2, 0.5]);
    let comment = r.data_set().get_var_attr_as_string("threshold", "comment").unwrap();
    assert!(comment.contains("pier, jetty"), "{comment}");
    let c = r.read_var_f64("c").unwrap();
    let hours = r.read_var_f64("hours_above").unwrap();
    let n = 24 * 20;
    assert_eq!(hours.len(), 2 * n);
    let cell_area = 2.0;
    // Per cell: the steps (dt = 1 s) whose end state is at or above the threshold.
    for (k, thr) in [0.2, 0.5].iter().enumerate() {
        for p in 0..n {
            let steps = (1..=30).filter(|&t| c[t * n + p] >= *thr).count() as f64;
            assert!(
                (hours[k * n + p] * 3600.0 - steps).abs() < 1e-9,
                "threshold {thr} cell {p}: {} s against {steps} steps",
                hours[k * n + p] * 3600.0
            );
        }
    }
    assert!(hours[n..].iter().any(|&h| h > 0.0), "the cone starts above 0.5");

    // exceedance.csv integrated over the steps (each row's area over the interval ending at
    // it) equals the time above summed over cells.
    let csv = std::fs::read_to_string(run.join("exceedance.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some("time,area_above_0.2,area_above_0.5"));
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), 31);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    for k in 0..2 {
        let integral: f64 = rows.windows(2).map(|w| w[1][k + 1] * (w[1][0] - w[0][0])).sum();
        let summed: f64 = hours[k * n..(k + 1) * n].iter().sum::<f64>() * 3600.0 * cell_area;
        assert!(
            (integral - summed).abs() <= 1e-9 * summed.max(1.0),
            "{integral} against {summed}"
        );
        let fig = &summary["exceedance"][k];
        assert!((fig["area_time"].as_f64().unwrap() - summed).abs() <= 1e-9 * summed.max(1.0));
        let largest = rows.iter().map(|r| r[k + 1]).fold(0.0, f64::max);
        assert_eq!(fig["largest_area"].as_f64().unwrap(), largest);
        // Area at t = 0 counted directly from the first record.
        let thr = [0.2, 0.5][k];
        let a0 = (0..n).filter(|&p| c[p] >= thr).count() as f64 * cell_area;
        assert_eq!(rows[0][k + 1], a0);
    }
    assert_eq!(
        summary["exceedance"][1]["receptors"],
        serde_json::json!(["pier", "jetty"])
    );
    // The charts: valid PNGs at least the default chart size, listed in the summary. The cone
    // starts with tracer and has no sources, so the run is also measured as a flushing run.
    for name in ["receptors", "budget", "exceedance", "flushing"] {
        let p = run.join(format!("plots/{name}.png"));
        let img = image::open(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        assert!(img.width() >= 900 && img.height() >= 560, "{name}");
        let listed = summary["files"].as_array().unwrap();
        assert!(listed.iter().any(|f| f == &format!("plots/{name}.png")), "{name}");
    }
    assert!(run.join("report.html").exists());
}

#[test]
fn frames_share_one_colour_range() {
    // A uniform tracer that decays: each frame alone is uniform, so a per-frame range would
    // draw every frame alike; one range for the run shows the fall (exact decay e^(-k t)).
    let dir = tempfile::tempdir().unwrap();
    let scn = dir.path().join("decay.toml");
    std::fs::write(
        &scn,
        r#"name = "decay"
[grid]
nx = 10
ny = 10
dx = 1.0
[tracer]
decay_rate = 0.1
[flow]
kind = "uniform"
velocity = [0.0, 0.0]
[initial]
kind = "uniform"
value = 1.0
[output]
colour = "linear"
[run]
end = 10.0
frames = 2
"#,
    )
    .unwrap();
    let o = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], dir.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let frames = dir.path().join("out/decay/frames");
    let first = image::open(frames.join("00000.png")).unwrap().to_rgb8();
    let last = image::open(frames.join("00002.png")).unwrap().to_rgb8();
    assert_eq!(first.dimensions(), last.dimensions());
    let (w, h) = first.dimensions();
    let (a, b) = (first.get_pixel(w / 2, h / 3), last.get_pixel(w / 2, h / 3));
    assert_ne!(a, b, "the decayed field must not look like the initial one");
}
