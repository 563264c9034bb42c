//! Concentration on the grid and at receptors from the particles in play.
//!
//! A cell's concentration is the mass of its particles over its water volume `h dA` (at the
//! tally's level). The statistical uncertainty of a cell value is the counting (Poisson)
//! standard error `sqrt(sum m_k^2) / (h dA)`, which for particles of equal mass is `c / sqrt(n)`
//! with n the particles in the cell (common practice for particle counts); a cell with no
//! particle has value 0 and no error estimate.

use super::Particles;
use crate::model::Model;
use ndarray::Array2;

/// Per-cell particle counts, mass and mass squared, in (y, x) order, row 0 south.
#[derive(Debug, Clone)]
pub struct Tally {
    /// Particles per cell.
    pub count: Array2<u32>,
    /// Mass per cell.
    pub mass: Array2<f64>,
    /// Sum of the squared particle masses per cell.
    pub mass2: Array2<f64>,
    /// Water volume per cell at the tally's time, m3 (0 on land).
    pub volume: Array2<f64>,
}

/// A receptor's concentration from the particles, with its counting error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReceptorValue {
    /// Concentration in the receptor's cell.
    pub value: f64,
    /// Standard error `sqrt(sum m^2) / V` (`c / sqrt(n)` for equal masses).
    pub std_error: f64,
    /// Particles in the cell.
    pub count: u32,
}

impl Tally {
    /// Tallies the first `released` particles at time `t`.
    pub(super) fn new(model: &Model, p: &Particles, released: usize, t: f64) -> Self {
        let g = &model.grid;
        let shape = g.shape();
        let mut count = Array2::zeros(shape);
        let mut mass = Array2::zeros(shape);
        let mut mass2 = Array2::zeros(shape);
        for k in 0..released {
            let (x, m) = (p.x[k], p.mass[k]);
            if x.is_nan() {
                continue;
            }
            let i = (((x - g.x0) / g.dx).floor() as isize).clamp(0, g.nx as isize - 1) as usize;
            let j = (((p.y[k] - g.y0) / g.dy).floor() as isize).clamp(0, g.ny as isize - 1) as usize;
            count[[j, i]] += 1;
            mass[[j, i]] += m;
            mass2[[j, i]] += m * m;
        }
        let volume = Array2::from_shape_fn(shape, |(j, i)| {
            if model.mask.is_wet(i, j) {
                model.depth_at(i, j, t) * g.cell_area()
            } else {
                0.0
            }
        });
        Self {
            count,
            mass,
            mass2,
            volume,
        }
    }

    /// Concentration per cell, shape (ny, nx), (y, x) order, row 0 south (0 on land).
    pub fn concentration(&self) -> Array2<f64> {
        ndarray::Zip::from(&self.mass)
            .and(&self.volume)
            .map_collect(|&m, &v| if v > 0.0 { m / v } else { 0.0 })
    }

    /// The value and counting error in cell (i, j).
    pub fn cell(&self, i: usize, j: usize) -> ReceptorValue {
        let v = self.volume[[j, i]];
        if v > 0.0 {
            ReceptorValue {
                value: self.mass[[j, i]] / v,
                std_error: self.mass2[[j, i]].sqrt() / v,
                count: self.count[[j, i]],
            }
        } else {
            ReceptorValue {
                value: 0.0,
                std_error: 0.0,
                count: 0,
            }
        }
    }

    /// The value and counting error at a receptor at (x, y), m; `None` outside the grid.
    pub fn receptor(&self, model: &Model, x: f64, y: f64) -> Option<ReceptorValue> {
        let (i, j) = model.grid.cell_at(x, y)?;
        Some(self.cell(i, j))
    }
}
