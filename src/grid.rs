//! Uniform rectangular grid: geometry, padded row-major indexing with a 2-cell halo, and the
//! water/land mask.
//!
//! Cell (i, j) has its centre at (x0 + (i + 1/2) dx, y0 + (j + 1/2) dy); j = 0 is the south row.
//! Cell fields are stored row-major (j outer, i inner) on a padded array of
//! (nx + 4) by (ny + 4) values, so that limiter stencils two cells wide never leave the array.

use crate::error::{finite, invalid, positive, ModelError};

/// Width of the ghost-cell halo on every side.
pub const HALO: usize = 2;

/// Largest number of cells accepted (about 67 million, several GiB of fields).
pub const MAX_CELLS: usize = 1 << 26;

/// Geometry of a uniform grid.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    /// Cells along x.
    pub nx: usize,
    /// Cells along y.
    pub ny: usize,
    /// Cell width along x, m.
    pub dx: f64,
    /// Cell width along y, m.
    pub dy: f64,
    /// Easting of the lower-left corner, m.
    pub x0: f64,
    /// Northing of the lower-left corner, m.
    pub y0: f64,
}

impl Grid {
    /// A grid of `nx` by `ny` cells of `dx` by `dy` metres with its lower-left corner at
    /// (`x0`, `y0`).
    pub fn new(nx: usize, ny: usize, dx: f64, dy: f64, x0: f64, y0: f64) -> Result<Self, ModelError> {
        if nx == 0 {
            return Err(invalid("grid.nx", nx, "an integer >= 1"));
        }
        if ny == 0 {
            return Err(invalid("grid.ny", ny, "an integer >= 1"));
        }
        if nx.saturating_mul(ny) > MAX_CELLS {
            return Err(invalid(
                "grid.nx * grid.ny",
                nx.saturating_mul(ny),
                format!("at most {MAX_CELLS} cells"),
            ));
        }
        positive("grid.dx", dx)?;
        positive("grid.dy", dy)?;
        finite("grid.origin[0]", x0)?;
        finite("grid.origin[1]", y0)?;
        Ok(Self { nx, ny, dx, dy, x0, y0 })
    }

    /// Distance between the starts of two consecutive padded rows.
    #[inline]
    pub fn stride(&self) -> usize {
        self.nx + 2 * HALO
    }

    /// Length of a padded cell array.
    #[inline]
    pub fn padded_len(&self) -> usize {
        self.stride() * (self.ny + 2 * HALO)
    }

    /// Padded index of cell (i, j); i and j may reach into the halo (down to -2).
    #[inline]
    pub fn idx(&self, i: isize, j: isize) -> usize {
        ((j + HALO as isize) as usize) * self.stride() + (i + HALO as isize) as usize
    }

    /// Number of cells.
    #[inline]
    pub fn cells(&self) -> usize {
        self.nx * self.ny
    }

    /// Area of one cell, m2.
    #[inline]
    pub fn cell_area(&self) -> f64 {
        self.dx * self.dy
    }

    /// Domain length along x, m.
    pub fn lx(&self) -> f64 {
        self.nx as f64 * self.dx
    }

    /// Domain length along y, m.
    pub fn ly(&self) -> f64 {
        self.ny as f64 * self.dy
    }

    /// Centre of cell (i, j).
    #[inline]
    pub fn centre(&self, i: usize, j: usize) -> (f64, f64) {
        (
            self.x0 + (i as f64 + 0.5) * self.dx,
            self.y0 + (j as f64 + 0.5) * self.dy,
        )
    }

    /// Cell-centre eastings, one per column.
    pub fn xs(&self) -> Vec<f64> {
        (0..self.nx).map(|i| self.centre(i, 0).0).collect()
    }

    /// Cell-centre northings, one per row.
    pub fn ys(&self) -> Vec<f64> {
        (0..self.ny).map(|j| self.centre(0, j).1).collect()
    }

    /// The cell containing point (x, y), or `None` outside the grid (the east and north edges
    /// belong to the last column and row).
    pub fn cell_at(&self, x: f64, y: f64) -> Option<(usize, usize)> {
        let fi = (x - self.x0) / self.dx;
        let fj = (y - self.y0) / self.dy;
        if !(fi >= 0.0 && fj >= 0.0 && fi <= self.nx as f64 && fj <= self.ny as f64) {
            return None;
        }
        Some(((fi as usize).min(self.nx - 1), (fj as usize).min(self.ny - 1)))
    }

    /// Copies the interior of a padded array into a new `nx * ny` row-major vector.
    pub fn interior(&self, padded: &[f64]) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.cells());
        for j in 0..self.ny {
            let s = self.idx(0, j as isize);
            out.extend_from_slice(&padded[s..s + self.nx]);
        }
        out
    }
}

/// Water/land mask over the interior cells (`true` = water), row-major, row 0 south.
#[derive(Debug, Clone, PartialEq)]
pub struct Mask {
    wet: Vec<bool>,
    nx: usize,
    ny: usize,
}

impl Mask {
    /// All water.
    pub fn all_water(grid: &Grid) -> Self {
        Self {
            wet: vec![true; grid.cells()],
            nx: grid.nx,
            ny: grid.ny,
        }
    }

    /// A mask from per-cell flags (`true` = water), `nx * ny` values, row 0 south.
    pub fn from_wet(grid: &Grid, wet: Vec<bool>) -> Result<Self, ModelError> {
        if wet.len() != grid.cells() {
            return Err(invalid(
                "grid.land (cells)",
                wet.len(),
                format!("exactly nx * ny = {} values", grid.cells()),
            ));
        }
        if !wet.iter().any(|&w| w) {
            return Err(invalid("grid.land", "all land", "at least one water cell"));
        }
        Ok(Self {
            wet,
            nx: grid.nx,
            ny: grid.ny,
        })
    }

    /// Marks every cell whose centre satisfies `is_land` as land.
    pub fn with_land(mut self, grid: &Grid, is_land: impl Fn(f64, f64) -> bool) -> Result<Self, ModelError> {
        for j in 0..grid.ny {
            for i in 0..grid.nx {
                let (x, y) = grid.centre(i, j);
                if is_land(x, y) {
                    self.wet[j * grid.nx + i] = false;
                }
            }
        }
        Self::from_wet(grid, self.wet)
    }

    /// Whether cell (i, j) is water.
    #[inline]
    pub fn is_wet(&self, i: usize, j: usize) -> bool {
        self.wet[j * self.nx + i]
    }

    /// The flags, row-major, row 0 south.
    pub fn as_slice(&self) -> &[bool] {
        &self.wet
    }

    /// Number of water cells.
    pub fn wet_count(&self) -> usize {
        self.wet.iter().filter(|&&w| w).count()
    }

    /// Whether any cell is land.
    pub fn has_land(&self) -> bool {
        self.wet_count() < self.nx * self.ny
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn indexing_and_geometry() {
        let g = Grid::new(4, 3, 2.0, 1.0, 10.0, -5.0).unwrap();
        assert_eq!(g.stride(), 8);
        assert_eq!(g.padded_len(), 8 * 7);
        assert_eq!(g.idx(0, 0), 2 * 8 + 2);
        assert_eq!(g.idx(-2, -2), 0);
        assert_eq!(g.centre(1, 2), (13.0, -2.5));
        assert_eq!(g.cell_at(13.0, -2.5), Some((1, 2)));
        assert_eq!(g.cell_at(18.0, -2.0), Some((3, 2)));
        assert_eq!(g.cell_at(18.1, -2.0), None);
        assert_eq!(g.cell_at(f64::NAN, 0.0), None);
    }

    #[test]
    fn bad_sizes_are_typed_errors() {
        assert!(matches!(
            Grid::new(0, 3, 1.0, 1.0, 0.0, 0.0),
            Err(ModelError::InvalidValue { .. })
        ));
        assert!(Grid::new(3, 3, -1.0, 1.0, 0.0, 0.0)
            .unwrap_err()
            .to_string()
            .contains("grid.dx"));
        assert!(Grid::new(3, 3, 1.0, f64::NAN, 0.0, 0.0)
            .unwrap_err()
            .to_string()
            .contains("grid.dy"));
        assert!(Grid::new(1 << 20, 1 << 20, 1.0, 1.0, 0.0, 0.0).is_err());
        let g = Grid::new(2, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        assert!(Mask::from_wet(&g, vec![false; 4]).is_err());
        assert!(Mask::from_wet(&g, vec![true; 3]).is_err());
    }
}
