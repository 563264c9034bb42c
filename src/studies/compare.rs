//! Scheme comparison (`tinct compare`): one scenario run once per convection scheme (and time
//! scheme), every result judged against the same reference.
//!
//! The reference is the exact solution where the scenario has one ([`super::exact`]), otherwise
//! a reference scheme on a grid refined `reference_refine` times, averaged back onto the study
//! grid. The default reference scheme is van Leer: it is second order on smooth profiles and
//! converges under refinement without the squaring of smooth peaks that the more compressive
//! superbee shows (Sweby 1984), so the reference does not carry a limiter's own artefact.
//!
//! For each run: error norms normalised by the reference's ([`error_norms`]), the peak ratio,
//! min (undershoot) and max (overshoot), the budget residual at the end (DESIGN §3), and the
//! effective numerical diffusivity from the growth of the second moments between the start and
//! the end minus the physical K ([`effective_diffusivity`]); `k_numerical` is the mean of the
//! x and y values (the trace of the covariance is unchanged by rotation, so the mean is
//! meaningful for rotating and swirling flows where each axis alone is not), both axes are kept.

use super::exact::exact_solution;
use super::{memory_budget, refine, restrict, run_memory, run_scenario, with_scheme, RunRecord, StudyError};
use crate::diagnostics::moments::effective_diffusivity;
use crate::diagnostics::norms::{error_norms, ErrorNorms};
use crate::grid::Grid;
use crate::ops::limiter::Limiter;
use crate::output::chart::{Axis, Chart, Line};
use crate::output::plot::{self, Tile};
use crate::output::write_atomic;
use crate::output::ColourScale;
use crate::scenario::Scenario;
use crate::step::TimeScheme;
use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// A straight section through the domain for `profiles.png`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Section {
    /// Along x at this y, m.
    AlongX {
        /// y of the section, m.
        y: f64,
    },
    /// Along y at this x, m.
    AlongY {
        /// x of the section, m.
        x: f64,
    },
}

impl std::str::FromStr for Section {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        let bad = || format!("section '{s}': expected y=VALUE (a line along x) or x=VALUE (a line along y), in m");
        let (k, v) = s.split_once('=').ok_or_else(bad)?;
        let v: f64 = v.trim().parse().map_err(|_| bad())?;
        if !v.is_finite() {
            return Err(bad());
        }
        match k.trim() {
            "y" => Ok(Section::AlongX { y: v }),
            "x" => Ok(Section::AlongY { x: v }),
            _ => Err(bad()),
        }
    }
}

/// What to compare.
#[derive(Debug, Clone, PartialEq)]
pub struct CompareOptions {
    /// Convection schemes.
    pub schemes: Vec<Limiter>,
    /// Time schemes (each scheme runs with each); empty means the scenario's.
    pub times: Vec<TimeScheme>,
    /// Scheme of the refined reference run when there is no exact solution.
    pub reference_scheme: Limiter,
    /// Refinement factor of the reference run.
    pub reference_refine: usize,
    /// Section for the profile plot; `None`: along x through the reference peak.
    pub section: Option<Section>,
    /// Memory the concurrent runs may use, bytes; `None`: [`memory_budget`].
    pub memory: Option<u64>,
}

impl Default for CompareOptions {
    fn default() -> Self {
        Self {
            schemes: vec![Limiter::Upwind, Limiter::Minmod, Limiter::VanLeer, Limiter::Superbee],
            times: Vec::new(),
            reference_scheme: Limiter::VanLeer,
            reference_refine: 4,
            section: None,
            memory: None,
        }
    }
}

/// The reference a comparison used.
#[derive(Debug, Clone, PartialEq)]
pub struct ReferenceInfo {
    /// Short label for plots and tables.
    pub label: String,
    /// What it is, in words.
    pub description: String,
    /// Published source of an exact solution; `None` for a reference run.
    pub source: Option<&'static str>,
}

/// One row of `metrics.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct CompareRow {
    /// Scheme label (`van_leer`, or `van_leer/imex` when several time schemes run).
    pub label: String,
    /// Convection scheme.
    pub limiter: Limiter,
    /// Time scheme.
    pub time: TimeScheme,
    /// Norms against the reference, peak ratio, min and max.
    pub norms: ErrorNorms,
    /// Budget residual at the end.
    pub mass_error: f64,
    /// Numerical diffusivity (x, y), m2/s: moment growth minus the physical K; only where the
    /// moment method is valid.
    pub k_numerical: Option<(f64, f64)>,
    /// Why `k_numerical` is not given, when it is not.
    pub k_numerical_reason: Option<String>,
    /// Wall seconds of the marching.
    pub seconds: f64,
    /// Warnings about the numerical choices of this run.
    pub warnings: Vec<String>,
}

impl CompareRow {
    /// Mean of the x and y numerical diffusivities.
    pub fn k_mean(&self) -> Option<f64> {
        self.k_numerical.map(|(a, b)| 0.5 * (a + b))
    }
}

/// The outcome of a comparison.
#[derive(Debug, Clone)]
pub struct CompareReport {
    /// Scenario name.
    pub scenario: String,
    /// The reference.
    pub reference: ReferenceInfo,
    /// One row per run, in the order asked.
    pub rows: Vec<CompareRow>,
    /// Runs marched at the same time.
    pub concurrent: usize,
    grid: Grid,
    wet: Array2<bool>,
    reference_field: Array2<f64>,
    fields: Vec<Array2<f64>>,
    section: Option<Section>,
    units: String,
    colour: ColourScale,
    range: Option<(f64, f64)>,
}

impl CompareReport {
    /// Rows sorted by L1 error, smallest first.
    pub fn sorted_by_l1(&self) -> Vec<&CompareRow> {
        let mut v: Vec<&CompareRow> = self.rows.iter().collect();
        v.sort_by(|a, b| a.norms.l1.total_cmp(&b.norms.l1));
        v
    }

    /// The grid of the study.
    pub fn grid(&self) -> &Grid {
        &self.grid
    }

    /// The reference field, shape (ny, nx), (y, x) order, row 0 south.
    pub fn reference_field(&self) -> ArrayView2<'_, f64> {
        self.reference_field.view()
    }

    /// The final field of row `k` (in the order of [`Self::rows`]), as
    /// [`Self::reference_field`].
    pub fn field(&self, k: usize) -> Option<ArrayView2<'_, f64>> {
        self.fields.get(k).map(|f| f.view())
    }
}

fn fmt_opt(v: Option<f64>) -> String {
    v.map_or_else(|| "".to_string(), |x| format!("{x:e}"))
}

/// `metrics.csv`: the DESIGN §5 columns
/// `scheme,l1,l2,linf,peak_ratio,min,max,mass_error,k_numerical,seconds`, then the two axes of
/// the numerical diffusivity `k_numerical_x,k_numerical_y` (empty when moments are undefined).
pub fn metrics_csv(report: &CompareReport) -> String {
    let mut s = String::from(
        "scheme,l1,l2,linf,peak_ratio,min,max,mass_error,k_numerical,seconds,k_numerical_x,k_numerical_y\n",
    );
    for r in &report.rows {
        let n = &r.norms;
        s.push_str(&format!(
            "{},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{},{:.3},{},{}\n",
            r.label,
            n.l1,
            n.l2,
            n.linf,
            n.peak_ratio,
            n.min,
            n.max,
            r.mass_error,
            fmt_opt(r.k_mean()),
            r.seconds,
            fmt_opt(r.k_numerical.map(|k| k.0)),
            fmt_opt(r.k_numerical.map(|k| k.1)),
        ));
    }
    s
}

/// Runs the comparison. `on_done` receives each run's label as it finishes (from any thread).
pub fn compare(
    scn: &Scenario,
    opts: &CompareOptions,
    on_done: &(dyn Fn(&str) + Sync),
) -> Result<CompareReport, StudyError> {
    if opts.schemes.is_empty() {
        return Err(StudyError::BadInput("no schemes to compare".into()));
    }
    if opts.reference_refine == 0 || opts.reference_refine > 16 {
        return Err(StudyError::BadInput(format!(
            "--reference-refine {}: must be an integer from 1 to 16",
            opts.reference_refine
        )));
    }
    let times = if opts.times.is_empty() {
        vec![scn.scheme.time]
    } else {
        opts.times.clone()
    };
    let mut jobs = Vec::new();
    for &t in &times {
        for &l in &opts.schemes {
            let label = if times.len() > 1 {
                format!("{}/{}", l.name(), t.name())
            } else {
                l.name().to_string()
            };
            if !jobs.iter().any(|(lab, _, _)| *lab == label) {
                jobs.push((label, l, t));
            }
        }
    }
    // Runs at once: as many as the memory budget holds (at least one).
    let budget = opts.memory.unwrap_or_else(memory_budget);
    let cells = scn.model.grid.cells();
    let worst = times.iter().map(|&t| run_memory(cells, t)).max().unwrap_or(1).max(1);
    let concurrent = ((budget / worst) as usize).clamp(1, jobs.len());
    let mut records: Vec<Result<RunRecord, StudyError>> = Vec::with_capacity(jobs.len());
    for batch in jobs.chunks(concurrent) {
        let done: Vec<_> = batch
            .par_iter()
            .map(|(label, l, t)| {
                let r = run_scenario(&with_scheme(scn, *l, *t), label);
                on_done(label);
                r
            })
            .collect();
        records.extend(done);
    }
    let records: Vec<RunRecord> = records.into_iter().collect::<Result<_, _>>()?;

    // The reference.
    let grid = scn.model.grid;
    let wet = records[0].wet.clone();
    let (reference, reference_field) = match exact_solution(scn) {
        Some(e) => (
            ReferenceInfo {
                label: "exact".into(),
                description: e.description.clone(),
                source: Some(e.source),
            },
            e.field(&grid, wet.view(), scn.run.end),
        ),
        None => {
            let r = opts.reference_refine;
            let fine = refine(&with_scheme(scn, opts.reference_scheme, scn.scheme.time), r)?;
            let label = format!("{} x{r}", opts.reference_scheme.name());
            let rec = run_scenario(&fine, &format!("reference {label}"))?;
            on_done(&format!("reference {label}"));
            (
                ReferenceInfo {
                    label: format!("reference {label}"),
                    description: format!(
                        "reference: {} on a grid refined {r} times, averaged onto this grid (no exact solution for this scenario)",
                        opts.reference_scheme.name()
                    ),
                    source: None,
                },
                restrict(rec.field.view(), rec.wet.view(), r),
            )
        }
    };

    let (kx, ky) = (scn.model.kx, scn.model.ky);
    let rows = jobs
        .iter()
        .zip(&records)
        .map(|((label, l, t), rec)| {
            // The moment method measures diffusion only for one release spreading freely in
            // open water, by a scheme that does not oscillate.
            let (lo, hi) = rec
                .field
                .iter()
                .zip(&rec.wet)
                .filter(|(_, &w)| w)
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (&c, _)| (a.min(c), b.max(c)));
            // Centroid +- 2 standard deviations within the grid (97.7% of a Gaussian's mass
            // on each axis).
            let inside = |m: &crate::diagnostics::moments::Moments| {
                let (sx, sy) = (2.0 * m.var_x.sqrt(), 2.0 * m.var_y.sqrt());
                m.x - sx >= grid.x0 && m.x + sx <= grid.x0 + grid.lx() && m.y - sy >= grid.y0 && m.y + sy <= grid.y0 + grid.ly()
            };
            let reason = crate::run::summary::single_release_refusal(scn)
                .or_else(|| {
                    scn.model
                        .mask
                        .as_ref()
                        .is_some_and(|m| m.has_land())
                        .then(|| "land in the domain stops and reflects the plume, so its variance growth is not diffusion".to_string())
                })
                .or_else(|| {
                    (lo < -1e-6 * hi.abs()).then(|| {
                        format!("the field oscillates (min {lo:.3e}): the variance growth of an oscillating field is not diffusion")
                    })
                })
                .or_else(|| match rec.moments {
                    (Some(a), Some(b)) if scn.run.end > 0.0 => {
                        (!(inside(&a) && inside(&b))).then(|| "the plume reaches a side of the grid".to_string())
                    }
                    _ => Some("no plume to measure".to_string()),
                });
            let k_numerical = match (rec.moments, &reason) {
                ((Some(a), Some(b)), None) => {
                    let (ex, ey) = effective_diffusivity(&a, &b, scn.run.end);
                    Some((ex - kx, ey - ky))
                }
                _ => None,
            };
            CompareRow {
                label: label.clone(),
                limiter: *l,
                time: *t,
                norms: error_norms(rec.field.view(), reference_field.view(), Some(wet.view())),
                mass_error: rec.mass_error,
                k_numerical,
                k_numerical_reason: reason,
                seconds: rec.seconds,
                warnings: rec.warnings.clone(),
            }
        })
        .collect();
    Ok(CompareReport {
        scenario: scn.name.clone(),
        reference,
        rows,
        concurrent,
        grid,
        wet,
        reference_field,
        fields: records.into_iter().map(|r| r.field).collect(),
        section: opts.section,
        units: scn.tracer.units.clone(),
        colour: scn.output.colour,
        range: scn.output.range,
    })
}

/// The section actually drawn: the given one, or along x through the reference peak.
pub fn chosen_section(report: &CompareReport) -> Section {
    report.section.unwrap_or_else(|| {
        let g = &report.grid;
        let (j, i) = report
            .reference_field
            .indexed_iter()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .map_or((0, 0), |(k, _)| k);
        Section::AlongX { y: g.centre(i, j).1 }
    })
}

/// Values of `field` along `section` (the row or column of cells it crosses) with positions.
fn cut(grid: &Grid, field: &Array2<f64>, section: Section) -> Option<(Vec<f64>, Vec<f64>)> {
    match section {
        Section::AlongX { y } => {
            let (_, j) = grid.cell_at(grid.x0, y)?;
            Some((grid.xs(), field.row(j).to_vec()))
        }
        Section::AlongY { x } => {
            let (i, _) = grid.cell_at(x, grid.y0)?;
            Some((grid.ys(), field.column(i).to_vec()))
        }
    }
}

/// Writes `panel.png`, `profiles.png` and `metrics.csv` into `dir` (created if needed);
/// returns the paths written.
pub fn write_compare(report: &CompareReport, dir: &Path) -> Result<Vec<PathBuf>, StudyError> {
    std::fs::create_dir_all(dir).map_err(|e| crate::output::OutputError::io(dir, e))?;
    let g = &report.grid;
    let mut tiles = vec![Tile {
        values: report.reference_field.view(),
        lines: vec![report.reference.label.clone(), "(reference)".into()],
    }];
    for (r, f) in report.rows.iter().zip(&report.fields) {
        tiles.push(Tile {
            values: f.view(),
            lines: vec![
                r.label.clone(),
                format!("L1 {:.3}  peak {:.3}", r.norms.l1, r.norms.peak_ratio),
            ],
        });
    }
    let lo = tiles
        .iter()
        .flat_map(|t| t.values.iter())
        .copied()
        .fold(0.0f64, f64::min);
    let hi = tiles
        .iter()
        .flat_map(|t| t.values.iter())
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let title = format!("{}: schemes against {}", report.scenario, report.reference.label);
    // The run's colour choice: a fixed output.range when set; a log scale spans four decades
    // under the peak, as the frames do.
    let (lo, hi) = match (report.range, report.colour) {
        (Some(r), _) => r,
        (None, ColourScale::Log) if hi > 0.0 => (hi * 1e-4, hi),
        _ => (lo, hi),
    };
    let log = if report.colour == ColourScale::Log {
        ", log scale"
    } else {
        ""
    };
    let caption = format!("concentration [{}]{log}, one colour scale for every tile", report.units);
    let panel = plot::render_panel(
        g.nx,
        g.ny,
        Some(report.wet.view()),
        &tiles,
        (lo, hi),
        report.colour,
        &title,
        &caption,
    );
    let p_panel = dir.join("panel.png");
    plot::write_png(&p_panel, &panel)?;

    let section = chosen_section(report);
    let mut paths = vec![p_panel];
    let cuts: Vec<_> = std::iter::once((&report.reference.label, &report.reference_field))
        .chain(report.rows.iter().map(|r| &r.label).zip(&report.fields))
        .filter_map(|(name, f)| cut(g, f, section).map(|(x, y)| (name.clone(), x, y)))
        .collect();
    if !cuts.is_empty() {
        let (what, axis) = match section {
            Section::AlongX { y } => (format!("section along x at y = {y:.4} m"), "x [m]"),
            Section::AlongY { x } => (format!("section along y at x = {x:.4} m"), "y [m]"),
        };
        let mut chart = Chart::new(
            format!("{}: {what}", report.scenario),
            Axis::linear(axis),
            Axis::linear(format!("concentration [{}]", report.units)),
        );
        // The reference first, in dark ink; the schemes in the palette, then dashed.
        chart.lines = cuts
            .iter()
            .enumerate()
            .map(|(k, (name, x, y))| {
                let line = Line::new(name.clone(), x.clone(), y.clone());
                if k == 0 {
                    line.emphasised()
                } else {
                    line
                }
            })
            .collect();
        let p = dir.join("profiles.png");
        chart.write(&p)?;
        paths.push(p);
    }
    let p_csv = dir.join("metrics.csv");
    write_atomic(&p_csv, metrics_csv(report).as_bytes())?;
    paths.push(p_csv);
    Ok(paths)
}
