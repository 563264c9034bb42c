//! End to end through the real binary in temporary folders: every shipped scenario runs and
//! writes every output file with the DESIGN §5 contents; every broken scenario exits 2, names
//! its key and creates nothing; `--set` overrides are checked like file values.

mod common;

use common::{root, tinct};
use std::path::{Path, PathBuf};

/// `tinct run SCENARIO --out results [--quiet] --set KEY=VALUE ...` in `dir`.
fn run_with(dir: &Path, scenario: &str, quiet: bool, sets: &[&str]) -> std::process::Output {
    let mut args = vec!["run", scenario, "--out", "results"];
    if quiet {
        args.push("--quiet");
    }
    for s in sets {
        args.extend(["--set", s]);
    }
    tinct(&args, dir)
}

/// Runs the shipped Gaussian puff with `--set` overrides into `dir/results`; asserts success and
/// returns the output and the parsed `summary.json`.
fn puff_run(dir: &Path, quiet: bool, sets: &[&str]) -> (std::process::Output, serde_json::Value) {
    let puff = root().join("scenarios/gaussian-puff.toml");
    let out = run_with(dir, puff.to_str().unwrap(), quiet, sets);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(dir.join("results/gaussian-puff/summary.json")).unwrap();
    (out, serde_json::from_str(&text).unwrap())
}

fn shipped() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(root().join("scenarios"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        // Sweep files (`tinct sweep`) name a base scenario; they are not scenarios themselves.
        .filter(|p| {
            !std::fs::read_to_string(p)
                .unwrap()
                .lines()
                .any(|l| l.starts_with("base = "))
        })
        .collect();
    v.sort();
    v
}

fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<f64>>) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let header = r.headers().unwrap().iter().map(String::from).collect();
    let rows = r
        .records()
        .map(|rec| rec.unwrap().iter().map(|v| v.parse::<f64>().unwrap()).collect())
        .collect();
    (header, rows)
}

#[test]
fn every_shipped_scenario_runs_and_writes_every_output() {
    let tmp = tempfile::tempdir().unwrap();
    let scenarios = shipped();
    assert!(scenarios.len() >= 4, "{scenarios:?}");
    for path in scenarios {
        let out = tinct(
            &["run", path.to_str().unwrap(), "--out", "results", "--quiet"],
            tmp.path(),
        );
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(out.status.success(), "{}: {stderr}", path.display());
        let scn: toml::Table = toml::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        let name = scn["name"].as_str().unwrap();
        let dir = tmp.path().join("results").join(name);
        for f in [
            "scenario.toml",
            "budget.csv",
            "receptors.csv",
            "summary.json",
            "fields.nc",
            "frames/00000.png",
        ] {
            assert!(dir.join(f).is_file(), "{name}: {f} missing");
        }
        // The scenario as run parses and names the same run.
        let resolved: toml::Table =
            toml::from_str(&std::fs::read_to_string(dir.join("scenario.toml")).unwrap()).unwrap();
        assert_eq!(resolved["name"].as_str(), Some(name));

        // budget.csv: DESIGN §5 columns, residual at round-off on every row.
        let (header, rows) = read_csv(&dir.join("budget.csv"));
        assert_eq!(
            header,
            "time,step,dt,mass,added,inflow,outflow,decayed,residual,min,max,courant"
                .split(',')
                .collect::<Vec<_>>()
        );
        assert!(rows.len() >= 2);
        for r in &rows {
            assert!(r[8].abs() < 1e-12, "{name}: residual {}", r[8]);
        }

        // summary.json parses; receptor peaks agree with receptors.csv (the summary's come from
        // every step, the file's rows from the logged steps only); the caution is there.
        let summary: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
        assert_eq!(summary["status"], "completed");
        assert!(summary["caution"].as_str().unwrap().contains("Screening estimate"));
        let (rheader, rrows) = read_csv(&dir.join("receptors.csv"));
        assert_eq!(rheader[0], "time");
        let recs = summary["receptors"].as_array().unwrap();
        assert_eq!(recs.len(), rheader.len() - 1);
        for (k, rec) in recs.iter().enumerate() {
            assert_eq!(rec["name"].as_str().unwrap(), rheader[k + 1]);
            let (peak, at) = rrows
                .iter()
                .map(|r| (r[k + 1], r[0]))
                .fold((f64::NEG_INFINITY, 0.0), |a, b| if b.0 > a.0 { b } else { a });
            let sp = rec["peak"].as_f64().unwrap();
            let pt = rec["peak_time"].as_f64().unwrap();
            assert!(
                sp >= peak - 1e-12 * peak.abs().max(1e-300),
                "{name}: peak {sp} below the csv's {peak}"
            );
            if (sp - peak).abs() <= 1e-12 * peak.abs().max(1e-300) {
                assert!(
                    (pt - at).abs() <= 1e-9 * at.max(1.0),
                    "{name}: peak time {pt} vs csv {at}"
                );
            }
        }

        // fields.nc reads back with the right shape, coordinates and CF attributes.
        let (nx, ny) = (summary_dim(&resolved, "nx"), summary_dim(&resolved, "ny"));
        let frames = resolved["run"]["frames"].as_integer().unwrap() as usize;
        let mut r = netcdf3::FileReader::open(dir.join("fields.nc")).unwrap();
        let ds = r.data_set();
        assert_eq!(ds.dim_size("x"), Some(nx));
        assert_eq!(ds.dim_size("y"), Some(ny));
        assert_eq!(ds.dim_size("time"), Some(frames + 1));
        assert_eq!(ds.get_global_attr_as_string("Conventions").unwrap(), "CF-1.8");
        assert_eq!(ds.get_var_attr_as_string("x", "units").unwrap(), "m");
        assert!(ds.get_var_attr_as_string("c", "units").is_some());
        assert!(ds.get_var_attr_f64("c", "_FillValue").is_some());
        let times = r.read_var_f64("time").unwrap();
        let end = resolved["run"]["end"].as_float().unwrap();
        assert!(
            (times[0]).abs() < 1e-12 && (times[frames] - end).abs() < 1e-9 * end,
            "{times:?}"
        );
        let xs = r.read_var_f64("x").unwrap();
        assert!(xs.windows(2).all(|w| w[1] > w[0]));

        // Frames: one per frame time, with the map in the grid's aspect.
        for k in 0..=frames {
            let img = image::open(dir.join(format!("frames/{k:05}.png"))).unwrap();
            let layout = tinct::output::frame_layout(nx, ny);
            assert_eq!((img.width(), img.height()), (layout.width, layout.height));
            let aspect = layout.map_w as f64 / layout.map_h as f64;
            let want = nx as f64 / ny as f64;
            assert!((aspect - want).abs() <= want * (1.0 / layout.map_h.min(layout.map_w) as f64) + 1e-12);
        }
    }
}

fn summary_dim(resolved: &toml::Table, key: &str) -> usize {
    resolved["grid"][key].as_integer().unwrap() as usize
}

#[test]
fn example_prints_the_shipped_scenarios() {
    let tmp = tempfile::tempdir().unwrap();
    for path in shipped() {
        let name = path.file_stem().unwrap().to_str().unwrap();
        let out = tinct(&["example", name], tmp.path());
        assert!(out.status.success());
        assert_eq!(
            String::from_utf8_lossy(&out.stdout),
            std::fs::read_to_string(&path).unwrap()
        );
    }
    let out = tinct(&["example", "no-such-thing"], tmp.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("rotating-cone"));
}

#[test]
fn every_broken_scenario_exits_2_names_its_key_and_writes_nothing() {
    let dir = root().join("tests/broken");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    files.sort();
    assert!(files.len() >= 30, "only {} broken scenarios", files.len());
    for f in files {
        let text = std::fs::read_to_string(&f).unwrap();
        let expect = text
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# expect:"))
            .map(str::trim)
            .unwrap_or_else(|| panic!("{} lacks '# expect:'", f.display()));
        let tmp = tempfile::tempdir().unwrap();
        let out = tinct(&["run", f.to_str().unwrap(), "--out", "results", "--quiet"], tmp.path());
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{}: {stderr}", f.display());
        assert!(
            stderr.contains(expect),
            "{}: message does not name '{expect}': {stderr}",
            f.display()
        );
        assert!(
            stderr.contains(f.file_name().unwrap().to_str().unwrap()),
            "{}: file not named: {stderr}",
            f.display()
        );
        assert!(
            !tmp.path().join("results").exists(),
            "{}: output folder created",
            f.display()
        );
    }
}

#[test]
fn set_overrides_are_validated_like_file_values() {
    let tmp = tempfile::tempdir().unwrap();
    let cone = root().join("scenarios/rotating-cone.toml");
    let cone = cone.to_str().unwrap();
    // A bad override is bad input, names its key, and writes nothing.
    for (set, key) in [
        ("scheme.courant=-1", "scheme.courant"),
        ("scheme.convection=vanleer", "scheme.convection"),
        ("grid.nx=0", "grid.nx"),
        ("tracer.diffusivity=nan", "tracer.diffusivity"),
        ("run.ends=10", "run.ends"),
    ] {
        let out = run_with(tmp.path(), cone, true, &[set]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "--set {set}: {stderr}");
        assert!(stderr.contains(key), "--set {set}: {stderr}");
        assert!(!tmp.path().join("results").exists());
    }
    // A good override changes the run, and the scenario as run records it.
    let out = run_with(
        tmp.path(),
        cone,
        true,
        &["scheme.convection=superbee", "run.frames=2", "grid.nx=64", "grid.ny=64"],
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let resolved: toml::Table =
        toml::from_str(&std::fs::read_to_string(tmp.path().join("results/rotating-cone/scenario.toml")).unwrap())
            .unwrap();
    assert_eq!(resolved["scheme"]["convection"].as_str(), Some("superbee"));
    assert_eq!(resolved["run"]["frames"].as_integer(), Some(2));
    assert!(tmp.path().join("results/rotating-cone/frames/00002.png").is_file());
    assert!(!tmp.path().join("results/rotating-cone/frames/00003.png").exists());
}

#[test]
fn a_diverging_run_exits_1_with_step_time_cell_and_keeps_its_logs() {
    let tmp = tempfile::tempdir().unwrap();
    let cone = root().join("scenarios/rotating-cone.toml");
    let out = run_with(
        tmp.path(),
        cone.to_str().unwrap(),
        true,
        &[
            "scheme.convection=central",
            "scheme.stages=1",
            "grid.nx=64",
            "grid.ny=64",
        ],
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("step") && stderr.contains("cell (i =") && stderr.contains("central"),
        "{stderr}"
    );
    let dir = tmp.path().join("results/rotating-cone");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["status"], "diverged");
    assert!(dir.join("budget.csv").is_file() && dir.join("fields.nc").is_file());
}

#[test]
fn crank_nicolson_at_a_large_diffusion_number_warns_on_stderr_and_in_the_summary() {
    let tmp = tempfile::tempdir().unwrap();
    let puff = root().join("scenarios/gaussian-puff.toml");
    let (out, summary) = puff_run(tmp.path(), false, &["scheme.time=crank_nicolson", "run.frames=2"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("warning") && stderr.contains("diffusion number"),
        "{stderr}"
    );
    assert_eq!(summary["scheme"]["time"], "crank_nicolson");
    assert!(summary["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .any(|w| w.as_str().unwrap().contains("rings")));
    assert!(summary["solver_iterations"].as_u64().unwrap() > 0);
    // Implicit upwind convection: a non-symmetric matrix, solved by multigrid BiCGStab.
    assert_eq!(summary["scheme"]["linear_solver"], "multigrid_bicgstab");
    // With --quiet nothing but errors reaches stderr.
    let out = run_with(
        tmp.path(),
        puff.to_str().unwrap(),
        true,
        &["scheme.time=crank_nicolson", "run.frames=2"],
    );
    assert!(
        out.status.success() && out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn a_solver_that_cannot_converge_stops_the_run_with_exit_1_the_step_and_the_residual() {
    let tmp = tempfile::tempdir().unwrap();
    let puff = root().join("scenarios/gaussian-puff.toml");
    let out = run_with(
        tmp.path(),
        puff.to_str().unwrap(),
        true,
        &[
            "scheme.time=implicit",
            "scheme.max_iterations=1",
            "scheme.tolerance=1e-15",
        ],
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("did not converge in step 1")
            && stderr.contains("relative residual")
            && stderr.contains("advice"),
        "{stderr}"
    );
    assert!(tmp.path().join("results/gaussian-puff/budget.csv").is_file());
}

/// IMEX on open water with uniform diffusivity: the implicit diffusion matrix qualifies for the
/// exact transform solver, which the summary names; the budget still closes.
#[test]
fn imex_on_open_water_uses_the_transform_solver() {
    let tmp = tempfile::tempdir().unwrap();
    let (_, summary) = puff_run(tmp.path(), true, &["scheme.time=imex", "run.frames=2"]);
    assert_eq!(summary["scheme"]["linear_solver"], "transform");
    assert_eq!(summary["solver_iterations"].as_u64(), Some(0));
    assert_eq!(summary["status"], "completed");
    // The budget closes to the solver's round-off (DESIGN: residual column, relative).
    let (header, rows) = read_csv(&tmp.path().join("results/gaussian-puff/budget.csv"));
    let col = header.iter().position(|h| h == "residual").unwrap();
    let worst = rows.iter().map(|r| r[col].abs()).fold(0.0, f64::max);
    assert!(worst < 1e-10, "budget residual {worst:e}");
}

/// `tinct bench --implicit --solvers` times only the solvers named, and an unknown one exits 2
/// naming the option and the allowed values.
#[test]
fn implicit_bench_runs_the_solvers_named() {
    let tmp = tempfile::tempdir().unwrap();
    let args = ["bench", "--implicit", "--sizes", "16,32", "--steps", "2", "--solvers"];
    let out = tinct(&[&args[..], &["transform"]].concat(), tmp.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("transform") && !text.contains("multigrid_cg"), "{text}");
    assert!(text.contains("time ratio N = 32 / N = 16"), "{text}");
    let out = tinct(&[&args[..], &["lu"]].concat(), tmp.path());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--solvers") && err.contains("multigrid_cg"), "{err}");
}
