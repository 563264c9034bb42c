//! Scheme studies through the real binary and the library: `tinct gci` on the worked example of
//! Celik et al. (2008), `tinct compare` on the rotating cone (Zalesak 1979; TVD bounds of Sweby
//! 1984), `tinct converge` on the Gaussian puff (exact: Crank 1975) and `tinct verify`.

mod common;

use common::{root, tinct};
use std::path::Path;
use std::process::Output;

fn text(o: &Output) -> String {
    format!(
        "{}\n{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// The number after `label` on its line of `out`.
fn number_after(out: &str, label: &str) -> f64 {
    let line = out
        .lines()
        .find(|l| l.starts_with(label))
        .unwrap_or_else(|| panic!("no '{label}' in {out}"));
    line[label.len()..]
        .split_whitespace()
        .next()
        .and_then(|v| v.trim_end_matches('%').parse().ok())
        .unwrap_or_else(|| panic!("no number in '{line}'"))
}

#[test]
fn gci_reproduces_celik_table_1() {
    // Celik et al. (2008), J. Fluids Eng. 130, 078001, Table 1, first column: N = 18000, 8000,
    // 4500 cells (2D), phi = 6.063, 5.972, 5.863; published p = 1.53, phi_ext21 = 6.1685,
    // GCI_fine21 = 2.2%.
    let dir = tempfile::tempdir().unwrap();
    let o = tinct(
        &[
            "gci",
            "--values",
            "6.063,5.972,5.863",
            "--cells",
            "18000,8000,4500",
            "--dims",
            "2",
        ],
        dir.path(),
    );
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!((number_after(&out, "apparent order p") - 1.53).abs() < 0.01, "{out}");
    assert!(
        (number_after(&out, "extrapolated value phi_ext21") - 6.1685).abs() < 5e-4,
        "{out}"
    );
    assert!((number_after(&out, "GCI_fine21") - 2.2).abs() < 0.05, "{out}");
    // Bad input exits 2 and says why.
    let o = tinct(&["gci", "--values", "1,2", "--spacing", "1,2,4"], dir.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    // Divergence is named, not hidden behind a number.
    let o = tinct(&["gci", "--values", "1,2,2.5", "--spacing", "1,2,4"], dir.path());
    assert!(o.status.success() && text(&o).contains("divergent"), "{}", text(&o));
}

fn read_metrics(path: &Path) -> Vec<(String, Vec<f64>)> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(
        &header[..10],
        [
            "scheme",
            "l1",
            "l2",
            "linf",
            "peak_ratio",
            "min",
            "max",
            "mass_error",
            "k_numerical",
            "seconds"
        ]
    );
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            // An empty field (k_numerical where the moment method does not hold) reads as NaN.
            let vals = rec
                .iter()
                .skip(1)
                .take(9)
                .map(|v| {
                    if v.is_empty() {
                        f64::NAN
                    } else {
                        v.parse::<f64>().unwrap()
                    }
                })
                .collect();
            (rec[0].to_string(), vals)
        })
        .collect()
}

#[test]
fn compare_on_the_rotating_cone() {
    // Zalesak (1979) rotation: one whole turn returns the initial cone, the exact reference.
    // Bounded (TVD) limiters create no new extrema (Sweby 1984); smearing ordered by
    // compressiveness, upwind > minmod > van Leer (common practice).
    let dir = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/rotating-cone.toml");
    let o = tinct(
        &[
            "compare",
            scn.to_str().unwrap(),
            "--schemes",
            "upwind,minmod,van_leer,superbee",
            "--out",
            "out",
            "--set",
            "grid.nx=64",
            "--set",
            "grid.ny=64",
            "--quiet",
        ],
        dir.path(),
    );
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("Zalesak") && out.contains("Screening estimate"), "{out}");
    let folder = dir.path().join("out/rotating-cone/compare");
    let rows = read_metrics(&folder.join("metrics.csv"));
    assert_eq!(rows.len(), 4);
    let get = |name: &str| rows.iter().find(|r| r.0 == name).map(|r| r.1.clone()).unwrap();
    for (name, v) in &rows {
        let (min, max) = (v[4], v[5]);
        assert!(min >= -1e-12, "{name}: min {min}");
        assert!(max <= 1.0 + 1e-12, "{name}: max {max}");
        assert!(v[6].abs() < 1e-12, "{name}: mass error {}", v[6]);
    }
    let (u, m, vl) = (get("upwind")[0], get("minmod")[0], get("van_leer")[0]);
    assert!(u > m && m > vl, "L1 upwind {u}, minmod {m}, van_leer {vl}");
    // Upwind's smearing shows as a positive numerical diffusivity larger than van Leer's.
    assert!(get("upwind")[7] > get("van_leer")[7] && get("upwind")[7] > 0.0);
    // stdout is sorted by L1.
    let order: Vec<&str> = out
        .lines()
        .filter_map(|l| l.split_whitespace().next())
        .filter(|w| ["upwind", "minmod", "van_leer", "superbee"].contains(w))
        .collect();
    let pos = |n: &str| order.iter().position(|w| *w == n).unwrap();
    assert!(
        pos("van_leer") < pos("minmod") && pos("minmod") < pos("upwind"),
        "{order:?}"
    );
    // The panel: one tile per scheme plus the reference.
    let panel = image::open(folder.join("panel.png")).unwrap().to_rgb8();
    let lay = tinct::output::plot::panel_layout(5, 64, 64);
    assert_eq!((panel.width(), panel.height()), (lay.width, lay.height));
    for &(x, y) in &lay.origins {
        let p = panel.get_pixel(x + 1, y + 1).0;
        assert_ne!(p, [255, 255, 255], "tile at ({x}, {y}) is empty");
    }
    // Nothing is drawn where a sixth tile would go.
    let six = tinct::output::plot::panel_layout(6, 64, 64);
    let (x6, y6) = six.origins[5];
    assert_eq!(panel.get_pixel(x6 + 1, y6 + 1).0, [255, 255, 255]);
    assert!(folder.join("profiles.png").is_file());
}

const PUFF: &str = r#"
name = "puff-study"
[grid]
nx = 120
ny = 80
dx = 2.0
[tracer]
diffusivity = [0.1, 0.05]
decay_rate = 0.0034657359
[flow]
kind = "uniform"
velocity = [0.5, 0.25]
[boundary]
west = "periodic"
east = "periodic"
south = "periodic"
north = "periodic"
[initial]
kind = "gaussian"
centre = [100.0, 70.0]
sigma = 20.0
peak = 1.0
[scheme]
convection = "van_leer"
stages = 3
[run]
end = 100.0
frames = 1
"#;

#[test]
fn converge_on_the_gaussian_puff() {
    // Exact solution: the decaying anisotropic Gaussian puff (Crank 1975). van Leer (second
    // order on smooth profiles, with SSP-RK3 and dt scaled with dx) should show p >= 1.8 on the
    // L1 error; first-order upwind p close to 1.
    let study = |limiter: &str| {
        let s =
            tinct::scenario::parse(PUFF, Path::new("puff.toml"), &[format!("scheme.convection={limiter}")]).unwrap();
        let opts = tinct::studies::converge::ConvergeOptions {
            quantities: vec!["l1".into()],
            ..Default::default()
        };
        let r = tinct::studies::converge::converge(&s, &opts, &mut |_, _, _| {}).unwrap();
        r.quantities[0].finest().unwrap().clone()
    };
    let vl = study("van_leer");
    let up = study("upwind");
    assert!(vl.p.unwrap() >= 1.8, "van Leer {vl:?}");
    assert!((up.p.unwrap() - 1.0).abs() < 0.2, "upwind {up:?}");
    // The CLI writes converge.csv and the plot, and names the exact solution's source.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("puff.toml"), PUFF).unwrap();
    let o = tinct(
        &[
            "converge",
            "puff.toml",
            "--out",
            "out",
            "--quiet",
            "--quantity",
            "l1,max",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("Crank (1975)"));
    let csv = std::fs::read_to_string(dir.path().join("out/puff-study/converge/converge.csv")).unwrap();
    assert!(csv.starts_with("quantity,levels,h1,h2,h3,f1,f2,f3,p,"), "{csv}");
    assert_eq!(csv.lines().count(), 3, "{csv}");
    assert!(dir.path().join("out/puff-study/converge/converge.png").is_file());
    // An unknown quantity is bad input.
    let o = tinct(
        &["converge", "puff.toml", "--quantity", "peak:nowhere", "--quiet"],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
}

#[test]
fn verify_passes_and_names_a_source_on_every_row() {
    let dir = tempfile::tempdir().unwrap();
    let o = tinct(&["verify"], dir.path());
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let rows: Vec<&str> = out.lines().skip(1).take_while(|l| l.contains(" | ")).collect();
    assert!(rows.len() >= 8, "{out}");
    for r in rows {
        let cols: Vec<&str> = r.split(" | ").map(str::trim).collect();
        assert_eq!(cols.len(), 6, "{r}");
        // A source names an author and a year.
        assert!(cols[1].chars().any(|c| c.is_ascii_digit()) && cols[1].len() > 8, "{r}");
        assert_eq!(cols[5], "yes", "{r}");
    }
}

#[test]
fn compare_gives_no_numerical_diffusivity_where_the_moment_method_fails() {
    // Regression: `compare` reported k_numerical = -0.34 m2/s for every scheme on a basin with
    // land and several releases, and counted central's oscillation as diffusion. The moment
    // method (variance growing as 2 K t for one release in open water; Taylor 1921) is valid only
    // for one release spreading freely, by a scheme that does not oscillate.
    let dir = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/marina.toml");
    let o = tinct(
        &[
            "compare",
            scn.to_str().unwrap(),
            "--schemes",
            "upwind,central",
            "--out",
            "out",
            "--set",
            "run.end=1800",
            "--quiet",
        ],
        dir.path(),
    );
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    let rows = read_metrics(&dir.path().join("out/marina/compare/metrics.csv"));
    for (name, v) in &rows {
        assert!(v[7].is_nan(), "{name}: k_numerical {} on a basin with land", v[7]);
    }
    assert!(out.contains("k_numerical not given") && out.contains("land"), "{out}");
    let cone = root().join("scenarios/rotating-cone.toml");
    let o = tinct(
        &[
            "compare",
            cone.to_str().unwrap(),
            "--schemes",
            "central,van_leer",
            "--out",
            "out",
            "--quiet",
        ],
        dir.path(),
    );
    let out = text(&o);
    let rows = read_metrics(&dir.path().join("out/rotating-cone/compare/metrics.csv"));
    let get = |name: &str| rows.iter().find(|r| r.0 == name).map(|r| r.1.clone()).unwrap();
    assert!(get("central")[7].is_nan() && out.contains("oscillates"), "{out}");
    assert!(get("van_leer")[7].is_finite(), "{out}");
}
