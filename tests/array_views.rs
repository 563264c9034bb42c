//! The library's arrays against the run's `fields.nc`: `Simulation::field_view` is (y, x)
//! order with row 0 south, exactly as the NetCDF variable `c(time, y, x)` the binary writes
//! (the CF conventions' ordering, common practice), bit for bit, and it borrows the padded
//! field without copying.

mod common;

use common::tinct;
use std::ops::ControlFlow;
use tinct::initial::Initial;
use tinct::step::Simulation;

/// A cone in the south-east of a grid wider than tall, so a transposed or flipped reading
/// cannot match.
const SCENARIO: &str = r#"name = "views"
[grid]
nx = 23
ny = 11
dx = 2.0
dy = 3.0
origin = [100.0, -50.0]
[flow]
kind = "uniform"
velocity = [-0.2, 0.1]
[tracer]
diffusivity = 0.05
[boundary]
west = "open"
east = "open"
south = "wall"
north = "open"
[initial]
kind = "cone"
centre = [136.0, -42.0]
radius = 8.0
peak = 1.0
[scheme]
convection = "van_leer"
dt = 1.0
[run]
end = 40.0
frames = 1
"#;

#[test]
fn field_view_matches_fields_nc_in_y_x_order_with_row_0_south() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("views.toml");
    std::fs::write(&path, SCENARIO).unwrap();
    let o = tinct(&["run", path.to_str().unwrap(), "--out", "out", "--quiet"], dir.path());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut r = netcdf3::FileReader::open(dir.path().join("out/views/fields.nc")).unwrap();
    let xs = r.read_var_f64("x").unwrap();
    let ys = r.read_var_f64("y").unwrap();
    let c = r.read_var_f64("c").unwrap();
    let (nx, ny) = (xs.len(), ys.len());
    assert_eq!((nx, ny), (23, 11));
    assert!(
        ys.windows(2).all(|w| w[1] > w[0]),
        "y rises with the row index: row 0 is south"
    );
    assert_eq!(c.len(), 2 * nx * ny);

    let scn = tinct::scenario::load(&path, &[]).unwrap();
    let model = scn.build_model().unwrap();
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    assert_eq!(c0.dim(), (ny, nx));
    let mut sim = Simulation::new(model, scn.scheme, c0).unwrap();
    // Record 0: the cone as written, against its formula at the file's own coordinates.
    let cone = Initial::Cone {
        centre: (136.0, -42.0),
        radius: 8.0,
        peak: 1.0,
    };
    let v0 = sim.field_view();
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            assert_eq!(
                c[k].to_bits(),
                cone.value_at(xs[i], ys[j]).to_bits(),
                "record 0, (i, j) = ({i}, {j})"
            );
            assert_eq!(c[k].to_bits(), v0[[j, i]].to_bits(), "record 0, (i, j) = ({i}, {j})");
        }
    }
    // The peak sits in the south-east: a transposed or north-first reading would move it.
    let (jp, ip) = v0.indexed_iter().max_by(|a, b| a.1.total_cmp(b.1)).unwrap().0;
    assert!(jp < ny / 2 && ip > nx / 2, "peak at (i, j) = ({ip}, {jp})");

    // The last record: the library's march, bit for bit.
    sim.advance_to(scn.run.end, |_| ControlFlow::Continue(())).unwrap();
    let last = &c[nx * ny..];
    let view = sim.field_view();
    for ((j, i), v) in view.indexed_iter() {
        assert_eq!(
            last[j * nx + i].to_bits(),
            v.to_bits(),
            "final record, (i, j) = ({i}, {j})"
        );
    }
    // Zero copy: the view's first cell is the padded field's first interior cell.
    let g = sim.model.grid;
    assert!(std::ptr::eq(&view[[0, 0]], &sim.state.c[g.idx(0, 0)]));
    assert!(std::ptr::eq(
        &view[[ny - 1, nx - 1]],
        &sim.state.c[g.idx(nx as isize - 1, ny as isize - 1)]
    ));
    assert_eq!(view.strides(), &[g.stride() as isize, 1]);
}
