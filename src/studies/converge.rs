//! Grid convergence (`tinct converge`): the scenario on grids refined by an integer ratio, and
//! for each quantity the observed order, the Richardson-extrapolated value, the relative errors
//! and the fine-grid convergence index of Celik et al. (2008) ([`crate::diagnostics::gci`]).
//!
//! Level 0 is the scenario's own grid, level k has `nx r^k` by `ny r^k` cells; the automatic
//! step keeps the Courant target, and a fixed `dt` is divided by `r^k` ([`super::refine`]), so
//! time and space errors fall together. The representative spacing of a level is
//! `h = sqrt(dx dy)`. Quantities: `l1` (relative L1 error against the exact solution, where the
//! scenario has one), `mass` (final mass), `max` (largest final concentration), and per
//! receptor `peak:NAME` and `arrival:NAME` (first time at the threshold). Each consecutive
//! triple of levels gives one three-grid result; the finest triple is the one to quote.

use super::exact::exact_solution;
use super::{refine, run_scenario, RunRecord, StudyError};
use crate::diagnostics::gci::{gci, Gci, GciParams};
use crate::diagnostics::norms::error_norms;
use crate::output::chart::{Axis, Chart, Dash, Line};
use crate::output::write_atomic;
use crate::scenario::Scenario;
use std::path::{Path, PathBuf};

/// What to run.
#[derive(Debug, Clone, PartialEq)]
pub struct ConvergeOptions {
    /// Grids (at least 3).
    pub levels: usize,
    /// Integer refinement ratio between successive grids (at least 2).
    pub ratio: usize,
    /// Quantities to report (names as in the module doc); empty means all available.
    pub quantities: Vec<String>,
    /// Knobs of the three-grid procedure.
    pub params: GciParams,
}

impl Default for ConvergeOptions {
    fn default() -> Self {
        Self {
            levels: 3,
            ratio: 2,
            quantities: Vec::new(),
            params: GciParams::default(),
        }
    }
}

/// One grid of the study.
#[derive(Debug, Clone, PartialEq)]
pub struct Level {
    /// Cells along x.
    pub nx: usize,
    /// Cells along y.
    pub ny: usize,
    /// Representative spacing sqrt(dx dy), m.
    pub h: f64,
    /// Steps taken.
    pub steps: u64,
    /// Wall seconds of the marching.
    pub seconds: f64,
}

/// One quantity over the levels.
#[derive(Debug, Clone, PartialEq)]
pub struct QuantityStudy {
    /// Name (`l1`, `mass`, `max`, `peak:NAME`, `arrival:NAME`).
    pub name: String,
    /// Value on each level, coarsest first (`None` where undefined, e.g. no arrival).
    pub values: Vec<Option<f64>>,
    /// Three-grid results for each consecutive triple of levels, coarsest triple first
    /// (`None` where a value of the triple is undefined).
    pub triples: Vec<Option<Gci>>,
}

impl QuantityStudy {
    /// The result of the finest triple.
    pub fn finest(&self) -> Option<&Gci> {
        self.triples.last().and_then(|t| t.as_ref())
    }
}

/// The outcome of a convergence study.
#[derive(Debug, Clone, PartialEq)]
pub struct ConvergeReport {
    /// Scenario name.
    pub scenario: String,
    /// The grids, coarsest first.
    pub levels: Vec<Level>,
    /// The quantities.
    pub quantities: Vec<QuantityStudy>,
    /// Remarks for the user (exact solution used or not, quantities left out).
    pub notes: Vec<String>,
}

/// The quantities a run yields, by name.
fn quantities_of(rec: &RunRecord, l1: Option<f64>, scn: &Scenario) -> Vec<(String, Option<f64>)> {
    let mut q = Vec::new();
    if let Some(e) = l1 {
        q.push(("l1".to_string(), Some(e)));
    }
    q.push(("mass".to_string(), Some(rec.final_mass)));
    let max = rec
        .field
        .iter()
        .zip(&rec.wet)
        .filter(|(_, &w)| w)
        .map(|(&c, _)| c)
        .fold(f64::NEG_INFINITY, f64::max);
    q.push(("max".to_string(), Some(max)));
    for (r, tr) in scn.receptors.iter().zip(&rec.receptors) {
        q.push((format!("peak:{}", r.name), Some(tr.peak)));
        if r.threshold.is_some() {
            q.push((format!("arrival:{}", r.name), tr.arrival));
        }
    }
    q
}

/// Runs the study. `on_level` receives each level's index and cell counts before it runs.
pub fn converge(
    scn: &Scenario,
    opts: &ConvergeOptions,
    on_level: &mut dyn FnMut(usize, usize, usize),
) -> Result<ConvergeReport, StudyError> {
    if opts.levels < 3 {
        return Err(StudyError::BadInput(format!(
            "--levels {}: the three-grid procedure needs at least 3 levels",
            opts.levels
        )));
    }
    if opts.ratio < 2 {
        return Err(StudyError::BadInput(format!(
            "--ratio {}: the refinement ratio must be an integer of at least 2",
            opts.ratio
        )));
    }
    let finest = opts.ratio.checked_pow(opts.levels as u32 - 1).filter(|&f| {
        f.checked_mul(f)
            .and_then(|f2| f2.checked_mul(scn.model.grid.cells()))
            .is_some_and(|c| c <= crate::grid::MAX_CELLS)
    });
    let Some(_) = finest else {
        return Err(StudyError::BadInput(format!(
            "--levels {} with --ratio {}: the finest grid would exceed {} cells",
            opts.levels,
            opts.ratio,
            crate::grid::MAX_CELLS
        )));
    };
    let exact = exact_solution(scn);
    let mut notes = Vec::new();
    match &exact {
        Some(e) => notes.push(format!("{} ({})", e.description, e.source)),
        None => notes.push("no exact solution for this scenario: the L1 error is not reported".into()),
    }
    let mut levels = Vec::new();
    let mut per_level: Vec<Vec<(String, Option<f64>)>> = Vec::new();
    for k in 0..opts.levels {
        let factor = opts.ratio.pow(k as u32);
        let s = refine(scn, factor)?;
        let g = s.model.grid;
        on_level(k, g.nx, g.ny);
        let rec = run_scenario(&s, &format!("level {k} ({} x {})", g.nx, g.ny))?;
        let l1 = exact.as_ref().map(|e| {
            let r = e.field(&rec.grid, rec.wet.view(), s.run.end);
            error_norms(rec.field.view(), r.view(), Some(rec.wet.view())).l1
        });
        per_level.push(quantities_of(&rec, l1, &s));
        levels.push(Level {
            nx: g.nx,
            ny: g.ny,
            h: (g.dx * g.dy).sqrt(),
            steps: rec.steps,
            seconds: rec.seconds,
        });
    }
    let names: Vec<String> = per_level[0].iter().map(|(n, _)| n.clone()).collect();
    if let Some(unknown) = opts.quantities.iter().find(|q| !names.contains(q)) {
        return Err(StudyError::BadInput(format!(
            "--quantity {unknown}: not available for this scenario; available are {}",
            names.join(", ")
        )));
    }
    let chosen: Vec<String> = if opts.quantities.is_empty() {
        names
    } else {
        opts.quantities.clone()
    };
    let quantities = chosen
        .into_iter()
        .map(|name| {
            let values: Vec<Option<f64>> = per_level
                .iter()
                .map(|q| q.iter().find(|(n, _)| *n == name).and_then(|(_, v)| *v))
                .collect();
            let triples = (2..levels.len())
                .map(|k| {
                    // Finest first for the procedure.
                    let f = [values[k]?, values[k - 1]?, values[k - 2]?];
                    let h = [levels[k].h, levels[k - 1].h, levels[k - 2].h];
                    Some(gci(f, h, &opts.params))
                })
                .collect();
            QuantityStudy { name, values, triples }
        })
        .collect();
    Ok(ConvergeReport {
        scenario: scn.name.clone(),
        levels,
        quantities,
        notes,
    })
}

fn opt(v: Option<f64>) -> String {
    v.map_or_else(String::new, |x| format!("{x:e}"))
}

/// `converge.csv`: one row per quantity and grid triple:
/// `quantity,levels,h1,h2,h3,f1,f2,f3,p,extrapolated,e_a21,e_ext21,gci_fine21,convergence,note`
/// (grid 1 the finest; empty cells where a number is not meaningful, the reason in `note`).
pub fn converge_csv(report: &ConvergeReport) -> String {
    let mut s =
        String::from("quantity,levels,h1,h2,h3,f1,f2,f3,p,extrapolated,e_a21,e_ext21,gci_fine21,convergence,note\n");
    for q in &report.quantities {
        for (k, t) in q.triples.iter().enumerate() {
            let lv = format!("{}-{}-{}", k + 2, k + 1, k);
            match t {
                Some(g) => s.push_str(&format!(
                    "{},{lv},{:e},{:e},{:e},{:e},{:e},{:e},{},{},{},{},{},{},\"{}\"\n",
                    q.name,
                    g.h[0],
                    g.h[1],
                    g.h[2],
                    g.f[0],
                    g.f[1],
                    g.f[2],
                    opt(g.p),
                    opt(g.extrapolated),
                    opt(g.e_a21),
                    opt(g.e_ext21),
                    opt(g.gci_fine21),
                    g.convergence.word(),
                    g.convergence.explain().replace('"', "'"),
                )),
                None => s.push_str(&format!(
                    "{},{lv},,,,,,,,,,,,undefined,\"the quantity is undefined on a grid of this triple (e.g. the threshold was never reached)\"\n",
                    q.name
                )),
            }
        }
    }
    s
}

/// Writes `converge.csv` and `converge.png` (error against spacing, log-log: the L1 error
/// itself, other quantities as |f - extrapolated value of the finest triple|) into `dir`.
pub fn write_converge(report: &ConvergeReport, dir: &Path) -> Result<Vec<PathBuf>, StudyError> {
    std::fs::create_dir_all(dir).map_err(|e| crate::output::OutputError::io(dir, e))?;
    let p_csv = dir.join("converge.csv");
    write_atomic(&p_csv, converge_csv(report).as_bytes())?;
    let h: Vec<f64> = report.levels.iter().map(|l| l.h).collect();
    let mut data: Vec<(String, Vec<f64>)> = Vec::new();
    for q in &report.quantities {
        let ext = if q.name == "l1" {
            Some(0.0)
        } else {
            q.finest().and_then(|g| g.extrapolated)
        };
        let Some(ext) = ext else { continue };
        let errs: Vec<f64> = q
            .values
            .iter()
            .map(|v| v.map_or(f64::NAN, |v| if q.name == "l1" { v } else { ((v - ext) / ext).abs() }))
            .collect();
        let name = if q.name == "l1" {
            "l1 (vs exact)".to_string()
        } else {
            format!("{} (rel. to extrap.)", q.name)
        };
        data.push((name, errs));
    }
    // Guide slopes p = 1 and p = 2 through the finest point of the first quantity.
    let anchor = data
        .first()
        .and_then(|(_, e)| e.last().copied())
        .filter(|e| e.is_finite() && *e > 0.0);
    let hf = h.last().copied().unwrap_or(1.0);
    let guides: Vec<(String, Vec<f64>)> = anchor
        .map(|a| {
            [1.0, 2.0]
                .iter()
                .map(|&p| (format!("slope {p}"), h.iter().map(|&x| a * (x / hf).powf(p)).collect()))
                .collect()
        })
        .unwrap_or_default();
    let mut chart = Chart::new(
        format!("{}: error against grid spacing", report.scenario),
        Axis::log("h = sqrt(dx dy) [m]"),
        Axis::log("relative error"),
    );
    chart.lines = data
        .iter()
        .map(|(n, y)| Line::new(n.clone(), h.clone(), y.clone()))
        .collect();
    // Each guide its own grey and stroke, so the two slopes can be told apart.
    let guide_style = [([60, 60, 66], Dash::Dashed), ([130, 130, 138], Dash::Dotted)];
    for ((n, y), (colour, dash)) in guides.iter().zip(guide_style) {
        chart.lines.push(
            Line::new(n.clone(), h.clone(), y.clone())
                .colour(colour)
                .dash(dash)
                .markers(false),
        );
    }
    let p_png = dir.join("converge.png");
    chart.write(&p_png)?;
    Ok(vec![p_csv, p_png])
}
