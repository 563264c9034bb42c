//! Scenario files end to end: the broken corpus in `tests/broken/` (one defect per file, the key
//! it must name on its first line), the shipped scenarios in `scenarios/`, the resolved TOML
//! round trip, `--set` overrides, several problems reported together and a byte-flip fuzz.

use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use tinct::scenario::{self, load, parse, Scenario};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn shipped() -> Vec<PathBuf> {
    scenario::EXAMPLES
        .iter()
        .map(|n| root().join("scenarios").join(format!("{n}.toml")))
        .collect()
}

/// The smallest valid scenario, for override tests.
const MINIMAL: &str =
    "[grid]\nnx = 20\nny = 10\ndx = 1.0\n\n[run]\nend = 10.0\n\n[[source]]\nat = [5.0, 5.0]\nrate = 1.0\n";

/// Every file in tests/broken/ fails to load, and its message names the file and the key given
/// on its `# expect:` line; every line of the message starts with the file name.
#[test]
fn every_broken_file_is_rejected_with_its_key() {
    let mut files: Vec<PathBuf> = std::fs::read_dir(root().join("tests/broken"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    files.sort();
    assert!(files.len() >= 35, "only {} broken files", files.len());
    let mut failures = Vec::new();
    for f in &files {
        let text = std::fs::read_to_string(f).unwrap();
        let expect = text
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# expect: "))
            .unwrap_or_else(|| panic!("{} lacks its '# expect:' line", f.display()))
            .trim()
            .to_string();
        match load(f, &[]) {
            Ok(_) => failures.push(format!("{}: loaded without error", f.display())),
            Err(e) => {
                let msg = e.to_string();
                let stem = f.file_name().unwrap().to_string_lossy().to_string();
                if !msg.contains(&expect) || !msg.contains(&stem) {
                    failures.push(format!("{}: expected '{expect}' in:\n{msg}", f.display()));
                }
                for line in msg.lines() {
                    if !line.starts_with(&f.display().to_string()) {
                        failures.push(format!("{}: line without the file name: {line}", f.display()));
                    }
                }
                if expect != "line" && !e.problems.iter().any(|p| p.key.contains(&expect)) {
                    failures.push(format!("{}: no problem keyed '{expect}': {msg}", f.display()));
                }
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// A syntax error is one problem whose key names the line and column of the error.
#[test]
fn syntax_errors_name_line_and_column() {
    let e = parse("[grid]\nnx = 20\nny = = 3\n", Path::new("s.toml"), &[]).unwrap_err();
    assert_eq!(e.problems.len(), 1);
    assert!(e.problems[0].key.starts_with("line 3, column "), "{e}");
}

/// Every shipped scenario loads from its file, its text is what `example` returns, and it is
/// named after its file.
#[test]
fn shipped_scenarios_load() {
    for (path, name) in shipped().iter().zip(scenario::EXAMPLES) {
        let s = load(path, &[]).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(s.name, *name);
        assert_eq!(
            scenario::example(name),
            Some(std::fs::read_to_string(path).unwrap().as_str())
        );
        assert!(s.run.frames >= 10 && s.run.frames <= 20);
        assert!(s.model.grid.nx >= 100 && s.model.grid.nx <= 200);
        assert!(std::fs::read_to_string(path).unwrap().starts_with("# "));
    }
    assert_eq!(scenario::example("no-such-example"), None);
}

/// Every shipped scenario runs to its end with a closed mass budget and a field that stays
/// within its initial bounds (no runaway) - the scenarios are runnable, not only parseable.
#[test]
fn shipped_scenarios_run() {
    for path in shipped() {
        let s = load(&path, &[]).unwrap();
        let model = s.build_model().unwrap();
        let c0 = model.field_from(|x, y| s.initial.value_at(x, y));
        let mut sim = tinct::step::Simulation::new(model, s.scheme, c0).unwrap();
        let start = std::time::Instant::now();
        sim.advance_to(s.run.end, |_| ControlFlow::Continue(())).unwrap();
        assert!(start.elapsed().as_secs_f64() < 30.0, "{} is too slow", path.display());
        let row = sim.budget_row();
        assert!(
            row.residual.abs() < 1e-10,
            "{}: residual {}",
            path.display(),
            row.residual
        );
        assert!(
            row.max.is_finite() && row.max > 0.0,
            "{}: max {}",
            path.display(),
            row.max
        );
    }
}

/// The swirl scenario brings its cloud back home at t = T: the final field is close to the
/// initial one (the check that the period and end were set consistently).
#[test]
fn swirl_returns_home() {
    let s = load(&root().join("scenarios/swirl.toml"), &[]).unwrap();
    let model = s.build_model().unwrap();
    let c0 = model.field_from(|x, y| s.initial.value_at(x, y));
    let first = c0.clone();
    let mut sim = tinct::step::Simulation::new(model, s.scheme, c0).unwrap();
    let half = 0.5 * s.run.end;
    sim.advance_to(half, |_| ControlFlow::Continue(())).unwrap();
    let mid: f64 = (&sim.field_view() - &first).mapv(f64::abs).sum();
    sim.advance_to(s.run.end, |_| ControlFlow::Continue(())).unwrap();
    let end: f64 = (&sim.field_view() - &first).mapv(f64::abs).sum();
    assert!(
        end < 0.5 * mid,
        "L1 distance from home: {end} at the end, {mid} half way"
    );
}

/// The puff scenario's plume passes both receptors above their thresholds within the run, and
/// peaks later at the one further down the current (its receptors are placed meaningfully).
#[test]
fn puff_reaches_its_receptors() {
    let s = load(&root().join("scenarios/gaussian-puff.toml"), &[]).unwrap();
    let model = s.build_model().unwrap();
    let c0 = model.zero_field();
    let mut sim = tinct::step::Simulation::new(model, s.scheme, c0).unwrap();
    let mut peaks = vec![(0.0f64, 0.0f64); s.receptors.len()];
    sim.advance_to(s.run.end, |sim| {
        for (r, peak) in s.receptors.iter().zip(peaks.iter_mut()) {
            let c = sim.value_at(r.at.0, r.at.1).unwrap();
            if c > peak.0 {
                *peak = (c, sim.state.t);
            }
        }
        ControlFlow::Continue(())
    })
    .unwrap();
    for (r, (c, _)) in s.receptors.iter().zip(&peaks) {
        assert!(*c > r.threshold.unwrap(), "{}: peak {c}", r.name);
    }
    assert!(peaks[1].1 > peaks[0].1, "{peaks:?}");
}

/// `resolved_toml` gives back an equal scenario, for every shipped scenario and for a file that
/// exercises the other kinds (land image, fixed sides, continuous source, tide, fixed dt).
#[test]
fn resolved_toml_round_trips() {
    let mut all: Vec<Scenario> = shipped().iter().map(|p| load(p, &[]).unwrap()).collect();
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(root().join("tests/broken/land.png"), dir.path().join("coast.png")).unwrap();
    let text = r#"
        name = "mixed"
        [grid]
        nx = 40
        ny = 20
        size = [400.0, 200.0]
        origin = [1000.0, -50.0]
        land = "coast.png"
        [tracer]
        diffusivity = 0.25
        t90 = 7200
        [flow]
        kind = "uniform"
        velocity = [0.05, 0.0]
        tide = { period = 44712.0 }
        [boundary]
        west = { kind = "fixed", value = 1.5 }
        east = "open"
        south = "periodic"
        north = "periodic"
        [initial]
        kind = "gaussian"
        centre = [1200.0, 50.0]
        sigma = 15.0
        [[source]]
        name = "pipe"
        at = [1250.0, 40.0]
        rate = 0.3
        start = 60
        stop = 1800
        spread = 12.5
        [scheme]
        convection = "koren"
        stages = 3
        dt = 5.0
        [run]
        end = 3600
        [[receptor]]
        at = [1300.0, 60.0]
    "#;
    let path = dir.path().join("mixed.toml");
    std::fs::write(&path, text).unwrap();
    all.push(load(&path, &[]).unwrap());
    for s in all {
        let again = parse(&s.resolved_toml(), &s.path, &[]).unwrap_or_else(|e| panic!("{e}\n{}", s.resolved_toml()));
        assert_eq!(again, s, "{}", s.resolved_toml());
    }
}

/// The land image: dark pixels are land, the top row is north, and a smaller image is
/// resampled by nearest pixel.
#[test]
fn land_image_orientation_and_resampling() {
    let dir = tempfile::tempdir().unwrap();
    // 4 by 2 pixels: only the top-left pixel is dark, so the north-west corner is land.
    let mut img = image::GrayImage::from_pixel(4, 2, image::Luma([255]));
    img.put_pixel(0, 0, image::Luma([60]));
    img.save(dir.path().join("m.png")).unwrap();
    let text = "[grid]\nnx = 8\nny = 4\ndx = 1.0\nland = \"m.png\"\n[run]\nend = 1.0\n";
    let s = parse(text, &dir.path().join("s.toml"), &[]).unwrap();
    let mask = s.model.mask.unwrap();
    let land: Vec<(usize, usize)> = (0..4)
        .flat_map(|j| (0..8).map(move |i| (i, j)))
        .filter(|&(i, j)| !mask.is_wet(i, j))
        .collect();
    assert_eq!(land, vec![(0, 2), (1, 2), (0, 3), (1, 3)]);
}

/// A good override changes the value (also creating a table absent from the file); a bad value
/// set by an override is rejected under its key path like a file value, and names the override.
#[test]
fn overrides_are_validated_like_file_values() {
    let p = Path::new("min.toml");
    let sets = [
        "scheme.convection=superbee",
        "grid.nx=40",
        "source[0].rate=2.5",
        "run.end=3600",
        "tracer.diffusivity=[0.1, 0.2]",
    ]
    .map(String::from);
    let s = parse(MINIMAL, p, &sets).unwrap();
    assert_eq!(s.scheme.limiter, tinct::ops::limiter::Limiter::Superbee);
    assert_eq!(s.model.grid.nx, 40);
    assert_eq!(s.run.end, 3600.0);
    assert_eq!((s.model.kx, s.model.ky), (0.1, 0.2));
    assert!(matches!(
        s.model.sources[0].release,
        tinct::ops::sources::Release::Continuous { rate, .. } if rate == 2.5
    ));
    // Bad values: the same key and rule as in a file.
    for (set, key) in [
        ("scheme.convection=fastest", "scheme.convection"),
        ("grid.nx=-5", "grid.nx"),
        ("source[0].rate=-1", "source[0].rate"),
        ("run.end=nan", "run.end"),
        ("tracer.diffusivity[1]=-3", "tracer.diffusivity[1]"),
        ("source[0].at=[500, 5]", "source[0].at"),
    ] {
        // The indexed override needs the array to exist: set it first.
        let sets = ["tracer.diffusivity=[0.1, 0.2]".to_string(), set.to_string()];
        let e = parse(MINIMAL, p, &sets).unwrap_err();
        assert!(
            e.problems.iter().any(|q| q.key == key && q.message.contains(set)),
            "{set}: {e}"
        );
    }
    // Malformed overrides: named by the override itself.
    for set in [
        "grid.nx",
        "grid.nxx=3",
        "source[4].rate=1",
        "run.end.x=1",
        "=3",
        "source[x].rate=1",
    ] {
        let e = parse(MINIMAL, p, &[set.to_string()]).unwrap_err();
        assert_eq!(e.problems.len(), 1, "{set}: {e}");
        assert_eq!(e.problems[0].key, format!("--set {set}"), "{e}");
    }
}

/// Three independent defects in three sections are all reported at once, and so are three
/// malformed overrides next to a file defect.
#[test]
fn several_problems_are_reported_together() {
    let e = load(&root().join("tests/broken/three-defects.toml"), &[]).unwrap_err();
    let keys: Vec<&str> = e.problems.iter().map(|p| p.key.as_str()).collect();
    for k in ["grid.dx", "tracer.diffusivity", "run.end"] {
        assert!(keys.contains(&k), "{k} missing from {keys:?}");
    }
    assert_eq!(e.to_string().lines().count(), e.problems.len());
    let sets = ["a=1", "b", "scheme.stages=9"].map(String::from);
    let e = parse(
        "[grid]\nnx = 0\nny = 1\ndx = 1.0\n[run]\nend = 1.0\n",
        Path::new("x.toml"),
        &sets,
    )
    .unwrap_err();
    assert_eq!(e.problems.len(), 4, "{e}");
}

/// Unknown keys list the allowed keys of their table and suggest a close one.
#[test]
fn unknown_keys_list_the_allowed_ones() {
    let e = parse(
        "[grid]\nnx = 20\nny = 10\ndx = 1.0\ndeph = 2\n[run]\nend = 1.0\n",
        Path::new("u.toml"),
        &[],
    )
    .unwrap_err();
    let m = &e.problems[0].message;
    assert!(
        m.contains("did you mean `depth`") && m.contains("`nx`") && m.contains("`land`"),
        "{m}"
    );
}

/// Random byte flips of a valid scenario never panic: each either loads or reports problems,
/// and every reported problem has a message.
#[test]
fn byte_flips_never_panic() {
    let base = scenario::example("gaussian-puff").unwrap().as_bytes().to_vec();
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        state
    };
    let (mut ok, mut bad) = (0, 0);
    for _ in 0..3000 {
        let mut bytes = base.clone();
        for _ in 0..1 + next() % 3 {
            let k = (next() % bytes.len() as u64) as usize;
            bytes[k] = match next() % 3 {
                0 => bytes[k] ^ (1 << (next() % 8)),
                1 => b"0123456789.-=[]\"#\n "[(next() % 19) as usize],
                _ => (next() % 256) as u8,
            };
        }
        let text = String::from_utf8_lossy(&bytes);
        match std::panic::catch_unwind(|| parse(&text, Path::new("fuzz.toml"), &[])) {
            Ok(Ok(_)) => ok += 1,
            Ok(Err(e)) => {
                assert!(!e.problems.is_empty() && e.problems.iter().all(|p| !p.message.is_empty()));
                bad += 1;
            }
            Err(_) => panic!("panic on input:\n{text}"),
        }
    }
    assert!(ok > 0 && bad > 0, "ok {ok}, bad {bad}");
}
