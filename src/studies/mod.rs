//! Scheme studies: running one scenario many times in memory and judging the results.
//!
//! - [`compare`]: every chosen convection scheme on the same scenario against the exact solution
//!   or a refined reference run (`tinct compare`).
//! - [`converge`]: the scenario on successively refined grids, with the grid-convergence index
//!   of Celik et al. (2008) for each quantity (`tinct converge`).
//! - [`exact`]: the exact solutions a scenario may have (return to the initial field after
//!   whole periods of rotation or swirl; the Gaussian puff of Crank 1975).
//! - [`verify`]: the built-in verification suite (`tinct verify`).
//!
//! The helpers here refine a scenario, change its scheme and march it in memory, collecting
//! what the studies need (final field, budget residual, plume moments, receptor peaks and
//! arrivals). Nothing here prints; progress goes to callbacks.

pub mod compare;
pub mod converge;
pub mod exact;
pub mod verify;

use crate::diagnostics::moments::{moments, Moments};
use crate::grid::Grid;
use crate::ops::limiter::Limiter;
use crate::output::OutputError;
use crate::scenario::Scenario;
use crate::step::{Simulation, TimeScheme};
use crate::RunError;
use ndarray::{Array2, ArrayView2, Zip};
use std::ops::ControlFlow;
use std::time::Instant;

/// Why a study did not complete.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StudyError {
    /// The study cannot run as asked (exit code 2).
    #[error("{0}")]
    BadInput(String),
    /// One of its runs failed (exit code 1).
    #[error("run '{label}' failed: {error}")]
    Run {
        /// Which run (scheme, grid level).
        label: String,
        /// What happened.
        error: RunError,
    },
    /// A result file could not be written (exit code 1).
    #[error(transparent)]
    Output(#[from] OutputError),
}

/// One receptor's record over a run, sampled after every step by bilinear interpolation of the
/// cell-centre values (so that the sampling point does not move with the grid in a
/// convergence study).
#[derive(Debug, Clone, PartialEq)]
pub struct ReceptorTrace {
    /// Receptor name.
    pub name: String,
    /// Largest sampled concentration after the start (the initial state is not a result of the
    /// run, so a receptor at the initial peak does not report it).
    pub peak: f64,
    /// Time of the peak, s.
    pub peak_time: f64,
    /// First time the concentration reached the threshold, s, interpolated linearly between
    /// the samples on either side; `None` without a threshold or if never reached.
    pub arrival: Option<f64>,
}

/// What a study keeps of one run.
#[derive(Debug, Clone)]
pub struct RunRecord {
    /// The run's label (scheme name, grid level).
    pub label: String,
    /// The grid it ran on.
    pub grid: Grid,
    /// Water flags, shape (ny, nx), (y, x) order, row 0 south.
    pub wet: Array2<bool>,
    /// The final field, shape (ny, nx), (y, x) order, row 0 south.
    pub field: Array2<f64>,
    /// Signed relative budget residual at the end (DESIGN §3).
    pub mass_error: f64,
    /// Mass in the domain at the end.
    pub final_mass: f64,
    /// Plume moments at the start (after releases at t = 0) and at the end.
    pub moments: (Option<Moments>, Option<Moments>),
    /// Receptor records.
    pub receptors: Vec<ReceptorTrace>,
    /// Steps taken.
    pub steps: u64,
    /// Wall-clock seconds of the marching (not of the set-up).
    pub seconds: f64,
    /// Warnings about the numerical choices.
    pub warnings: Vec<String>,
}

/// `scn` on a grid refined `factor` times along each axis (cell sizes divided by `factor`);
/// a fixed `dt` is divided by `factor` too, so the Courant number is kept. The land image, if
/// any, is resampled to the finer grid as any scenario's would be.
pub fn refine(scn: &Scenario, factor: usize) -> Result<Scenario, StudyError> {
    if factor == 1 {
        return Ok(scn.clone());
    }
    if factor == 0 {
        return Err(StudyError::BadInput("a refinement factor must be at least 1".into()));
    }
    let g = &scn.model.grid;
    let f = factor as f64;
    let mut sets = vec![
        format!("grid.nx={}", g.nx * factor),
        format!("grid.ny={}", g.ny * factor),
        format!("grid.dx={:?}", g.dx / f),
        format!("grid.dy={:?}", g.dy / f),
    ];
    if let Some(dt) = scn.scheme.dt {
        sets.push(format!("scheme.dt={:?}", dt / f));
    }
    let mut out = crate::scenario::parse(&scn.resolved_toml(), &scn.path, &sets)
        .map_err(|e| StudyError::BadInput(format!("the scenario refined {factor} times is not valid: {e}")))?;
    // Keys the resolved text does not carry are copied over.
    out.scheme = crate::step::Scheme {
        dt: out.scheme.dt,
        ..scn.scheme
    };
    Ok(out)
}

/// `scn` with another convection scheme and time scheme. The Courant target is kept when the
/// new time scheme treats convection the same way (explicitly or implicitly) as the scenario's,
/// and otherwise set to the new time scheme's default.
pub fn with_scheme(scn: &Scenario, limiter: Limiter, time: TimeScheme) -> Scenario {
    let mut s = scn.clone();
    s.scheme.limiter = limiter;
    if time != scn.scheme.time {
        s.scheme.time = time;
        if time.implicit_convection() != scn.scheme.time.implicit_convection() {
            s.scheme.courant = time.default_courant();
        }
    }
    s
}

/// Bilinear interpolation of cell-centre values (`field`, shape (ny, nx), (y, x) order) at
/// (x, y); next to land or within half a cell of a side it takes the containing cell's value.
pub fn sample(grid: &Grid, mask: &crate::grid::Mask, field: ArrayView2<f64>, x: f64, y: f64) -> Option<f64> {
    let (ci, cj) = grid.cell_at(x, y)?;
    let fx = (x - grid.x0) / grid.dx - 0.5;
    let fy = (y - grid.y0) / grid.dy - 0.5;
    let (i0, j0) = (fx.floor(), fy.floor());
    let own = field[[cj, ci]];
    if i0 < 0.0 || j0 < 0.0 || i0 as usize + 1 >= grid.nx || j0 as usize + 1 >= grid.ny {
        return Some(own);
    }
    let (i0, j0) = (i0 as usize, j0 as usize);
    if !(mask.is_wet(i0, j0) && mask.is_wet(i0 + 1, j0) && mask.is_wet(i0, j0 + 1) && mask.is_wet(i0 + 1, j0 + 1)) {
        return Some(own);
    }
    let (ax, ay) = (fx - i0 as f64, fy - j0 as f64);
    let v = |i: usize, j: usize| field[[j, i]];
    Some(
        (1.0 - ay) * ((1.0 - ax) * v(i0, j0) + ax * v(i0 + 1, j0))
            + ay * ((1.0 - ax) * v(i0, j0 + 1) + ax * v(i0 + 1, j0 + 1)),
    )
}

/// Marches `scn` to its end in memory and keeps what the studies need.
pub fn run_scenario(scn: &Scenario, label: &str) -> Result<RunRecord, StudyError> {
    let bad = |e: crate::ModelError| StudyError::BadInput(format!("{} ({label}): {e}", scn.path.display()));
    let model = scn.build_model().map_err(bad)?;
    let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
    let mut sim = Simulation::new(model, scn.scheme, c0).map_err(bad)?;
    let grid = sim.model.grid;
    let wet = sim.model.mask.view().to_owned();
    let m0 = moments(&grid, sim.field_view(), Some(wet.view()));
    let mut traces: Vec<ReceptorTrace> = scn
        .receptors
        .iter()
        .map(|r| ReceptorTrace {
            name: r.name.clone(),
            peak: f64::NEG_INFINITY,
            peak_time: 0.0,
            arrival: None,
        })
        .collect();
    let mut last: Vec<(f64, f64)> = Vec::with_capacity(traces.len());
    let observe = |sim: &Simulation, traces: &mut [ReceptorTrace], last: &mut Vec<(f64, f64)>| {
        let first = last.is_empty();
        for (k, (r, tr)) in scn.receptors.iter().zip(traces.iter_mut()).enumerate() {
            let c = sample(&grid, &sim.model.mask, sim.field_view(), r.at.0, r.at.1).unwrap_or(f64::NAN);
            let t = sim.state.t;
            if !first && c > tr.peak {
                tr.peak = c;
                tr.peak_time = t;
            }
            if let (Some(th), None) = (r.threshold, tr.arrival) {
                if c >= th {
                    tr.arrival = Some(if first {
                        t
                    } else {
                        let (t0, c0) = last[k];
                        if c > c0 {
                            t0 + (t - t0) * ((th - c0) / (c - c0)).clamp(0.0, 1.0)
                        } else {
                            t
                        }
                    });
                }
            }
            if first {
                last.push((t, c));
            } else {
                last[k] = (t, c);
            }
        }
    };
    observe(&sim, &mut traces, &mut last);
    let started = Instant::now();
    sim.advance_to(scn.run.end, |s| {
        observe(s, &mut traces, &mut last);
        ControlFlow::Continue(())
    })
    .map_err(|error| StudyError::Run {
        label: label.to_string(),
        error,
    })?;
    let seconds = started.elapsed().as_secs_f64();
    let row = sim.budget_row();
    let field = sim.field();
    let m1 = moments(&grid, field.view(), Some(wet.view()));
    Ok(RunRecord {
        label: label.to_string(),
        grid,
        wet,
        field,
        mass_error: row.residual,
        final_mass: row.mass,
        moments: (m0, m1),
        receptors: traces,
        steps: sim.state.step,
        seconds,
        warnings: sim.warnings(),
    })
}

/// Averages a field on a grid refined `r` times (shape (ny r, nx r)) onto the (ny, nx) grid,
/// over the water cells of each r by r block (a block without water gives 0).
pub fn restrict(fine: ArrayView2<f64>, fine_wet: ArrayView2<bool>, r: usize) -> Array2<f64> {
    Zip::from(fine.exact_chunks((r, r)))
        .and(fine_wet.exact_chunks((r, r)))
        .map_collect(|c, w| {
            let (mut s, mut n) = (0.0, 0usize);
            for (&c, _) in c.iter().zip(w).filter(|(_, &w)| w) {
                s += c;
                n += 1;
            }
            if n > 0 {
                s / n as f64
            } else {
                0.0
            }
        })
}

/// Bytes a run of `cells` cells is expected to hold (fields, face velocities, scratch; the
/// implicit steppers add the matrix and solver levels). An estimate, for scheduling only.
pub fn run_memory(cells: usize, time: TimeScheme) -> u64 {
    let per_cell: u64 = if time.is_implicit() { 96 } else { 20 };
    cells as u64 * 8 * per_cell
}

/// Memory the studies may use for concurrent runs: half of what the system reports available
/// (Linux `/proc/meminfo`), or 1 GiB when that cannot be read.
pub fn memory_budget() -> u64 {
    let avail = std::fs::read_to_string("/proc/meminfo").ok().and_then(|t| {
        t.lines()
            .find(|l| l.starts_with("MemAvailable:"))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<u64>().ok())
            .map(|kib| kib * 1024)
    });
    avail.map_or(1 << 30, |a| a / 2)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Regression: a receptor at the initial peak reported the initial value as its peak at
    /// t = 0, so `converge` saw the same number on every grid (observed order 1.000 exactly).
    #[test]
    fn receptor_peaks_exclude_the_initial_state() {
        let text = crate::scenario::example("rotating-cone").unwrap();
        let sets = ["receptor[0].at=[16.0,24.0]".to_string(), "run.end=30".to_string()];
        let scn = crate::scenario::parse(text, std::path::Path::new("x.toml"), &sets).unwrap();
        let initial = scn.initial.value_at(16.0, 24.0);
        let rec = run_scenario(&scn, "test").unwrap();
        let tr = &rec.receptors[0];
        assert!(tr.peak_time > 0.0, "peak at t = {}", tr.peak_time);
        assert!(tr.peak < initial, "peak {} equals the initial {initial}", tr.peak);
    }

    #[test]
    fn restriction_averages_water_cells() {
        let fine = ndarray::array![[1.0, 2.0, 5.0, 6.0], [3.0, 4.0, 7.0, 8.0]];
        let wet = Array2::from_elem((2, 4), true);
        assert_eq!(restrict(fine.view(), wet.view(), 2), ndarray::array![[2.5, 6.5]]);
        let wet = ndarray::array![[true, false, true, true], [true, false, true, true]];
        assert_eq!(restrict(fine.view(), wet.view(), 2)[[0, 0]], 2.0);
    }

    #[test]
    fn bilinear_sampling_is_exact_for_a_plane() {
        let g = Grid::new(10, 8, 1.0, 2.0, 0.0, 0.0).unwrap();
        let mask = crate::grid::Mask::all_water(&g);
        let c = crate::field::fill_from(&g, &mask, |x, y| 2.0 * x - y);
        let v = sample(&g, &mask, g.interior_view(&c), 4.3, 7.1).unwrap();
        assert!((v - (8.6 - 7.1)).abs() < 1e-12, "{v}");
        assert!(sample(&g, &mask, g.interior_view(&c), -1.0, 1.0).is_none());
    }
}
