//! Influence maps (`tinct::adjoint`, `tinct influence`) against forward runs and a published
//! solution: duality at random release points (the adjoint identity <A x, y> = <x, A^T y>,
//! common practice), the reversed problem's Gaussian (Crank 1975), land, a breakwater, and the
//! command line end to end.

use ndarray::Array2;
use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use std::path::{Path, PathBuf};
use std::process::Command;
use tinct::adjoint::{self, forward_steps, Influence, Window};
use tinct::flow::FlowSpec;
use tinct::grid::{Grid, Mask};
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::Boundaries;
use tinct::scenario::Scenario;
use tinct::step::{Scheme, Simulation};

fn scenario(name: &str, sets: &[&str]) -> Scenario {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios").join(name);
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    tinct::scenario::load(&path, &sets).unwrap_or_else(|e| panic!("{e}"))
}

/// The dose at the receptor cell of a forward run of the homogeneous model from a unit mass
/// released in cell (i, j) at `t0`, over the same steps as the map's march.
fn forward_dose(model: &Model, scheme: &Scheme, inf: &Influence, (i, j): (usize, usize), t0: f64) -> f64 {
    let m = adjoint::homogeneous(model);
    let g = m.grid;
    let mut c0 = Array2::zeros((g.ny, g.nx));
    c0[[j, i]] = 1.0 / (m.depth_at(i, j, t0) * g.cell_area());
    let steps = forward_steps(&m, scheme, inf.window, &inf.release_times).unwrap();
    let mut sim = Simulation::new(m, *scheme, &c0).unwrap();
    let r = g.idx(inf.cell.0 as isize, inf.cell.1 as isize);
    let mut dose = 0.0;
    for s in steps.iter().filter(|s| s.t >= t0) {
        sim.state.t = s.t;
        sim.step(s.dt).unwrap();
        dose += inf.window.weight(s.t1, s.dt) * sim.state.c[r];
    }
    dose
}

/// Five random water cells where the map is above `floor` times its largest value.
fn random_cells(inf: &Influence, k: usize, floor: f64, seed: u64) -> Vec<(usize, usize)> {
    let top = inf.top_cells(k, 1)[0].2;
    let map = inf.map(k);
    let cells: Vec<(usize, usize)> = map
        .indexed_iter()
        .filter(|(_, v)| v.is_finite() && **v > floor * top)
        .map(|((j, i), _)| (i, j))
        .collect();
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    (0..5).map(|_| cells[rng.random_range(0..cells.len())]).collect()
}

/// Largest relative difference between forward doses and map values at five random cells.
fn duality(scn: &Scenario, receptor: usize, window: Window, release: f64, seed: u64) -> f64 {
    let model = scn.build_model().unwrap();
    let inf = adjoint::influence(&model, &scn.scheme, scn.receptors[receptor].at, window, &[release]).unwrap();
    let mut worst = 0.0f64;
    for cell in random_cells(&inf, 0, 1e-3, seed) {
        let d = forward_dose(&model, &scn.scheme, &inf, cell, release);
        let v = inf.map(0)[[cell.1, cell.0]];
        worst = worst.max((d - v).abs() / d.abs());
    }
    worst
}

/// Linear schemes (discrete transpose): the forward dose from a unit release equals the map
/// value to 1e-10 relative (the adjoint identity, common practice), with open and wall sides
/// and decay (gaussian-puff), and with land, openings and a tide (marina: depth and flow vary
/// in time), for a release after the start and a window inside the run.
#[test]
fn linear_schemes_are_dual_to_round_off() {
    let cases: &[(&str, &[&str], usize, Window, f64)] = &[
        (
            "gaussian-puff.toml",
            &["scheme.convection=\"upwind\"", "run.end=1800"],
            0,
            Window::Span {
                start: 0.0,
                end: 1800.0,
            },
            0.0,
        ),
        (
            "gaussian-puff.toml",
            &["scheme.convection=\"quick\"", "scheme.stages=3", "run.end=1800"],
            1,
            Window::At(1500.0),
            300.0,
        ),
        (
            "marina.toml",
            &["scheme.convection=\"upwind\"", "run.end=6000"],
            0,
            Window::Span {
                start: 1000.0,
                end: 6000.0,
            },
            600.0,
        ),
    ];
    for (k, (name, sets, receptor, window, release)) in cases.iter().enumerate() {
        let scn = scenario(name, sets);
        let worst = duality(&scn, *receptor, *window, *release, 11 + k as u64);
        eprintln!("{name} {sets:?}: largest relative difference {worst:e}");
        assert!(worst < 1e-10, "{name} {sets:?}: relative difference {worst:e}");
    }
}

/// van Leer (continuous adjoint with the run's own scheme) on the gaussian-puff scenario:
/// the map agrees with forward runs from five random release points within the tolerance
/// the issue asks for (2%; measured 0.31% when this was written).
#[test]
fn van_leer_duality_on_the_puff_is_within_two_percent() {
    let scn = scenario("gaussian-puff.toml", &[]);
    let w = Window::Span {
        start: 0.0,
        end: scn.run.end,
    };
    let worst = duality(&scn, 0, w, 0.0, 5);
    eprintln!("van Leer duality on gaussian-puff: largest relative difference {worst:.4}");
    assert!(worst < 0.02, "{worst}");
}

/// Uniform flow, constant diffusivity and decay, far from every side: the map for the
/// concentration at time T is the reversed problem's Gaussian (Crank 1975, The Mathematics of
/// Diffusion, eq. 3.5 moved with the flow), centred a distance U T upstream of the receptor:
/// `I(x0) = exp(-lambda T) / (4 pi T h sqrt(Kx Ky)) exp(-(xr - x0 - U T)^2 / (4 Kx T) -
/// (yr - y0)^2 / (4 Ky T))`, within 2% in the L1 norm (QUICK, discrete transpose).
#[test]
fn uniform_flow_map_is_the_reversed_gaussian() {
    let scn = scenario(
        "gaussian-puff.toml",
        &[
            "scheme.convection=\"quick\"",
            "scheme.stages=3",
            "run.end=3600",
            "boundary.south=\"open\"",
        ],
    );
    let model = scn.build_model().unwrap();
    // A cell centre: the map samples the receptor cell.
    let (xr, yr) = (1305.0, 505.0);
    let t = 3600.0;
    let inf = adjoint::influence(&model, &scn.scheme, (xr, yr), Window::At(t), &[0.0]).unwrap();
    let (u, kx, ky, h): (f64, f64, f64, f64) = (0.15, 1.0, 0.3, 3.0);
    let lambda = 10f64.ln() / 10800.0;
    let (mut num, mut den) = (0.0, 0.0);
    let g = &model.grid;
    for ((j, i), v) in inf.map(0).indexed_iter() {
        let (x, y) = g.centre(i, j);
        let dx = xr - x - u * t;
        let dy = yr - y;
        let exact = (-lambda * t).exp() / (4.0 * std::f64::consts::PI * t * h * (kx * ky).sqrt())
            * (-(dx * dx) / (4.0 * kx * t) - dy * dy / (4.0 * ky * t)).exp();
        num += (v - exact).abs();
        den += exact.abs();
    }
    let l1 = num / den;
    eprintln!("reversed Gaussian, relative L1 error {l1:.4}");
    assert!(l1 < 0.02, "{l1}");
}

/// Land holds no water to release into: the map is NaN there (`_FillValue` in the file), and
/// finite on every water cell (marina, upwind).
#[test]
fn no_influence_on_land() {
    let scn = scenario("marina.toml", &["scheme.convection=\"upwind\"", "run.end=3000"]);
    let model = scn.build_model().unwrap();
    let inf = adjoint::influence(
        &model,
        &scn.scheme,
        scn.receptors[0].at,
        Window::Span {
            start: 0.0,
            end: 3000.0,
        },
        &[0.0],
    )
    .unwrap();
    let mut land = 0;
    for ((j, i), v) in inf.map(0).indexed_iter() {
        if model.mask.is_wet(i, j) {
            assert!(v.is_finite() && *v >= -1e-300, "water cell ({i}, {j}): {v}");
        } else {
            assert!(v.is_nan());
            land += 1;
        }
    }
    assert!(land > 0);
}

/// A model of 1 km x 600 m still water with diffusion only, walls all round, and optionally a
/// breakwater of land from the west wall to x = 600 m at y = 300-320 m.
fn harbour(breakwater: bool) -> Model {
    let grid = Grid::new(100, 60, 10.0, 10.0, 0.0, 0.0).unwrap();
    let mask = breakwater.then(|| {
        Mask::all_water(&grid)
            .with_land(&grid, |x, y| x < 600.0 && (300.0..320.0).contains(&y))
            .unwrap()
    });
    Model::new(ModelSpec {
        grid,
        mask,
        depth: 2.0.into(),
        kx: 2.0,
        ky: 2.0,
        decay_rate: 0.0,
        flow: FlowSpec::uniform(0.0, 0.0),
        boundaries: Boundaries::walls(),
        sources: vec![],
    })
    .unwrap()
}

/// A receptor behind a breakwater is reached only around it: a release 180 m straight across
/// the breakwater (A) has less influence than one 440 m away whose path round the tip is
/// shorter (B), while without the breakwater A has far more (common practice: diffusion
/// follows the water path).
#[test]
fn a_breakwater_shelters_the_receptor() {
    let scheme = Scheme {
        limiter: tinct::ops::limiter::Limiter::Upwind,
        ..Scheme::default()
    };
    let (r, a, b) = ((300.0, 400.0), (300.0, 220.0), (700.0, 220.0));
    let w = Window::Span {
        start: 0.0,
        end: 30000.0,
    };
    let at = |m: &Model, inf: &Influence, p: (f64, f64)| {
        let (i, j) = m.grid.cell_at(p.0, p.1).unwrap();
        inf.map(0)[[j, i]]
    };
    let open = harbour(false);
    let sheltered = harbour(true);
    let io = adjoint::influence(&open, &scheme, r, w, &[0.0]).unwrap();
    let is = adjoint::influence(&sheltered, &scheme, r, w, &[0.0]).unwrap();
    let (oa, ob) = (at(&open, &io, a), at(&open, &io, b));
    let (sa, sb) = (at(&sheltered, &is, a), at(&sheltered, &is, b));
    eprintln!("open water A {oa:e} B {ob:e}; breakwater A {sa:e} B {sb:e}");
    assert!(oa > 3.0 * ob, "without the breakwater A is nearer: {oa} vs {ob}");
    assert!(sa < sb, "with it the way round the tip decides: {sa} vs {sb}");
    assert!(sa < 0.2 * oa, "the breakwater shelters A: {sa} vs {oa}");
}

fn tinct(args: &[&str], cwd: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tinct"))
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap()
}

/// `tinct influence` end to end: the four files, the ranked candidates, and exit 2 for a bad
/// receptor name (listing the names) or window.
#[test]
fn command_line_writes_the_maps_and_refuses_bad_input() {
    let tmp = tempfile::tempdir().unwrap();
    let scn = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/gaussian-puff.toml");
    let scn = scn.to_str().unwrap();
    let o = tinct(
        &[
            "influence",
            scn,
            "--receptor",
            "swimming-area",
            "--out",
            "o",
            "--set",
            "run.end=1800",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let dir = tmp.path().join("o/gaussian-puff/influence/swimming-area");
    for f in ["influence.png", "influence.nc", "candidates.csv", "influence.json"] {
        assert!(dir.join(f).is_file(), "{f}");
    }
    let csv = std::fs::read_to_string(dir.join("candidates.csv")).unwrap();
    let doses: Vec<f64> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(7).unwrap().parse().unwrap())
        .collect();
    assert_eq!(doses.len(), 3);
    assert!(doses.windows(2).all(|w| w[0] >= w[1]), "{csv}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("influence.json")).unwrap()).unwrap();
    assert_eq!(json["adjoint"], "continuous adjoint, van_leer");
    assert!(json["caution"].as_str().unwrap().contains("Screening"));
    // The run report's section, built from these files.
    let html = tinct::report::influence::section(&tmp.path().join("o/gaussian-puff"));
    for want in [
        "Influence maps",
        "swimming-area",
        "continuous adjoint, van_leer",
        "storm-overflow",
        "data:image/png;base64,",
        "Screening",
    ] {
        assert!(html.contains(want), "{want}");
    }
    assert_eq!(tinct::report::influence::section(tmp.path()), "");
    let bad = tinct(&["influence", scn, "--receptor", "nowhere", "--out", "o"], tmp.path());
    assert_eq!(bad.status.code(), Some(2));
    let err = String::from_utf8_lossy(&bad.stderr);
    assert!(err.contains("swimming-area") && err.contains("lifeguard-post"), "{err}");
    for w in ["5,1", "0,99999", "x"] {
        let bad = tinct(
            &["influence", scn, "--receptor", "swimming-area", "--window", w],
            tmp.path(),
        );
        assert_eq!(bad.status.code(), Some(2), "--window {w}");
        assert!(String::from_utf8_lossy(&bad.stderr).contains("--window"));
    }
}

/// A candidate on land or off the grid is refused naming the file and the key.
#[test]
fn bad_candidates_are_refused() {
    let scn = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/marina.toml");
    let text = std::fs::read_to_string(&scn).unwrap()
        + "\n[[candidate]]\nname = \"x\"\nat = [1.0, 299.0]\n[[candidate]]\nat = [9000.0, 1.0]\n";
    let tmp = tempfile::tempdir().unwrap();
    let f = tmp.path().join("m.toml");
    std::fs::write(&f, text).unwrap();
    std::fs::copy(
        scn.with_file_name("marina-land.png"),
        tmp.path().join("marina-land.png"),
    )
    .unwrap();
    let e = tinct::scenario::load(&f, &[]).unwrap_err().to_string();
    assert!(e.contains("candidate[0].at") && e.contains("land"), "{e}");
    assert!(e.contains("candidate[1].at") && e.contains("outside the grid"), "{e}");
    assert!(e.contains("m.toml"), "{e}");
}

/// Implicit time stepping is refused as bad input naming `scheme.time` and the allowed value
/// (the continuous adjoint with implicit upwind missed forward doses by 21% on the puff at
/// Courant 1 when measured; the transposed implicit solve is not built).
#[test]
fn implicit_runs_are_refused() {
    let scn = scenario(
        "gaussian-puff.toml",
        &[
            "scheme.convection=\"upwind\"",
            "scheme.time=\"implicit\"",
            "scheme.courant=1.0",
            "run.end=1800",
        ],
    );
    let model = scn.build_model().unwrap();
    let e = adjoint::influence(&model, &scn.scheme, scn.receptors[0].at, Window::At(900.0), &[0.0]).unwrap_err();
    assert!(matches!(e, adjoint::AdjointError::Input(_)));
    let msg = e.to_string();
    assert!(msg.contains("scheme.time") && msg.contains("explicit"), "{msg}");
}
