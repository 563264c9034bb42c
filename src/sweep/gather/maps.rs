//! Per cell results of a sweep: for every distinct receptor threshold, the probability that a
//! cell reaches it (the fraction of the mapped members whose `c_max` at the cell is at or above
//! the threshold: the run's own rule, `src/run/exceedance.rs`, counts a cell as above a
//! threshold when its value is at or above it), and the ensemble maximum (the largest `c_max`
//! of any member). Land (fill in every member's `c_max`) stays fill.
//!
//! The members' `fields.nc` are read in parallel (rayon), `c_max` only, and folded into counts
//! per threshold, so memory does not grow with the number of members.
//!
//! Threshold tokens in file and variable names: Rust's shortest round-trip decimal (`0.5`,
//! `250`, `0.001`) when it has at most six characters, else its shortest round-trip scientific
//! form (`5e6` for 5000000, `1e-6` for 0.000001, `1.25e-7`).

use super::MemberOutcome;
use crate::output::colour::{ColourScale, Ramp};
use crate::output::ncmaps::{self, MapVar};
use crate::output::{maps, Extent, Marker, MarkerKind, OutputError, FILL_VALUE};
use rayon::prelude::*;
use std::path::Path;

/// The token of `t` in file and variable names (see the module documentation).
pub fn threshold_token(t: f64) -> String {
    let plain = format!("{t}");
    if plain.len() <= 6 {
        plain
    } else {
        format!("{t:e}")
    }
}

/// The per cell counts of the mapped members.
#[derive(Debug, Clone)]
pub struct EnsembleMaps {
    /// Cells along x.
    pub nx: usize,
    /// Cells along y.
    pub ny: usize,
    /// Cell centres along x, m.
    pub x: Vec<f64>,
    /// Cell centres along y, m.
    pub y: Vec<f64>,
    /// Distinct receptor thresholds, ascending, with the receptors that carry each.
    pub thresholds: Vec<(f64, Vec<String>)>,
    /// Per threshold and cell (row 0 south): members at or above it.
    pub counts: Vec<Vec<u32>>,
    /// Per cell: the largest `c_max` of any member (NaN on land).
    pub max: Vec<f64>,
    /// Members in the maps.
    pub members: usize,
    /// Tracer name (`long_name` of `c`) and units.
    pub tracer: (String, String),
    /// Receptor markers.
    pub markers: Vec<Marker>,
}

impl EnsembleMaps {
    /// Probability of reaching threshold `k` per cell (NaN on land).
    pub fn probability(&self, k: usize) -> Vec<f64> {
        let n = self.members.max(1) as f64;
        self.counts[k]
            .iter()
            .zip(&self.max)
            .map(|(&c, m)| if m.is_nan() { f64::NAN } else { c as f64 / n })
            .collect()
    }

    /// Water flags (a cell with a value in some member).
    pub fn wet(&self) -> Vec<bool> {
        self.max.iter().map(|m| !m.is_nan()).collect()
    }

    /// The largest ensemble maximum over water.
    pub fn peak(&self) -> Option<f64> {
        self.max.iter().copied().filter(|v| v.is_finite()).reduce(f64::max)
    }

    /// The grid's outer edges from the cell centres (`None` for a single cell).
    pub fn extent(&self) -> Option<Extent> {
        let step = |v: &[f64]| (v.len() > 1).then(|| v[1] - v[0]);
        let dx = step(&self.x).or(step(&self.y))?;
        let dy = step(&self.y).unwrap_or(dx);
        Some(Extent {
            x0: self.x[0] - dx / 2.0,
            x1: self.x[self.nx - 1] + dx / 2.0,
            y0: self.y[0] - dy / 2.0,
            y1: self.y[self.ny - 1] + dy / 2.0,
        })
    }
}

/// The maps (if any member could be read) and notes on members left out.
#[derive(Debug, Clone)]
pub struct Ensemble {
    /// The maps.
    pub maps: Option<EnsembleMaps>,
    /// Members left out of the maps and why.
    pub notes: Vec<String>,
}

/// One written probability map.
#[derive(Debug, Clone, PartialEq)]
pub struct ThresholdMap {
    /// Threshold, tracer units.
    pub threshold: f64,
    /// Its token in names.
    pub token: String,
    /// Receptors carrying it.
    pub receptors: Vec<String>,
    /// NetCDF variable name.
    pub variable: String,
    /// PNG file, relative to the sweep folder.
    pub png: String,
    /// Water cells with a probability above 0.
    pub cells_any: usize,
    /// Water cells with probability 1.
    pub cells_all: usize,
}

fn read_err(path: &Path, e: impl std::fmt::Debug) -> String {
    format!("{}: {e:?}", path.display())
}

/// The header facts and `c_max` of one member's `fields.nc`.
struct Field {
    nx: usize,
    ny: usize,
    c_max: Vec<f64>,
}

fn read_c_max(dir: &Path) -> Result<Field, String> {
    let path = dir.join("fields.nc");
    let mut r = netcdf3::FileReader::open(&path).map_err(|e| read_err(&path, e))?;
    let ds = r.data_set();
    let (Some(nx), Some(ny)) = (ds.dim_size("x"), ds.dim_size("y")) else {
        return Err(format!("{}: no x and y dimensions", path.display()));
    };
    let c_max = r
        .read_var_f64(crate::output::netcdf::MAX_VAR)
        .map_err(|e| read_err(&path, e))?;
    if c_max.len() != nx * ny {
        return Err(format!(
            "{}: c_max has {} values for {nx} x {ny} cells",
            path.display(),
            c_max.len()
        ));
    }
    Ok(Field { nx, ny, c_max })
}

/// Counts folded over members.
struct Acc {
    counts: Vec<Vec<u32>>,
    max: Vec<f64>,
    members: usize,
    left_out: Vec<(usize, String)>,
}

impl Acc {
    fn new(thresholds: usize, cells: usize) -> Self {
        Self {
            counts: vec![vec![0; cells]; thresholds],
            max: vec![f64::NAN; cells],
            members: 0,
            left_out: Vec::new(),
        }
    }

    fn add(&mut self, c: &[f64], thresholds: &[(f64, Vec<String>)]) {
        for (m, &v) in self.max.iter_mut().zip(c) {
            if v != FILL_VALUE && !v.is_nan() && !(v <= *m) {
                *m = v;
            }
        }
        for (counts, (t, _)) in self.counts.iter_mut().zip(thresholds) {
            for (n, &v) in counts.iter_mut().zip(c) {
                *n += u32::from(v != FILL_VALUE && v >= *t);
            }
        }
        self.members += 1;
    }

    fn merge(mut self, o: Acc) -> Acc {
        for (m, &v) in self.max.iter_mut().zip(&o.max) {
            if !(v <= *m) && !v.is_nan() {
                *m = v;
            }
        }
        for (a, b) in self.counts.iter_mut().zip(&o.counts) {
            for (x, y) in a.iter_mut().zip(b) {
                *x += y;
            }
        }
        self.members += o.members;
        self.left_out.extend(o.left_out);
        self
    }
}

/// The tracer's `long_name` and `units` of `c` in `dir/fields.nc`.
fn tracer(dir: &Path) -> (String, String) {
    let Ok(r) = netcdf3::FileReader::open(dir.join("fields.nc")) else {
        return (String::new(), String::new());
    };
    let ds = r.data_set();
    let get = |a| ds.get_var_attr_as_string("c", a).unwrap_or_default();
    (get("long_name"), get("units"))
}

/// Reads the finished members' `c_max` and folds them into the maps. The grid is that of the
/// first member whose `fields.nc` reads; members on another grid or without a readable file
/// are left out (and named in the notes).
pub fn ensemble(finished: &[&MemberOutcome]) -> Ensemble {
    let mut notes = Vec::new();
    let mut first = None;
    for (k, m) in finished.iter().enumerate() {
        match read_c_max(&m.dir) {
            Ok(f) => {
                first = Some((k, f));
                break;
            }
            Err(e) => notes.push(format!("member {} left out of the maps: {e}", m.index)),
        }
    }
    let Some((k0, f0)) = first else {
        if !finished.is_empty() {
            notes.push("no member's fields.nc could be read: no per cell maps".into());
        }
        return Ensemble { maps: None, notes };
    };
    let (nx, ny) = (f0.nx, f0.ny);
    let coords = netcdf3::FileReader::open(finished[k0].dir.join("fields.nc"))
        .and_then(|mut r| Ok((r.read_var_f64("x")?, r.read_var_f64("y")?)));
    let (x, y) = match coords {
        Ok((x, y)) if x.len() == nx && y.len() == ny => (x, y),
        _ => (
            (0..nx).map(|i| i as f64 + 0.5).collect(),
            (0..ny).map(|j| j as f64 + 0.5).collect(),
        ),
    };
    let mut thresholds: Vec<(f64, Vec<String>)> = Vec::new();
    for m in finished {
        for r in &m.receptors {
            let Some(t) = r.threshold.filter(|t| t.is_finite()) else {
                continue;
            };
            match thresholds.iter_mut().find(|(v, _)| *v == t) {
                Some((_, names)) if !names.contains(&r.name) => names.push(r.name.clone()),
                Some(_) => {}
                None => thresholds.push((t, vec![r.name.clone()])),
            }
        }
    }
    thresholds.sort_by(|a, b| a.0.total_cmp(&b.0));
    let cells = nx * ny;
    let mut acc = Acc::new(thresholds.len(), cells);
    acc.add(&f0.c_max, &thresholds);
    drop(f0);
    let rest = finished[k0 + 1..]
        .par_iter()
        .fold(
            || Acc::new(thresholds.len(), cells),
            |mut a, m| {
                match read_c_max(&m.dir) {
                    Ok(f) if (f.nx, f.ny) == (nx, ny) => a.add(&f.c_max, &thresholds),
                    Ok(f) => a.left_out.push((
                        m.index,
                        format!("its grid is {} x {} cells, the maps' {nx} x {ny}", f.nx, f.ny),
                    )),
                    Err(e) => a.left_out.push((m.index, e)),
                }
                a
            },
        )
        .reduce(|| Acc::new(thresholds.len(), cells), Acc::merge);
    let mut acc = acc.merge(rest);
    acc.left_out.sort_by_key(|l| l.0);
    notes.extend(
        acc.left_out
            .iter()
            .map(|(i, e)| format!("member {i} left out of the maps: {e}")),
    );
    let markers = finished[k0]
        .receptors
        .iter()
        .map(|r| Marker {
            x: r.at.0,
            y: r.at.1,
            label: r.name.clone(),
            kind: MarkerKind::Receptor,
        })
        .collect();
    Ensemble {
        maps: Some(EnsembleMaps {
            nx,
            ny,
            x,
            y,
            thresholds,
            counts: acc.counts,
            max: acc.max,
            members: acc.members,
            tracer: tracer(&finished[k0].dir),
            markers,
        }),
        notes,
    }
}

/// Writes `ensemble.nc`, `probability_above_<token>.png` per threshold and
/// `c_max_ensemble.png` into `out_dir`, adding their names (relative to the sweep folder) to
/// `files`.
pub fn write_maps(
    out_dir: &Path,
    sweep: &str,
    e: &EnsembleMaps,
    finished: &[&MemberOutcome],
    files: &mut Vec<String>,
) -> Result<Vec<ThresholdMap>, OutputError> {
    let (tracer, units) = (&e.tracer.0, &e.tracer.1);
    let tracer = if tracer.is_empty() {
        "concentration"
    } else {
        tracer.as_str()
    };
    let probs: Vec<Vec<f64>> = (0..e.thresholds.len()).map(|k| e.probability(k)).collect();
    let names: Vec<String> = e
        .thresholds
        .iter()
        .map(|(t, _)| format!("probability_above_{}", threshold_token(*t)))
        .collect();
    let longs: Vec<String> = e
        .thresholds
        .iter()
        .map(|(t, _)| format!("probability that the largest {tracer} reaches {t} {units}"))
        .collect();
    let comments: Vec<String> = e
        .thresholds
        .iter()
        .map(|(t, r)| {
            format!(
                "fraction of the {} mapped members (of {} finished) whose c_max at the cell is at or above {t} {units} (the run's rule for time above a threshold); threshold of: {}",
                e.members,
                finished.len(),
                r.join(", ")
            )
        })
        .collect();
    let mut vars: Vec<MapVar> = (0..e.thresholds.len())
        .map(|k| MapVar {
            name: &names[k],
            long_name: &longs[k],
            units: "1",
            valid_range: Some((0.0, 1.0)),
            comment: &comments[k],
            values: &probs[k],
        })
        .collect();
    let max_long = format!("largest {tracer} reached in any member at any step");
    let max_comment = format!("maximum over the {} mapped members of c_max", e.members);
    vars.push(MapVar {
        name: "c_max_ensemble",
        long_name: &max_long,
        units,
        valid_range: None,
        comment: &max_comment,
        values: &e.max,
    });
    let title = format!("{sweep}: ensemble of {} members", e.members);
    let history = format!("gathered by tinct {}", env!("CARGO_PKG_VERSION"));
    ncmaps::write_maps(&out_dir.join("ensemble.nc"), &e.x, &e.y, &vars, &title, &history)?;
    files.push(format!("{}/ensemble.nc", super::GATHER_DIR));

    let wet = e.wet();
    let extent = e.extent();
    let results = e
        .thresholds
        .par_iter()
        .enumerate()
        .map(|(k, (t, receptors))| {
            let file = format!("{}.png", names[k]);
            let caption = format!(
                "probability of reaching {t} {units} (fraction of {} members)",
                e.members
            );
            let title = format!("{sweep}: {tracer} at or above {t} {units}");
            let map = maps::ScalarMap {
                nx: e.nx,
                ny: e.ny,
                values: &probs[k],
                wet: Some(&wet),
                range: (0.0, 1.0),
                scale: ColourScale::Linear,
                ramp: Ramp::Sequential,
                caption: &caption,
                title: &title,
                extent,
                markers: &e.markers,
            };
            maps::write_scalar_png(&out_dir.join(&file), &map)?;
            let water = || probs[k].iter().filter(|p| !p.is_nan());
            Ok(ThresholdMap {
                threshold: *t,
                token: threshold_token(*t),
                receptors: receptors.clone(),
                variable: names[k].clone(),
                png: format!("{}/{file}", super::GATHER_DIR),
                cells_any: water().filter(|&&p| p > 0.0).count(),
                cells_all: water().filter(|&&p| p >= 1.0).count(),
            })
        })
        .collect::<Result<Vec<_>, OutputError>>()?;
    files.extend(results.iter().map(|m| m.png.clone()));

    let peak = e.peak().filter(|p| *p > 0.0);
    let (range, scale) = match peak {
        Some(p) => ((p * 1e-4, p), ColourScale::Log),
        None => ((0.0, 1.0), ColourScale::Linear),
    };
    let caption = format!("largest {tracer} [{units}] in any member at any step");
    let title = format!("{sweep}: ensemble maximum over {} members", e.members);
    let map = maps::ScalarMap {
        nx: e.nx,
        ny: e.ny,
        values: &e.max,
        wet: Some(&wet),
        range,
        scale,
        ramp: Ramp::Sequential,
        caption: &caption,
        title: &title,
        extent,
        markers: &e.markers,
    };
    maps::write_scalar_png(&out_dir.join("c_max_ensemble.png"), &map)?;
    files.push(format!("{}/c_max_ensemble.png", super::GATHER_DIR));
    Ok(results)
}
