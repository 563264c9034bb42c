//! Side conditions: ghost-cell filling for the limiter stencils and the fluxes through the four
//! sides of the grid.
//!
//! Every non-periodic side's face flux is computed here, not from the interior formula:
//! `wall` carries nothing; `open` takes the side's value on inflow and the cell value on
//! outflow, with zero-gradient diffusion; `fixed` uses the side's value as the face value for
//! convection and as a Dirichlet value half a cell away for diffusion. Ghost cells serve only as
//! the far-upwind cell U of the first interior faces: mirrored (zero gradient) beside walls and
//! open sides, the side's value beside fixed sides, wrapped for periodic pairs.

use crate::error::{finite, ModelError};
use crate::grid::Grid;
use std::fmt;

/// One side of the rectangle.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Side {
    /// x = x0.
    West,
    /// x = x0 + Lx.
    East,
    /// y = y0.
    South,
    /// y = y0 + Ly.
    North,
}

impl Side {
    /// All four, in budget-column order.
    pub const ALL: [Side; 4] = [Side::West, Side::East, Side::South, Side::North];

    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Side::West => "west",
            Side::East => "east",
            Side::South => "south",
            Side::North => "north",
        }
    }

    /// The opposite side.
    pub fn opposite(self) -> Side {
        match self {
            Side::West => Side::East,
            Side::East => Side::West,
            Side::South => Side::North,
            Side::North => Side::South,
        }
    }

    /// Position in [`Side::ALL`].
    pub fn index(self) -> usize {
        self as usize
    }
}

/// What happens at one side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SideKind {
    /// No flux of any kind; the normal velocity is zero.
    Wall,
    /// Inflow carries `value`, outflow carries the cell value; no diffusive flux.
    Open {
        /// Concentration of inflowing water.
        value: f64,
    },
    /// Dirichlet: the face value is `value` for convection and diffusion.
    Fixed {
        /// The prescribed concentration.
        value: f64,
    },
    /// Wraps to the opposite side (which must be periodic too).
    Periodic,
}

impl SideKind {
    /// Scenario-file name of the kind.
    pub fn name(&self) -> &'static str {
        match self {
            SideKind::Wall => "wall",
            SideKind::Open { .. } => "open",
            SideKind::Fixed { .. } => "fixed",
            SideKind::Periodic => "periodic",
        }
    }

    /// Whether flow may cross the side (open, fixed or periodic).
    pub fn passes_flow(&self) -> bool {
        !matches!(self, SideKind::Wall)
    }
}

impl fmt::Display for SideKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SideKind::Open { value } | SideKind::Fixed { value } => {
                write!(f, "{} (value {value})", self.name())
            }
            _ => f.write_str(self.name()),
        }
    }
}

/// The conditions on all four sides.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Boundaries {
    /// x = x0.
    pub west: SideKind,
    /// x = x0 + Lx.
    pub east: SideKind,
    /// y = y0.
    pub south: SideKind,
    /// y = y0 + Ly.
    pub north: SideKind,
}

impl Boundaries {
    /// Walls all round.
    pub fn walls() -> Self {
        Self::uniform(SideKind::Wall)
    }

    /// The same kind on every side.
    pub fn uniform(kind: SideKind) -> Self {
        Self {
            west: kind,
            east: kind,
            south: kind,
            north: kind,
        }
    }

    /// Periodic in both directions.
    pub fn periodic() -> Self {
        Self::uniform(SideKind::Periodic)
    }

    /// The kind on `side`.
    pub fn get(&self, side: Side) -> SideKind {
        match side {
            Side::West => self.west,
            Side::East => self.east,
            Side::South => self.south,
            Side::North => self.north,
        }
    }

    /// Checks pairs of periodic sides and finite side values.
    pub fn validate(&self) -> Result<(), ModelError> {
        for side in Side::ALL {
            let k = self.get(side);
            if let SideKind::Open { value } | SideKind::Fixed { value } = k {
                finite(&format!("boundary.{}.value", side.name()), value)?;
            }
            let other = self.get(side.opposite());
            if k == SideKind::Periodic && other != SideKind::Periodic {
                return Err(ModelError::UnpairedPeriodic {
                    side: side.name(),
                    partner: side.opposite().name(),
                    other: other.name().to_string(),
                });
            }
        }
        Ok(())
    }

    /// Whether west and east wrap.
    pub fn periodic_x(&self) -> bool {
        self.west == SideKind::Periodic
    }

    /// Whether south and north wrap.
    pub fn periodic_y(&self) -> bool {
        self.south == SideKind::Periodic
    }
}

/// Flux through a side face in the +x (or +y) direction: `w` is the face velocity (positive
/// along the axis), `inner` the adjacent interior cell value, `coef2 = 2K/h` the diffusive
/// conductance over the half cell, `low` true for west/south. Not called for periodic sides.
#[inline]
pub fn side_flux(kind: SideKind, w: f64, inner: f64, coef2: f64, low: bool) -> f64 {
    match kind {
        SideKind::Wall | SideKind::Periodic => 0.0,
        SideKind::Open { value } => {
            let inflow = if low { w > 0.0 } else { w < 0.0 };
            w * if inflow { value } else { inner }
        }
        SideKind::Fixed { value } => {
            let diff = if low {
                -coef2 * (inner - value)
            } else {
                -coef2 * (value - inner)
            };
            w * value + diff
        }
    }
}

/// Fills the two-cell halo of a padded field along both axes (corners are never read).
pub fn fill_ghosts(grid: &Grid, b: &Boundaries, c: &mut [f64]) {
    let (nx, ny) = (grid.nx as isize, grid.ny as isize);
    let s = grid.stride();
    for j in 0..ny {
        let row = grid.idx(0, j);
        fill_line(&mut c[row - 2..row + nx as usize + 2], nx as usize, b.west, b.east);
    }
    for i in 0..nx {
        let base = grid.idx(i, -2);
        // A column of the padded array (stride s): compute the four ghosts, then store them.
        let n = ny as usize + 4;
        let mut col = [0.0f64; 4];
        for k in 0..2 {
            col[k] = ghost_value(b.south, k, &|m| c[base + (m + 2) * s], ny as usize, false);
            col[2 + k] = ghost_value(b.north, k, &|m| c[base + (m + 2) * s], ny as usize, true);
        }
        // k = 0 is the ghost next to the side, k = 1 the one beyond.
        c[base + s] = col[0];
        c[base] = col[1];
        c[base + (n - 2) * s] = col[2];
        c[base + (n - 1) * s] = col[3];
    }
}

/// Fills the halo of one contiguous line (a padded row: 2 ghosts, n cells, 2 ghosts).
fn fill_line(line: &mut [f64], n: usize, low: SideKind, high: SideKind) {
    let g = |k: usize, hi: bool, kind: SideKind, line: &[f64]| ghost_value(kind, k, &|m| line[m + 2], n, hi);
    let l0 = g(0, false, low, line);
    let l1 = g(1, false, low, line);
    let h0 = g(0, true, high, line);
    let h1 = g(1, true, high, line);
    line[1] = l0;
    line[0] = l1;
    line[n + 2] = h0;
    line[n + 3] = h1;
}

/// Value of ghost `k` (0 = next to the side) beyond the low or high end of a line of `n`
/// interior cells read through `at(m)`, m in 0..n.
fn ghost_value(kind: SideKind, k: usize, at: &dyn Fn(usize) -> f64, n: usize, high: bool) -> f64 {
    match kind {
        SideKind::Fixed { value } => value,
        SideKind::Periodic => {
            // Low ghost k sits at index -1-k, i.e. n-1-k (mod n); high ghost k at n+k, i.e. k (mod n).
            if high {
                at(k % n)
            } else {
                at((n - 1 - (k % n)) % n)
            }
        }
        SideKind::Wall | SideKind::Open { .. } => {
            // Mirror about the side: ghost k copies interior cell k (clamped for short lines).
            let m = k.min(n - 1);
            if high {
                at(n - 1 - m)
            } else {
                at(m)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unpaired_periodic_is_an_error() {
        let mut b = Boundaries::walls();
        b.west = SideKind::Periodic;
        let e = b.validate().unwrap_err().to_string();
        assert!(e.contains("west") && e.contains("east") && e.contains("wall"), "{e}");
        b.east = SideKind::Periodic;
        assert!(b.validate().is_ok());
        b.north = SideKind::Fixed { value: f64::NAN };
        assert!(b.validate().unwrap_err().to_string().contains("boundary.north.value"));
    }

    #[test]
    fn ghosts_wrap_mirror_and_fix() {
        let g = Grid::new(3, 1, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut c = vec![f64::NAN; g.padded_len()];
        for i in 0..3 {
            c[g.idx(i, 0)] = (i + 1) as f64;
        }
        let mut b = Boundaries::periodic();
        fill_ghosts(&g, &b, &mut c);
        let row: Vec<f64> = (-2..5).map(|i| c[g.idx(i, 0)]).collect();
        assert_eq!(row, vec![2.0, 3.0, 1.0, 2.0, 3.0, 1.0, 2.0]);
        // y is periodic with one row: every ghost copies the row.
        assert_eq!(c[g.idx(1, -2)], 2.0);
        assert_eq!(c[g.idx(1, 2)], 2.0);
        b.west = SideKind::Fixed { value: 9.0 };
        b.east = SideKind::Wall;
        b.south = SideKind::Open { value: 0.0 };
        b.north = SideKind::Open { value: 0.0 };
        fill_ghosts(&g, &b, &mut c);
        let row: Vec<f64> = (-2..5).map(|i| c[g.idx(i, 0)]).collect();
        assert_eq!(row, vec![9.0, 9.0, 1.0, 2.0, 3.0, 3.0, 2.0]);
        assert_eq!(c[g.idx(2, -1)], 3.0);
        assert_eq!(c[g.idx(2, -2)], 3.0);
    }

    #[test]
    fn side_fluxes() {
        let open = SideKind::Open { value: 5.0 };
        // West side, flow into the domain: carries the side value.
        assert_eq!(side_flux(open, 2.0, 1.0, 10.0, true), 10.0);
        // West side, flow out: carries the cell value.
        assert_eq!(side_flux(open, -2.0, 1.0, 10.0, true), -2.0);
        // East side, flow out (w > 0) carries the cell value; in (w < 0) the side value.
        assert_eq!(side_flux(open, 2.0, 1.0, 10.0, false), 2.0);
        assert_eq!(side_flux(open, -2.0, 1.0, 10.0, false), -10.0);
        let fixed = SideKind::Fixed { value: 1.0 };
        // Dirichlet diffusion over the half cell: -2K/dx (c - value) into +x on the west side.
        assert_eq!(side_flux(fixed, 0.0, 0.0, 4.0, true), 4.0);
        assert_eq!(side_flux(fixed, 0.0, 0.0, 4.0, false), -4.0);
        assert_eq!(side_flux(SideKind::Wall, 3.0, 1.0, 4.0, true), 0.0);
    }
}
