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

use crate::diagnostics::advice::sig;
use crate::grid::{Grid, Mask};
use netcdf3::{DataVector, FileReader};
use std::path::Path;

/// Largest number of velocity values (u and v over every record) accepted from one file.
pub const MAX_VALUES: usize = 100_000_000;

/// Largest CSV file accepted, bytes (far above what [`MAX_VALUES`] needs as text).
const MAX_CSV_BYTES: u64 = 16 << 30;

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
            Some("csv") => read_csv(path, grid, mask),
            Some("nc") => read_netcdf(path, grid, mask),
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

// ---------------------------------------------------------------------------------------------
// CSV

/// One time record being filled from CSV rows.
struct CsvRecord {
    time: Option<f64>,
    u: Vec<f64>,
    v: Vec<f64>,
}

/// Column positions in the CSV header.
struct Columns {
    x: usize,
    y: usize,
    u: usize,
    v: usize,
    time: Option<usize>,
    count: usize,
}

/// Finds the columns by name (case-insensitive, surrounding spaces and a byte-order mark ignored).
fn csv_columns(name: &str, header: &csv::ByteRecord) -> Result<Columns, String> {
    let names: Vec<String> = header
        .iter()
        .map(|f| {
            String::from_utf8_lossy(f)
                .trim_start_matches('\u{feff}')
                .trim()
                .to_ascii_lowercase()
        })
        .collect();
    if names.iter().all(|n| n.is_empty()) {
        return Err(format!(
            "{name} is empty: the first row must be a header naming the columns x, y, u, v (and optionally time)"
        ));
    }
    let find = |wanted: &str| -> Result<Option<usize>, String> {
        let mut hits = names.iter().enumerate().filter(|(_, n)| n.as_str() == wanted);
        let first = hits.next().map(|(k, _)| k);
        if let Some((second, _)) = hits.next() {
            return Err(format!(
                "{name}: the header names column `{wanted}` twice (columns {} and {})",
                first.unwrap_or(0) + 1,
                second + 1
            ));
        }
        Ok(first)
    };
    let found = || {
        names
            .iter()
            .map(|n| {
                if n.is_empty() {
                    "(blank)".to_string()
                } else {
                    format!("`{n}`")
                }
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let need = |wanted: &str| -> Result<usize, String> {
        find(wanted)?.ok_or_else(|| {
            format!(
                "{name}: no column `{wanted}` in the header row; columns found: {}; \
                 x, y, u and v are required, time is optional",
                found()
            )
        })
    };
    Ok(Columns {
        x: need("x")?,
        y: need("y")?,
        u: need("u")?,
        v: need("v")?,
        time: find("time")?,
        count: names.len(),
    })
}

/// Parses one finite number from a CSV field.
fn csv_number(
    name: &str,
    rec: &csv::ByteRecord,
    col: usize,
    col_name: &str,
    row: u64,
    cols: usize,
) -> Result<f64, String> {
    let Some(bytes) = rec.get(col) else {
        return Err(format!(
            "{name}: row {row} has {} fields but the header has {cols}: no value for column `{col_name}`",
            rec.len()
        ));
    };
    let text = String::from_utf8_lossy(bytes);
    let text = text.trim();
    let value: f64 = text.parse().map_err(|_| {
        let shown: String = text.chars().take(40).collect();
        let shown = if shown.is_empty() {
            "an empty field".to_string()
        } else {
            format!("`{shown}`")
        };
        format!("{name}: row {row}, column `{col_name}`: {shown} is not a number")
    })?;
    if !value.is_finite() {
        return Err(format!(
            "{name}: row {row}, column `{col_name}`: {value} is not allowed (values must be finite numbers)"
        ));
    }
    Ok(value)
}

/// Reads a CSV flow table.
fn read_csv(path: &Path, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
    let name = path.display().to_string();
    let size = std::fs::metadata(path)
        .map_err(|e| format!("cannot open {name}: {e}"))?
        .len();
    if size > MAX_CSV_BYTES {
        return Err(format!(
            "{name} is {} GB: flow files are limited to {} million values",
            num(size as f64 / 1e9),
            MAX_VALUES / 1_000_000
        ));
    }
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_path(path)
        .map_err(|e| format!("cannot open {name}: {e}"))?;
    let header = reader
        .byte_headers()
        .map_err(|e| format!("cannot read the header row of {name}: {e}"))?
        .clone();
    let cols = csv_columns(&name, &header)?;
    let cells = grid.cells();
    let mut records: Vec<CsvRecord> = Vec::new();
    // Row number (1-based, header = 1) where each cell of the current record was given; 0 = not yet.
    let mut seen: Vec<u64> = vec![0; cells];
    let mut rec = csv::ByteRecord::new();
    let mut rows: u64 = 1;
    loop {
        match reader.read_byte_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                let row = e.position().map_or(rows + 1, |p| p.line());
                return Err(format!("{name}: cannot read row {row}: {e}"));
            }
        }
        rows += 1;
        let row = rec.position().map_or(rows, |p| p.line());
        let x = csv_number(&name, &rec, cols.x, "x", row, cols.count)?;
        let y = csv_number(&name, &rec, cols.y, "y", row, cols.count)?;
        let u = csv_number(&name, &rec, cols.u, "u", row, cols.count)?;
        let v = csv_number(&name, &rec, cols.v, "v", row, cols.count)?;
        let time = match cols.time {
            Some(c) => Some(csv_number(&name, &rec, c, "time", row, cols.count)?),
            None => None,
        };
        // A new record when the time changes (or on the first row).
        let current = records.last().map(|r| r.time);
        if current != Some(time) {
            if let (Some(Some(prev)), Some(t)) = (current, time) {
                if !(t > prev) {
                    return Err(format!(
                        "{name}: row {row} has time {} s after rows at time {} s: the time axis must be \
                         increasing, with the rows of each time together",
                        num(t),
                        num(prev)
                    ));
                }
                check_complete(&name, grid, mask, &seen, Some(prev), "row")?;
                seen.fill(0);
            }
            if (records.len() + 1).saturating_mul(2 * cells) > MAX_VALUES {
                return Err(format!(
                    "{name}: row {row} starts time record {} but flow files are limited to {} million \
                     values ({} per record on this grid)",
                    records.len() + 1,
                    MAX_VALUES / 1_000_000,
                    2 * cells
                ));
            }
            records.push(CsvRecord {
                time,
                u: vec![0.0; cells],
                v: vec![0.0; cells],
            });
        }
        let (Some(i), Some(j)) = (
            centre_index(x, grid.x0, grid.dx, grid.nx),
            centre_index(y, grid.y0, grid.dy, grid.ny),
        ) else {
            return Err(format!(
                "{name}: row {row}: the point ({}, {}) m is not a cell centre of the grid; {}",
                num(x),
                num(y),
                lattice(grid)
            ));
        };
        let k = j * grid.nx + i;
        if seen[k] != 0 {
            let (cx, cy) = grid.centre(i, j);
            return Err(format!(
                "{name}: row {row}: cell (i = {i}, j = {j}) centred at ({}, {}) m is given twice{} \
                 (rows {} and {row})",
                num(cx),
                num(cy),
                at_time(time),
                seen[k]
            ));
        }
        seen[k] = row.max(1);
        let r = records.last_mut().expect("a record was pushed above");
        r.u[k] = u;
        r.v[k] = v;
    }
    let Some(last) = records.last() else {
        return Err(format!(
            "{name} has a header row but no data rows: one row per water cell is needed"
        ));
    };
    check_complete(&name, grid, mask, &seen, last.time, "row")?;
    let times = if cols.time.is_some() {
        records.iter().filter_map(|r| r.time).collect()
    } else {
        Vec::new()
    };
    let (u, v) = records.into_iter().map(|r| (r.u, r.v)).unzip();
    Ok(FlowFile { times, u, v })
}

// ---------------------------------------------------------------------------------------------
// NetCDF

/// Reads a NetCDF flow file. The `netcdf3` reader is trusted with well-formed headers only, so
/// a panic inside it on a malformed file becomes an error message here.
fn read_netcdf(path: &Path, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
    let name = path.display().to_string();
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        read_netcdf_checked(path, &name, grid, mask)
    }))
    .unwrap_or_else(|_| Err(format!("{name}: the NetCDF header is malformed")))
}

/// Largest NetCDF header read, bytes.
const MAX_HEADER_BYTES: usize = 16 << 20;

/// Checks the file's first bytes (NetCDF-3, not another format) and walks its header, checking
/// every count against the bytes that follow, before the `netcdf3` reader sizes allocations from
/// those counts. Returns the file size.
fn check_header(name: &str, path: &Path) -> Result<u64, String> {
    use std::io::Read;
    let file = std::fs::File::open(path).map_err(|e| format!("cannot open {name}: {e}"))?;
    let size = file.metadata().map_err(|e| format!("cannot read {name}: {e}"))?.len();
    let mut head = Vec::new();
    file.take(MAX_HEADER_BYTES as u64)
        .read_to_end(&mut head)
        .map_err(|e| format!("cannot read {name}: {e}"))?;
    match head.get(..4.min(head.len())).unwrap_or_default() {
        b"CDF\x01" | b"CDF\x02" => {}
        b"CDF\x05" => {
            return Err(format!(
                "{name} is a 64-bit-data (CDF-5) NetCDF file: save it as NetCDF classic or 64-bit offset"
            ))
        }
        b"\x89HDF" => {
            return Err(format!(
                "{name} is a NetCDF-4 (HDF5) file: save it as NetCDF classic or 64-bit offset"
            ))
        }
        [] => {
            return Err(format!(
                "{name} is empty: a NetCDF classic or 64-bit offset file is expected"
            ))
        }
        _ => {
            return Err(format!(
                "{name} is not a NetCDF classic or 64-bit offset file (it does not start with `CDF`)"
            ))
        }
    }
    if walk_header(&head, size).is_none() {
        let limit = if head.len() == MAX_HEADER_BYTES {
            format!(" (or its header is larger than {} MiB)", MAX_HEADER_BYTES >> 20)
        } else {
            String::new()
        };
        return Err(format!("{name}: the NetCDF header is malformed or truncated{limit}"));
    }
    Ok(size)
}

/// Walks a NetCDF-3 header (magic, record count, dimension, attribute and variable lists);
/// `None` when a count or offset does not fit in the bytes available.
fn walk_header(bytes: &[u8], file_size: u64) -> Option<()> {
    struct Cursor<'a> {
        b: &'a [u8],
        pos: usize,
    }
    impl Cursor<'_> {
        fn left(&self) -> usize {
            self.b.len() - self.pos
        }
        fn skip(&mut self, n: usize) -> Option<()> {
            (n <= self.left()).then(|| self.pos += n)
        }
        fn u32(&mut self) -> Option<usize> {
            let w = self.b.get(self.pos..self.pos + 4)?;
            self.pos += 4;
            Some(u32::from_be_bytes([w[0], w[1], w[2], w[3]]) as usize)
        }
        /// A list header: 0, 0 (absent) or `tag`, count; the count must fit `min_item` bytes each.
        fn list(&mut self, tag: usize, min_item: usize) -> Option<usize> {
            let (t, n) = (self.u32()?, self.u32()?);
            match t {
                0 if n == 0 => Some(0),
                _ if t == tag && n <= self.left() / min_item => Some(n),
                _ => None,
            }
        }
        fn padded(&mut self, n: usize) -> Option<()> {
            self.skip(n.checked_add(3)? / 4 * 4)
        }
        fn name(&mut self) -> Option<()> {
            let n = self.u32()?;
            self.padded(n)
        }
        fn attrs(&mut self) -> Option<()> {
            for _ in 0..self.list(0x0C, 12)? {
                self.name()?;
                let width = match self.u32()? {
                    1 | 2 => 1,
                    3 => 2,
                    4 | 5 => 4,
                    6 => 8,
                    _ => return None,
                };
                let n = self.u32()?;
                self.padded(n.checked_mul(width)?)?;
            }
            Some(())
        }
    }
    let mut c = Cursor { b: bytes, pos: 4 };
    let offset64 = bytes.get(3) == Some(&2);
    c.u32()?; // record count
    for _ in 0..c.list(0x0A, 8)? {
        c.name()?;
        c.u32()?;
    }
    c.attrs()?;
    for _ in 0..c.list(0x0B, 16)? {
        c.name()?;
        let dims = c.u32()?;
        c.skip(dims.checked_mul(4)?)?;
        c.attrs()?;
        if !(1..=6).contains(&c.u32()?) {
            return None;
        }
        c.u32()?; // bytes per record
        let begin = if offset64 {
            (c.u32()? as u64) << 32 | c.u32()? as u64
        } else {
            c.u32()? as u64
        };
        if begin > file_size {
            return None;
        }
    }
    Some(())
}

/// Dimension names and sizes of a variable, as text, e.g. `(time = 3, y = 5, x = 4)`.
fn shape_text(dims: &[(String, usize)]) -> String {
    let parts: Vec<String> = dims.iter().map(|(n, s)| format!("{n} = {s}")).collect();
    format!("({})", parts.join(", "))
}

/// A variable's dimensions as (name, size).
fn var_dims(reader: &FileReader, var: &str) -> Option<Vec<(String, usize)>> {
    let v = reader.data_set().get_var(var)?;
    Some(v.get_dims().iter().map(|d| (d.name(), d.size())).collect())
}

/// Any numeric vector as f64.
fn as_f64(data: DataVector) -> Vec<f64> {
    match data {
        DataVector::I8(d) => d.into_iter().map(f64::from).collect(),
        DataVector::U8(d) => d.into_iter().map(f64::from).collect(),
        DataVector::I16(d) => d.into_iter().map(f64::from).collect(),
        DataVector::I32(d) => d.into_iter().map(f64::from).collect(),
        DataVector::F32(d) => d.into_iter().map(f64::from).collect(),
        DataVector::F64(d) => d,
    }
}

/// Reads a whole variable after checking its size against the file's, so that a header that
/// claims more data than the file holds cannot trigger a huge allocation.
fn read_checked(reader: &mut FileReader, name: &str, var: &str, file_size: u64) -> Result<DataVector, String> {
    let dims = var_dims(reader, var).ok_or_else(|| format!("{name} has no variable `{var}`"))?;
    let len = dims
        .iter()
        .try_fold(1usize, |acc, (_, s)| acc.checked_mul(*s))
        .filter(|&n| n <= MAX_VALUES)
        .ok_or_else(|| {
            format!(
                "{name}: variable `{var}` {} holds more than the {} million values flow files are limited to",
                shape_text(&dims),
                MAX_VALUES / 1_000_000
            )
        })?;
    let elem = reader.data_set().var_data_type(var).map_or(8, |t| t.size_of() as u64);
    if len as u64 * elem > file_size {
        return Err(format!(
            "{name} is truncated: variable `{var}` {} needs {} bytes but the file has {file_size}",
            shape_text(&dims),
            len as u64 * elem
        ));
    }
    reader
        .read_var(var)
        .map_err(|e| format!("{name}: cannot read variable `{var}`: {e:?}"))
}

/// Reads and checks a coordinate variable against the grid's cell centres.
#[allow(clippy::too_many_arguments)]
fn read_axis(
    reader: &mut FileReader,
    name: &str,
    var: &str,
    file_size: u64,
    n: usize,
    c0: f64,
    d: f64,
    grid: &Grid,
) -> Result<(), String> {
    let Some(dims) = var_dims(reader, var) else {
        return Err(format!(
            "{name} has no coordinate variable `{var}` (cell-centre {var} in m, ascending)"
        ));
    };
    if dims.len() != 1 || dims[0].1 != n {
        return Err(format!(
            "{name}: coordinate `{var}` has dimensions {} but the grid has {n} cells along {var}",
            shape_text(&dims)
        ));
    }
    let values = as_f64(read_checked(reader, name, var, file_size)?);
    for k in 1..values.len() {
        if !(values[k] > values[k - 1]) {
            return Err(format!(
                "{name}: coordinate `{var}` must be ascending but {var}[{k}] = {} follows {var}[{}] = {}",
                num(values[k]),
                k - 1,
                num(values[k - 1])
            ));
        }
    }
    for (k, &c) in values.iter().enumerate() {
        if centre_index(c, c0, d, n) != Some(k) {
            let expect = c0 + (k as f64 + 0.5) * d;
            return Err(format!(
                "{name}: coordinate {var}[{k}] = {} is not the grid's cell centre {var} = {} m; {}",
                num(c),
                num(expect),
                lattice(grid)
            ));
        }
    }
    Ok(())
}

/// Reads the record times (`time` variable), checked finite, strictly increasing, in seconds.
fn read_times(reader: &mut FileReader, name: &str, file_size: u64, nt: usize) -> Result<Vec<f64>, String> {
    let Some(dims) = var_dims(reader, "time") else {
        if nt > 1 {
            return Err(format!(
                "{name}: u and v have {nt} time records but the file has no `time` variable (s)"
            ));
        }
        return Ok(Vec::new());
    };
    if dims.len() != 1 || dims[0].1 != nt {
        return Err(format!(
            "{name}: `time` has dimensions {} but u and v have {nt} time records",
            shape_text(&dims)
        ));
    }
    if let Some(units) = reader.data_set().get_var_attr_as_string("time", "units") {
        let first = units.split_whitespace().next().unwrap_or("").to_ascii_lowercase();
        if !["s", "sec", "secs", "second", "seconds"].contains(&first.as_str()) {
            return Err(format!(
                "{name}: `time` is in `{}`: flow file times must be in seconds from the start of the run",
                units.chars().take(60).collect::<String>()
            ));
        }
    }
    let times = as_f64(read_checked(reader, name, "time", file_size)?);
    for (k, &t) in times.iter().enumerate() {
        if !t.is_finite() {
            return Err(format!("{name}: time[{k}] = {t} is not a finite number"));
        }
        if k > 0 && !(t > times[k - 1]) {
            return Err(format!(
                "{name}: the time axis must be strictly increasing but time[{k}] = {} s follows time[{}] = {} s",
                num(t),
                k - 1,
                num(times[k - 1])
            ));
        }
    }
    Ok(times)
}

/// The first value of a numeric attribute of `var`, if it is f32 or f64.
fn attr_f64(reader: &FileReader, var: &str, attr: &str) -> Option<f64> {
    let ds = reader.data_set();
    ds.get_var_attr_f64(var, attr)
        .and_then(|a| a.first().copied())
        .or_else(|| {
            ds.get_var_attr_f32(var, attr)
                .and_then(|a| a.first().map(|&x| f64::from(x)))
        })
}

/// Reads `u` or `v` (f32 or f64) into `nt` per-record cell vectors: fill values and NaN become
/// 0 on land and are errors on water; `scale_factor` / `add_offset` are applied when present.
#[allow(clippy::too_many_arguments)]
fn read_velocity(
    reader: &mut FileReader,
    name: &str,
    var: &str,
    file_size: u64,
    grid: &Grid,
    mask: &Mask,
    times: &[f64],
    nt: usize,
) -> Result<Vec<Vec<f64>>, String> {
    let scale = attr_f64(reader, var, "scale_factor").unwrap_or(1.0);
    let offset = attr_f64(reader, var, "add_offset").unwrap_or(0.0);
    let fill = attr_f64(reader, var, "_FillValue");
    let data = read_checked(reader, name, var, file_size)?;
    let cells = grid.cells();
    if data.len() != nt * cells {
        return Err(format!(
            "{name}: `{var}` holds {} values, not the {} its dimensions say",
            data.len(),
            nt * cells
        ));
    }
    // (value as f64, whether it is the fill value or NaN), compared in the stored type.
    let classify: Box<dyn Fn(usize) -> (f64, bool) + '_> = match &data {
        DataVector::F32(d) => {
            let fill = fill.map_or(netcdf3::NC_FILL_F32, |f| f as f32);
            Box::new(move |k| {
                let x = d[k];
                (f64::from(x), x.is_nan() || x == fill)
            })
        }
        DataVector::F64(d) => {
            let fill = fill.unwrap_or(netcdf3::NC_FILL_F64);
            Box::new(move |k| {
                let x = d[k];
                (x, x.is_nan() || x == fill)
            })
        }
        other => {
            return Err(format!(
                "{name}: variable `{var}` is stored as {:?}; f32 or f64 is expected",
                other.data_type()
            ))
        }
    };
    let mut out = Vec::with_capacity(nt);
    for r in 0..nt {
        let time = times.get(r).copied();
        let mut rec = Vec::with_capacity(cells);
        for k in 0..cells {
            let (raw, is_fill) = classify(r * cells + k);
            let value = raw * scale + offset;
            if is_fill || !value.is_finite() {
                if mask.as_slice()[k] {
                    let (i, j) = (k % grid.nx, k / grid.nx);
                    let (x, y) = grid.centre(i, j);
                    let what = if is_fill && !raw.is_nan() {
                        "the fill value".to_string()
                    } else {
                        format!("{value}")
                    };
                    let record = if nt > 1 {
                        format!(" (record {r})")
                    } else {
                        String::new()
                    };
                    return Err(format!(
                        "{name}: `{var}` at water cell (i = {i}, j = {j}) centred at ({}, {}) m{}{record} \
                         is {what}; fill values and NaN are allowed on land cells only",
                        num(x),
                        num(y),
                        at_time(time)
                    ));
                }
                rec.push(0.0);
            } else {
                rec.push(value);
            }
        }
        out.push(rec);
    }
    Ok(out)
}

/// Reads a NetCDF flow file (after the magic-number check).
fn read_netcdf_checked(path: &Path, name: &str, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
    let file_size = check_header(name, path)?;
    let mut reader = FileReader::open(path).map_err(|e| format!("cannot read {name} as a NetCDF file: {e:?}"))?;
    let var_list = || reader.data_set().get_var_names().join(", ");
    let (Some(u_dims), Some(v_dims)) = (var_dims(&reader, "u"), var_dims(&reader, "v")) else {
        return Err(format!(
            "{name} needs variables `u` and `v`; variables found: {}",
            if reader.data_set().num_vars() == 0 {
                "none".into()
            } else {
                var_list()
            }
        ));
    };
    let (nx, ny) = (grid.nx, grid.ny);
    let shape_ok =
        |d: &[(String, usize)]| (d.len() == 2 || d.len() == 3) && d[d.len() - 2].1 == ny && d[d.len() - 1].1 == nx;
    for (var, dims) in [("u", &u_dims), ("v", &v_dims)] {
        if !shape_ok(dims) {
            return Err(format!(
                "{name}: `{var}` has dimensions {} but the grid needs (y = {ny}, x = {nx}) or (time, y = {ny}, x = {nx})",
                shape_text(dims)
            ));
        }
    }
    let sizes = |d: &[(String, usize)]| d.iter().map(|x| x.1).collect::<Vec<_>>();
    if sizes(&u_dims) != sizes(&v_dims) {
        return Err(format!(
            "{name}: `u` has dimensions {} but `v` has {}: they must match",
            shape_text(&u_dims),
            shape_text(&v_dims)
        ));
    }
    let nt = if u_dims.len() == 3 { u_dims[0].1 } else { 1 };
    if nt == 0 {
        return Err(format!("{name}: `u` and `v` have no time records"));
    }
    if nt.saturating_mul(2 * grid.cells()) > MAX_VALUES {
        return Err(format!(
            "{name}: `u` and `v` {} hold more than the {} million values flow files are limited to",
            shape_text(&u_dims),
            MAX_VALUES / 1_000_000
        ));
    }
    read_axis(&mut reader, name, "x", file_size, nx, grid.x0, grid.dx, grid)?;
    read_axis(&mut reader, name, "y", file_size, ny, grid.y0, grid.dy, grid)?;
    let times = if u_dims.len() == 3 {
        read_times(&mut reader, name, file_size, nt)?
    } else {
        Vec::new()
    };
    let u = read_velocity(&mut reader, name, "u", file_size, grid, mask, &times, nt)?;
    let v = read_velocity(&mut reader, name, "v", file_size, grid, mask, &times, nt)?;
    Ok(FlowFile { times, u, v })
}

#[cfg(test)]
mod tests {
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
            e.contains(
                "`u` at water cell (i = 3, j = 2) centred at (17, -2.5) m at time 0 s (record 0) is the fill value"
            ),
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
}
