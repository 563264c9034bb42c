//! Flows from files: a CSV written from an analytic field reproduces the analytic run, a
//! divergent file flow is projected and keeps a TVD limiter bounded, and every bad file is
//! refused by the binary with exit 2 naming what is wrong.

mod common;

use common::{run_to, tinct};
use std::fmt::Write as _;
use std::path::Path;
use std::sync::Arc;
use tinct::flow::file::FlowFile;
use tinct::flow::{FileFlow, FlowKind, FlowSpec};
use tinct::grid::{Grid, Mask};
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::step::{Scheme, Simulation};

/// Writes `x,y,u,v` at every cell centre of `g` from `f`.
fn write_csv(path: &Path, g: &Grid, f: impl Fn(f64, f64) -> (f64, f64)) {
    let mut s = String::from("x,y,u,v\n");
    for j in 0..g.ny {
        for i in 0..g.nx {
            let (x, y) = g.centre(i, j);
            let (u, v) = f(x, y);
            writeln!(s, "{x},{y},{u},{v}").unwrap();
        }
    }
    std::fs::write(path, s).unwrap();
}

fn file_flow(path: &Path, g: &Grid) -> FlowKind {
    let data = FlowFile::read(path, g, &Mask::all_water(g)).unwrap();
    FlowKind::File(FileFlow {
        path: path.to_path_buf(),
        data: Arc::new(data),
    })
}

fn spec(g: Grid, kind: FlowKind, boundaries: Boundaries) -> ModelSpec {
    ModelSpec {
        grid: g,
        mask: None,
        depth: 2.0.into(),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec::steady(kind),
        boundaries,
        sources: vec![],
    }
}

fn cone(x: f64, y: f64) -> f64 {
    let r = ((x - 70.0).powi(2) + (y - 50.0).powi(2)).sqrt();
    (1.0 - r / 15.0).max(0.0)
}

#[test]
fn a_csv_of_solid_body_rotation_reproduces_the_analytic_run() {
    // The velocities of solid-body rotation are linear in x and y, so the mean of two cell
    // centres is the exact face value: the file run must equal the stream-function run to
    // round-off (interpolation is exact here; common practice).
    let dir = tempfile::tempdir().unwrap();
    let g = Grid::new(50, 50, 2.0, 2.0, 0.0, 0.0).unwrap();
    let (xc, yc, period) = (50.0, 50.0, 600.0);
    let w = 2.0 * std::f64::consts::PI / period;
    let csv = dir.path().join("rotation.csv");
    write_csv(&csv, &g, |x, y| (-w * (y - yc), w * (x - xc)));
    let open = Boundaries::uniform(SideKind::Open { value: 0.0 });
    let analytic = FlowKind::Rotation {
        centre: (xc, yc),
        period,
    };
    let mut runs = Vec::new();
    for kind in [analytic, file_flow(&csv, &g)] {
        let model = Model::new(spec(g, kind, open)).unwrap();
        assert!(!model.flow.report().projected);
        let c0 = model.field_from(cone);
        let mut s = Simulation::new(model, Scheme::default(), c0).unwrap();
        run_to(&mut s, period / 4.0, |_| {});
        runs.push(s.field());
    }
    let worst = runs[0]
        .iter()
        .zip(&runs[1])
        .fold(0.0f64, |a, (x, y)| a.max((x - y).abs()));
    assert!(worst < 1e-12, "file and analytic runs differ by {worst:e}");
}

#[test]
fn a_divergent_file_flow_is_projected_and_a_tvd_limiter_stays_bounded() {
    // A current that speeds up along x is divergent; projected (with walls north and south and
    // open ends) it balances every cell to 1e-9 of its largest face discharge, and van Leer then
    // makes no new extremes (Sweby 1984).
    let dir = tempfile::tempdir().unwrap();
    let g = Grid::new(60, 40, 2.0, 2.0, 0.0, 0.0).unwrap();
    let csv = dir.path().join("speeding.csv");
    write_csv(&csv, &g, |x, y| (0.05 * (1.0 + x / 60.0), 0.02 * (y / 80.0 - 0.5)));
    let open = SideKind::Open { value: 0.0 };
    let b = Boundaries {
        west: open,
        east: open,
        south: SideKind::Wall,
        north: SideKind::Wall,
    };
    let model = Model::new(spec(g, file_flow(&csv, &g), b)).unwrap();
    let r = model.flow.report();
    assert!(r.projected && r.divergence > 1e-3, "{r:?}");
    assert!(r.imbalance < 1e-9, "{r:?}");
    let c0 = model.field_from(cone);
    let mut s = Simulation::new(model, Scheme::default(), c0).unwrap();
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    run_to(&mut s, 300.0, |s| {
        let r = s.budget_row();
        (lo, hi) = (lo.min(r.min), hi.max(r.max));
    });
    assert!(lo > -1e-14 && hi <= 1.0 + 1e-12, "[{lo}, {hi}]");
}

/// A scenario using the flow file `file` (relative to the scenario), ending at `end`.
fn scenario(dir: &Path, file: &str, end: f64) -> std::path::PathBuf {
    let text = format!(
        r#"name = "file-flow"
[grid]
nx = 4
ny = 3
dx = 2.0
[flow]
kind = "file"
path = "{file}"
[boundary]
west = "open"
east = "open"
[initial]
kind = "uniform"
value = 1.0
[run]
end = {end}
frames = 1
"#
    );
    let p = dir.join("s.toml");
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn bad_flow_files_exit_2_naming_what_is_wrong() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let g = Grid::new(4, 3, 2.0, 2.0, 0.0, 0.0).unwrap();
    let good = |f: &dyn Fn(f64, f64) -> String| {
        let mut s = String::from("x,y,u,v\n");
        for j in 0..g.ny {
            for i in 0..g.nx {
                let (x, y) = g.centre(i, j);
                s += &f(x, y);
            }
        }
        s
    };
    let cases: Vec<(&str, String, f64, &[&str])> = vec![
        (
            "nan.csv",
            good(&|x, y| {
                if x == 3.0 && y == 3.0 {
                    format!("{x},{y},NaN,0\n")
                } else {
                    format!("{x},{y},0.1,0\n")
                }
            }),
            10.0,
            &["flow.path", "row", "NaN"],
        ),
        (
            "nocol.csv",
            good(&|x, y| format!("{x},{y},0.1,0\n")).replacen("x,y,u,v", "x,y,u,w", 1),
            10.0,
            &["flow.path", "no column `v`"],
        ),
        (
            "offgrid.csv",
            good(&|x, y| format!("{},{y},0.1,0\n", x + 0.5)),
            10.0,
            &["flow.path", "not a cell centre"],
        ),
        (
            "short.csv",
            good(&|x, y| {
                if x > 6.0 {
                    String::new()
                } else {
                    format!("{x},{y},0.1,0\n")
                }
            }),
            10.0,
            &["flow.path", "has no row"],
        ),
        (
            "time.csv",
            {
                let a = good(&|x, y| format!("0,{x},{y},0.1,0\n")).replacen("x,y,u,v", "time,x,y,u,v", 1);
                let b = good(&|x, y| format!("100,{x},{y},0.1,0\n"));
                a + b.split_once('\n').unwrap().1
            },
            200.0,
            &["flow.path", "run.end = 200 s"],
        ),
    ];
    for (name, text, end, want) in cases {
        std::fs::write(d.join(name), text).unwrap();
        let scn = scenario(d, name, end);
        let out = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], d);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: {err}");
        for w in want {
            assert!(err.contains(w), "{name}: expected '{w}' in: {err}");
        }
        assert!(!d.join("out").exists(), "{name}: wrote output");
    }
    // A good file with a time axis covering the run runs to completion.
    let text = {
        let a = good(&|x, y| format!("0,{x},{y},0.1,0\n")).replacen("x,y,u,v", "time,x,y,u,v", 1);
        let b = good(&|x, y| format!("100,{x},{y},0.2,0\n"));
        a + b.split_once('\n').unwrap().1
    };
    std::fs::write(d.join("ok.csv"), text).unwrap();
    let scn = scenario(d, "ok.csv", 100.0);
    let out = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], d);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
}

#[test]
fn file_records_are_interpolated_linearly_in_time() {
    // Linear interpolation between records, held beyond the ends (common practice).
    let dir = tempfile::tempdir().unwrap();
    let g = Grid::new(6, 4, 5.0, 5.0, 0.0, 0.0).unwrap();
    let mut s = String::from("time,x,y,u,v\n");
    for (t, u) in [(0.0, 0.1), (100.0, 0.2), (300.0, -0.2)] {
        for j in 0..g.ny {
            for i in 0..g.nx {
                let (x, y) = g.centre(i, j);
                writeln!(s, "{t},{x},{y},{u},0").unwrap();
            }
        }
    }
    let csv = dir.path().join("records.csv");
    std::fs::write(&csv, s).unwrap();
    let b = Boundaries::uniform(SideKind::Open { value: 0.0 });
    let model = Model::new(spec(g, file_flow(&csv, &g), b)).unwrap();
    assert!(model.flow.has_fill() && !model.flow.is_steady());
    let n = g.padded_len();
    let (mut u, mut v) = (vec![0.0; n], vec![0.0; n]);
    let p = g.idx(3, 2);
    for (t, want) in [
        (-5.0, 0.1),
        (50.0, 0.15),
        (100.0, 0.2),
        (200.0, 0.0),
        (250.0, -0.1),
        (400.0, -0.2),
    ] {
        model.flow.faces_at(t, 0.0, &mut u, &mut v);
        assert!((u[p] - want).abs() < 1e-15, "t = {t}: {} vs {want}", u[p]);
    }
}
