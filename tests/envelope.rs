//! The envelope (`c_max` in `fields.nc`, `envelope.png`) is the running maximum of the field
//! over every step: checked against a run whose frames fall on every step, so `fields.nc`
//! holds every state (common practice: the maximum of a sampled series).

mod common;

use common::tinct;

#[test]
fn the_envelope_is_the_maximum_over_every_step() {
    let dir = tempfile::tempdir().unwrap();
    let scn = dir.path().join("cone.toml");
    std::fs::write(
        &scn,
        r#"name = "cone"
[grid]
nx = 24
ny = 20
dx = 1.0
[flow]
kind = "rotation"
centre = [12.0, 10.0]
period = 240.0
[boundary]
west = "open"
east = "open"
south = "open"
north = "open"
[initial]
kind = "cone"
centre = [12.0, 15.0]
radius = 4.0
peak = 1.0
[scheme]
convection = "upwind"
dt = 1.0
[run]
end = 30.0
frames = 30
"#,
    )
    .unwrap();
    let o = tinct(&["run", scn.to_str().unwrap(), "--out", "out", "--quiet"], dir.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let run = dir.path().join("out/cone");
    let mut r = netcdf3::FileReader::open(run.join("fields.nc")).unwrap();
    assert_eq!(
        r.data_set().get_var_attr_as_string("c_max", "cell_methods").as_deref(),
        Some("time: maximum")
    );
    let c = r.read_var_f64("c").unwrap();
    let c_max = r.read_var_f64("c_max").unwrap();
    let n = 24 * 20;
    assert_eq!(c.len(), 31 * n);
    for k in 0..n {
        let running = (0..31).map(|t| c[t * n + k]).fold(f64::NEG_INFINITY, f64::max);
        assert_eq!(c_max[k].to_bits(), running.to_bits(), "cell {k}");
    }
    // Upwind smears the cone, so the envelope exceeds the final field along the path.
    assert!((0..n).any(|k| c_max[k] > c[30 * n + k] + 0.1));
    let png = image::open(run.join("envelope.png")).unwrap();
    assert!(png.width() > 24 && png.height() > 20);
}
