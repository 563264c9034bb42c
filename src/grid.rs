//! Uniform rectangular grid: geometry, padded row-major indexing with a 2-cell halo, and the
//! water/land mask.
//!
//! Cell (i, j) has its centre at (x0 + (i + 1/2) dx, y0 + (j + 1/2) dy); j = 0 is the south row.
//! Cell fields are stored row-major (j outer, i inner) on a padded array of
//! (nx + 4) by (ny + 4) values, so that limiter stencils two cells wide never leave the array.
//! [`Grid::interior_view`] lends the interior of such an array as an `ndarray` view of shape
//! (ny, nx), in (y, x) order with row 0 south, without copying (strides (nx + 4, 1)).

use ndarray::{s, Array2, ArrayView2, ArrayViewMut2};

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
        for row in self.interior_view(padded).rows() {
            out.extend(row.iter().copied());
        }
        out
    }

    /// Shape (ny, nx) of an interior array in (y, x) order.
    pub fn shape(&self) -> (usize, usize) {
        (self.ny, self.nx)
    }

    /// The interior of a padded array as a zero-copy view of shape (ny, nx), (y, x) order,
    /// row 0 south: `view[[j, i]]` is cell (i, j).
    ///
    /// # Panics
    /// If `padded` is not [`Self::padded_len`] long (fields built for this grid always are).
    pub fn interior_view<'a, T>(&self, padded: &'a [T]) -> ArrayView2<'a, T> {
        let (h, w) = (self.ny + 2 * HALO, self.stride());
        ArrayView2::from_shape((h, w), padded)
            .expect("a padded array of this grid")
            .slice_move(s![HALO..HALO + self.ny, HALO..HALO + self.nx])
    }

    /// The interior of a padded array as a zero-copy mutable view, as [`Self::interior_view`].
    ///
    /// # Panics
    /// If `padded` is not [`Self::padded_len`] long.
    pub fn interior_view_mut<'a, T>(&self, padded: &'a mut [T]) -> ArrayViewMut2<'a, T> {
        let (h, w) = (self.ny + 2 * HALO, self.stride());
        ArrayViewMut2::from_shape((h, w), padded)
            .expect("a padded array of this grid")
            .slice_move(s![HALO..HALO + self.ny, HALO..HALO + self.nx])
    }

    /// Checks that an interior array `what` has shape (ny, nx); the error names both shapes.
    pub fn check_shape(&self, what: &str, shape: &[usize]) -> Result<(), ModelError> {
        if shape == [self.ny, self.nx] {
            return Ok(());
        }
        Err(invalid(
            format!("{what} (shape)"),
            format!("{shape:?}"),
            format!("(ny, nx) = ({}, {}), rows south to north", self.ny, self.nx),
        ))
    }

    /// A zeroed padded array whose interior is a copy of `interior` (shape (ny, nx), row 0
    /// south); another shape is a [`ModelError`] naming `what` and both shapes.
    pub fn padded_from(&self, what: &str, interior: ArrayView2<f64>) -> Result<Vec<f64>, ModelError> {
        self.check_shape(what, interior.shape())?;
        let mut c = crate::field::huge_filled(self.padded_len(), 0.0);
        self.interior_view_mut(&mut c).assign(&interior);
        Ok(c)
    }

    /// A copy of the interior of a padded array, shape (ny, nx), standard layout.
    pub fn interior_array(&self, padded: &[f64]) -> Array2<f64> {
        self.interior_view(padded).to_owned()
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

    /// The flags as a view of shape (ny, nx), (y, x) order, row 0 south (`true` = water).
    pub fn view(&self) -> ArrayView2<'_, bool> {
        ArrayView2::from_shape((self.ny, self.nx), &self.wet).expect("nx * ny flags")
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
    fn interior_view_is_zero_copy_in_y_x_order() {
        let g = Grid::new(4, 3, 1.0, 1.0, 0.0, 0.0).unwrap();
        // Each interior cell holds 10 j + i, so (y, x) order is visible in the values.
        let mut p = vec![-1.0; g.padded_len()];
        for j in 0..3 {
            for i in 0..4 {
                p[g.idx(i, j)] = (10 * j + i) as f64;
            }
        }
        let v = g.interior_view(&p);
        assert_eq!(v.shape(), &[3, 4]);
        assert_eq!(v.strides(), &[g.stride() as isize, 1]);
        assert!(
            std::ptr::eq(&v[[0, 0]], &p[g.idx(0, 0)]),
            "the view borrows, it does not copy"
        );
        assert!(std::ptr::eq(&v[[2, 3]], &p[g.idx(3, 2)]));
        assert_eq!(v[[2, 1]], 21.0);
        assert_eq!(g.interior(&p), v.iter().copied().collect::<Vec<_>>());
        assert!(v.iter().all(|&x| x >= 0.0), "no halo value leaks into the view");
        let back = g.padded_from("test field", v).unwrap();
        assert_eq!(g.interior_view(&back), g.interior_view(&p));
        assert_eq!(back[0], 0.0);
        g.interior_view_mut(&mut p)[[1, 2]] = 7.0;
        assert_eq!(p[g.idx(2, 1)], 7.0);
    }

    #[test]
    fn wrong_shapes_name_both() {
        let g = Grid::new(4, 3, 1.0, 1.0, 0.0, 0.0).unwrap();
        let a = Array2::<f64>::zeros((4, 3));
        let e = g.padded_from("initial field", a.view()).unwrap_err().to_string();
        assert!(
            e.contains("initial field") && e.contains("[4, 3]") && e.contains("(3, 4)"),
            "{e}"
        );
        let m = Mask::all_water(&g).with_land(&g, |x, _| x < 1.0).unwrap();
        assert_eq!(m.view().shape(), &[3, 4]);
        assert!(!m.view()[[2, 0]] && m.view()[[2, 1]]);
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
