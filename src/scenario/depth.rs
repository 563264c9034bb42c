//! Depth fields from a file (`grid.depth = "depth.csv"` or `"depth.png"`): a CSV grid of
//! numbers, first row north, or a grey-level PNG scaled linearly between
//! `grid.depth_range = [shallow, deep]` (black = shallow, white = deep), top row north and
//! resampled by nearest pixel like the land mask.
//!
//! Land cells may hold anything (a non-finite value there reads as 0); every water cell needs a
//! finite depth > 0. Errors are messages for the key `grid.depth` naming the file and the line,
//! column or cell at fault.

use crate::diagnostics::advice::sig;
use crate::grid::{Grid, Mask};
use std::path::Path;

/// Largest CSV depth file accepted, bytes.
const MAX_CSV_BYTES: u64 = 1 << 30;

/// Reads a depth field for the grid from `path`, by extension: a `.csv` grid (`ny` rows of `nx`
/// comma-separated numbers, first row = north, no header; blank lines and lines starting with
/// `#` ignored; `range` is not used) or a `.png` grey-level image with `range` =
/// (shallow, deep) in m (black = shallow, white = deep, linear in the 8- or 16-bit grey level,
/// colour images by their luminance; top row = north edge; nearest-pixel resampling and the
/// aspect check of the land mask). Returns `nx * ny` depths, row-major, row 0 south. A zero,
/// negative or non-finite depth on a water cell is an error naming the cell; land cells keep
/// any finite value and read non-finite ones as 0.
#[allow(dead_code)] // the `grid.depth` key's caller is written separately
pub(super) fn load_depth(path: &Path, grid: &Grid, mask: &Mask, range: Option<(f64, f64)>) -> Result<Vec<f64>, String> {
    let ext = path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase);
    let (mut depth, origin) = match ext.as_deref() {
        Some("csv") => read_csv(path, grid)?,
        Some("png") => (read_png(path, grid, range)?, Origin::Pixels),
        _ => {
            return Err(format!(
                "{}: unknown kind of depth file: the name must end in .csv (numbers) or .png (grey levels)",
                path.display()
            ))
        }
    };
    for j in 0..grid.ny {
        for i in 0..grid.nx {
            let k = j * grid.nx + i;
            let d = depth[k];
            if mask.is_wet(i, j) {
                if !(d.is_finite() && d > 0.0) {
                    let (x, y) = grid.centre(i, j);
                    let from = match &origin {
                        Origin::Lines(lines) => format!(" (line {}, column {})", lines[grid.ny - 1 - j], i + 1),
                        Origin::Pixels => String::new(),
                    };
                    return Err(format!(
                        "{}: water cell (i = {i}, j = {j}) centred at ({}, {}) m has depth {}{from}: \
                         water depths must be finite and > 0 m (land cells may hold anything)",
                        path.display(),
                        sig(x, 4),
                        sig(y, 4),
                        sig(d, 4)
                    ));
                }
            } else if !d.is_finite() {
                depth[k] = 0.0;
            }
        }
    }
    Ok(depth)
}

/// Where the values came from, for messages.
enum Origin {
    /// The file line of each CSV row, north row first.
    Lines(Vec<usize>),
    /// An image.
    Pixels,
}

/// Reads the CSV grid; returns the depths (row 0 south) and each row's line number.
fn read_csv(path: &Path, grid: &Grid) -> Result<(Vec<f64>, Origin), String> {
    let name = path.display();
    let size = std::fs::metadata(path)
        .map_err(|e| format!("cannot open {name}: {e}"))?
        .len();
    if size > MAX_CSV_BYTES {
        return Err(format!(
            "{name} is {} MB: depth files are limited to {} MB",
            sig(size as f64 / 1e6, 4),
            MAX_CSV_BYTES >> 20
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| format!("cannot read {name}: {e}"))?;
    let text = String::from_utf8_lossy(&bytes);
    let (nx, ny) = (grid.nx, grid.ny);
    // Rows as read, north first.
    let mut rows: Vec<Vec<f64>> = Vec::with_capacity(ny);
    let mut lines: Vec<usize> = Vec::with_capacity(ny);
    for (n, line) in text.lines().enumerate() {
        let line_no = n + 1;
        let t = line.trim().trim_start_matches('\u{feff}');
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        if rows.len() == ny {
            return Err(format!(
                "{name}: line {line_no} holds row {} but the grid has ny = {ny} rows (the first row is north)",
                ny + 1
            ));
        }
        let fields: Vec<&str> = t.split(',').collect();
        if fields.len() != nx {
            return Err(format!(
                "{name}: line {line_no} has {} values but the grid has nx = {nx} columns",
                fields.len()
            ));
        }
        let mut row = Vec::with_capacity(nx);
        for (c, f) in fields.iter().enumerate() {
            let f = f.trim();
            let value: f64 = f.parse().map_err(|_| {
                let shown: String = f.chars().take(40).collect();
                let shown = if shown.is_empty() {
                    "an empty field".to_string()
                } else {
                    format!("`{shown}`")
                };
                format!("{name}: line {line_no}, column {}: {shown} is not a number", c + 1)
            })?;
            row.push(value);
        }
        rows.push(row);
        lines.push(line_no);
    }
    if rows.len() < ny {
        let last = lines
            .last()
            .map(|l| format!(", the last on line {l}"))
            .unwrap_or_default();
        return Err(format!(
            "{name} has {} rows of values{last}, but the grid has ny = {ny} rows (the first row is north)",
            rows.len()
        ));
    }
    let mut depth = Vec::with_capacity(grid.cells());
    for row in rows.iter().rev() {
        depth.extend_from_slice(row);
    }
    Ok((depth, Origin::Lines(lines)))
}

/// Reads the grey-level image and maps it onto [shallow, deep].
fn read_png(path: &Path, grid: &Grid, range: Option<(f64, f64)>) -> Result<Vec<f64>, String> {
    let name = path.display();
    let Some((shallow, deep)) = range else {
        return Err(format!(
            "{name}: grey-level depth images need grid.depth_range = [shallow, deep] (m; black = shallow, white = deep)"
        ));
    };
    if !(shallow.is_finite() && deep.is_finite() && shallow > 0.0 && deep >= shallow) {
        return Err(format!(
            "grid.depth_range = [{}, {}] is not allowed for {name}: shallow must be > 0 and deep >= shallow, both finite (m)",
            sig(shallow, 4),
            sig(deep, 4)
        ));
    }
    // 8-bit levels arrive scaled by 257, so level / 65535 is the same fraction.
    let depth = super::land::grid_image(path, grid)?
        .into_iter()
        .map(|level| {
            let f = f64::from(level) / 65535.0;
            shallow * (1.0 - f) + deep * f
        })
        .collect();
    Ok(depth)
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{ImageBuffer, Luma};

    /// 4 by 3 cells of 10 m, so a 4 by 3 image has the grid's aspect.
    fn grid() -> Grid {
        Grid::new(4, 3, 10.0, 10.0, 0.0, 0.0).unwrap()
    }

    fn write(dir: &tempfile::TempDir, name: &str, text: &str) -> std::path::PathBuf {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    /// Depth of cell (i, j) in a row-major, row-0-south vector.
    fn at(d: &[f64], i: usize, j: usize) -> f64 {
        d[j * 4 + i]
    }

    const RANGE: Option<(f64, f64)> = Some((2.0, 12.0));

    #[test]
    fn png_8_bit_is_read_north_up() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("depth.png");
        // Image rows top (north) to bottom (south); no two rows alike.
        #[rustfmt::skip]
        let px: Vec<u8> = vec![
            0,   51,  102, 153,
            204, 255, 0,   0,
            255, 255, 255, 51,
        ];
        ImageBuffer::<Luma<u8>, _>::from_raw(4, 3, px)
            .unwrap()
            .save(&p)
            .unwrap();
        let depth = load_depth(&p, &g, &m, RANGE).unwrap();
        // Worked by hand: depth = 2 + 10 level / 255; image row 0 is grid row j = 2.
        let close = |a: f64, b: f64| (a - b).abs() < 1e-12;
        assert_eq!(at(&depth, 0, 2), 2.0); // black, top-left = north-west
        assert!(close(at(&depth, 1, 2), 4.0));
        assert!(close(at(&depth, 3, 2), 8.0));
        assert_eq!(at(&depth, 1, 1), 12.0); // white
        assert_eq!(at(&depth, 2, 1), 2.0);
        assert_eq!(at(&depth, 0, 0), 12.0);
        assert!(close(at(&depth, 3, 0), 4.0)); // south-east
    }

    #[test]
    fn png_is_resampled_by_nearest_pixel_with_the_aspect_check() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("big.png");
        // 8 by 6 pixels: each cell's 2 by 2 block is black only in the north-west cell.
        let img = ImageBuffer::from_fn(8, 6, |x, y| Luma([if x < 2 && y < 2 { 0u8 } else { 255 }]));
        img.save(&p).unwrap();
        let depth = load_depth(&p, &g, &m, RANGE).unwrap();
        assert_eq!(at(&depth, 0, 2), 2.0);
        assert_eq!(depth.iter().filter(|&&x| x == 12.0).count(), 11);
        let p = d.path().join("wide.png");
        ImageBuffer::from_pixel(5, 3, Luma([255u8])).save(&p).unwrap();
        let e = load_depth(&p, &g, &m, RANGE).unwrap_err();
        assert!(e.contains("5 by 3 pixels") && e.contains("aspects must agree"), "{e}");
    }

    #[test]
    fn png_16_bit_uses_the_full_grey_scale() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("deep16.png");
        let mut img = ImageBuffer::from_pixel(4, 3, Luma([65535u16]));
        img.put_pixel(0, 0, Luma([0]));
        img.put_pixel(1, 0, Luma([32768]));
        img.put_pixel(3, 2, Luma([13107]));
        img.save(&p).unwrap();
        let depth = load_depth(&p, &g, &m, RANGE).unwrap();
        // Worked by hand: 32768 / 65535 lies 1/131070 above one half; 13107 / 65535 = 1/5.
        assert_eq!(at(&depth, 0, 2), 2.0);
        assert!((at(&depth, 1, 2) - (7.0 + 10.0 / 131070.0)).abs() < 1e-12);
        assert!((at(&depth, 3, 0) - 4.0).abs() < 1e-12);
        assert_eq!(at(&depth, 2, 1), 12.0);
    }

    #[test]
    fn csv_is_read_north_up() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let text = "# depths in m, first row north\n1, 2, 3, 4\n\n5,6,7,8\n  # comment\n9,10,11,12.5\n";
        let p = write(&d, "depth.csv", text);
        let depth = load_depth(&p, &g, &m, None).unwrap();
        // Worked by hand: the file's last row is the grid's south row j = 0.
        assert_eq!(depth, [9.0, 10.0, 11.0, 12.5, 5.0, 6.0, 7.0, 8.0, 1.0, 2.0, 3.0, 4.0]);
    }

    #[test]
    fn land_cells_may_hold_anything() {
        let g = grid();
        let mut wet = vec![true; 12];
        wet[2 * 4] = false; // (0, 2), the north-west corner
        wet[3] = false; // (3, 0)
        wet[4 + 1] = false; // (1, 1)
        let m = Mask::from_wet(&g, wet).unwrap();
        let d = tempfile::tempdir().unwrap();
        let p = write(&d, "d.csv", "0,2,3,4\n5,nan,7,8\n9,10,11,-3\n");
        let depth = load_depth(&p, &g, &m, None).unwrap();
        assert_eq!(at(&depth, 0, 2), 0.0);
        assert_eq!(at(&depth, 1, 1), 0.0);
        assert_eq!(at(&depth, 3, 0), -3.0);
    }

    #[test]
    fn bad_water_depth_names_the_cell_centre_and_value() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        for (bad, shown) in [("0", "0"), ("-1.5", "-1.5"), ("inf", "infinite"), ("NaN", "NaN")] {
            let p = write(&d, "d.csv", &format!("1,2,3,4\n5,6,{bad},8\n9,10,11,12\n"));
            let e = load_depth(&p, &g, &m, None).unwrap_err();
            let want = format!("water cell (i = 2, j = 1) centred at (25, 15) m has depth {shown} (line 2, column 3)");
            assert!(e.contains(&want) && e.contains("d.csv"), "{e}");
        }
    }

    #[test]
    fn csv_errors_name_the_line() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let err = |text: &str| load_depth(&write(&d, "d.csv", text), &g, &m, None).unwrap_err();
        let e = err("1,2,3,4\n# note\n5,6,7\n9,10,11,12\n");
        assert!(e.contains("line 3 has 3 values but the grid has nx = 4 columns"), "{e}");
        let e = err("1,2,3,4\n5,6,x7,8\n9,10,11,12\n");
        assert!(e.contains("line 2, column 3: `x7` is not a number"), "{e}");
        let e = err("1,2,3,4\n5,6,,8\n9,10,11,12\n");
        assert!(e.contains("line 2, column 3: an empty field is not a number"), "{e}");
        let e = err("1,2,3,4\n\n5,6,7,8\n");
        assert!(
            e.contains("has 2 rows of values, the last on line 3, but the grid has ny = 3 rows"),
            "{e}"
        );
        let e = err("1,2,3,4\n5,6,7,8\n9,10,11,12\n13,14,15,16\n");
        assert!(e.contains("line 4 holds row 4 but the grid has ny = 3 rows"), "{e}");
        let e = err("");
        assert!(e.contains("has 0 rows of values"), "{e}");
        let e = load_depth(&d.path().join("absent.csv"), &g, &m, None).unwrap_err();
        assert!(e.contains("cannot open") && e.contains("absent.csv"), "{e}");
        let e = load_depth(&write(&d, "d.tif", ""), &g, &m, None).unwrap_err();
        assert!(e.contains("must end in .csv"), "{e}");
    }

    #[test]
    fn png_errors_name_the_problem() {
        let g = grid();
        let m = Mask::all_water(&g);
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("d.png");
        ImageBuffer::from_pixel(4, 3, Luma([128u8])).save(&p).unwrap();
        let e = load_depth(&p, &g, &m, None).unwrap_err();
        assert!(
            e.contains("grey-level depth images need grid.depth_range = [shallow, deep]"),
            "{e}"
        );
        for range in [(0.0, 5.0), (5.0, 2.0), (f64::NAN, 3.0), (1.0, f64::INFINITY)] {
            let e = load_depth(&p, &g, &m, Some(range)).unwrap_err();
            assert!(
                e.contains("grid.depth_range") && e.contains("shallow must be > 0"),
                "{e}"
            );
        }
        assert!(load_depth(&p, &g, &m, Some((3.0, 3.0)))
            .unwrap()
            .iter()
            .all(|&x| x == 3.0));
        let junk = write(&d, "junk.png", "not an image at all");
        let e = load_depth(&junk, &g, &m, RANGE).unwrap_err();
        assert!(e.contains("cannot decode") && e.contains("junk.png"), "{e}");
    }
}
