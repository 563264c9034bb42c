//! Water depth: uniform, or a field per cell resolved onto cells and faces.
//!
//! The depth-averaged equation stores mass `c h dA` in a cell and carries `h_f u_f c_f` through a
//! face of depth `h_f` (DESIGN §1). A depth field keeps the still-water depth `h0` of every cell
//! and of every face (the mean of the two cells beside an interior face, the cell's own depth on
//! the grid's sides); a tidal level `eta(t)` adds uniformly to both.

use crate::error::{invalid, ModelError};
use crate::grid::{Grid, Mask};
use crate::ops::boundary::Boundaries;

/// Depth as the user gives it.
#[derive(Debug, Clone, PartialEq)]
pub enum Depth {
    /// One depth everywhere, m.
    Uniform(f64),
    /// Still-water depth per cell, `nx * ny` values row-major, row 0 south (land ignored), m.
    Field(Vec<f64>),
}

impl From<f64> for Depth {
    fn from(h: f64) -> Self {
        Depth::Uniform(h)
    }
}

impl Depth {
    /// The depth of cell (i, j) on `grid`.
    pub fn at(&self, grid: &Grid, i: usize, j: usize) -> f64 {
        match self {
            Depth::Uniform(h) => *h,
            Depth::Field(v) => v[j * grid.nx + i],
        }
    }

    /// The uniform value, if uniform.
    pub fn uniform(&self) -> Option<f64> {
        match self {
            Depth::Uniform(h) => Some(*h),
            Depth::Field(_) => None,
        }
    }
}

/// Shallowest water a tide may leave in any cell, m.
pub const MIN_WATER: f64 = 0.05;

/// Still-water depths on cells and faces, padded layouts of [`Grid::idx`].
#[derive(Debug, Clone, PartialEq)]
pub struct DepthField {
    /// Cell depth h0; on land and in the halo a positive placeholder (land holds no mass, so
    /// the value only keeps the cell update finite).
    pub cell: Vec<f64>,
    /// Depth of the west face of each cell (and of the east face of the last column).
    pub fx: Vec<f64>,
    /// Depth of the south face of each cell (and of the north face of the top row).
    pub fy: Vec<f64>,
    /// Shallowest and deepest water cell, m.
    pub range: (f64, f64),
}

impl DepthField {
    /// Resolves `depth` on the grid; `low_water` is the lowest tidal level (0 or below): every
    /// water cell must keep at least [`MIN_WATER`] at low water. Zero, negative or non-finite
    /// depth on water is an error naming the cell.
    pub fn new(depth: &Depth, grid: &Grid, mask: &Mask, b: &Boundaries, low_water: f64) -> Result<Self, ModelError> {
        let (nx, ny) = (grid.nx, grid.ny);
        if let Depth::Field(v) = depth {
            if v.len() != grid.cells() {
                return Err(invalid(
                    "grid.depth (cells)",
                    v.len(),
                    format!("nx * ny = {} values", grid.cells()),
                ));
            }
        }
        let mut range = (f64::INFINITY, 0.0f64);
        for j in 0..ny {
            for i in 0..nx {
                if !mask.is_wet(i, j) {
                    continue;
                }
                let h = depth.at(grid, i, j);
                let (x, y) = grid.centre(i, j);
                if !(h.is_finite() && h > 0.0) {
                    let key = if depth.uniform().is_some() {
                        "grid.depth".to_string()
                    } else {
                        format!("grid.depth at cell ({i}, {j}), centre ({x:.4}, {y:.4}) m")
                    };
                    return Err(invalid(key, h, "a finite depth > 0 m on water"));
                }
                if h + low_water < MIN_WATER {
                    return Err(invalid(
                        format!("flow.tide.amplitude (cell ({i}, {j}) at ({x:.4}, {y:.4}) m has depth {h:.4} m)"),
                        -low_water,
                        format!(
                            "small enough that the water stays at least {MIN_WATER} m deep: low water {low_water:.4} m would leave {:.4} m",
                            h + low_water
                        ),
                    ));
                }
                range = (range.0.min(h), range.1.max(h));
            }
        }
        // Land and halo cells: a placeholder that stays positive through any tide.
        let placeholder = 1.0 - low_water;
        let mut cell = vec![placeholder; grid.padded_len()];
        for j in 0..ny {
            for i in 0..nx {
                if mask.is_wet(i, j) {
                    cell[grid.idx(i as isize, j as isize)] = depth.at(grid, i, j);
                }
            }
        }
        let wet = |i: isize, j: isize| -> Option<f64> {
            let (ii, jj) = (i.rem_euclid(nx as isize) as usize, j.rem_euclid(ny as isize) as usize);
            mask.is_wet(ii, jj).then(|| depth.at(grid, ii, jj))
        };
        let face = |a: Option<f64>, b: Option<f64>| match (a, b) {
            (Some(a), Some(b)) => 0.5 * (a + b),
            (Some(h), None) | (None, Some(h)) => h,
            (None, None) => 0.0,
        };
        let mut fx = vec![0.0; grid.padded_len()];
        let mut fy = vec![0.0; grid.padded_len()];
        for j in 0..ny as isize {
            for i in 0..=nx as isize {
                let west = if i > 0 || b.periodic_x() { wet(i - 1, j) } else { None };
                let east = if i < nx as isize || b.periodic_x() {
                    wet(i, j)
                } else {
                    None
                };
                fx[grid.idx(i, j)] = face(west, east);
            }
        }
        for j in 0..=ny as isize {
            for i in 0..nx as isize {
                let south = if j > 0 || b.periodic_y() { wet(i, j - 1) } else { None };
                let north = if j < ny as isize || b.periodic_y() {
                    wet(i, j)
                } else {
                    None
                };
                fy[grid.idx(i, j)] = face(south, north);
            }
        }
        Ok(Self { cell, fx, fy, range })
    }

    /// Wet area times still-water depth: the basin volume at mean level, m3.
    pub fn volume(&self, grid: &Grid, mask: &Mask) -> f64 {
        let mut v = crate::field::Neumaier::default();
        for j in 0..grid.ny {
            for i in 0..grid.nx {
                if mask.is_wet(i, j) {
                    v.add(self.cell[grid.idx(i as isize, j as isize)]);
                }
            }
        }
        v.value() * grid.cell_area()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ops::boundary::SideKind;

    #[test]
    fn faces_take_the_mean_inside_and_the_cell_on_sides() {
        let g = Grid::new(3, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let m = Mask::all_water(&g);
        let d = Depth::Field(vec![1.0, 2.0, 4.0, 3.0, 5.0, 7.0]);
        let f = DepthField::new(&d, &g, &m, &Boundaries::walls(), 0.0).unwrap();
        assert_eq!(f.fx[g.idx(0, 0)], 1.0);
        assert_eq!(f.fx[g.idx(1, 0)], 1.5);
        assert_eq!(f.fx[g.idx(3, 0)], 4.0);
        assert_eq!(f.fy[g.idx(1, 1)], 3.5);
        assert_eq!(f.fy[g.idx(1, 2)], 5.0);
        assert_eq!(f.range, (1.0, 7.0));
        assert_eq!(f.volume(&g, &m), 22.0);
        let p = DepthField::new(&d, &g, &m, &Boundaries::uniform(SideKind::Periodic), 0.0).unwrap();
        assert_eq!(p.fx[g.idx(0, 0)], 2.5);
        assert_eq!(p.fx[g.idx(3, 0)], 2.5);
    }

    #[test]
    fn dry_or_bad_water_cells_are_named() {
        let g = Grid::new(2, 2, 10.0, 10.0, 0.0, 0.0).unwrap();
        let m = Mask::all_water(&g);
        let d = Depth::Field(vec![1.0, 0.0, 1.0, 1.0]);
        let e = DepthField::new(&d, &g, &m, &Boundaries::walls(), 0.0)
            .unwrap_err()
            .to_string();
        assert!(e.contains("cell (1, 0)") && e.contains("(15.0000, 5.0000)"), "{e}");
        let d = Depth::Field(vec![1.0, 0.5, 1.0, 1.0]);
        let e = DepthField::new(&d, &g, &m, &Boundaries::walls(), -0.6)
            .unwrap_err()
            .to_string();
        assert!(e.contains("flow.tide.amplitude") && e.contains("cell (1, 0)"), "{e}");
        // Land cells may hold anything.
        let land = Mask::from_wet(&g, vec![true, false, true, true]).unwrap();
        assert!(DepthField::new(&d, &g, &land, &Boundaries::walls(), -0.6).is_ok());
    }
}
