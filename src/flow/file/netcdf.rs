//! The NetCDF classic / 64-bit offset reader: the header walk that checks every count and offset
//! before the `netcdf3` crate sizes allocations from them (and turns a panic inside it into an
//! error), the `x`, `y` and `time` axes, and the `u` and `v` variables with their fill values.

use super::{at_time, centre_index, lattice, num, FlowFile, MAX_VALUES};
use crate::grid::{Grid, Mask};
use netcdf3::{DataVector, FileReader};
use std::path::Path;

/// Reads a NetCDF flow file. The `netcdf3` reader is trusted with well-formed headers only, so
/// a panic inside it on a malformed file becomes an error message here.
pub(super) fn read_netcdf(path: &Path, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
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
