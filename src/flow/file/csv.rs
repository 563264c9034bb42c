//! The CSV flow-table reader: header columns found by name, one row per cell centre (and per
//! time), rows of one time grouped into a record, every water cell checked to have a value.

use super::{at_time, centre_index, check_complete, lattice, num, FlowFile, MAX_VALUES};
use crate::grid::{Grid, Mask};
use std::path::Path;

/// Largest CSV file accepted, bytes (far above what [`MAX_VALUES`] needs as text).
const MAX_CSV_BYTES: u64 = 16 << 30;

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
pub(super) fn read_csv(path: &Path, grid: &Grid, mask: &Mask) -> Result<FlowFile, String> {
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
