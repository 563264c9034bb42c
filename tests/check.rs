//! `tinct check` and the regime diagnostics against outside references: a hand-computed small
//! grid, Patankar's (1980) cell-Peclet rule for central differencing run through the binary, the
//! von Neumann bound of explicit upwind (a run at 0.99 of it stays bounded, one at 1.05 grows),
//! and the modified-equation numerical diffusivity of upwind; plus the run's advice and its
//! measured effective diffusivity in `summary.json`.

mod common;

use common::{root, tinct};
use std::path::{Path, PathBuf};
use tinct::diagnostics::regime::{analyse, cell_maps, Regime};
use tinct::flow::FlowSpec;
use tinct::grid::{Grid, Mask};
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::step::{Scheme, Simulation, StepLimits};

fn scenario(name: &str) -> String {
    root().join("tests/check").join(name).to_string_lossy().into_owned()
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The last row of `receptors.csv` (time, then one value per receptor).
fn last_receptor_row(dir: &Path) -> Vec<f64> {
    let text = std::fs::read_to_string(dir.join("receptors.csv")).unwrap();
    let last = text.lines().last().unwrap();
    last.split(',').map(|v| v.parse().unwrap()).collect()
}

fn small_model(kx: f64) -> Model {
    // 3 x 2 cells of 2 m by 1 m; land at (0, 1) and (2, 1); west/east open, south/north walls.
    let g = Grid::new(3, 2, 2.0, 1.0, 0.0, 0.0).unwrap();
    let mask = Mask::from_wet(&g, vec![true, true, true, false, true, false]).unwrap();
    Model::new(ModelSpec {
        grid: g,
        mask: Some(mask),
        depth: 1.0.into(),
        kx,
        ky: 0.1,
        decay_rate: 0.0,
        // Not projected: the face velocities below are worked by hand from the raw field.
        flow: FlowSpec {
            project: false,
            ..FlowSpec::uniform(1.0, 0.01)
        },
        boundaries: Boundaries {
            west: SideKind::Open { value: 0.0 },
            east: SideKind::Open { value: 0.0 },
            south: SideKind::Wall,
            north: SideKind::Wall,
        },
        sources: vec![],
    })
    .unwrap()
}

#[test]
fn peclet_numbers_and_regimes_match_a_hand_computation() {
    // By hand (face velocities: u = 1 on every x-face of the south row, 0 around the north-row
    // cell (1, 1) whose neighbours are land; v = 0.01 only on the face between (1, 0) and
    // (1, 1), walls and land zero the rest):
    //   cell (0,0): uc = 1, vc = 0       -> Pe_x = 1*2/0.5 = 4, Pe_y = 0
    //   cell (1,0): uc = 1, vc = 0.005   -> Pe_x = 4, Pe_y = 0.005*1/0.1 = 0.05
    //   cell (2,0): uc = 1, vc = 0       -> Pe_x = 4
    //   cell (1,1): uc = 0, vc = 0.005   -> Pe_x = 0, Pe_y = 0.05, speed 0.005 < 1% of 1.0000125
    // Regimes: the south row convection-dominated (Pe 4 > 2), (1,1) near-stagnant, two land.
    let m = small_model(0.5);
    let sch = Scheme {
        limiter: Limiter::Upwind,
        stages: 1,
        ..Scheme::default()
    };
    let c = cell_maps(&m, &sch, 0.5);
    let close = |a: f64, b: f64| (a - b).abs() < 1e-12;
    for k in [0, 1, 2] {
        assert!(close(c.pe_x[k], 4.0), "{k}: {}", c.pe_x[k]);
        assert_eq!(c.regime[k], Regime::ConvectionDominated);
    }
    assert!(close(c.pe_y[0], 0.0) && close(c.pe_y[1], 0.05) && close(c.pe_y[4], 0.05));
    assert!(close(c.pe_x[4], 0.0));
    assert_eq!(c.regime[4], Regime::NearStagnant);
    assert_eq!((c.regime[3], c.regime[5]), (Regime::Land, Regime::Land));
    // Courant sums at dt = 0.5: (1,0): 1*0.5/2 + 0.01*0.5/1 = 0.255; (1,1): 0.005.
    assert!(
        close(c.courant[1], 0.255) && close(c.courant[4], 0.005),
        "{:?}",
        c.courant
    );
    // Upwind numerical diffusivity of (1,0), one forward-Euler stage: Cx = 0.25,
    // Kx_num = 1*2*(1 - 0.25)/2 = 0.75 -> ratio to Kx = 1.5.
    assert!(close(c.k_num_x[1], 0.75) && close(c.ratio[1], 1.5), "{:?}", c.k_num_x);
    let (_, r) = analyse(&m, &sch, 0.5);
    assert_eq!(r.wet_cells, 4);
    assert!(close(r.share_peclet_above_2, 0.75));
    assert!(close(r.peclet_x.max, 4.0) && close(r.peclet_x.min, 0.0));
    // With Kx = 1 the south row sits exactly at Pe = 2: not above the switch, so
    // diffusion-dominated.
    let c = cell_maps(&small_model(1.0), &sch, 0.5);
    assert!(close(c.pe_x[1], 2.0));
    assert_eq!(c.regime[1], Regime::DiffusionDominated);
}

#[test]
fn central_at_cell_peclet_5_is_flagged_and_oscillates_but_not_at_0_2() {
    // Patankar (1980), Numerical Heat Transfer and Fluid Flow, §5.2: central differencing of
    // steady convection-diffusion gives a non-monotone profile when the cell Peclet number
    // exceeds 2, a monotone one below (case of Versteeg & Malalasekera 2007, Example 5.1).
    let tmp = tempfile::tempdir().unwrap();
    let path = scenario("steady-1d.toml");
    let out = tinct(&["check", &path, "--out", "o"], tmp.path());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{text}");
    let j = json(&tmp.path().join("o/steady-1d/check/check.json"));
    assert!((j["report"]["peclet_x"]["max"].as_f64().unwrap() - 5.0).abs() < 1e-9);
    let flagged =
        |j: &serde_json::Value| {
            j["advice"].as_array().unwrap().iter().any(|a| {
                a["severity"] == "warning" && a["text"].as_str().unwrap().contains("cell Peclet number exceeds 2")
            })
        };
    assert!(flagged(&j), "{j}");
    assert!(text.contains("expect oscillations"), "{text}");
    for f in [
        "regime.png",
        "peclet.png",
        "courant.png",
        "numerical_diffusion.png",
        "check.txt",
    ] {
        assert!(tmp.path().join("o/steady-1d/check").join(f).is_file(), "{f}");
    }
    // The run shows it: the steady profile at the five cell centres rises and falls.
    let out = tinct(&["run", &path, "--out", "o"], tmp.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cell Peclet number exceeds 2"));
    let row = last_receptor_row(&tmp.path().join("o/steady-1d"));
    let c = &row[1..];
    let rises = c.windows(2).any(|w| w[1] > w[0] + 1e-3);
    let falls = c.windows(2).any(|w| w[1] < w[0] - 1e-3);
    assert!(rises && falls, "non-monotone profile expected: {c:?}");
    let s = json(&tmp.path().join("o/steady-1d/summary.json"));
    assert!(s["advice"]
        .as_array()
        .unwrap()
        .iter()
        .any(|a| a["text"].as_str().unwrap().contains("cell Peclet number exceeds 2")));

    // At cell Peclet 0.2 (u = 0.1): no warning, and the profile falls monotonically.
    let slow = "flow.velocity=[0.1, 0.0]";
    let out = tinct(&["check", &path, "--out", "p", "--set", slow], tmp.path());
    assert!(out.status.success());
    let j = json(&tmp.path().join("p/steady-1d/check/check.json"));
    assert!((j["report"]["peclet_x"]["max"].as_f64().unwrap() - 0.2).abs() < 1e-9);
    assert!(!flagged(&j), "{j}");
    assert!(
        j["advice"].as_array().unwrap().iter().all(|a| a["severity"] == "note"),
        "{j}"
    );
    let out = tinct(&["run", &path, "--out", "p", "--set", slow], tmp.path());
    assert!(out.status.success());
    assert!(!String::from_utf8_lossy(&out.stderr).contains("warning"));
    let row = last_receptor_row(&tmp.path().join("p/steady-1d"));
    assert!(row[1..].windows(2).all(|w| w[1] < w[0]), "{row:?}");
}

#[test]
fn explicit_upwind_is_bounded_below_the_von_neumann_limit_and_grows_above_it() {
    // von Neumann analysis of forward-Euler first-order upwind in 2D (common practice): the
    // amplification factor stays within the unit circle iff Cx + Cy <= 1, here
    // dt <= 1/(u/dx + v/dy) = 1/(1 + 0.5) = 2/3 s; above it the shortest wave grows.
    let bound = 1.0 / (1.0 / 1.0 + 0.5 / 1.0);
    let tmp = tempfile::tempdir().unwrap();
    let path = scenario("uniform-pulse.toml");
    let model = tinct::scenario::load(Path::new(&path), &[])
        .unwrap()
        .build_model()
        .unwrap();
    assert!((StepLimits::of(&model).stable() / bound - 1.0).abs() < 1e-12);

    let ok = format!("scheme.dt={}", 0.99 * bound);
    let out = tinct(&["check", &path, "--out", "a", "--set", &ok], tmp.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let j = json(&tmp.path().join("a/uniform-pulse/check/check.json"));
    assert!((j["report"]["limits"]["binding"].as_f64().unwrap() / bound - 1.0).abs() < 1e-12);
    assert_eq!(j["runnable"], true);
    let out = tinct(&["run", &path, "--out", "a", "--quiet", "--set", &ok], tmp.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let s = json(&tmp.path().join("a/uniform-pulse/summary.json"));
    assert!(s["max_ever"].as_f64().unwrap() <= 1.0 + 1e-12, "{s}");
    assert!(s["min_ever"].as_f64().unwrap() >= -1e-12, "{s}");

    // At 1.05 of the bound: check and run refuse it (exit 2, nothing run) ...
    let bad = format!("scheme.dt={}", 1.05 * bound);
    let out = tinct(&["check", &path, "--out", "b", "--set", &bad], tmp.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stdout).contains("cannot run"));
    let out = tinct(&["run", &path, "--out", "b", "--quiet", "--set", &bad], tmp.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(!tmp.path().join("b/uniform-pulse/summary.json").exists());
    // ... and with --force check exits 0 and the run grows until it is stopped.
    let out = tinct(&["check", &path, "--out", "b", "--force", "--set", &bad], tmp.path());
    assert!(out.status.success());
    let out = tinct(
        &["run", &path, "--out", "b", "--quiet", "--force", "--set", &bad],
        tmp.path(),
    );
    let s = json(&tmp.path().join("b/uniform-pulse/summary.json"));
    let grew = s["status"] == "diverged" || s["max_ever"].as_f64().unwrap() > 1.0 + 1e-6;
    assert!(grew, "exit {:?}: {s}", out.status.code());
}

#[test]
fn upwind_numerical_diffusivity_map_matches_the_modified_equation_and_the_measured_spread() {
    // The case of tests/exact_solutions.rs, upwind_spreads_at_the_modified_equation_diffusivity:
    // modified-equation analysis of forward-Euler upwind (common practice) gives
    // K_num = |u| dx (1 - C)/2 per axis: Kx = 1*1*(1 - 0.4)/2 = 0.3, Ky = 0.5*2*(1 - 0.1)/2 = 0.45.
    let (u, v, dx, dy, dt) = (1.0, 0.5, 1.0, 2.0, 0.4);
    let g = Grid::new(400, 100, dx, dy, 0.0, 0.0).unwrap();
    let model = Model::new(ModelSpec {
        grid: g,
        mask: None,
        depth: 1.0.into(),
        kx: 0.0,
        ky: 0.0,
        decay_rate: 0.0,
        flow: FlowSpec::uniform(u, v),
        boundaries: Boundaries::uniform(SideKind::Open { value: 0.0 }),
        sources: vec![],
    })
    .unwrap();
    let sch = Scheme {
        limiter: Limiter::Upwind,
        stages: 1,
        dt: Some(dt),
        ..Scheme::default()
    };
    let c = cell_maps(&model, &sch, dt);
    let kx = u * dx * (1.0 - u * dt / dx) / 2.0;
    let ky = v * dy * (1.0 - v * dt / dy) / 2.0;
    assert!(c.k_num_x.iter().all(|&k| (k - kx).abs() < 1e-12), "{}", c.k_num_x[0]);
    assert!(c.k_num_y.iter().all(|&k| (k - ky).abs() < 1e-12), "{}", c.k_num_y[0]);
    // And a run spreads at that rate (variance growth 2 K t, as in the engine's test).
    let c0 = model.field_from(|x, y| (-((x - 80.0).powi(2) + (y - 50.0).powi(2)) / 50.0).exp());
    let mut sim = Simulation::new(model, sch, c0).unwrap();
    let m = |s: &Simulation| tinct::diagnostics::moments::moments(&s.model.grid, s.field_view(), None).unwrap();
    let a = m(&sim);
    sim.advance_to(160.0, |_| std::ops::ControlFlow::Continue(())).unwrap();
    let (ex, ey) = tinct::diagnostics::moments::effective_diffusivity(&a, &m(&sim), 160.0);
    assert!(
        (ex / kx - 1.0).abs() < 0.05 && (ey / ky - 1.0).abs() < 0.05,
        "{ex} {ey}"
    );
}

#[test]
fn the_puff_run_reports_advice_and_its_effective_diffusivity() {
    // For a single release the variance grows as 2 K t (Taylor 1921; common practice). The
    // puff's current is along x only, so across it the measured Ky is the physical 0.3 m2/s
    // (to the 5-point stencil's small error), and along it Kx lies between the physical 1 m2/s
    // and that plus upwind's numerical diffusivity (0.75 m2/s from `check`: an upper bound
    // for van Leer).
    let tmp = tempfile::tempdir().unwrap();
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/gaussian-puff.toml");
    let out = tinct(&["run", path.to_str().unwrap(), "--out", "o", "--quiet"], tmp.path());
    assert!(out.status.success());
    let s = json(&tmp.path().join("o/gaussian-puff/summary.json"));
    let e = &s["effective_diffusivity"];
    let (kx, ky) = (e["kx"].as_f64().unwrap(), e["ky"].as_f64().unwrap());
    assert_eq!(e["physical_kx"].as_f64(), Some(1.0));
    assert!((ky / 0.3 - 1.0).abs() < 0.05, "{e}");
    assert!(kx > 0.97 && kx < 1.75, "{e}");
    assert!(s["advice"].is_array(), "{s}");
    // Not a single release: no measurement, with a reason.
    let cone = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/rotating-cone.toml");
    let out = tinct(
        &[
            "run",
            cone.to_str().unwrap(),
            "--out",
            "o",
            "--quiet",
            "--set",
            "initial.kind=zero",
        ],
        tmp.path(),
    );
    if out.status.success() {
        let s = json(&tmp.path().join("o/rotating-cone/summary.json"));
        assert!(s["effective_diffusivity"].is_null());
        assert!(s["effective_diffusivity_reason"].is_string());
    }
}

#[test]
fn advice_never_says_central_falls_back_to_upwind() {
    // Regression: the note on numerical diffusion said every non-upwind scheme "falls back to
    // upwind near extrema"; central and QUICK never do (common practice: they are linear).
    let root = common::root();
    let dir = tempfile::tempdir().unwrap();
    let scn = root.join("scenarios/gaussian-puff.toml");
    for (scheme, falls_back) in [("central", false), ("quick", false), ("van_leer", true)] {
        let out = common::tinct(
            &[
                "check",
                scn.to_str().unwrap(),
                "--out",
                dir.path().to_str().unwrap(),
                "--set",
                &format!("scheme.convection={scheme}"),
            ],
            dir.path(),
        );
        let text = String::from_utf8_lossy(&out.stdout);
        assert_eq!(
            text.contains("falls back to upwind only"),
            falls_back,
            "{scheme}: {text}"
        );
        if !falls_back {
            assert!(text.contains("never falls back"), "{scheme}: {text}");
        }
    }
}

#[test]
fn implicit_limited_runs_say_they_are_bounded_only_to_the_correction_tolerance() {
    // Regression: implicit superbee dipped below zero (-8e-6 on the rotating cone at Courant 2)
    // with no word about it; check, the run and summary.json now state the bound.
    let root = common::root();
    let dir = tempfile::tempdir().unwrap();
    let scn = root.join("scenarios/rotating-cone.toml");
    let sets = [
        "--set",
        "scheme.time=implicit",
        "--set",
        "scheme.convection=superbee",
        "--set",
        "scheme.courant=2",
    ];
    let mut args = vec![
        "run",
        scn.to_str().unwrap(),
        "--out",
        "out",
        "--quiet",
        "--set",
        "run.end=200",
    ];
    args.extend(sets);
    let out = common::tinct(&args, dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let summary = std::fs::read_to_string(dir.path().join("out/rotating-cone/summary.json")).unwrap();
    assert!(summary.contains("correction tolerance"), "{summary}");
    let mut args = vec!["check", scn.to_str().unwrap(), "--out", "out"];
    args.extend(sets);
    let text = String::from_utf8_lossy(&common::tinct(&args, dir.path()).stdout).to_string();
    assert!(text.contains("correction tolerance"), "{text}");
    // Upwind is bounded at any step: no such warning.
    let text = String::from_utf8_lossy(
        &common::tinct(
            &[
                "check",
                scn.to_str().unwrap(),
                "--out",
                "out",
                "--set",
                "scheme.time=implicit",
                "--set",
                "scheme.convection=upwind",
            ],
            dir.path(),
        )
        .stdout,
    )
    .to_string();
    assert!(!text.contains("correction tolerance"), "{text}");
}
