//! Prescribed velocity fields on the staggered C-grid.
//!
//! `u` lives on x-faces (the west face of cell (i, j) at padded index `idx(i, j)`, the east face
//! of the last column at `idx(nx, j)`), `v` on y-faces (the south face of cell (i, j) at
//! `idx(i, j)`). Analytic flows are evaluated through a stream function at cell corners,
//! `u = dpsi/dy`, `v = -dpsi/dx` as differences, so the discrete divergence of every cell is
//! zero to round-off. The time dependence of every flow here is a scalar factor on a steady
//! base field ([`Flow::factor`]); faces on land or walls are zeroed once, at construction.

pub mod file;

use crate::error::{finite, positive, ModelError};
use crate::grid::{Grid, Mask};
use crate::ops::boundary::Boundaries;
use std::f64::consts::PI;

/// The analytic flow kinds.
#[derive(Debug, Clone, Copy, PartialEq)]
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
}

/// An optional tidal factor `cos(2 pi t / period + phase)` on the base field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tide {
    /// Tidal period, s.
    pub period: f64,
    /// Phase, radians.
    pub phase: f64,
}

/// What the user asks for: a kind and an optional tide.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlowSpec {
    /// The base field.
    pub kind: FlowKind,
    /// Tidal modulation.
    pub tide: Option<Tide>,
}

impl FlowSpec {
    /// A steady uniform flow.
    pub fn uniform(u: f64, v: f64) -> Self {
        Self {
            kind: FlowKind::Uniform { u, v },
            tide: None,
        }
    }

    /// Checks every number.
    pub fn validate(&self) -> Result<(), ModelError> {
        match self.kind {
            FlowKind::Uniform { u, v } => {
                finite("flow.velocity[0]", u)?;
                finite("flow.velocity[1]", v)?;
            }
            FlowKind::Rotation { centre, period } => {
                finite("flow.centre[0]", centre.0)?;
                finite("flow.centre[1]", centre.1)?;
                positive("flow.period", period)?;
            }
            FlowKind::Swirl { period, speed } => {
                positive("flow.period", period)?;
                finite("flow.speed", speed)?;
            }
            FlowKind::Vortex { speed } => {
                finite("flow.speed", speed)?;
            }
        }
        if let Some(t) = self.tide {
            positive("flow.tide.period", t.period)?;
            finite("flow.tide.phase", t.phase)?;
        }
        Ok(())
    }
}

/// Face velocities of a flow on a grid, with its time factor.
#[derive(Debug, Clone)]
pub struct Flow {
    /// Base x-velocity on west faces, padded layout, m/s.
    pub u: Vec<f64>,
    /// Base y-velocity on south faces, padded layout, m/s.
    pub v: Vec<f64>,
    spec: FlowSpec,
    max_divergence: f64,
    courant_rate: f64,
}

impl Flow {
    /// Evaluates `spec` on the grid; faces that touch land, and faces on walls, get zero normal
    /// velocity. For a periodic pair the last face copies the first so the wrap is exact.
    pub fn new(spec: FlowSpec, grid: &Grid, mask: &Mask, bnd: &Boundaries) -> Result<Self, ModelError> {
        spec.validate()?;
        let n = grid.padded_len();
        let (nx, ny) = (grid.nx, grid.ny);
        let mut u = crate::field::huge_filled(n, 0.0);
        let mut v = crate::field::huge_filled(n, 0.0);
        match spec.kind {
            FlowKind::Uniform { u: u0, v: v0 } => {
                for j in 0..ny as isize {
                    for i in 0..=nx as isize {
                        u[grid.idx(i, j)] = u0;
                    }
                }
                for j in 0..=ny as isize {
                    for i in 0..nx as isize {
                        v[grid.idx(i, j)] = v0;
                    }
                }
            }
            FlowKind::Rotation { centre, period } => {
                let w = 2.0 * PI / period;
                let psi = |i: usize, j: usize| {
                    let x = grid.x0 + i as f64 * grid.dx - centre.0;
                    let y = grid.y0 + j as f64 * grid.dy - centre.1;
                    -0.5 * w * (x * x + y * y)
                };
                from_stream_function(grid, &mut u, &mut v, psi);
            }
            FlowKind::Swirl { speed, .. } | FlowKind::Vortex { speed } => {
                // sin(pi k / n) evaluated on min(k, n - k) so both ends are exactly zero.
                let s2 = |k: usize, n: usize| {
                    let m = k.min(n - k) as f64 / n as f64;
                    let s = (PI * m).sin();
                    s * s
                };
                let sx: Vec<f64> = (0..=nx).map(|i| s2(i, nx)).collect();
                let sy: Vec<f64> = (0..=ny).map(|j| s2(j, ny)).collect();
                let a = speed * grid.ly() / PI;
                from_stream_function(grid, &mut u, &mut v, |i, j| a * sx[i] * sy[j]);
            }
        }
        // Periodic pairs: the east face is the west face.
        if bnd.periodic_x() {
            for j in 0..ny as isize {
                u[grid.idx(nx as isize, j)] = u[grid.idx(0, j)];
            }
        }
        if bnd.periodic_y() {
            for i in 0..nx as isize {
                v[grid.idx(i, ny as isize)] = v[grid.idx(i, 0)];
            }
        }
        // Close faces on walls and land.
        let wet = |i: isize, j: isize, side_open: bool| -> bool {
            if i < 0 || j < 0 || i >= nx as isize || j >= ny as isize {
                side_open
            } else {
                mask.is_wet(i as usize, j as usize)
            }
        };
        for j in 0..ny as isize {
            for i in 0..=nx as isize {
                let side = if i == 0 { bnd.west } else { bnd.east };
                let open = wet(i - 1, j, side.passes_flow()) && wet(i, j, side.passes_flow());
                if !open {
                    u[grid.idx(i, j)] = 0.0;
                }
            }
        }
        for j in 0..=ny as isize {
            for i in 0..nx as isize {
                let side = if j == 0 { bnd.south } else { bnd.north };
                let open = wet(i, j - 1, side.passes_flow()) && wet(i, j, side.passes_flow());
                if !open {
                    v[grid.idx(i, j)] = 0.0;
                }
            }
        }
        let max_divergence = max_divergence(grid, &u, &v);
        let courant_rate = crate::ops::convection::max_courant_rate(grid, &u, &v);
        Ok(Self {
            u,
            v,
            spec,
            max_divergence,
            courant_rate,
        })
    }

    /// The flow as specified.
    pub fn spec(&self) -> &FlowSpec {
        &self.spec
    }

    /// Scalar factor on the base field at time `t`: the swirl's `cos(pi t/T)` times the tide's
    /// `cos(2 pi t/period + phase)`.
    #[inline]
    pub fn factor(&self, t: f64) -> f64 {
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

    /// Largest per-cell `|div u|` of the base field, 1/s (round-off for stream-function flows;
    /// non-zero where walls or land cut a through-flow).
    pub fn max_divergence(&self) -> f64 {
        self.max_divergence
    }

    /// Largest per-cell `max|u|/dx + max|v|/dy` of the base field, 1/s: Courant number = this
    /// times dt times |factor|.
    pub fn courant_rate(&self) -> f64 {
        self.courant_rate
    }

    /// Whether every face velocity is zero.
    pub fn is_still(&self) -> bool {
        self.courant_rate == 0.0
    }

    /// Whether the base field is steady (no swirl reversal, no tide).
    pub fn is_steady(&self) -> bool {
        self.spec.tide.is_none() && !matches!(self.spec.kind, FlowKind::Swirl { .. })
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
            let f = Flow::new(FlowSpec { kind, tide: None }, &g, &m, &b).unwrap();
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
        let f = Flow::new(FlowSpec::uniform(1.0, 0.5), &g, &m, &Boundaries::walls()).unwrap();
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
            }),
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
        let bad = FlowSpec {
            kind: FlowKind::Rotation {
                centre: (0.0, 0.0),
                period: 0.0,
            },
            tide: None,
        };
        assert!(Flow::new(bad, &g, &m, &b)
            .unwrap_err()
            .to_string()
            .contains("flow.period"));
        assert!(Flow::new(FlowSpec::uniform(f64::INFINITY, 0.0), &g, &m, &b).is_err());
    }
}
