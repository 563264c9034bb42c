//! The gather benchmark: fabricates a sweep folder of many members from one real run (its
//! `summary.json`, `scenario.toml` and a `fields.nc` whose `c_max` is the real one scaled per
//! member), then times [`gather`](super::gather) on it. Library code; `tinct bench --gather N`
//! runs it. Never called from a test.

use super::{gather, member_dir, MEMBERS_CSV};
use crate::output::netcdf::{FieldMeta, FieldsWriter, MAX_VAR};
use std::path::Path;
use std::time::Instant;

/// The template run: a 200 x 100 cell basin with one release and two receptors (ten minutes).
const TEMPLATE: &str = r#"
name = "template"
[grid]
nx = 200
ny = 100
dx = 10.0
depth = 3.0
[tracer]
name = "dye"
units = "kg/m3"
diffusivity = 1.0
[flow]
kind = "uniform"
velocity = [0.2, 0.0]
[boundary]
west = "open"
east = "open"
south = "wall"
north = "open"
[[source]]
name = "spill"
at = [300.0, 500.0]
mass = 1000.0
spread = 30.0
[[receptor]]
name = "beach"
at = [500.0, 500.0]
threshold = 1e-4
[[receptor]]
name = "pier"
at = [700.0, 400.0]
threshold = 1e-5
[run]
end = 600.0
frames = 1
"#;

/// Timings of a gather benchmark.
#[derive(Debug, Clone)]
pub struct BenchReport {
    /// Members gathered.
    pub members: usize,
    /// Cells per member.
    pub cells: usize,
    /// Seconds to fabricate the folder.
    pub fabricate_seconds: f64,
    /// Seconds of each timed gather.
    pub seconds: Vec<f64>,
}

impl BenchReport {
    /// Median of the timed gathers.
    pub fn median(&self) -> f64 {
        let mut s = self.seconds.clone();
        s.sort_by(f64::total_cmp);
        s.get(s.len() / 2).copied().unwrap_or(f64::NAN)
    }
}

/// Runs the template scenario into `dir/template` and fabricates `members` members of a
/// one-axis sweep in `dir/sweep`, each member's `c_max` the template's times
/// `0.5 + index / members`.
pub fn fabricate(dir: &Path, members: usize) -> Result<std::path::PathBuf, String> {
    let e = |e: &dyn std::fmt::Display| e.to_string();
    std::fs::create_dir_all(dir).map_err(|x| e(&x))?;
    let scn_path = dir.join("template.toml");
    std::fs::write(&scn_path, TEMPLATE).map_err(|x| e(&x))?;
    let scn = crate::scenario::load(&scn_path, &[]).map_err(|x| e(&x))?;
    crate::run::execute(&scn, &dir.join("runs"), &mut |_| {}, &mut |_| {}).map_err(|x| e(&x))?;
    let src = dir.join("runs").join("template");
    let mut r = netcdf3::FileReader::open(src.join("fields.nc")).map_err(|x| format!("{x:?}"))?;
    let read = |r: &mut netcdf3::FileReader, v: &str| r.read_var_f64(v).map_err(|x| format!("{v}: {x:?}"));
    let (x, y, c_max, th) = (
        read(&mut r, "x")?,
        read(&mut r, "y")?,
        read(&mut r, MAX_VAR)?,
        read(&mut r, "threshold")?,
    );
    let summary = std::fs::read(src.join("summary.json")).map_err(|x| e(&x))?;
    let toml = std::fs::read(src.join("scenario.toml")).map_err(|x| e(&x))?;
    let root = dir.join("sweep");
    std::fs::create_dir_all(root.join(super::MEMBERS_DIR)).map_err(|x| e(&x))?;
    let mut csv = String::from("index,tracer.diffusivity\n");
    for i in 0..members {
        csv.push_str(&format!("{i},{}\n", 1.0 + i as f64 / members as f64));
    }
    std::fs::write(root.join(MEMBERS_CSV), csv).map_err(|x| e(&x))?;
    use rayon::prelude::*;
    (0..members).into_par_iter().try_for_each(|i| -> Result<(), String> {
        let d = member_dir(&root, i, members);
        std::fs::create_dir_all(&d).map_err(|x| e(&x))?;
        std::fs::write(d.join("summary.json"), &summary).map_err(|x| e(&x))?;
        std::fs::write(d.join("scenario.toml"), &toml).map_err(|x| e(&x))?;
        std::fs::write(d.join("exit_code"), "0\n").map_err(|x| e(&x))?;
        let f = 0.5 + i as f64 / members as f64;
        let c: Vec<f64> = c_max
            .iter()
            .map(|&v| {
                if v == crate::output::FILL_VALUE {
                    f64::NAN
                } else {
                    v * f
                }
            })
            .collect();
        let view = ndarray::ArrayView2::from_shape((y.len(), x.len()), &c).map_err(|x| e(&x))?;
        let meta = FieldMeta {
            name: "c",
            long_name: "dye",
            units: "kg/m3",
            standard_name: None,
            title: "fabricated member",
            history: "gather benchmark",
            thresholds: &th,
            threshold_comment: "",
        };
        let mut w = FieldsWriter::create(&d.join("fields.nc"), &x, &y, 1, &meta).map_err(|x| e(&x))?;
        w.write_record(0.0, view, None).map_err(|x| e(&x))?;
        w.write_max(view, None).map_err(|x| e(&x))?;
        let zeros = ndarray::Array3::zeros((th.len(), view.nrows(), view.ncols()));
        w.write_hours_above(zeros.view(), None).map_err(|x| e(&x))?;
        w.finish().map_err(|x| e(&x))
    })?;
    Ok(root)
}

/// Fabricates `members` members in `dir` and times `reps` gathers of them.
pub fn run(dir: &Path, members: usize, reps: usize) -> Result<BenchReport, String> {
    let t0 = Instant::now();
    let root = fabricate(dir, members)?;
    let fabricate_seconds = t0.elapsed().as_secs_f64();
    let mut seconds = Vec::new();
    for _ in 0..reps.max(1) {
        let t = Instant::now();
        let s = gather(&root).map_err(|x| x.to_string())?;
        seconds.push(t.elapsed().as_secs_f64());
        if s.finished != members {
            return Err(format!("{} of {members} members finished", s.finished));
        }
    }
    Ok(BenchReport {
        members,
        // The template's grid.
        cells: 200 * 100,
        fabricate_seconds,
        seconds,
    })
}
