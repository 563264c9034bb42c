//! CF-1.8 NetCDF-3 files of 2D maps: any number of `(y, x)` variables of 64-bit floats over
//! one grid, each with its own units, `long_name`, optional `valid_range` and `comment`, and a
//! `_FillValue` ([`FILL_VALUE`]) for NaN (land). Used for per-cell results that are not a time
//! series, such as the ensemble maps of a sweep. The file is written to a temporary name and
//! renamed into place, as every other output.

use std::path::Path;

use netcdf3::{DataSet, FileWriter, Version};

use super::{AtomicFile, OutputError, FILL_VALUE};

/// One `(y, x)` variable of a map file.
#[derive(Debug, Clone, Copy)]
pub struct MapVar<'a> {
    /// Variable name (a valid NetCDF name other than `x` and `y`).
    pub name: &'a str,
    /// `long_name` attribute.
    pub long_name: &'a str,
    /// `units` attribute (`1` for a fraction).
    pub units: &'a str,
    /// `valid_range` attribute, written when given.
    pub valid_range: Option<(f64, f64)>,
    /// `comment` attribute, written when not empty.
    pub comment: &'a str,
    /// `ny * nx` values, row-major, row 0 south; NaN is written as [`FILL_VALUE`].
    pub values: &'a [f64],
}

/// Writes `vars` over the cell centres `x` (west to east) and `y` (south to north), in metres,
/// to `path` with the global attributes `Conventions`, `title`, `history` and `source`.
pub fn write_maps(
    path: &Path,
    x: &[f64],
    y: &[f64],
    vars: &[MapVar],
    title: &str,
    history: &str,
) -> Result<(), OutputError> {
    let n = x.len() * y.len();
    if x.is_empty() || y.is_empty() {
        return Err(OutputError::invalid(path, "empty grid"));
    }
    for v in vars {
        if !netcdf3::is_valid_name(v.name) || ["x", "y"].contains(&v.name) {
            return Err(OutputError::invalid(
                path,
                format!("`{}` is not usable as a NetCDF variable name", v.name),
            ));
        }
        if v.values.len() != n {
            return Err(OutputError::invalid(
                path,
                format!("{} has {} values, expected ny*nx = {n}", v.name, v.values.len()),
            ));
        }
    }
    let nc = |e: &dyn std::fmt::Debug| OutputError::NetCdf {
        path: path.to_path_buf(),
        message: format!("{e:?}"),
    };
    let build = || -> Result<DataSet, netcdf3::InvalidDataSet> {
        let mut ds = DataSet::new();
        ds.add_fixed_dim("y", y.len())?;
        ds.add_fixed_dim("x", x.len())?;
        for (name, long, axis, std) in [
            (
                "y",
                "y coordinate of cell centre (northward)",
                "Y",
                "projection_y_coordinate",
            ),
            (
                "x",
                "x coordinate of cell centre (eastward)",
                "X",
                "projection_x_coordinate",
            ),
        ] {
            ds.add_var_f64(name, &[name])?;
            ds.add_var_attr_string(name, "standard_name", std)?;
            ds.add_var_attr_string(name, "long_name", long)?;
            ds.add_var_attr_string(name, "units", "m")?;
            ds.add_var_attr_string(name, "axis", axis)?;
        }
        for v in vars {
            ds.add_var_f64(v.name, &["y", "x"])?;
            ds.add_var_attr_string(v.name, "long_name", v.long_name)?;
            ds.add_var_attr_string(v.name, "units", v.units)?;
            if let Some((lo, hi)) = v.valid_range {
                ds.add_var_attr_f64(v.name, "valid_range", vec![lo, hi])?;
            }
            if !v.comment.is_empty() {
                ds.add_var_attr_string(v.name, "comment", v.comment)?;
            }
            ds.add_var_attr_f64(v.name, "_FillValue", vec![FILL_VALUE])?;
        }
        ds.add_global_attr_string("Conventions", "CF-1.8")?;
        ds.add_global_attr_string("title", title)?;
        ds.add_global_attr_string("history", history)?;
        ds.add_global_attr_string("source", format!("tinct {}", env!("CARGO_PKG_VERSION")))?;
        Ok(ds)
    };
    let ds = build().map_err(|e| nc(&e))?;
    let atomic = AtomicFile::create(path)?;
    {
        let mut fw = FileWriter::open(atomic.path_tmp()).map_err(|e| nc(&e))?;
        fw.set_def(&ds, Version::Offset64Bit, 0).map_err(|e| nc(&e))?;
        fw.write_var_f64("x", x).map_err(|e| nc(&e))?;
        fw.write_var_f64("y", y).map_err(|e| nc(&e))?;
        let mut data = Vec::with_capacity(n);
        for v in vars {
            data.clear();
            data.extend(v.values.iter().map(|&c| if c.is_nan() { FILL_VALUE } else { c }));
            fw.write_var_f64(v.name, &data).map_err(|e| nc(&e))?;
        }
        fw.close().map_err(|e| nc(&e))?;
    }
    atomic.commit()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_maps_round_trip_with_fill_and_attributes() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("maps.nc");
        let a = [0.0, 0.5, f64::NAN, 1.0, 0.25, 0.75];
        let b = [1.0, 2.0, f64::NAN, 4.0, 5.0, 6.0];
        let vars = [
            MapVar {
                name: "probability_above_1e-6",
                long_name: "probability",
                units: "1",
                valid_range: Some((0.0, 1.0)),
                comment: "fraction of members",
                values: &a,
            },
            MapVar {
                name: "c_max_ensemble",
                long_name: "largest",
                units: "kg/m3",
                valid_range: None,
                comment: "",
                values: &b,
            },
        ];
        write_maps(&p, &[5.0, 15.0, 25.0], &[1.0, 3.0], &vars, "t", "h").unwrap();
        let mut r = netcdf3::FileReader::open(&p).unwrap();
        let ds = r.data_set();
        assert_eq!(ds.get_global_attr_as_string("Conventions").unwrap(), "CF-1.8");
        assert_eq!(ds.get_var("c_max_ensemble").unwrap().dim_names(), ["y", "x"]);
        let name = "probability_above_1e-6";
        assert_eq!(ds.get_var_attr_f64(name, "valid_range").unwrap(), [0.0, 1.0]);
        assert_eq!(ds.get_var_attr_as_string(name, "units").unwrap(), "1");
        assert!(!ds.has_var_attr("c_max_ensemble", "valid_range").unwrap());
        let got = r.read_var_f64(name).unwrap();
        assert_eq!(got, [0.0, 0.5, FILL_VALUE, 1.0, 0.25, 0.75]);
        assert_eq!(r.read_var_f64("x").unwrap(), [5.0, 15.0, 25.0]);
        assert!(write_maps(&p, &[0.0], &[0.0], &vars, "t", "h").is_err());
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }
}
