//! `summary.json`: the facts of a run in one document.

use super::receptors::ReceptorStats;
use crate::budget::BudgetRow;
use crate::diagnostics::advice::Advice;
use crate::diagnostics::moments::{effective_diffusivity, moments, Moments};
use crate::grid::Grid;
use crate::initial::Initial;
use crate::ops::boundary::{Side, SideKind};
use crate::ops::sources::Release;
use crate::scenario::Scenario;
use crate::step::Simulation;
use crate::RunError;
use ndarray::ArrayView2;

/// The numerical choices as run.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SchemeFacts {
    /// Convection scheme name.
    pub convection: String,
    /// Time scheme.
    pub time: String,
    /// SSP Runge–Kutta stages (explicit convection).
    pub stages: u8,
    /// Implicit weight of the theta method (0 for explicit, 1 for backward Euler).
    pub theta: f64,
    /// Linear-solver tolerance (implicit schemes).
    pub tolerance: Option<f64>,
    /// Target Courant number of the automatic step.
    pub courant: f64,
    /// The fixed step, if one was given.
    pub dt: Option<f64>,
    /// Linear solver of the implicit steps: `transform` (exact, by fast cosine/sine
    /// transforms), `multigrid_cg` or `multigrid_bicgstab`; null for explicit runs.
    pub linear_solver: Option<String>,
}

/// The plume's effective diffusivity, measured from the growth of its second moments between
/// two frames (for a single release the variance grows as `2 K t` along each axis; Taylor 1921,
/// common practice), beside the physical one. It includes the scheme's numerical diffusion.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct EffectiveDiffusivity {
    /// Measured along x, m2/s.
    pub kx: f64,
    /// Measured along y, m2/s.
    pub ky: f64,
    /// Physical diffusivity along x, m2/s.
    pub physical_kx: f64,
    /// Physical diffusivity along y, m2/s.
    pub physical_ky: f64,
    /// First frame time used, s.
    pub from_time: f64,
    /// Last frame time used, s.
    pub to_time: f64,
    /// How the frames were chosen.
    pub note: String,
}

/// The flushing figures of a run from its budget rows, or why there are none: only a basin
/// that starts with tracer (any initial field) and has no sources is measured.
pub fn flushing_of(
    scn: &Scenario,
    model: &crate::model::Model,
    rows: &[BudgetRow],
) -> (Option<crate::diagnostics::flushing::Flushing>, Option<String>) {
    if !scn.model.sources.is_empty() {
        return (
            None,
            Some("the run has sources: flushing is measured for a basin that starts with tracer and has none".into()),
        );
    }
    if matches!(scn.initial, Initial::Zero) {
        return (None, Some("the basin starts without tracer".into()));
    }
    let samples: Vec<(f64, f64)> = rows.iter().map(|r| (r.time, r.mass)).collect();
    let prism = model.flow.spec().tide.filter(|t| t.amplitude > 0.0).and_then(|t| {
        let r = model.flow.report();
        r.prism.map(|p| (r.volume, t.period, p, t.return_flow))
    });
    match crate::diagnostics::flushing::flushing(&samples, prism) {
        Some(f) => (Some(f), None),
        None => (
            None,
            Some("no tracer mass at the start, or fewer than two logged rows".into()),
        ),
    }
}

/// Why the moment method cannot measure an effective diffusivity for `scn` (`None` when the
/// tracer comes from one release: one instantaneous source over a zero initial field, or a
/// Gaussian or cone initial field without sources).
pub fn single_release_refusal(scn: &Scenario) -> Option<String> {
    let instant = |s: &crate::ops::sources::SourceSpec| matches!(s.release, Release::Instant { .. });
    match (&scn.initial, scn.model.sources.as_slice()) {
        (Initial::Zero, [s]) if instant(s) => None,
        (Initial::Gaussian { .. } | Initial::Cone { .. }, []) => None,
        (Initial::Zero, []) => Some("no tracer is released".to_string()),
        _ => Some(
            "not a single release (measured only for one instantaneous source, or a Gaussian or cone initial field without sources)"
                .to_string(),
        ),
    }
}

/// Follows a single release's moments at frame times and keeps the first and last frames where
/// the plume (centroid plus or minus three standard deviations) is away from the sides.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct PlumeTrack {
    /// Why no measurement is possible (not a single release), if so.
    refused: Option<String>,
    first: Option<(f64, Moments)>,
    last: Option<(f64, Moments)>,
    frames_touching: usize,
}

impl PlumeTrack {
    /// A tracker for `scn`: measures only when the tracer comes from one release (one
    /// instantaneous source over a zero initial field, or a Gaussian or cone initial field
    /// without sources).
    pub fn new(scn: &Scenario) -> Self {
        let refused = single_release_refusal(scn);
        Self {
            refused,
            first: None,
            last: None,
            frames_touching: 0,
        }
    }

    /// Records the frame at time `t` (`field` and `wet` of shape (ny, nx), row 0 south).
    pub fn observe(&mut self, grid: &Grid, t: f64, field: ArrayView2<f64>, wet: ArrayView2<bool>) {
        if self.refused.is_some() {
            return;
        }
        let Some(m) = moments(grid, field, Some(wet)) else {
            return;
        };
        let (sx, sy) = (3.0 * m.var_x.sqrt(), 3.0 * m.var_y.sqrt());
        let inside = m.x - sx >= grid.x0
            && m.x + sx <= grid.x0 + grid.lx()
            && m.y - sy >= grid.y0
            && m.y + sy <= grid.y0 + grid.ly();
        if !inside {
            self.frames_touching += 1;
            return;
        }
        if self.first.is_none() {
            self.first = Some((t, m));
        }
        self.last = Some((t, m));
    }

    /// The measurement, or why there is none.
    pub fn finish(&self, kx: f64, ky: f64) -> (Option<EffectiveDiffusivity>, Option<String>) {
        if let Some(r) = &self.refused {
            return (None, Some(r.clone()));
        }
        match (self.first, self.last) {
            (Some((t0, a)), Some((t1, b))) if t1 > t0 => {
                let (ex, ey) = effective_diffusivity(&a, &b, t1 - t0);
                let note = if self.frames_touching > 0 {
                    format!(
                        "variance growth between the first and last frames where the plume (centroid +- 3 standard deviations) is inside the grid; {} frame(s) where it reached a side were skipped",
                        self.frames_touching
                    )
                } else {
                    "variance growth between the first and last frames with the plume (centroid +- 3 standard deviations) inside the grid".to_string()
                };
                (
                    Some(EffectiveDiffusivity {
                        kx: ex,
                        ky: ey,
                        physical_kx: kx,
                        physical_ky: ky,
                        from_time: t0,
                        to_time: t1,
                        note,
                    }),
                    None,
                )
            }
            _ => (
                None,
                Some("fewer than two frames with the plume away from the sides".to_string()),
            ),
        }
    }
}

/// What crossed one side over the run.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SideBudget {
    /// `west`, `east`, `south` or `north`.
    pub side: String,
    /// The side condition.
    pub kind: String,
    /// Mass carried in.
    pub inflow: f64,
    /// Mass carried out.
    pub outflow: f64,
}

/// Everything `summary.json` holds.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RunSummary {
    /// Program and version.
    pub program: String,
    /// Scenario name.
    pub scenario: String,
    /// `completed`, `diverged`, `not_converged` or `interrupted` (a signal stopped the run).
    pub status: String,
    /// Why the run stopped early, if it did.
    pub error: Option<String>,
    /// Cells in the grid.
    pub cells: usize,
    /// Water cells.
    pub wet_cells: usize,
    /// Steps taken.
    pub steps: u64,
    /// Simulated time reached, s.
    pub simulated_time: f64,
    /// Smallest step, s.
    pub dt_min: f64,
    /// Largest step, s.
    pub dt_max: f64,
    /// Wall-clock time of the time loop (frames and logs included), s.
    pub wall_seconds: f64,
    /// Of `wall_seconds`, the time spent writing outputs (fields, logs, pictures, report).
    pub output_seconds: f64,
    /// Cell updates per wall-clock second of marching (outputs excluded).
    pub cell_updates_per_second: f64,
    /// Largest |budget residual| over the logged rows.
    pub max_abs_residual: f64,
    /// Smallest concentration over the logged rows.
    pub min_ever: f64,
    /// Largest concentration over the logged rows.
    pub max_ever: f64,
    /// Mass at the start.
    pub initial_mass: f64,
    /// Mass at the end.
    pub final_mass: f64,
    /// Mass released by sources.
    pub added: f64,
    /// Mass carried in through the sides.
    pub inflow: f64,
    /// Mass carried out through the sides.
    pub outflow: f64,
    /// Mass removed by decay.
    pub decayed: f64,
    /// Mass carried in and out through each side that passes flow or a Dirichlet value.
    pub sides: Vec<SideBudget>,
    /// Largest discrete divergence of the base flow, 1/s.
    pub max_flow_divergence: f64,
    /// Discharges, residence time V/Q, tidal prism, cell speeds, the largest cell imbalance
    /// and whether a divergent flow was projected.
    pub flow: crate::flow::FlowReport,
    /// Numerical choices.
    pub scheme: SchemeFacts,
    /// Frames written.
    pub frames: usize,
    /// Linear-solver iterations over the run (implicit schemes).
    pub solver_iterations: usize,
    /// Deferred-correction iterations over the run (implicit convection with a limiter).
    pub corrections: usize,
    /// Warnings about the numerical choices.
    pub warnings: Vec<String>,
    /// Advice about the numerical choices (the same as `tinct check` gives).
    pub advice: Vec<Advice>,
    /// The plume's effective diffusivity against the physical one (single releases only).
    pub effective_diffusivity: Option<EffectiveDiffusivity>,
    /// Why `effective_diffusivity` is null, if it is.
    pub effective_diffusivity_reason: Option<String>,
    /// Flushing of a basin that starts with tracer and has no sources: e-folding time, fitted
    /// rate, and the tidal-prism estimate with a tide.
    pub flushing: Option<crate::diagnostics::flushing::Flushing>,
    /// Why `flushing` is null, if it is.
    pub flushing_reason: Option<String>,
    /// Per-receptor statistics.
    pub receptors: Vec<ReceptorStats>,
    /// Per distinct receptor threshold: the largest area above it and when, the area ever
    /// above, the longest time one cell spent above it (`fields.nc` `hours_above` has the map).
    pub exceedance: Vec<super::exceedance::ExceedanceFigure>,
    /// Files of the run, relative to its folder.
    pub files: Vec<String>,
    /// The particle run beside the grid run and its comparison (`run.particles` or `tinct
    /// particles` on a completed run), else absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub particles: Option<super::particles::ParticleSummary>,
    /// The caution that goes with every result.
    pub caution: String,
}

impl RunSummary {
    /// Gathers the summary of a run.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        scn: &Scenario,
        sim: &Simulation,
        rows: &[BudgetRow],
        receptors: &[ReceptorStats],
        dt_range: (f64, f64),
        wall_seconds: f64,
        frames: usize,
        failure: Option<&RunError>,
        iterations: (usize, usize),
    ) -> Self {
        let last = rows.last().copied().unwrap_or_else(|| sim.budget_row());
        let cells = sim.model.grid.cells();
        let steps = sim.state.step;
        let mut files: Vec<String> = [
            "scenario.toml",
            "budget.csv",
            "receptors.csv",
            "summary.json",
            "fields.nc",
            "envelope.png",
        ]
        .map(String::from)
        .to_vec();
        files.extend((0..frames).map(|k| format!("frames/{k:05}.png")));
        if scn.output.animation {
            files.push("animation.gif".into());
        }
        Self {
            program: format!("tinct {}", env!("CARGO_PKG_VERSION")),
            scenario: scn.name.clone(),
            status: match failure {
                None => "completed",
                Some(RunError::Diverged { .. } | RunError::NonFinite { .. }) => "diverged",
                Some(_) => "not_converged",
            }
            .into(),
            error: failure.map(|e| e.to_string()),
            cells,
            wet_cells: sim.model.mask.wet_count(),
            steps,
            simulated_time: sim.state.t,
            dt_min: if steps > 0 { dt_range.0 } else { 0.0 },
            dt_max: dt_range.1,
            wall_seconds,
            output_seconds: 0.0,
            cell_updates_per_second: if wall_seconds > 0.0 {
                cells as f64 * steps as f64 / wall_seconds
            } else {
                0.0
            },
            // NaN-aware: a NaN residual makes the maximum NaN (f64::max would drop it).
            max_abs_residual: rows.iter().map(|r| r.residual.abs()).fold(0.0, |a, r| {
                if a.is_nan() || r.is_nan() {
                    f64::NAN
                } else {
                    a.max(r)
                }
            }),
            min_ever: rows.iter().map(|r| r.min).fold(f64::INFINITY, f64::min),
            max_ever: rows.iter().map(|r| r.max).fold(f64::NEG_INFINITY, f64::max),
            initial_mass: sim.budget.mass0,
            final_mass: last.mass,
            added: last.added,
            inflow: last.inflow,
            outflow: last.outflow,
            decayed: last.decayed,
            sides: Side::ALL
                .iter()
                .filter(|&&side| {
                    matches!(
                        sim.model.boundaries.get(side),
                        SideKind::Open { .. } | SideKind::Fixed { .. }
                    )
                })
                .map(|&side| SideBudget {
                    side: side.name().into(),
                    kind: sim.model.boundaries.get(side).to_string(),
                    inflow: sim.budget.inflow_through(side),
                    outflow: sim.budget.outflow_through(side),
                })
                .collect(),
            max_flow_divergence: sim.model.flow.max_divergence(),
            flow: sim.model.flow.report().clone(),
            scheme: SchemeFacts {
                convection: scn.scheme.limiter.name().into(),
                time: scn.scheme.time.name().into(),
                stages: scn.scheme.stages,
                theta: scn.scheme.effective_theta(),
                tolerance: scn.scheme.time.is_implicit().then_some(scn.scheme.tolerance),
                courant: scn.scheme.courant,
                dt: scn.scheme.dt,
                linear_solver: sim.linear_solver().map(|m| m.name().to_string()),
            },
            frames,
            solver_iterations: iterations.0,
            corrections: iterations.1,
            warnings: sim.warnings(),
            advice: Vec::new(),
            effective_diffusivity: None,
            effective_diffusivity_reason: None,
            flushing: None,
            flushing_reason: None,
            receptors: receptors.to_vec(),
            exceedance: Vec::new(),
            files,
            particles: None,
            caution: super::CAUTION.into(),
        }
    }
}
