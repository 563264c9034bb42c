//! Tests of reading flow files (CSV and NetCDF: round trips, every error message, corrupted
//! and degenerate files) and of the face velocities interpolated in time.

use super::*;
use netcdf3::{DataSet, FileWriter, Version};
use std::fmt::Write as _;

/// 4 by 3 cells of 2 m by 1 m, lower-left corner at (10, -5): centres x = 11, 13, 15, 17 and
/// y = -4.5, -3.5, -2.5.
fn grid() -> Grid {
    Grid::new(4, 3, 2.0, 1.0, 10.0, -5.0).unwrap()
}

/// Cell (3, 2), the north-east corner, is land.
fn mask_with_land(g: &Grid) -> Mask {
    let mut wet = vec![true; g.cells()];
    wet[2 * g.nx + 3] = false;
    Mask::from_wet(g, wet).unwrap()
}

fn write(dir: &tempfile::TempDir, name: &str, text: &str) -> std::path::PathBuf {
    let p = dir.path().join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// The analytic field u = x, v = -y (plus `shift` on both) as CSV rows, skipping `skip`.
fn rows(g: &Grid, time: Option<f64>, shift: f64, skip: Option<(usize, usize)>) -> String {
    let mut s = String::new();
    for j in 0..g.ny {
        for i in 0..g.nx {
            if skip == Some((i, j)) {
                continue;
            }
            let (x, y) = g.centre(i, j);
            let t = time.map(|t| format!("{t},")).unwrap_or_default();
            writeln!(s, "{t}{},{x},{y},{},7", -y + shift, x + shift).unwrap();
        }
    }
    s
}

fn err(path: &Path, g: &Grid, m: &Mask) -> String {
    FlowFile::read(path, g, m).unwrap_err()
}

fn faces(f: &FlowFile, g: &Grid, t: f64) -> (Vec<f64>, Vec<f64>) {
    let mut u = vec![f64::NAN; g.padded_len()];
    let mut v = vec![f64::NAN; g.padded_len()];
    f.faces_at(g, t, &mut u, &mut v);
    (u, v)
}

#[test]
fn csv_analytic_field_reads_back_exactly_at_the_faces() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    // Columns in another order and case, with an extra one.
    let p = write(
        &d,
        "flow.csv",
        &format!("V, X ,Y,U,depth\n{}", rows(&g, None, 0.0, None)),
    );
    let f = FlowFile::read(&p, &g, &m).unwrap();
    assert!(f.times.is_empty() && f.is_steady());
    assert_eq!(f.u.len(), 1);
    assert_eq!(f.u[0][g.nx + 2], 15.0); // cell (2, 1): u = x
    assert_eq!(f.v[0][g.nx + 2], 3.5); // v = -y
    let (u, v) = faces(&f, &g, 123.0);
    // Worked by hand: x-faces of every row sit at x = 10, 12, 14, 16, 18; the interior ones
    // take the mean of the two centres (= the face's x), the edge ones the adjacent cell.
    for j in 0..3 {
        let got: Vec<f64> = (0..=4).map(|i| u[g.idx(i, j)]).collect();
        assert_eq!(got, [11.0, 12.0, 14.0, 16.0, 17.0], "row {j}");
    }
    // y-faces at y = -5, -4, -3, -2: v = -y inside, the edge cells' 4.5 and 2.5 outside.
    for i in 0..4 {
        let got: Vec<f64> = (0..=3).map(|j| v[g.idx(i, j)]).collect();
        assert_eq!(got, [4.5, 4.0, 3.0, 2.5], "column {i}");
    }
    // Everything else in the padded arrays is zero.
    assert_eq!(u[g.idx(-1, 0)], 0.0);
    assert_eq!(v[g.idx(0, -1)], 0.0);
    assert_eq!(u.iter().filter(|x| **x != 0.0).count(), 15);
    assert!(f.covers(-1e9, 1e9));
}

#[test]
fn csv_land_cells_may_be_absent_and_read_as_zero() {
    let g = grid();
    let m = mask_with_land(&g);
    let d = tempfile::tempdir().unwrap();
    let p = write(
        &d,
        "f.csv",
        &format!("v,x,y,u,w\n{}", rows(&g, None, 0.0, Some((3, 2)))),
    );
    let f = FlowFile::read(&p, &g, &m).unwrap();
    assert_eq!(f.u[0][2 * 4 + 3], 0.0);
    assert_eq!(f.v[0][2 * 4 + 3], 0.0);
    assert_eq!(f.u[0][2 * 4 + 2], 15.0);
}

#[test]
fn csv_time_records_interpolate_linearly() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let text = format!(
        "time,v,x,y,u,w\n{}\n{}",
        rows(&g, Some(0.0), 0.0, None),
        rows(&g, Some(100.0), 4.0, None)
    );
    let p = write(&d, "f.csv", &text);
    let f = FlowFile::read(&p, &g, &m).unwrap();
    assert_eq!(f.times, [0.0, 100.0]);
    assert!(!f.is_steady());
    // Worked by hand: halfway between the records every value is shifted by 2.
    let (u, v) = faces(&f, &g, 50.0);
    assert_eq!(u[g.idx(2, 1)], 16.0);
    assert_eq!(u[g.idx(4, 0)], 19.0);
    assert_eq!(v[g.idx(1, 2)], 5.0);
    // A quarter of the way: shifted by 1.
    let (u, _) = faces(&f, &g, 25.0);
    assert_eq!(u[g.idx(2, 1)], 15.0);
    // Outside the axis: held at the end records.
    assert_eq!(faces(&f, &g, -10.0).0[g.idx(2, 1)], 14.0);
    assert_eq!(faces(&f, &g, 1e9).0[g.idx(2, 1)], 18.0);
    assert_eq!(faces(&f, &g, f64::NAN).0[g.idx(2, 1)], 14.0);
    assert!(f.covers(0.0, 100.0));
    assert!(f.covers(10.0, 60.0));
    assert!(!f.covers(-1.0, 50.0));
    assert!(!f.covers(0.0, 100.5));
    assert!(!f.covers(f64::NAN, 50.0));
}

/// Writes u = x + shift r, v = -y + shift r per record r, f32 or f64, land as the fill value.
fn write_nc(path: &Path, g: &Grid, m: &Mask, times: Option<&[f64]>, f32: bool, fill: Option<f64>) {
    let mut ds = DataSet::new();
    let nt = times.map_or(1, |t| t.len());
    let dims: &[&str] = if let Some(t) = times {
        ds.set_unlimited_dim("time", t.len()).unwrap();
        ds.add_var_f64("time", &["time"]).unwrap();
        ds.add_var_attr_string("time", "units", "seconds since 2000-01-01")
            .unwrap();
        &["time", "y", "x"]
    } else {
        &["y", "x"]
    };
    ds.add_fixed_dim("y", g.ny).unwrap();
    ds.add_fixed_dim("x", g.nx).unwrap();
    ds.add_var_f64("x", &["x"]).unwrap();
    ds.add_var_f64("y", &["y"]).unwrap();
    for var in ["u", "v"] {
        if f32 {
            ds.add_var_f32(var, dims).unwrap();
            if let Some(f) = fill {
                ds.add_var_attr_f32(var, "_FillValue", vec![f as f32]).unwrap();
            }
        } else {
            ds.add_var_f64(var, dims).unwrap();
            if let Some(f) = fill {
                ds.add_var_attr_f64(var, "_FillValue", vec![f]).unwrap();
            }
        }
    }
    let mut u = Vec::new();
    let mut v = Vec::new();
    for r in 0..nt {
        for j in 0..g.ny {
            for i in 0..g.nx {
                let (x, y) = g.centre(i, j);
                let land = !m.is_wet(i, j);
                let f = fill.unwrap_or(f64::NAN);
                u.push(if land { f } else { x + 4.0 * r as f64 });
                v.push(if land { f } else { -y + 4.0 * r as f64 });
            }
        }
    }
    let mut w = FileWriter::open(path).unwrap();
    w.set_def(&ds, Version::Classic, 0).unwrap();
    w.write_var_f64("x", &g.xs()).unwrap();
    w.write_var_f64("y", &g.ys()).unwrap();
    if let Some(t) = times {
        w.write_var_f64("time", t).unwrap();
    }
    if f32 {
        let to32 = |a: &[f64]| a.iter().map(|&x| x as f32).collect::<Vec<_>>();
        w.write_var_f32("u", &to32(&u)).unwrap();
        w.write_var_f32("v", &to32(&v)).unwrap();
    } else {
        w.write_var_f64("u", &u).unwrap();
        w.write_var_f64("v", &v).unwrap();
    }
    w.close().unwrap();
}

#[test]
fn netcdf_round_trip_f32_f64_with_and_without_time() {
    let g = grid();
    let m = mask_with_land(&g);
    let d = tempfile::tempdir().unwrap();
    for f32 in [false, true] {
        for times in [None, Some(&[0.0, 100.0][..])] {
            for fill in [None, Some(-999.0)] {
                let p = d.path().join("flow.nc");
                write_nc(&p, &g, &m, times, f32, fill);
                let f = FlowFile::read(&p, &g, &m)
                    .unwrap_or_else(|e| panic!("f32 {f32}, times {times:?}, fill {fill:?}: {e}"));
                let case = format!("f32 {f32}, times {times:?}, fill {fill:?}");
                assert_eq!(f.times, times.unwrap_or(&[]), "{case}");
                assert_eq!(f.u.len(), times.map_or(1, |t| t.len()), "{case}");
                assert_eq!(f.u[0][4 + 2], 15.0, "{case}"); // every value here is exact in f32
                assert_eq!(f.v[0][4 + 2], 3.5, "{case}");
                assert_eq!(f.u[0][2 * 4 + 3], 0.0, "{case}: land fill reads as 0");
                let (u, v) = faces(&f, &g, 50.0);
                let shift = if times.is_some() { 2.0 } else { 0.0 };
                assert_eq!(u[g.idx(2, 1)], 14.0 + shift, "{case}");
                assert_eq!(v[g.idx(1, 1)], 4.0 + shift, "{case}");
            }
        }
    }
}

#[test]
fn csv_error_missing_column_lists_the_columns_found() {
    let (g, m, d) = (grid(), Mask::all_water(&grid()), tempfile::tempdir().unwrap());
    let p = write(&d, "f.csv", "x,y,u,speed\n11,-4.5,1,2\n");
    let e = err(&p, &g, &m);
    assert!(e.contains("f.csv") && e.contains("no column `v`"), "{e}");
    assert!(e.contains("columns found: `x`, `y`, `u`, `speed`"), "{e}");
    let p = write(&d, "dup.csv", "x,y,u,v,U\n");
    assert!(err(&p, &g, &m).contains("column `u` twice (columns 3 and 5)"));
}

#[test]
fn csv_error_non_numeric_value_names_row_and_column() {
    let (g, m, d) = (grid(), Mask::all_water(&grid()), tempfile::tempdir().unwrap());
    let p = write(&d, "f.csv", "x,y,u,v\n11,-4.5,1,2\n13,-4.5,abc,2\n");
    let e = err(&p, &g, &m);
    assert!(e.contains("row 3, column `u`: `abc` is not a number"), "{e}");
    let p = write(&d, "f.csv", "x,y,u,v\n11,-4.5,1,\n");
    let e = err(&p, &g, &m);
    assert!(e.contains("row 2, column `v`: an empty field is not a number"), "{e}");
    let p = write(&d, "f.csv", "x,y,u,v\n11,-4.5\n");
    let e = err(&p, &g, &m);
    assert!(e.contains("row 2 has 2 fields but the header has 4"), "{e}");
}

#[test]
fn csv_error_non_finite_value_names_row_and_column() {
    let (g, m, d) = (grid(), Mask::all_water(&grid()), tempfile::tempdir().unwrap());
    for (bad, shown) in [("NaN", "NaN"), ("inf", "inf"), ("-1e400", "-inf")] {
        let p = write(&d, "f.csv", &format!("x,y,u,v\n11,-4.5,1,2\n13,-4.5,1,{bad}\n"));
        let e = err(&p, &g, &m);
        assert!(e.contains(&format!("row 3, column `v`: {shown} is not allowed")), "{e}");
    }
}

#[test]
fn csv_error_point_off_the_centres_names_row_point_and_grid() {
    let (g, m, d) = (grid(), Mask::all_water(&grid()), tempfile::tempdir().unwrap());
    for (x, y) in [(12.0, -4.5), (19.0, -4.5), (11.0, -1.5), (11.00001, -4.5)] {
        let p = write(
            &d,
            "f.csv",
            &format!("x,y,u,v\n11,-4.5,1,2\n13,-4.5,1,2\n{x},{y},0,0\n"),
        );
        let e = err(&p, &g, &m);
        let point = format!("row 4: the point ({}, {}) m is not a cell centre", num(x), num(y));
        assert!(e.contains(&point), "{e}");
        assert!(
            e.contains("x 10 to 18 m and y -5 to -2 m with dx = 2 m, dy = 1 m"),
            "{e}"
        );
        assert!(e.contains("x = 11, 13, ..., 17"), "{e}");
    }
    // Within a millionth of a cell is a centre.
    let text = rows(&g, None, 0.0, None).replacen("11,-4.5", "11.000001,-4.5", 1);
    let p = write(&d, "f.csv", &format!("v,x,y,u,w\n{text}"));
    assert!(FlowFile::read(&p, &g, &m).is_ok());
}

#[test]
fn csv_error_missing_water_cell_names_the_cell() {
    let g = grid();
    let m = mask_with_land(&g);
    let d = tempfile::tempdir().unwrap();
    let p = write(
        &d,
        "f.csv",
        &format!("v,x,y,u,w\n{}", rows(&g, None, 0.0, Some((2, 1)))),
    );
    let e = err(&p, &g, &m);
    assert!(
        e.contains("water cell (i = 2, j = 1) centred at (15, -3.5) m has no row"),
        "{e}"
    );
    // In a time record other than the last.
    let text = format!(
        "time,v,x,y,u,w\n{}{}",
        rows(&g, Some(0.0), 0.0, Some((0, 0))),
        rows(&g, Some(60.0), 0.0, None)
    );
    let p = write(&d, "t.csv", &text);
    let e = err(&p, &g, &m);
    assert!(
        e.contains("(i = 0, j = 0) centred at (11, -4.5) m has no row at time 0 s"),
        "{e}"
    );
}

#[test]
fn csv_error_duplicate_cell_names_both_rows() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let text = format!("v,x,y,u,w\n{}4.5,11,-4.5,11,7\n", rows(&g, None, 0.0, None));
    let p = write(&d, "f.csv", &text);
    let e = err(&p, &g, &m);
    assert!(
        e.contains("row 14: cell (i = 0, j = 0) centred at (11, -4.5) m is given twice (rows 2 and 14)"),
        "{e}"
    );
}

#[test]
fn csv_error_time_going_back_names_the_row() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let text = format!(
        "time,v,x,y,u,w\n{}{}",
        rows(&g, Some(100.0), 0.0, None),
        rows(&g, Some(50.0), 0.0, None)
    );
    let p = write(&d, "f.csv", &text);
    let e = err(&p, &g, &m);
    assert!(e.contains("row 14 has time 50 s after rows at time 100 s"), "{e}");
}

#[test]
fn csv_degenerate_files_are_errors_not_panics() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let e = err(&write(&d, "empty.csv", ""), &g, &m);
    assert!(e.contains("empty.csv is empty"), "{e}");
    let e = err(&write(&d, "head.csv", "x,y,u,v\n"), &g, &m);
    assert!(e.contains("no data rows"), "{e}");
    let e = err(&write(&d, "junk.csv", "\u{0}\u{1}\u{ff}garbage\"\n\"\"x"), &g, &m);
    assert!(e.contains("junk.csv"), "{e}");
    let bytes: Vec<u8> = (0..5000u32).map(|k| (k * 7919 % 251) as u8).collect();
    let p = d.path().join("noise.csv");
    std::fs::write(&p, bytes).unwrap();
    assert!(FlowFile::read(&p, &g, &m).is_err());
    let e = err(&d.path().join("absent.csv"), &g, &m);
    assert!(e.contains("cannot open") && e.contains("absent.csv"), "{e}");
    let e = err(&write(&d, "f.txt", "x,y,u,v\n"), &g, &m);
    assert!(e.contains("must end in .csv or .nc"), "{e}");
    // Huge finite values are accepted, and faces stay finite.
    let text = rows(&g, None, 0.0, None).replacen("4.5,11,-4.5,11,", "1.7e308,11,-4.5,-1.7e308,", 1);
    let p = write(&d, "huge.csv", &format!("v,x,y,u,w\n{text}"));
    let f = FlowFile::read(&p, &g, &m).unwrap();
    let (u, v) = faces(&f, &g, 0.0);
    assert!(u.iter().chain(&v).all(|x| x.is_finite()));
    assert_eq!(v[g.idx(0, 1)], 0.5 * 1.7e308 + 0.5 * 3.5);
    assert_eq!(u[g.idx(0, 0)], -1.7e308);
}

#[test]
fn netcdf_error_grid_size_mismatch_names_both_shapes() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("f.nc");
    let big = Grid::new(5, 3, 2.0, 1.0, 10.0, -5.0).unwrap();
    write_nc(&p, &big, &Mask::all_water(&big), Some(&[0.0, 1.0]), false, None);
    let g = grid();
    let e = err(&p, &g, &Mask::all_water(&g));
    assert!(
        e.contains("`u` has dimensions (time = 2, y = 3, x = 5) but the grid needs (y = 3, x = 4)"),
        "{e}"
    );
}

#[test]
fn netcdf_error_coordinates_off_the_grid() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("f.nc");
    let shifted = Grid::new(4, 3, 2.0, 1.0, 10.5, -5.0).unwrap();
    write_nc(&p, &shifted, &Mask::all_water(&shifted), None, true, None);
    let g = grid();
    let e = err(&p, &g, &Mask::all_water(&g));
    assert!(
        e.contains("coordinate x[0] = 11.5 is not the grid's cell centre x = 11 m"),
        "{e}"
    );
}

#[test]
fn netcdf_error_non_increasing_time_names_the_index() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("f.nc");
    write_nc(&p, &g, &m, Some(&[0.0, 100.0, 100.0]), false, None);
    let e = err(&p, &g, &m);
    assert!(e.contains("time[2] = 100 s follows time[1] = 100 s"), "{e}");
}

#[test]
fn netcdf_error_fill_or_nan_on_water_names_the_cell() {
    let g = grid();
    let land = mask_with_land(&g);
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("f.nc");
    // Written with land at (3, 2), read with that cell as water.
    write_nc(&p, &g, &land, Some(&[0.0, 60.0]), true, Some(-999.0));
    let e = err(&p, &g, &Mask::all_water(&g));
    assert!(
        e.contains("`u` at water cell (i = 3, j = 2) centred at (17, -2.5) m at time 0 s (record 0) is the fill value"),
        "{e}"
    );
    write_nc(&p, &g, &land, None, false, None);
    let e = err(&p, &g, &Mask::all_water(&g));
    assert!(
        e.contains("`u` at water cell (i = 3, j = 2) centred at (17, -2.5) m is NaN"),
        "{e}"
    );
}

#[test]
fn netcdf_error_missing_variables_and_other_formats() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("f.nc");
    let mut ds = DataSet::new();
    ds.add_fixed_dim("x", 4).unwrap();
    ds.add_var_f64("x", &["x"]).unwrap();
    let mut w = FileWriter::open(&p).unwrap();
    w.set_def(&ds, Version::Offset64Bit, 0).unwrap();
    w.write_var_f64("x", &g.xs()).unwrap();
    w.close().unwrap();
    let e = err(&p, &g, &m);
    assert!(e.contains("needs variables `u` and `v`; variables found: x"), "{e}");
    for (bytes, says) in [
        (&b""[..], "is empty"),
        (&b"\x89HDF\r\n\x1a\n"[..], "NetCDF-4 (HDF5)"),
        (&b"CDF\x05\0\0"[..], "CDF-5"),
        (&b"hello world"[..], "not a NetCDF classic"),
        (&b"CDF\x01"[..], "f.nc"),
    ] {
        std::fs::write(&p, bytes).unwrap();
        let e = err(&p, &g, &m);
        assert!(e.contains(says), "{e}");
    }
}

#[test]
fn netcdf_corrupted_headers_give_errors_not_panics() {
    let g = grid();
    let m = Mask::all_water(&g);
    let d = tempfile::tempdir().unwrap();
    let good = d.path().join("good.nc");
    write_nc(&good, &g, &m, Some(&[0.0, 60.0]), false, Some(-1.0));
    let bytes = std::fs::read(&good).unwrap();
    let p = d.path().join("bad.nc");
    // Truncations and single-byte corruptions of the header.
    for cut in (0..bytes.len()).step_by(7) {
        std::fs::write(&p, &bytes[..cut]).unwrap();
        let _ = FlowFile::read(&p, &g, &m);
    }
    let header = bytes.len().min(400);
    for k in 4..header {
        for b in [0x00, 0x7f, 0xff] {
            let mut c = bytes.clone();
            c[k] = b;
            std::fs::write(&p, &c).unwrap();
            let _ = FlowFile::read(&p, &g, &m);
        }
    }
}
