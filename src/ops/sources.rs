//! Sources (instantaneous and continuous releases) and first-order decay.
//!
//! A release is laid on the cell that contains it, or spread as a Gaussian of given radius
//! (standard deviation) over water cells only, with weights normalised so the released mass is
//! exact; the concentration added to a cell is `mass * weight / (h dA)`. Decay multiplies the
//! field by the exact factor `exp(-lambda dt)` each step.

use crate::error::{finite, invalid, non_negative, positive, ModelError};
use crate::grid::{Grid, Mask};

/// How a source releases its mass.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Release {
    /// `mass` (tracer units times m3) all at once at time `at`.
    Instant {
        /// Released mass.
        mass: f64,
        /// Release time, s.
        at: f64,
    },
    /// `rate` (tracer units times m3 per s) from `start` to `stop`.
    Continuous {
        /// Release rate.
        rate: f64,
        /// Start, s.
        start: f64,
        /// Stop, s (may be infinite).
        stop: f64,
    },
}

/// A source as the user describes it.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceSpec {
    /// Name (for messages and logs).
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// The release.
    pub release: Release,
    /// Gaussian radius (standard deviation), m; `None` lays the release on one cell.
    pub spread: Option<f64>,
}

/// A source resolved on the grid: padded cell indices and weights summing to one.
#[derive(Debug, Clone, PartialEq)]
pub struct Source {
    /// Name.
    pub name: String,
    /// The release.
    pub release: Release,
    cells: Vec<(usize, f64)>,
}

impl Source {
    /// Resolves `spec` on the grid; `label` names it in errors (e.g. `source[2]`).
    pub fn new(spec: &SourceSpec, label: &str, grid: &Grid, mask: &Mask) -> Result<Self, ModelError> {
        let (x, y) = (
            finite(&format!("{label}.at[0]"), spec.at.0)?,
            finite(&format!("{label}.at[1]"), spec.at.1)?,
        );
        match spec.release {
            Release::Instant { mass, at } => {
                non_negative(&format!("{label}.mass"), mass)?;
                finite(&format!("{label}.start"), at)?;
            }
            Release::Continuous { rate, start, stop } => {
                non_negative(&format!("{label}.rate"), rate)?;
                finite(&format!("{label}.start"), start)?;
                if stop.is_nan() || stop <= start {
                    return Err(invalid(
                        format!("{label}.stop"),
                        stop,
                        format!("a time after start = {start} s"),
                    ));
                }
            }
        }
        let Some((ci, cj)) = grid.cell_at(x, y) else {
            return Err(ModelError::OutsideWater {
                what: label.to_string(),
                x,
                y,
                reason: "outside the grid".into(),
            });
        };
        if !mask.is_wet(ci, cj) {
            return Err(ModelError::OutsideWater {
                what: label.to_string(),
                x,
                y,
                reason: "on land".into(),
            });
        }
        let cells = match spec.spread {
            None => vec![(grid.idx(ci as isize, cj as isize), 1.0)],
            Some(s) => {
                positive(&format!("{label}.spread"), s)?;
                gaussian_weights(grid, mask, x, y, s)
            }
        };
        Ok(Self {
            name: spec.name.clone(),
            release: spec.release,
            cells,
        })
    }

    /// Mass released in the interval (t0, t1].
    pub fn mass_between(&self, t0: f64, t1: f64) -> f64 {
        match self.release {
            Release::Instant { mass, at } => {
                if t0 < at && at <= t1 {
                    mass
                } else {
                    0.0
                }
            }
            Release::Continuous { rate, start, stop } => {
                let overlap = t1.min(stop) - t0.max(start);
                if overlap > 0.0 {
                    rate * overlap
                } else {
                    0.0
                }
            }
        }
    }

    /// Mass released at or before `t0` by an instantaneous source (applied with the initial
    /// field).
    pub fn mass_at_start(&self, t0: f64) -> f64 {
        match self.release {
            Release::Instant { mass, at } if at <= t0 => mass,
            _ => 0.0,
        }
    }

    /// Adds `mass` to the padded field `c`; `inv_volume = 1/(h dA)`.
    pub fn deposit(&self, c: &mut [f64], mass: f64, inv_volume: f64) {
        for &(p, w) in &self.cells {
            c[p] += mass * w * inv_volume;
        }
    }

    /// Adds `mass` to the padded field `c` with a per-cell `1/(h dA)` (depth fields).
    pub fn deposit_with(&self, c: &mut [f64], mass: f64, inv_volume: impl Fn(usize) -> f64) {
        for &(p, w) in &self.cells {
            c[p] += mass * w * inv_volume(p);
        }
    }

    /// Padded indices and weights of the cells fed.
    pub fn cells(&self) -> &[(usize, f64)] {
        &self.cells
    }
}

/// Normalised Gaussian weights over water cells within four radii of (x, y); at least the
/// containing cell.
fn gaussian_weights(grid: &Grid, mask: &Mask, x: f64, y: f64, s: f64) -> Vec<(usize, f64)> {
    let reach = 4.0 * s;
    let i0 = (((x - reach - grid.x0) / grid.dx).floor().max(0.0)) as usize;
    let j0 = (((y - reach - grid.y0) / grid.dy).floor().max(0.0)) as usize;
    let i1 = ((((x + reach - grid.x0) / grid.dx).ceil()) as usize).min(grid.nx);
    let j1 = ((((y + reach - grid.y0) / grid.dy).ceil()) as usize).min(grid.ny);
    let mut cells = Vec::new();
    for j in j0..j1 {
        for i in i0..i1 {
            if !mask.is_wet(i, j) {
                continue;
            }
            let (cx, cy) = grid.centre(i, j);
            let d2 = (cx - x).powi(2) + (cy - y).powi(2);
            if d2 <= reach * reach {
                cells.push((grid.idx(i as isize, j as isize), (-0.5 * d2 / (s * s)).exp()));
            }
        }
    }
    let total: f64 = cells.iter().map(|c| c.1).sum();
    if !(total > 0.0) {
        let (ci, cj) = grid.cell_at(x, y).unwrap_or((0, 0));
        return vec![(grid.idx(ci as isize, cj as isize), 1.0)];
    }
    for c in &mut cells {
        c.1 /= total;
    }
    cells
}

/// First-order decay rate from a rate or a T90 (the time to remove 90%): lambda = ln 10 / T90.
pub fn decay_rate(rate: Option<f64>, t90: Option<f64>) -> Result<f64, ModelError> {
    match (rate, t90) {
        (Some(_), Some(_)) => Err(invalid(
            "tracer.decay_rate and tracer.t90",
            "both given",
            "one of them, not both",
        )),
        (Some(r), None) => non_negative("tracer.decay_rate", r),
        (None, Some(t)) => Ok(std::f64::consts::LN_10 / positive("tracer.t90", t)?),
        (None, None) => Ok(0.0),
    }
}

/// The exact decay factor over a step, `exp(-lambda dt)`.
#[inline]
pub fn decay_factor(lambda: f64, dt: f64) -> f64 {
    (-lambda * dt).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn setup() -> (Grid, Mask) {
        let g = Grid::new(20, 20, 1.0, 1.0, 0.0, 0.0).unwrap();
        let m = Mask::all_water(&g).with_land(&g, |x, _| x > 12.0).unwrap();
        (g, m)
    }

    #[test]
    fn t90_means_ninety_percent_gone() {
        let l = decay_rate(None, Some(3600.0)).unwrap();
        assert!((decay_factor(l, 3600.0) - 0.1).abs() < 1e-15);
        assert!(decay_rate(Some(1e-4), Some(10.0)).is_err());
        assert!(decay_rate(Some(-1.0), None).is_err());
        assert_eq!(decay_rate(None, None).unwrap(), 0.0);
    }

    #[test]
    fn gaussian_spread_stays_in_water_and_keeps_the_mass() {
        let (g, m) = setup();
        let spec = SourceSpec {
            name: "pipe".into(),
            at: (11.0, 10.0),
            release: Release::Instant { mass: 5.0, at: 0.0 },
            spread: Some(2.0),
        };
        let s = Source::new(&spec, "source[0]", &g, &m).unwrap();
        let mut c = vec![0.0; g.padded_len()];
        s.deposit(&mut c, 5.0, 1.0);
        assert!((crate::field::interior_sum(&g, &c) - 5.0).abs() < 1e-14);
        for j in 0..20 {
            for i in 13..20 {
                assert_eq!(c[g.idx(i, j)], 0.0, "land cell ({i},{j}) fed");
            }
        }
        assert!(s.cells().len() > 20);
    }

    #[test]
    fn releases_outside_the_water_are_refused() {
        let (g, m) = setup();
        let mut spec = SourceSpec {
            name: "x".into(),
            at: (15.0, 10.0),
            release: Release::Instant { mass: 1.0, at: 0.0 },
            spread: None,
        };
        assert!(Source::new(&spec, "source[1]", &g, &m)
            .unwrap_err()
            .to_string()
            .contains("on land"));
        spec.at = (-1.0, 10.0);
        let e = Source::new(&spec, "source[1]", &g, &m).unwrap_err().to_string();
        assert!(e.contains("source[1]") && e.contains("outside the grid"), "{e}");
        spec.at = (5.0, 5.0);
        spec.release = Release::Continuous {
            rate: 1.0,
            start: 10.0,
            stop: 5.0,
        };
        assert!(Source::new(&spec, "source[1]", &g, &m)
            .unwrap_err()
            .to_string()
            .contains("source[1].stop"));
    }

    #[test]
    fn mass_over_intervals() {
        let (g, m) = setup();
        let spec = SourceSpec {
            name: "c".into(),
            at: (5.0, 5.0),
            release: Release::Continuous {
                rate: 2.0,
                start: 10.0,
                stop: 20.0,
            },
            spread: None,
        };
        let s = Source::new(&spec, "source[0]", &g, &m).unwrap();
        assert_eq!(s.mass_between(0.0, 10.0), 0.0);
        assert_eq!(s.mass_between(5.0, 15.0), 10.0);
        assert_eq!(s.mass_between(0.0, 100.0), 20.0);
        let i = Source::new(
            &SourceSpec {
                release: Release::Instant { mass: 3.0, at: 10.0 },
                ..spec
            },
            "s",
            &g,
            &m,
        )
        .unwrap();
        assert_eq!(i.mass_between(5.0, 10.0), 3.0);
        assert_eq!(i.mass_between(10.0, 15.0), 0.0);
        assert_eq!(i.mass_at_start(0.0), 0.0);
    }
}
