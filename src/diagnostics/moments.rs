//! Plume moments: mass, centroid and second central moments of a field, and the effective
//! diffusivity implied by the growth of the second moments (for a single release the variance
//! of a diffusing plume grows as `2 K t` along each axis; Taylor 1921, common practice).

use ndarray::ArrayView2;

use crate::grid::Grid;

/// Zeroth, first and second moments of a non-negative field.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Moments {
    /// Sum of the field times the cell area (mass per unit depth).
    pub total: f64,
    /// Centroid x, m.
    pub x: f64,
    /// Centroid y, m.
    pub y: f64,
    /// Variance along x, m2.
    pub var_x: f64,
    /// Variance along y, m2.
    pub var_y: f64,
}

/// Moments of `field` (shape (ny, nx), (y, x) order, row 0 south) over `wet` cells; negative
/// values (undershoots) are counted as zero so they cannot make a variance negative.
pub fn moments(grid: &Grid, field: ArrayView2<f64>, wet: Option<ArrayView2<bool>>) -> Option<Moments> {
    let xs = grid.xs();
    let ys = grid.ys();
    // The water cells with their centres and non-negative values, row by row from the south.
    let cells = || {
        field
            .indexed_iter()
            .filter(|&((j, i), _)| wet.as_ref().is_none_or(|w| w[[j, i]]))
            .map(|((j, i), &c)| (xs[i], ys[j], c.max(0.0)))
    };
    let (mut m, mut mx, mut my) = (0.0, 0.0, 0.0);
    for (x, y, c) in cells() {
        m += c;
        mx += c * x;
        my += c * y;
    }
    if !(m > 0.0) {
        return None;
    }
    let (xb, yb) = (mx / m, my / m);
    let (mut vx, mut vy) = (0.0, 0.0);
    for (x, y, c) in cells() {
        vx += c * (x - xb).powi(2);
        vy += c * (y - yb).powi(2);
    }
    Some(Moments {
        total: m * grid.cell_area(),
        x: xb,
        y: yb,
        var_x: vx / m,
        var_y: vy / m,
    })
}

/// Effective diffusivity (Kx, Ky) from the variance growth between two moment sets `dt`
/// seconds apart: `K = d(variance)/dt / 2`.
pub fn effective_diffusivity(a: &Moments, b: &Moments, dt: f64) -> (f64, f64) {
    ((b.var_x - a.var_x) / (2.0 * dt), (b.var_y - a.var_y) / (2.0 * dt))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaussian_moments_and_growth() {
        let g = Grid::new(200, 100, 0.5, 0.5, 0.0, 0.0).unwrap();
        let (xs, ys) = (g.xs(), g.ys());
        let field = |s: f64| {
            ndarray::Array2::from_shape_fn(g.shape(), |(j, i)| {
                (-((xs[i] - 40.0).powi(2) + (ys[j] - 25.0).powi(2)) / (2.0 * s * s)).exp()
            })
        };
        let a = moments(&g, field(3.0).view(), None).unwrap();
        let b = moments(&g, field(4.0).view(), None).unwrap();
        assert!((a.x - 40.0).abs() < 1e-9 && (a.y - 25.0).abs() < 1e-9);
        // Sampled at half-metre cells the discrete variance is s^2 to well within 0.1%.
        assert!((a.var_x / 9.0 - 1.0).abs() < 1e-3, "{}", a.var_x);
        let (kx, ky) = effective_diffusivity(&a, &b, 10.0);
        assert!(
            (kx - 7.0 / 20.0).abs() < 1e-3 && (ky - 7.0 / 20.0).abs() < 1e-3,
            "{kx} {ky}"
        );
        assert!(moments(&g, ndarray::Array2::zeros(g.shape()).view(), None).is_none());
    }
}
