//! Velocity fields read from a file (`flow.kind = "file"`): cell-centre `u` and `v` on the grid
//! at one or more times, from a CSV table or a NetCDF classic / 64-bit offset file, turned into
//! C-grid face velocities and interpolated linearly in time.
//!
//! CSV: a header row naming the columns `x`, `y`, `u`, `v` (any case, any order, extra columns
//! ignored) and optionally `time`; one row per cell centre (and per time). Rows of one time come
//! together, times in increasing order. Land cells may be left out (they read as 0).
//!
//! NetCDF: variables `u` and `v` shaped (y, x) or (time, y, x), f32 or f64; coordinate
//! variables `x` and `y` (cell centres, ascending) and, for several records, `time` (seconds,
//! strictly increasing). `_FillValue` (or the NetCDF default fill) and NaN are accepted on land
//! cells only.
//!
//! Every error is a message for the key `flow.path` naming the file and what is wrong in it;
//! CSV row numbers are the file's line numbers (the header is row 1).
//!
//! Layout: this module holds [`FlowFile`] (reading by extension, time interpolation to the faces)
//! and the helpers both readers share; `csv` reads CSV tables, `netcdf` reads NetCDF files.

mod csv;
mod netcdf;
#[cfg(test)]
mod tests;

use crate::diagnostics::advice::sig;
use crate::grid::{Grid, Mask};
use std::path::Path;

/// Largest number of velocity values (u and v over every record) accepted from one file.
pub const MAX_VALUES: usize = 100_000_000;

/// A coordinate matches a cell centre when it is within this fraction of a cell size.
const CENTRE_TOLERANCE: f64 = 1e-6;

/// Cell-centre velocities read from a file, on the grid, at one or more times.
#[derive(Debug, Clone, PartialEq)]
pub struct FlowFile {
    /// Record times, s, strictly increasing; empty or one entry = steady.
    pub times: Vec<f64>,
    /// x-velocity per record (at least one): `nx * ny` values row-major, row 0 south, i fastest,
    /// m/s. Land cells hold any finite value (0 where the file gives none).
    pub u: Vec<Vec<f64>>,
    /// y-velocity per record, laid out like `u`, m/s.
    pub v: Vec<Vec<f64>>,
}

impl FlowFile {
    /// Reads `path` for the grid, by extension: `.csv` or `.nc`. Every water cell of `mask` must
    /// have a finite velocity at every time; the error is a message for the key `flow.path`.
    pub fn read(path: &Path, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
        let ext = path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("csv") => csv::read_csv(path, grid, mask),
            Some("nc") => netcdf::read_netcdf(path, grid, mask),
            _ => Err(format!(
                "{}: unknown kind of flow file: the name must end in .csv or .nc",
                path.display()
            )),
        }
    }

    /// Whether the field does not change in time (no or one record time).
    pub fn is_steady(&self) -> bool {
        self.times.len() <= 1
    }

    /// Face velocities at time `t`, linearly interpolated in time between the bracketing
    /// records (held at the first or last record outside the time axis; constant for a steady
    /// file). `u` gets the x-faces (west face of cell (i, j) at `grid.idx(i, j)`, east face of
    /// the last column at `grid.idx(nx, j)`), `v` the y-faces (south face at `grid.idx(i, j)`,
    /// north face of the top row at `grid.idx(i, ny)`); both are padded arrays of
    /// `grid.padded_len()`, zero outside the faces. An interior face takes the mean of its two
    /// cells, a face on the grid's outer edge its one cell. Land and wall faces are not zeroed.
    ///
    /// Panics if the slices do not have `grid.padded_len()` values or the records do not match
    /// the grid (programming errors, not input errors).
    pub fn faces_at(&self, grid: &Grid, t: f64, u: &mut [f64], v: &mut [f64]) {
        let n = grid.padded_len();
        assert!(
            u.len() == n && v.len() == n,
            "faces_at: face arrays must have grid.padded_len() values"
        );
        let (nx, ny) = (grid.nx, grid.ny);
        let (k0, k1, w) = self.bracket(t);
        let at = |f: &[Vec<f64>], i: usize, j: usize| {
            let a = f[k0][j * nx + i];
            if w == 0.0 {
                a
            } else {
                (1.0 - w) * a + w * f[k1][j * nx + i]
            }
        };
        // Halves first, so that the sum cannot overflow for huge finite values.
        let mean = |a: f64, b: f64| 0.5 * a + 0.5 * b;
        u.fill(0.0);
        v.fill(0.0);
        for j in 0..ny {
            for i in 0..=nx {
                let value = if i == 0 {
                    at(&self.u, 0, j)
                } else if i == nx {
                    at(&self.u, nx - 1, j)
                } else {
                    mean(at(&self.u, i - 1, j), at(&self.u, i, j))
                };
                u[grid.idx(i as isize, j as isize)] = value;
            }
        }
        for j in 0..=ny {
            for i in 0..nx {
                let value = if j == 0 {
                    at(&self.v, i, 0)
                } else if j == ny {
                    at(&self.v, i, ny - 1)
                } else {
                    mean(at(&self.v, i, j - 1), at(&self.v, i, j))
                };
                v[grid.idx(i as isize, j as isize)] = value;
            }
        }
    }

    /// Whether the time axis covers [t0, t1] (a steady file covers everything).
    pub fn covers(&self, t0: f64, t1: f64) -> bool {
        match self.times.as_slice() {
            [first, .., last] => *first <= t0 && t0 <= t1 && t1 <= *last,
            _ => true,
        }
    }

    /// The records bracketing `t` and the weight of the later one.
    fn bracket(&self, t: f64) -> (usize, usize, f64) {
        let times = &self.times;
        if times.len() <= 1 || !(t > times[0]) {
            return (0, 0, 0.0);
        }
        let last = times.len() - 1;
        if t >= times[last] {
            return (last, last, 0.0);
        }
        // times[0] < t < times[last]: p is in 1..=last.
        let p = times.partition_point(|&s| s <= t);
        let (k0, k1) = (p - 1, p);
        let w = (t - times[k0]) / (times[k1] - times[k0]);
        (k0, k1, w.clamp(0.0, 1.0))
    }
}

/// A number with at most 4 significant digits.
fn num(x: f64) -> String {
    sig(x, 4)
}

/// The grid's cell-centre lattice in words, for "not a cell centre" messages.
fn lattice(grid: &Grid) -> String {
    let (xa, ya) = grid.centre(0, 0);
    let (xb, yb) = grid.centre(grid.nx - 1, grid.ny - 1);
    format!(
        "the grid spans x {} to {} m and y {} to {} m with dx = {} m, dy = {} m: cell centres are \
         x = {}, {}, ..., {} and y = {}, {}, ..., {}",
        num(grid.x0),
        num(grid.x0 + grid.lx()),
        num(grid.y0),
        num(grid.y0 + grid.ly()),
        num(grid.dx),
        num(grid.dy),
        num(xa),
        num(xa + grid.dx),
        num(xb),
        num(ya),
        num(ya + grid.dy),
        num(yb)
    )
}

/// Index of the cell-centre coordinate `c` along an axis starting at `c0` with spacing `d` and
/// `n` cells, when `c` is within [`CENTRE_TOLERANCE`] cells of a centre.
fn centre_index(c: f64, c0: f64, d: f64, n: usize) -> Option<usize> {
    let f = (c - c0) / d - 0.5;
    let r = f.round();
    if (f - r).abs() <= CENTRE_TOLERANCE && r >= 0.0 && r < n as f64 {
        Some(r as usize)
    } else {
        None
    }
}

/// " at t = ... s" when the file has a time axis.
fn at_time(t: Option<f64>) -> String {
    t.map(|t| format!(" at time {} s", num(t))).unwrap_or_default()
}

/// The first water cell without a value, as an error, or `Ok` when every water cell has one.
fn check_complete(
    name: &str,
    grid: &Grid,
    mask: &Mask,
    seen: &[u64],
    time: Option<f64>,
    what: &str,
) -> Result<(), String> {
    let mut missing = (0..grid.cells()).filter(|&k| seen[k] == 0 && mask.as_slice()[k]);
    if let Some(k) = missing.next() {
        let (i, j) = (k % grid.nx, k / grid.nx);
        let (x, y) = grid.centre(i, j);
        let others = missing.count();
        let more = if others > 0 {
            format!(" ({others} more water cells are missing too)")
        } else {
            String::new()
        };
        return Err(format!(
            "{name}: water cell (i = {i}, j = {j}) centred at ({}, {}) m has no {what}{}{more}; \
             every water cell needs a velocity",
            num(x),
            num(y),
            at_time(time)
        ));
    }
    Ok(())
}
