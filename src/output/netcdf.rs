//! NetCDF-3 (64-bit offset) field files following the CF-1.8 conventions,
//! written with the pure-Rust `netcdf3` crate.
//!
//! Layout: dimensions `time` (record dimension, its length fixed up front
//! because `netcdf3` needs the record count when the header is written),
//! `y`, `x`; coordinate variables `x(x)`, `y(y)`, `time(time)`; one field
//! variable `<name>(time, y, x)` as 64-bit floats with `_FillValue` on land
//! cells and NaN values.
//!
//! Records are written to disk as they arrive (nothing is buffered beyond
//! one record). The file is built as a temporary file next to the target and
//! renamed into place by [`FieldsWriter::finish`]; a writer dropped without
//! `finish` leaves no file at the target path.
//!
//! Implementation note: `netcdf3::FileWriter` borrows its `DataSet` and
//! tracks written records in memory, so a short-lived `FileWriter` is made
//! per call over a shared buffered handle; each one rewrites the (identical)
//! header and then writes one record. Its `close` (which would overwrite
//! unwritten records with fill) is never called.

use std::fs::{File, OpenOptions};
use std::io::{self, BufWriter, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use ndarray::{ArrayView2, ArrayView3};
use netcdf3::{DataSet, FileWriter, Version};

use super::{AtomicFile, OutputError};

/// The netCDF default fill value for doubles, written on land cells, for
/// NaN values and in records that were announced but never written.
pub const FILL_VALUE: f64 = 9.969209968386869e36;

/// Name of the envelope variable `c_max(y, x)`.
pub const MAX_VAR: &str = "c_max";

/// Name of the time-above variable `hours_above(threshold, y, x)`.
pub const ABOVE_VAR: &str = "hours_above";

/// Units of the time coordinate. The date is a placeholder: times are model
/// time since the start of the run (see the variable's `comment`).
const TIME_UNITS: &str = "seconds since 2000-01-01 00:00:00";

/// Descriptive metadata of the field variable and the file.
#[derive(Debug, Clone, Copy)]
pub struct FieldMeta<'a> {
    /// Variable name, e.g. `c` (must be a valid netCDF name other than `x`, `y`, `time`).
    pub name: &'a str,
    /// `long_name` attribute, e.g. `dye concentration`.
    pub long_name: &'a str,
    /// `units` attribute, e.g. `kg m-3`.
    pub units: &'a str,
    /// CF `standard_name`, written only if given.
    pub standard_name: Option<&'a str>,
    /// Global `title` attribute.
    pub title: &'a str,
    /// Global `history` attribute.
    pub history: &'a str,
    /// Thresholds (tracer units) for the time-above variable `hours_above(threshold, y, x)`;
    /// empty = no such variable.
    pub thresholds: &'a [f64],
    /// `comment` of the `threshold` coordinate (e.g. which receptors carry each threshold).
    pub threshold_comment: &'a str,
}

/// Owned copy of [`FieldMeta`], so the writer has no borrowed lifetime.
#[derive(Debug, Clone)]
struct OwnedMeta {
    name: String,
    long_name: String,
    units: String,
    standard_name: Option<String>,
    title: String,
    history: String,
    thresholds: Vec<f64>,
    threshold_comment: String,
}

/// Writes a field, one record (time step) at a time, to a NetCDF-3 file.
///
/// Records must be written in order; at most `n_records` of them. Records
/// announced in [`FieldsWriter::create`] but not written before
/// [`FieldsWriter::finish`] are padded with [`FILL_VALUE`] (both the field
/// and the `time` value), so readers see the announced record count.
#[derive(Debug)]
pub struct FieldsWriter {
    atomic: AtomicFile,
    sink: SharedSink,
    meta: OwnedMeta,
    nx: usize,
    ny: usize,
    n_records: usize,
    written: usize,
    /// Reused per-record buffer with fill substituted.
    record: Vec<f64>,
}

/// A buffered file handle shared between this module and the short-lived
/// `netcdf3::FileWriter`s (which need an owned `'static` sink). It keeps the last operating-system
/// error, which `netcdf3` reduces to its kind, so a failed write names it ("File too large").
#[derive(Debug, Clone)]
struct SharedSink(Arc<Mutex<BufWriter<File>>>, Arc<Mutex<Option<io::Error>>>);

impl SharedSink {
    fn with<T>(&self, f: impl FnOnce(&mut BufWriter<File>) -> io::Result<T>) -> io::Result<T> {
        let mut guard = self
            .0
            .lock()
            .map_err(|_| io::Error::other("output file lock poisoned"))?;
        let r = f(&mut guard);
        if let Err(e) = &r {
            let copy = match e.raw_os_error() {
                Some(code) => io::Error::from_raw_os_error(code),
                None => io::Error::new(e.kind(), e.to_string()),
            };
            if let Ok(mut last) = self.1.lock() {
                *last = Some(copy);
            }
        }
        r
    }

    /// The operating-system error behind a failed `netcdf3` call, if there was one.
    fn take_error(&self) -> Option<io::Error> {
        self.1.lock().ok().and_then(|mut e| e.take())
    }
}

impl Write for SharedSink {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.with(|w| w.write(buf))
    }
    fn flush(&mut self) -> io::Result<()> {
        self.with(|w| w.flush())
    }
}

impl Seek for SharedSink {
    fn seek(&mut self, pos: SeekFrom) -> io::Result<u64> {
        self.with(|w| w.seek(pos))
    }
}

fn nc_err(path: &Path, e: impl std::fmt::Debug) -> OutputError {
    OutputError::NetCdf {
        path: path.to_path_buf(),
        message: format!("{e:?}"),
    }
}

impl FieldsWriter {
    /// Creates the (temporary) file, writes the header and the `x`/`y`
    /// coordinates. `x` has `nx` cell-centre coordinates in metres
    /// (west to east), `y` has `ny` (south to north); `n_records` is the
    /// number of time records the file will hold.
    pub fn create(path: &Path, x: &[f64], y: &[f64], n_records: usize, meta: &FieldMeta) -> Result<Self, OutputError> {
        if x.is_empty() || y.is_empty() {
            return Err(OutputError::invalid(
                path,
                format!("empty grid: {} x and {} y coordinates", x.len(), y.len()),
            ));
        }
        if !netcdf3::is_valid_name(meta.name) || ["x", "y", "time"].contains(&meta.name) {
            return Err(OutputError::invalid(
                path,
                format!("`{}` is not usable as a NetCDF variable name", meta.name),
            ));
        }
        let n_cells = x
            .len()
            .checked_mul(y.len())
            .ok_or_else(|| OutputError::invalid(path, "grid too large"))?;
        let atomic = AtomicFile::create(path)?;
        let file = OpenOptions::new()
            .read(true)
            .write(true)
            .open(atomic.path_tmp())
            .map_err(|e| OutputError::io(atomic.path_tmp(), e))?;
        let mut w = FieldsWriter {
            sink: SharedSink(
                Arc::new(Mutex::new(BufWriter::with_capacity(1 << 20, file))),
                Arc::new(Mutex::new(None)),
            ),
            atomic,
            meta: OwnedMeta {
                name: meta.name.to_string(),
                long_name: meta.long_name.to_string(),
                units: meta.units.to_string(),
                standard_name: meta.standard_name.map(str::to_string),
                title: meta.title.to_string(),
                history: meta.history.to_string(),
                thresholds: meta.thresholds.to_vec(),
                threshold_comment: meta.threshold_comment.to_string(),
            },
            nx: x.len(),
            ny: y.len(),
            n_records,
            written: 0,
            record: Vec::with_capacity(n_cells),
        };
        let ds = w.data_set()?;
        w.with_writer(&ds, |fw| {
            fw.write_var_f64("x", x)?;
            fw.write_var_f64("y", y)
        })?;
        Ok(w)
    }

    /// Path the file will have after [`FieldsWriter::finish`].
    pub fn path(&self) -> &Path {
        self.atomic.target()
    }

    /// Number of records written so far.
    pub fn records_written(&self) -> usize {
        self.written
    }

    /// Builds the NetCDF definition (dimensions, variables, attributes).
    fn data_set(&self) -> Result<DataSet, OutputError> {
        let m = &self.meta;
        let build = || -> Result<DataSet, netcdf3::InvalidDataSet> {
            let mut ds = DataSet::new();
            ds.set_unlimited_dim("time", self.n_records)?;
            ds.add_fixed_dim("y", self.ny)?;
            ds.add_fixed_dim("x", self.nx)?;

            ds.add_var_f64("time", &["time"])?;
            ds.add_var_attr_string("time", "standard_name", "time")?;
            ds.add_var_attr_string("time", "long_name", "simulated time")?;
            ds.add_var_attr_string("time", "units", TIME_UNITS)?;
            ds.add_var_attr_string("time", "calendar", "standard")?;
            ds.add_var_attr_string("time", "axis", "T")?;
            ds.add_var_attr_string(
                "time",
                "comment",
                "model time elapsed since the start of the run; the reference date in units is a placeholder",
            )?;

            ds.add_var_f64("y", &["y"])?;
            ds.add_var_attr_string("y", "standard_name", "projection_y_coordinate")?;
            ds.add_var_attr_string("y", "long_name", "y coordinate of cell centre (northward)")?;
            ds.add_var_attr_string("y", "units", "m")?;
            ds.add_var_attr_string("y", "axis", "Y")?;

            ds.add_var_f64("x", &["x"])?;
            ds.add_var_attr_string("x", "standard_name", "projection_x_coordinate")?;
            ds.add_var_attr_string("x", "long_name", "x coordinate of cell centre (eastward)")?;
            ds.add_var_attr_string("x", "units", "m")?;
            ds.add_var_attr_string("x", "axis", "X")?;

            ds.add_var_f64(&m.name, &["time", "y", "x"])?;
            ds.add_var_attr_string(&m.name, "long_name", &m.long_name)?;
            ds.add_var_attr_string(&m.name, "units", &m.units)?;
            if let Some(sn) = &m.standard_name {
                ds.add_var_attr_string(&m.name, "standard_name", sn)?;
            }
            ds.add_var_attr_f64(&m.name, "_FillValue", vec![FILL_VALUE])?;
            // The envelope: the largest value each cell reached at any step (written by
            // `write_max`, fill until then).
            ds.add_var_f64(MAX_VAR, &["y", "x"])?;
            ds.add_var_attr_string(
                MAX_VAR,
                "long_name",
                format!("largest {} reached at any step", m.long_name),
            )?;
            ds.add_var_attr_string(MAX_VAR, "units", &m.units)?;
            ds.add_var_attr_string(MAX_VAR, "cell_methods", "time: maximum")?;
            ds.add_var_attr_f64(MAX_VAR, "_FillValue", vec![FILL_VALUE])?;
            // Time at or above each threshold (written by `write_hours_above`).
            if !m.thresholds.is_empty() {
                ds.add_fixed_dim("threshold", m.thresholds.len())?;
                ds.add_var_f64("threshold", &["threshold"])?;
                ds.add_var_attr_string("threshold", "long_name", "receptor threshold concentration")?;
                ds.add_var_attr_string("threshold", "units", &m.units)?;
                if !m.threshold_comment.is_empty() {
                    ds.add_var_attr_string("threshold", "comment", &m.threshold_comment)?;
                }
                ds.add_var_f64(ABOVE_VAR, &["threshold", "y", "x"])?;
                ds.add_var_attr_string(
                    ABOVE_VAR,
                    "long_name",
                    format!("time {} was at or above the threshold", m.long_name),
                )?;
                ds.add_var_attr_string(ABOVE_VAR, "units", "h")?;
                ds.add_var_attr_string(
                    ABOVE_VAR,
                    "comment",
                    "each step counts in full when the value at its end is at or above the threshold",
                )?;
                ds.add_var_attr_f64(ABOVE_VAR, "_FillValue", vec![FILL_VALUE])?;
            }

            ds.add_global_attr_string("Conventions", "CF-1.8")?;
            ds.add_global_attr_string("title", &m.title)?;
            ds.add_global_attr_string("history", &m.history)?;
            ds.add_global_attr_string("source", format!("tinct {}", env!("CARGO_PKG_VERSION")))?;
            Ok(ds)
        };
        build().map_err(|e| nc_err(self.atomic.target(), e))
    }

    /// Runs `f` with a fresh `netcdf3::FileWriter` over the shared handle
    /// (after it has rewritten the header), then flushes the buffer.
    fn with_writer(
        &mut self,
        ds: &DataSet,
        f: impl FnOnce(&mut FileWriter) -> Result<(), netcdf3::WriteError>,
    ) -> Result<(), OutputError> {
        let target = self.atomic.target().to_path_buf();
        let tmp = self.atomic.path_tmp().to_path_buf();
        let sink = self.sink.clone();
        let err = |e: netcdf3::WriteError| match sink.take_error() {
            Some(os) => OutputError::io(&tmp, os),
            None => nc_err(&target, e),
        };
        let mut fw = FileWriter::open_seek_write(&tmp.to_string_lossy(), Box::new(self.sink.clone())).map_err(err)?;
        fw.set_def(ds, Version::Offset64Bit, 0).map_err(err)?;
        f(&mut fw).map_err(err)?;
        // Deliberately not `close()`: it would fill every record this
        // short-lived writer did not see.
        drop(fw);
        let tmp: PathBuf = self.atomic.path_tmp().to_path_buf();
        self.sink.with(|w| w.flush()).map_err(|e| OutputError::io(tmp, e))
    }

    /// Checks that `what` has shape (ny, nx).
    fn check_shape(&self, what: &str, shape: &[usize]) -> Result<(), OutputError> {
        if shape == [self.ny, self.nx] {
            return Ok(());
        }
        Err(OutputError::invalid(
            self.atomic.target(),
            format!(
                "{what} has shape {shape:?}, expected (ny, nx) = ({}, {})",
                self.ny, self.nx
            ),
        ))
    }

    /// Appends one record: `values` of shape (ny, nx), (y, x) order with row 0
    /// the southern row (any strides: a view of a padded field is fine);
    /// cells where `wet` is false and NaN values are written as [`FILL_VALUE`].
    pub fn write_record(
        &mut self,
        time_s: f64,
        values: ArrayView2<f64>,
        wet: Option<ArrayView2<bool>>,
    ) -> Result<(), OutputError> {
        if self.written >= self.n_records {
            return Err(OutputError::invalid(
                self.atomic.target(),
                format!("all {} announced records already written", self.n_records),
            ));
        }
        self.check_shape("record", values.shape())?;
        if let Some(w) = &wet {
            self.check_shape("wet mask", w.shape())?;
        }
        let mut record = std::mem::take(&mut self.record);
        record.clear();
        match wet {
            Some(w) => record.extend(
                values
                    .iter()
                    .zip(&w)
                    .map(|(&v, &wet)| if wet && !v.is_nan() { v } else { FILL_VALUE }),
            ),
            None => record.extend(values.iter().map(|&v| if v.is_nan() { FILL_VALUE } else { v })),
        }
        let result = self.put_record(self.written, time_s, &record);
        self.record = record;
        result?;
        self.written += 1;
        Ok(())
    }

    fn put_record(&mut self, index: usize, time_s: f64, record: &[f64]) -> Result<(), OutputError> {
        let ds = self.data_set()?;
        let name = self.meta.name.clone();
        self.with_writer(&ds, |fw| {
            fw.write_record_f64("time", index, &[time_s])?;
            fw.write_record_f64(&name, index, record)
        })
    }

    /// Writes the envelope `c_max(y, x)`: `values` of shape (ny, nx), row 0 south; land and
    /// NaN become [`FILL_VALUE`].
    pub fn write_max(&mut self, values: ArrayView2<f64>, wet: Option<ArrayView2<bool>>) -> Result<(), OutputError> {
        self.check_shape("c_max", values.shape())?;
        if let Some(w) = &wet {
            self.check_shape("wet mask", w.shape())?;
        }
        let data: Vec<f64> = values
            .indexed_iter()
            .map(|(jk, &v)| {
                if wet.as_ref().is_none_or(|w| w[jk]) && !v.is_nan() {
                    v
                } else {
                    FILL_VALUE
                }
            })
            .collect();
        let ds = self.data_set()?;
        self.with_writer(&ds, |fw| fw.write_var_f64(MAX_VAR, &data))
    }

    /// Writes `hours_above(threshold, y, x)` and the `threshold` coordinate: `hours` of shape
    /// (thresholds given at creation, ny, nx), row 0 south; land and NaN become [`FILL_VALUE`].
    pub fn write_hours_above(
        &mut self,
        hours: ArrayView3<f64>,
        wet: Option<ArrayView2<bool>>,
    ) -> Result<(), OutputError> {
        let nt = self.meta.thresholds.len();
        if hours.shape() != [nt, self.ny, self.nx] {
            return Err(OutputError::invalid(
                self.atomic.target(),
                format!(
                    "hours_above has shape {:?}, expected (thresholds, ny, nx) = ({nt}, {}, {})",
                    hours.shape(),
                    self.ny,
                    self.nx
                ),
            ));
        }
        if let Some(w) = &wet {
            self.check_shape("wet mask", w.shape())?;
        }
        if nt == 0 {
            return Ok(());
        }
        let data: Vec<f64> = hours
            .indexed_iter()
            .map(|((_, j, i), &v)| {
                if wet.as_ref().is_none_or(|w| w[[j, i]]) && !v.is_nan() {
                    v
                } else {
                    FILL_VALUE
                }
            })
            .collect();
        let ds = self.data_set()?;
        let th = self.meta.thresholds.clone();
        self.with_writer(&ds, |fw| {
            fw.write_var_f64("threshold", &th)?;
            fw.write_var_f64(ABOVE_VAR, &data)
        })
    }

    /// Pads unwritten records with [`FILL_VALUE`], syncs the file and
    /// atomically renames it to the target path.
    pub fn finish(mut self) -> Result<(), OutputError> {
        if self.written < self.n_records {
            let fill = vec![FILL_VALUE; self.nx * self.ny];
            for index in self.written..self.n_records {
                self.put_record(index, FILL_VALUE, &fill)?;
            }
        }
        let tmp = self.atomic.path_tmp().to_path_buf();
        self.sink
            .with(|w| {
                w.flush()?;
                w.get_ref().sync_all()
            })
            .map_err(|e| OutputError::io(&tmp, e))?;
        let FieldsWriter { atomic, sink, .. } = self;
        drop(sink);
        atomic.commit()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use netcdf3::FileReader;

    const META: FieldMeta<'static> = FieldMeta {
        name: "c",
        long_name: "dye concentration",
        units: "kg m-3",
        standard_name: None,
        title: "test run",
        thresholds: &[],
        threshold_comment: "",
        history: "created by unit test",
    };

    fn field(nx: usize, ny: usize, r: usize) -> Vec<f64> {
        (0..nx * ny).map(|k| (r * 1000 + k) as f64 * 0.5).collect()
    }

    /// `v` as one row of cells (ny = 1).
    fn row(v: &[f64]) -> ArrayView2<'_, f64> {
        ArrayView2::from_shape((1, v.len()), v).unwrap()
    }

    #[test]
    fn fill_value_is_the_netcdf_default() {
        assert_eq!(FILL_VALUE, netcdf3::NC_FILL_F64);
    }

    #[test]
    fn three_records_round_trip() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("fields.nc");
        let (nx, ny) = (4, 3);
        let x: Vec<f64> = (0..nx).map(|i| 5.0 + 10.0 * i as f64).collect();
        let y: Vec<f64> = (0..ny).map(|j| 2.5 + 5.0 * j as f64).collect();
        let mut wet = ndarray::Array2::from_elem((ny, nx), true);
        wet[[0, 1]] = false; // south row, i = 1
        wet[[2, 3]] = false; // north row, i = 3
        let times = [0.0, 600.0, 1200.0];
        let meta = FieldMeta {
            standard_name: Some("mass_concentration_of_dye_in_sea_water"),
            ..META
        };
        let mut w = FieldsWriter::create(&p, &x, &y, 3, &meta).unwrap();
        for (r, t) in times.iter().enumerate() {
            let mut v = field(nx, ny, r);
            v[5] = f64::NAN;
            let v = ArrayView2::from_shape((ny, nx), &v).unwrap();
            w.write_record(*t, v, Some(wet.view())).unwrap();
            assert!(!p.exists(), "target must appear only on finish");
        }
        assert_eq!(w.records_written(), 3);
        let f3 = field(nx, ny, 3);
        assert!(w
            .write_record(1800.0, ArrayView2::from_shape((ny, nx), &f3).unwrap(), None)
            .is_err());
        w.finish().unwrap();

        let mut r = FileReader::open(&p).unwrap();
        let ds = r.data_set();
        assert_eq!(ds.dim_size("time"), Some(3));
        assert!(ds.has_unlimited_dim());
        assert_eq!(ds.dim_size("y"), Some(ny));
        assert_eq!(ds.dim_size("x"), Some(nx));
        assert_eq!(ds.get_var("c").unwrap().dim_names(), ["time", "y", "x"]);
        assert_eq!(ds.get_global_attr_as_string("Conventions").unwrap(), "CF-1.8");
        assert_eq!(ds.get_global_attr_as_string("title").unwrap(), "test run");
        assert_eq!(
            ds.get_global_attr_as_string("source").unwrap(),
            format!("tinct {}", env!("CARGO_PKG_VERSION"))
        );
        assert!(!ds.has_global_attr("institution"));
        assert_eq!(ds.get_var_attr_as_string("c", "units").unwrap(), "kg m-3");
        assert_eq!(
            ds.get_var_attr_as_string("c", "standard_name").unwrap(),
            "mass_concentration_of_dye_in_sea_water"
        );
        assert_eq!(ds.get_var_attr_f64("c", "_FillValue").unwrap(), [FILL_VALUE]);
        assert_eq!(ds.get_var_attr_as_string("x", "units").unwrap(), "m");
        assert_eq!(ds.get_var_attr_as_string("y", "axis").unwrap(), "Y");
        assert_eq!(
            ds.get_var_attr_as_string("x", "standard_name").unwrap(),
            "projection_x_coordinate"
        );
        assert_eq!(ds.get_var_attr_as_string("time", "units").unwrap(), TIME_UNITS);
        assert_eq!(ds.get_var_attr_as_string("time", "calendar").unwrap(), "standard");
        assert!(ds
            .get_var_attr_as_string("time", "comment")
            .unwrap()
            .contains("placeholder"));

        assert_eq!(r.read_var_f64("x").unwrap(), x);
        assert_eq!(r.read_var_f64("y").unwrap(), y);
        assert_eq!(r.read_var_f64("time").unwrap(), times);
        let c = r.read_var_f64("c").unwrap();
        assert_eq!(c.len(), 3 * nx * ny);
        for rec in 0..3 {
            let expect = field(nx, ny, rec);
            for k in 0..nx * ny {
                let got = c[rec * nx * ny + k];
                if !wet[[k / nx, k % nx]] || k == 5 {
                    assert_eq!(got, FILL_VALUE, "record {rec} cell {k}");
                } else {
                    assert_eq!(got, expect[k], "record {rec} cell {k}");
                }
            }
        }
        let names: Vec<_> = std::fs::read_dir(d.path()).unwrap().collect();
        assert_eq!(names.len(), 1, "temporary file left behind");
    }

    #[test]
    fn hours_above_has_a_threshold_axis() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("above.nc");
        let meta = FieldMeta {
            thresholds: &[0.1, 0.5],
            threshold_comment: "0.1: beach; 0.5: pier",
            ..META
        };
        let mut w = FieldsWriter::create(&p, &[0.0, 1.0], &[0.0], 1, &meta).unwrap();
        w.write_record(0.0, row(&[1.0, 2.0]), None).unwrap();
        let one = ndarray::Array3::from_shape_vec((1, 1, 2), vec![1.0, 2.0]).unwrap();
        assert!(w.write_hours_above(one.view(), None).is_err());
        let two = ndarray::Array3::from_shape_vec((2, 1, 2), vec![1.0, 2.0, 0.5, f64::NAN]).unwrap();
        let wet = ndarray::Array2::from_elem((1, 2), true);
        w.write_hours_above(two.view(), Some(wet.view())).unwrap();
        w.finish().unwrap();
        let mut r = FileReader::open(&p).unwrap();
        let ds = r.data_set();
        assert_eq!(ds.dim_size("threshold"), Some(2));
        assert_eq!(ds.get_var(ABOVE_VAR).unwrap().dim_names(), ["threshold", "y", "x"]);
        assert_eq!(ds.get_var_attr_as_string(ABOVE_VAR, "units").unwrap(), "h");
        assert_eq!(ds.get_var_attr_as_string("threshold", "units").unwrap(), "kg m-3");
        assert_eq!(r.read_var_f64("threshold").unwrap(), [0.1, 0.5]);
        assert_eq!(r.read_var_f64(ABOVE_VAR).unwrap(), [1.0, 2.0, 0.5, FILL_VALUE]);
        assert_eq!(r.read_var_f64("c").unwrap(), [1.0, 2.0]);
    }

    #[test]
    fn missing_records_are_padded_with_fill() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("short.nc");
        let mut w = FieldsWriter::create(&p, &[0.0, 1.0], &[0.0], 4, &META).unwrap();
        w.write_record(10.0, row(&[1.0, 2.0]), None).unwrap();
        w.finish().unwrap();
        let mut r = FileReader::open(&p).unwrap();
        assert_eq!(r.data_set().dim_size("time"), Some(4));
        assert!(!r.data_set().has_var_attr("c", "standard_name").unwrap());
        let t = r.read_var_f64("time").unwrap();
        assert_eq!(t, [10.0, FILL_VALUE, FILL_VALUE, FILL_VALUE]);
        let c = r.read_var_f64("c").unwrap();
        assert_eq!(&c[..2], &[1.0, 2.0]);
        assert!(c[2..].iter().all(|&v| v == FILL_VALUE));
    }

    #[test]
    fn dropped_writer_leaves_no_file() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("dropped.nc");
        {
            let mut w = FieldsWriter::create(&p, &[0.0, 1.0], &[0.0, 1.0], 2, &META).unwrap();
            w.write_record(0.0, ArrayView2::from_shape((2, 2), &[1.0; 4]).unwrap(), None)
                .unwrap();
        }
        assert!(!p.exists());
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 0);
    }

    #[test]
    fn bad_input_is_rejected_with_the_path() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("bad.nc");
        for name in ["x", "time", "", "bad name/"] {
            let meta = FieldMeta { name, ..META };
            let err = FieldsWriter::create(&p, &[0.0], &[0.0], 1, &meta).unwrap_err();
            assert!(err.to_string().contains("bad.nc"), "{err}");
        }
        assert!(FieldsWriter::create(&p, &[], &[0.0], 1, &META).is_err());
        let mut w = FieldsWriter::create(&p, &[0.0, 1.0], &[0.0], 1, &META).unwrap();
        assert!(w.write_record(0.0, row(&[1.0]), None).is_err());
        let transposed = ArrayView2::from_shape((2, 1), &[1.0, 2.0]).unwrap();
        let e = w.write_record(0.0, transposed, None).unwrap_err().to_string();
        assert!(e.contains("[2, 1]") && e.contains("(1, 2)"), "{e}");
        let one_flag = ndarray::Array2::from_elem((1, 1), true);
        assert!(w.write_record(0.0, row(&[1.0, 2.0]), Some(one_flag.view())).is_err());
        w.write_record(0.0, row(&[1.0, 2.0]), None).unwrap();
        w.finish().unwrap();
        assert!(p.exists());
    }
}
