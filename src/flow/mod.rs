//! Prescribed velocity fields on the staggered C-grid.
//!
//! `u` lives on x-faces (the west face of cell (i, j) at padded index `idx(i, j)`, the east face
//! of the last column at `idx(nx, j)`), `v` on y-faces (the south face of cell (i, j) at
//! `idx(i, j)`). Analytic flows are evaluated through a stream function at cell corners,
//! `u = dpsi/dy`, `v = -dpsi/dx` as differences, so the discrete divergence of every cell is
//! zero to round-off. Flow through openings comes from a potential-flow solve
//! (the `potential` module), and a prescribed or file flow that land or walls make divergent is
//! projected onto a divergence-free one around the land (`project`, default on).
//!
//! With a uniform depth the face arrays hold velocities (m/s); with a depth field or a tidal
//! level they hold transports `h_f u_f` (m2/s, [`Flow::is_transport`]). The time dependence is a
//! scalar factor on a steady base field ([`Flow::factor`]), plus, with a tidal amplitude, the
//! filling field times the rate of rise of the level, or the linear interpolation between the
//! records of a file flow ([`Flow::faces_at`]).

mod assemble;
pub mod file;
mod openings;
pub(crate) mod potential;

pub use assemble::FaceDepth;
pub use openings::Opening;

use crate::error::{finite, invalid, positive, ModelError};
use crate::grid::Grid;
use std::f64::consts::PI;

/// The flow kinds.
#[derive(Debug, Clone, PartialEq)]
pub enum FlowKind {
    /// Constant velocity (u, v), m/s.
    Uniform {
        /// Velocity along x, m/s.
        u: f64,
        /// Velocity along y, m/s.
        v: f64,
    },
    /// Solid-body rotation about `centre`, counter-clockwise, one turn per `period` seconds.
    Rotation {
        /// Centre of rotation, m.
        centre: (f64, f64),
        /// Time for one turn, s.
        period: f64,
    },
    /// Time-reversing deformation of LeVeque (1996) on the grid's rectangle:
    /// psi = (U Ly / pi) sin^2(pi xi) sin^2(pi eta) cos(pi t / T), xi and eta the position
    /// scaled to the unit square.
    Swirl {
        /// T, s: the field reverses at T/2 and the tracer returns home at T.
        period: f64,
        /// U, m/s.
        speed: f64,
    },
    /// The swirl's base field held steady: one counter-clockwise cell filling the rectangle,
    /// psi = (U Ly / pi) sin^2(pi xi) sin^2(pi eta).
    Vortex {
        /// U, m/s.
        speed: f64,
    },
    /// Potential flow through openings in the sides (`[[flow.opening]]`).
    Openings(Vec<Opening>),
    /// Cell-centre velocities read from a CSV or NetCDF file, linear in time between records.
    File(FileFlow),
}

/// A flow file and what was read from it.
#[derive(Debug, Clone, PartialEq)]
pub struct FileFlow {
    /// The file, as resolved against the scenario file.
    pub path: std::path::PathBuf,
    /// Its records.
    pub data: std::sync::Arc<file::FlowFile>,
}

/// An optional tide: the factor `cos(2 pi t / period + phase)` on the base field and, with an
/// amplitude, the level `eta = amplitude sin(2 pi t / period + phase)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tide {
    /// Tidal period, s.
    pub period: f64,
    /// Phase, radians.
    pub phase: f64,
    /// Amplitude of the level, m (0: no rise and fall).
    pub amplitude: f64,
    /// Return-flow factor b (0 to 1): the fraction of the ebb's water that comes back on the
    /// next flood, for the tidal-prism flushing estimate only.
    pub return_flow: f64,
}

impl Tide {
    /// The largest rate of rise of the level, `amplitude 2 pi / period`, m/s.
    pub fn peak_rate(&self) -> f64 {
        self.amplitude * 2.0 * PI / self.period
    }
}

/// What the user asks for: a kind, an optional tide, and whether a divergent field is
/// projected.
#[derive(Debug, Clone, PartialEq)]
pub struct FlowSpec {
    /// The base field.
    pub kind: FlowKind,
    /// Tidal modulation.
    pub tide: Option<Tide>,
    /// Remove a discrete divergence above [`DIVERGENCE_TOLERANCE`] of the largest face flux by
    /// a projection around land (default true).
    pub project: bool,
}

/// Relative divergence (worst cell over largest face discharge) above which a prescribed flow
/// is projected, or reported when projection is off.
pub const DIVERGENCE_TOLERANCE: f64 = 1e-6;

impl FlowSpec {
    /// A steady uniform flow.
    pub fn uniform(u: f64, v: f64) -> Self {
        Self::steady(FlowKind::Uniform { u, v })
    }

    /// A steady flow of `kind`, projected when divergent.
    pub fn steady(kind: FlowKind) -> Self {
        Self {
            kind,
            tide: None,
            project: true,
        }
    }

    /// Checks every number.
    pub fn validate(&self) -> Result<(), ModelError> {
        match &self.kind {
            FlowKind::Uniform { u, v } => {
                finite("flow.velocity[0]", *u)?;
                finite("flow.velocity[1]", *v)?;
            }
            FlowKind::Rotation { centre, period } => {
                finite("flow.centre[0]", centre.0)?;
                finite("flow.centre[1]", centre.1)?;
                positive("flow.period", *period)?;
            }
            FlowKind::Swirl { period, speed } => {
                positive("flow.period", *period)?;
                finite("flow.speed", *speed)?;
            }
            FlowKind::Vortex { speed } => {
                finite("flow.speed", *speed)?;
            }
            FlowKind::Openings(_) | FlowKind::File(_) => {}
        }
        if let Some(t) = self.tide {
            positive("flow.tide.period", t.period)?;
            finite("flow.tide.phase", t.phase)?;
            if !(t.amplitude.is_finite() && t.amplitude >= 0.0) {
                return Err(invalid("flow.tide.amplitude", t.amplitude, "a level amplitude >= 0 m"));
            }
            if !(0.0..1.0).contains(&t.return_flow) {
                return Err(invalid(
                    "flow.tide.return_flow",
                    t.return_flow,
                    "a fraction from 0 up to (not including) 1",
                ));
            }
            if t.amplitude > 0.0 && !matches!(self.kind, FlowKind::Openings(_)) {
                return Err(invalid(
                    "flow.tide.amplitude",
                    t.amplitude,
                    "0 unless flow.kind = \"openings\" (the level rises and falls through the openings)",
                ));
            }
        }
        Ok(())
    }

    /// Tidal amplitude, m (0 without one).
    pub fn amplitude(&self) -> f64 {
        self.tide.map_or(0.0, |t| t.amplitude)
    }
}

/// Facts about a flow for `check` and `summary.json`.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FlowReport {
    /// Largest cell's net discharge over the largest face discharge before any projection
    /// (0 for divergence-free fields).
    pub divergence: f64,
    /// Whether the field was projected onto a divergence-free one.
    pub projected: bool,
    /// Largest cell imbalance of the final field relative to the total discharge (openings) or
    /// the largest face discharge (other kinds).
    pub imbalance: f64,
    /// Smallest and largest face speed of the base field at full strength, m/s.
    pub speed: (f64, f64),
    /// Sum of the openings' inflows (through-flow), m3/s.
    pub discharge: f64,
    /// Water volume at mean level, m3.
    pub volume: f64,
    /// Wet area, m2.
    pub area: f64,
    /// V/Q, s (openings with through-flow).
    pub residence: Option<f64>,
    /// Tidal prism 2 amplitude A, m3 (with a tidal amplitude).
    pub prism: Option<f64>,
}

/// Face arrays of a flow on a grid, with its time dependence.
#[derive(Debug, Clone)]
pub struct Flow {
    /// Base x-velocity (or transport) on west faces, padded layout.
    pub u: Vec<f64>,
    /// Base y-velocity (or transport) on south faces, padded layout.
    pub v: Vec<f64>,
    /// Transport per unit rate of rise of the level (m2/s per m/s), with a tidal amplitude.
    fill: Option<(Vec<f64>, Vec<f64>)>,
    /// Time records of a file flow that changes in time: (time, u, v); empty otherwise.
    records: Vec<(f64, Vec<f64>, Vec<f64>)>,
    /// `Some(T)` for the time-reversed copy of [`Flow::reversed`]: its time `tau` is the
    /// original's `T - tau`.
    reverse: Option<f64>,
    transport: bool,
    spec: FlowSpec,
    max_divergence: f64,
    courant_rate: f64,
    report: FlowReport,
}

impl Flow {
    /// The flow as specified.
    pub fn spec(&self) -> &FlowSpec {
        &self.spec
    }

    /// Scalar factor on the base field at time `t`: the swirl's `cos(pi t/T)` times the tide's
    /// `cos(2 pi t/period + phase)`.
    #[inline]
    pub fn factor(&self, t: f64) -> f64 {
        let t = self.reverse.map_or(t, |end| end - t);
        let mut f = 1.0;
        if let FlowKind::Swirl { period, .. } = self.spec.kind {
            f *= (PI * t / period).cos();
        }
        if let Some(tide) = self.spec.tide {
            f *= (2.0 * PI * t / tide.period + tide.phase).cos();
        }
        f
    }

    /// Largest |factor| over time (1: every factor here is a cosine).
    pub fn max_factor(&self) -> f64 {
        1.0
    }

    /// The tidal level `eta(t) = amplitude sin(2 pi t/period + phase)`, m (0 without one).
    #[inline]
    pub fn level(&self, t: f64) -> f64 {
        let t = self.reverse.map_or(t, |end| end - t);
        match self.spec.tide {
            Some(tide) if tide.amplitude > 0.0 => tide.amplitude * (2.0 * PI * t / tide.period + tide.phase).sin(),
            _ => 0.0,
        }
    }

    /// Whether the face arrays hold transports `h_f u_f` (depth field or tidal level) rather
    /// than velocities.
    pub fn is_transport(&self) -> bool {
        self.transport
    }

    /// Whether the face values change other than by a scalar factor (tidal filling, file
    /// records), so that a stepper must form them with [`Flow::faces_at`].
    pub fn has_fill(&self) -> bool {
        self.fill.is_some() || !self.records.is_empty()
    }

    /// Face values at time `t` with the level rising at `rate` m/s: the base (or the records
    /// interpolated linearly in time, held beyond the ends) times the factor, plus `rate` times
    /// the filling field.
    pub fn faces_at(&self, t: f64, rate: f64, u: &mut [f64], v: &mut [f64]) {
        let f = self.factor(t);
        if !self.records.is_empty() {
            let t = self.reverse.map_or(t, |end| end - t);
            let r = &self.records;
            let k = r.partition_point(|x| x.0 <= t).clamp(1, r.len() - 1);
            let (t0, t1) = (r[k - 1].0, r[k].0);
            let w = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
            let w = if w.is_nan() { 0.0 } else { w };
            for (o, (a, b)) in u.iter_mut().zip(r[k - 1].1.iter().zip(&r[k].1)) {
                *o = f * ((1.0 - w) * a + w * b);
            }
            for (o, (a, b)) in v.iter_mut().zip(r[k - 1].2.iter().zip(&r[k].2)) {
                *o = f * ((1.0 - w) * a + w * b);
            }
            return;
        }
        match &self.fill {
            Some((fu, fv)) => {
                for ((o, b), q) in u.iter_mut().zip(&self.u).zip(fu) {
                    *o = f * b + rate * q;
                }
                for ((o, b), q) in v.iter_mut().zip(&self.v).zip(fv) {
                    *o = f * b + rate * q;
                }
            }
            None => {
                for (o, b) in u.iter_mut().zip(&self.u) {
                    *o = f * b;
                }
                for (o, b) in v.iter_mut().zip(&self.v) {
                    *o = f * b;
                }
            }
        }
    }

    /// Writes the filling field (transport per unit rate of rise, m2/s per m/s) into `u`, `v`;
    /// zeros without a tidal level.
    pub fn fill_into(&self, u: &mut [f64], v: &mut [f64]) {
        match &self.fill {
            Some((fu, fv)) => {
                u.copy_from_slice(fu);
                v.copy_from_slice(fv);
            }
            None => {
                u.fill(0.0);
                v.fill(0.0);
            }
        }
    }

    /// Largest per-cell `|div u|` of the base field, 1/s (round-off for stream-function and
    /// projected flows; non-zero where walls or land cut an unprojected through-flow).
    pub fn max_divergence(&self) -> f64 {
        self.max_divergence
    }

    /// Largest per-cell `max|u|/dx + max|v|/dy` of the base field, 1/s: Courant number = this
    /// times dt times |factor| (with a tidal level, a bound over the tide at low water).
    pub fn courant_rate(&self) -> f64 {
        self.courant_rate
    }

    /// Whether every face velocity is zero.
    pub fn is_still(&self) -> bool {
        self.courant_rate == 0.0
    }

    /// Whether the base field is steady (no swirl reversal, no tide, no file records).
    pub fn is_steady(&self) -> bool {
        self.spec.tide.is_none() && !matches!(self.spec.kind, FlowKind::Swirl { .. }) && self.records.is_empty()
    }

    /// Divergence, discharge, speed, volume, residence and prism figures.
    pub fn report(&self) -> &FlowReport {
        &self.report
    }

    /// The flow run backward from time `end`: at time `tau` its discharge is minus this
    /// flow's at `end - tau` and its level this flow's at `end - tau` (the base field and the
    /// file records change sign; the filling field does not, because the level's rate of rise
    /// changes sign with time). The flow of the adjoint problem (see `crate::adjoint`).
    pub fn reversed(&self, end: f64) -> Flow {
        let mut r = self.clone();
        let neg = |x: &mut Vec<f64>| x.iter_mut().for_each(|v| *v = -*v);
        neg(&mut r.u);
        neg(&mut r.v);
        for (_, u, v) in r.records.iter_mut() {
            neg(u);
            neg(v);
        }
        // Reversing a reversed flow about the same end gives the original back; about another
        // end it would be a shift in time, which no caller needs.
        r.reverse = match self.reverse {
            None => Some(end),
            Some(e) => {
                assert!(e == end, "a reversed flow can only be reversed again about its own end");
                None
            }
        };
        r
    }
}

/// Sets face velocities from a stream function given at corner (i, j), i in 0..=nx,
/// j in 0..=ny (corner (i, j) at (x0 + i dx, y0 + j dy)).
pub fn from_stream_function(grid: &Grid, u: &mut [f64], v: &mut [f64], psi: impl Fn(usize, usize) -> f64) {
    let (nx, ny) = (grid.nx, grid.ny);
    let corners: Vec<f64> = (0..=ny)
        .flat_map(|j| (0..=nx).map(move |i| (i, j)))
        .map(|(i, j)| psi(i, j))
        .collect();
    let at = |i: usize, j: usize| corners[j * (nx + 1) + i];
    for j in 0..ny {
        for i in 0..=nx {
            u[grid.idx(i as isize, j as isize)] = (at(i, j + 1) - at(i, j)) / grid.dy;
        }
    }
    for j in 0..=ny {
        for i in 0..nx {
            v[grid.idx(i as isize, j as isize)] = -(at(i + 1, j) - at(i, j)) / grid.dx;
        }
    }
}

/// Largest `|(u_e - u_w)/dx + (v_n - v_s)/dy|` over interior cells, 1/s.
pub fn max_divergence(grid: &Grid, u: &[f64], v: &[f64]) -> f64 {
    let s = grid.stride();
    let mut worst = 0.0f64;
    for j in 0..grid.ny {
        let p0 = grid.idx(0, j as isize);
        for p in p0..p0 + grid.nx {
            let d = (u[p + 1] - u[p]) / grid.dx + (v[p + s] - v[p]) / grid.dy;
            worst = worst.max(d.abs());
        }
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::Mask;
    use crate::ops::boundary::Boundaries;
    use crate::ops::boundary::SideKind;

    fn grid() -> Grid {
        Grid::new(40, 30, 2.5, 2.0, -50.0, 10.0).unwrap()
    }

    #[test]
    fn stream_function_flows_are_divergence_free_to_round_off() {
        let g = grid();
        let m = Mask::all_water(&g);
        let b = Boundaries::uniform(SideKind::Open { value: 0.0 });
        for kind in [
            FlowKind::Rotation {
                centre: (0.0, 40.0),
                period: 600.0,
            },
            FlowKind::Swirl {
                period: 5.0,
                speed: 1.0,
            },
        ] {
            let f = Flow::new(FlowSpec::steady(kind.clone()), &g, &m, &b).unwrap();
            assert!(
                f.max_divergence() < 1e-14 * f.courant_rate().max(1.0),
                "{kind:?}: {}",
                f.max_divergence()
            );
            assert!(f.courant_rate() > 0.0);
        }
    }

    #[test]
    fn rotation_is_counter_clockwise_at_the_right_speed() {
        let g = Grid::new(100, 100, 1.0, 1.0, 0.0, 0.0).unwrap();
        let m = Mask::all_water(&g);
        let b = Boundaries::uniform(SideKind::Open { value: 0.0 });
        let period = 628.0;
        let f = Flow::new(
            FlowSpec {
                kind: FlowKind::Rotation {
                    centre: (50.0, 50.0),
                    period,
                },
                tide: None,
                project: true,
            },
            &g,
            &m,
            &b,
        )
        .unwrap();
        // West face of cell (80, 49) is at (80, 49.5): u = -w (y - yc) = 0.5 w; south face of
        // cell (79, 50) at (79.5, 50): v = w (x - xc) = 29.5 w.
        let w = 2.0 * PI / period;
        assert!((f.u[g.idx(80, 49)] - 0.5 * w).abs() < 1e-12);
        assert!((f.v[g.idx(79, 50)] - 29.5 * w).abs() < 1e-12);
    }

    #[test]
    fn walls_and_land_zero_the_normal_velocity() {
        let g = Grid::new(10, 10, 1.0, 1.0, 0.0, 0.0).unwrap();
        let m = Mask::all_water(&g)
            .with_land(&g, |x, y| (4.0..6.0).contains(&x) && (4.0..6.0).contains(&y))
            .unwrap();
        let unprojected = FlowSpec {
            project: false,
            ..FlowSpec::uniform(1.0, 0.5)
        };
        let f = Flow::new(unprojected, &g, &m, &Boundaries::walls()).unwrap();
        for j in 0..10 {
            assert_eq!(f.u[g.idx(0, j)], 0.0);
            assert_eq!(f.u[g.idx(10, j)], 0.0);
        }
        assert_eq!(f.u[g.idx(4, 4)], 0.0); // water (3,4) | land (4,4)
        assert_eq!(f.u[g.idx(6, 5)], 0.0); // land (5,5) | water (6,5)
        assert_eq!(f.v[g.idx(4, 4)], 0.0);
        assert_eq!(f.u[g.idx(2, 2)], 1.0);
        // A uniform flow blocked by walls is not divergence-free, and that is reported.
        assert!(f.max_divergence() > 0.1);
    }

    #[test]
    fn swirl_reverses_and_tide_modulates() {
        let g = grid();
        let m = Mask::all_water(&g);
        let b = Boundaries::walls();
        let f = Flow::new(
            FlowSpec {
                kind: FlowKind::Swirl {
                    period: 4.0,
                    speed: 1.0,
                },
                tide: None,
                project: true,
            },
            &g,
            &m,
            &b,
        )
        .unwrap();
        assert_eq!(f.factor(0.0), 1.0);
        assert!(f.factor(2.0).abs() < 1e-15);
        assert!((f.factor(4.0) + 1.0).abs() < 1e-15);
        let t = FlowSpec {
            kind: FlowKind::Uniform { u: 1.0, v: 0.0 },
            tide: Some(Tide {
                period: 100.0,
                phase: PI,
                amplitude: 0.0,
                return_flow: 0.0,
            }),
            project: true,
        };
        let f = Flow::new(t, &g, &m, &b).unwrap();
        assert!((f.factor(0.0) + 1.0).abs() < 1e-15);
        assert!((f.factor(50.0) - 1.0).abs() < 1e-15);
        assert!(!f.is_steady());
    }

    #[test]
    fn bad_numbers_are_rejected() {
        let g = grid();
        let m = Mask::all_water(&g);
        let b = Boundaries::walls();
        let bad = FlowSpec::steady(FlowKind::Rotation {
            centre: (0.0, 0.0),
            period: 0.0,
        });
        assert!(Flow::new(bad, &g, &m, &b)
            .unwrap_err()
            .to_string()
            .contains("flow.period"));
        assert!(Flow::new(FlowSpec::uniform(f64::INFINITY, 0.0), &g, &m, &b).is_err());
    }
}
