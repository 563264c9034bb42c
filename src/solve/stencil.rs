//! The 5-point operator `(A x)_P = diag_P x_P - (aw_P x_W + ae_P x_E + as_P x_S + an_P x_N)`
//! on an `nx` by `ny` grid, with per-cell coefficients and optional periodic wrap, and its
//! assembly for backward-Euler / theta-method diffusion and upwind convection-diffusion.
//!
//! Conventions: coefficient arrays and vectors hold the interior cells, row-major, row 0 south,
//! i fastest. A zero off-diagonal is a closed face (land, wall, zero-flux side). Land cells are
//! identity rows (diag 1, no couplings) and no water cell couples to them, so a solve returns
//! the right-hand side there. Couplings across a non-periodic side must be zero; because of
//! that the kernels always index the wrapped neighbour and need no branch at the edges.

use super::blocks::{dot_lanes, rows_per_block, sum_rows, sum_rows_mut};
use super::compact::{self, Coefficients, Compact};
use super::{check_len, SolveError};
use crate::grid::{Grid, Mask};
use crate::ops::boundary::{Boundaries, SideKind};
use rayon::prelude::*;

/// Fewest rows per parallel piece of assembly and validation.
const ROWS_MIN: usize = 8;

/// How the operator treats one side of the rectangle.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SideCoupling {
    /// Zero flux (wall, or the zero-gradient diffusion of an open side): no coupling.
    Closed,
    /// Wraps to the opposite side, which must be periodic too.
    Periodic,
    /// A prescribed value half a cell outside the side: the face conductance over the half
    /// cell, `2 theta dt K / h^2`, is added to the diagonal (its value times the conductance
    /// belongs on the right-hand side, which the caller forms).
    Dirichlet,
}

/// The treatment of the four sides.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Sides {
    /// x = x0.
    pub west: SideCoupling,
    /// x = x0 + Lx.
    pub east: SideCoupling,
    /// y = y0.
    pub south: SideCoupling,
    /// y = y0 + Ly.
    pub north: SideCoupling,
}

impl Sides {
    /// The same treatment on every side.
    pub fn uniform(kind: SideCoupling) -> Self {
        Self {
            west: kind,
            east: kind,
            south: kind,
            north: kind,
        }
    }

    /// Zero flux all round.
    pub fn closed() -> Self {
        Self::uniform(SideCoupling::Closed)
    }

    /// Periodic in x and y.
    pub fn periodic() -> Self {
        Self::uniform(SideCoupling::Periodic)
    }

    /// The diffusion treatment of the model's side conditions: walls and open sides are
    /// closed (open sides have zero-gradient diffusion), fixed sides are Dirichlet, periodic
    /// pairs wrap.
    pub fn from_boundaries(b: &Boundaries) -> Self {
        let f = |k: SideKind| match k {
            SideKind::Wall | SideKind::Open { .. } => SideCoupling::Closed,
            SideKind::Fixed { .. } => SideCoupling::Dirichlet,
            SideKind::Periodic => SideCoupling::Periodic,
        };
        Self {
            west: f(b.west),
            east: f(b.east),
            south: f(b.south),
            north: f(b.north),
        }
    }

    fn validate(&self) -> Result<(bool, bool), SolveError> {
        let p = |k: SideCoupling| k == SideCoupling::Periodic;
        if p(self.west) != p(self.east) || p(self.south) != p(self.north) {
            return Err(SolveError::InvalidOperator(format!(
                "periodic sides come in pairs (west with east, south with north), got {self:?}"
            )));
        }
        Ok((p(self.west), p(self.south)))
    }
}

/// Per-cell coefficients added to an assembled diffusion operator, e.g. first-order upwind
/// convection `theta dt / h` times face velocities: `diag` gains the outflow terms and the
/// off-diagonals the inflow terms. Couplings across closed faces or into land must be zero.
#[derive(Debug, Clone, Copy)]
pub struct ExtraCoefs<'a> {
    /// Added to the diagonal.
    pub diag: &'a [f64],
    /// Added to the west coupling.
    pub aw: &'a [f64],
    /// Added to the east coupling.
    pub ae: &'a [f64],
    /// Added to the south coupling.
    pub as_: &'a [f64],
    /// Added to the north coupling.
    pub an: &'a [f64],
}

/// The coefficients of one row, each cut to the row length.
#[derive(Clone, Copy)]
pub(crate) struct Row<'a> {
    pub d: &'a [f64],
    pub w: &'a [f64],
    pub e: &'a [f64],
    pub s: &'a [f64],
    pub n: &'a [f64],
}

/// A 5-point operator with per-cell coefficients (see the module doc for the conventions).
#[derive(Debug, Clone, PartialEq)]
pub struct Stencil5 {
    pub(crate) nx: usize,
    pub(crate) ny: usize,
    pub(crate) periodic_x: bool,
    pub(crate) periodic_y: bool,
    pub(crate) diag: Vec<f64>,
    pub(crate) aw: Vec<f64>,
    pub(crate) ae: Vec<f64>,
    pub(crate) as_: Vec<f64>,
    pub(crate) an: Vec<f64>,
    pub(crate) land: Vec<bool>,
    pub(crate) symmetric: bool,
    pub(crate) rpb: usize,
    /// The matrix-free form (flags and scalars), when the coefficients fit it exactly; the
    /// products and residuals then read one byte per cell instead of five `f64`.
    pub(crate) compact: Option<Compact>,
}

impl Stencil5 {
    /// The coefficients, lent for [`Compact::detect`].
    pub(crate) fn coefficients(&self) -> Coefficients<'_> {
        Coefficients {
            nx: self.nx,
            ny: self.ny,
            periodic_x: self.periodic_x,
            periodic_y: self.periodic_y,
            diag: &self.diag,
            aw: &self.aw,
            ae: &self.ae,
            as_: &self.as_,
            an: &self.an,
            land: &self.land,
        }
    }

    /// An operator from its coefficients (each `nx * ny`, row-major, row 0 south) and land
    /// flags (`None`: all water). Checks the rules of the module doc and that water rows have
    /// a positive diagonal.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        nx: usize,
        ny: usize,
        periodic_x: bool,
        periodic_y: bool,
        diag: Vec<f64>,
        aw: Vec<f64>,
        ae: Vec<f64>,
        as_: Vec<f64>,
        an: Vec<f64>,
        land: Option<Vec<bool>>,
    ) -> Result<Self, SolveError> {
        if nx == 0 || ny == 0 {
            return Err(SolveError::InvalidOperator(format!("empty grid {nx} x {ny}")));
        }
        let n = nx
            .checked_mul(ny)
            .ok_or_else(|| SolveError::InvalidOperator("grid too large".into()))?;
        check_len("diag", &diag, n)?;
        check_len("aw", &aw, n)?;
        check_len("ae", &ae, n)?;
        check_len("as", &as_, n)?;
        check_len("an", &an, n)?;
        let land = land.unwrap_or_else(|| vec![false; n]);
        if land.len() != n {
            return Err(SolveError::SizeMismatch {
                what: "land",
                expected: n,
                got: land.len(),
            });
        }
        let mut s = Self {
            nx,
            ny,
            periodic_x,
            periodic_y,
            diag,
            aw,
            ae,
            as_,
            an,
            land,
            symmetric: false,
            rpb: rows_per_block(nx, ny),
            compact: None,
        };
        s.validate()?;
        Ok(s)
    }

    /// The theta-method diffusion matrix `I - theta dt L_h` (symmetric positive definite) on
    /// `grid` with `mask`: `tkx = theta dt Kx` and `tky = theta dt Ky` in m2, 5-point central
    /// differences with no flux through land and closed sides.
    pub fn diffusion(grid: &Grid, mask: &Mask, sides: Sides, tkx: f64, tky: f64) -> Result<Self, SolveError> {
        Self::convection_diffusion(grid, mask, sides, tkx, tky, None)
    }

    /// The diffusion matrix of [`Stencil5::diffusion`] plus the per-cell coefficients in
    /// `extra` (e.g. upwind convection), giving a general, non-symmetric operator.
    pub fn convection_diffusion(
        grid: &Grid,
        mask: &Mask,
        sides: Sides,
        tkx: f64,
        tky: f64,
        extra: Option<&ExtraCoefs>,
    ) -> Result<Self, SolveError> {
        let (px, py) = sides.validate()?;
        let mut s = Self::zeros(grid.nx, grid.ny, px, py);
        s.assemble(grid, mask, sides, tkx, tky, extra)?;
        Ok(s)
    }

    /// Re-assembles this operator in place (no allocation) for new `tkx`, `tky` and `extra`;
    /// the grid size and periodicity must match those it was built with.
    pub fn assemble(
        &mut self,
        grid: &Grid,
        mask: &Mask,
        sides: Sides,
        tkx: f64,
        tky: f64,
        extra: Option<&ExtraCoefs>,
    ) -> Result<(), SolveError> {
        let (nx, ny) = (grid.nx, grid.ny);
        let n = nx * ny;
        let (px, py) = sides.validate()?;
        if (nx, ny, px, py) != (self.nx, self.ny, self.periodic_x, self.periodic_y) {
            return Err(SolveError::InvalidOperator(format!(
                "re-assembly on a {nx} x {ny} grid (periodic {px}, {py}) of an operator built for {} x {} \
                 (periodic {}, {})",
                self.nx, self.ny, self.periodic_x, self.periodic_y
            )));
        }
        let wet = mask.as_slice();
        if wet.len() != n {
            return Err(SolveError::SizeMismatch {
                what: "mask",
                expected: n,
                got: wet.len(),
            });
        }
        for (what, v) in [("theta dt Kx", tkx), ("theta dt Ky", tky)] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(SolveError::InvalidParameter {
                    what,
                    value: v.to_string(),
                    allowed: "finite and >= 0",
                });
            }
        }
        if let Some(e) = extra {
            check_len("extra.diag", e.diag, n)?;
            check_len("extra.aw", e.aw, n)?;
            check_len("extra.ae", e.ae, n)?;
            check_len("extra.as", e.as_, n)?;
            check_len("extra.an", e.an, n)?;
        }
        let cx = tkx / (grid.dx * grid.dx);
        let cy = tky / (grid.dy * grid.dy);
        // Each row is a function of the inputs alone: rows are filled in parallel.
        let rows = self
            .diag
            .par_chunks_mut(nx)
            .zip(self.aw.par_chunks_mut(nx))
            .zip(self.ae.par_chunks_mut(nx))
            .zip(self.as_.par_chunks_mut(nx))
            .zip(self.an.par_chunks_mut(nx))
            .zip(self.land.par_chunks_mut(nx));
        rows.with_min_len(ROWS_MIN)
            .enumerate()
            .for_each(|(j, (((((dr, awr), aer), asr), anr), landr))| {
                for i in 0..nx {
                    let k = j * nx + i;
                    landr[i] = !wet[k];
                    if !wet[k] {
                        dr[i] = 1.0;
                        awr[i] = 0.0;
                        aer[i] = 0.0;
                        asr[i] = 0.0;
                        anr[i] = 0.0;
                        continue;
                    }
                    // A face is open if the neighbour (wrapped for periodic sides) is water.
                    let face = |inside: bool, nb: usize, side: SideCoupling, c: f64| -> (f64, f64) {
                        if inside {
                            (if wet[nb] { c } else { 0.0 }, 0.0)
                        } else {
                            match side {
                                SideCoupling::Periodic => (if wet[nb] { c } else { 0.0 }, 0.0),
                                SideCoupling::Closed => (0.0, 0.0),
                                SideCoupling::Dirichlet => (0.0, 2.0 * c),
                            }
                        }
                    };
                    let west = j * nx + if i > 0 { i - 1 } else { nx - 1 };
                    let east = j * nx + if i + 1 < nx { i + 1 } else { 0 };
                    let south = if j > 0 { j - 1 } else { ny - 1 } * nx + i;
                    let north = if j + 1 < ny { j + 1 } else { 0 } * nx + i;
                    let (w, dw) = face(i > 0, west, sides.west, cx);
                    let (e, de) = face(i + 1 < nx, east, sides.east, cx);
                    let (s, ds) = face(j > 0, south, sides.south, cy);
                    let (nn, dn) = face(j + 1 < ny, north, sides.north, cy);
                    let mut d = 1.0 + w + e + s + nn + dw + de + ds + dn;
                    let (mut w, mut e, mut s, mut nn) = (w, e, s, nn);
                    if let Some(x) = extra {
                        d += x.diag[k];
                        w += x.aw[k];
                        e += x.ae[k];
                        s += x.as_[k];
                        nn += x.an[k];
                    }
                    dr[i] = d;
                    awr[i] = w;
                    aer[i] = e;
                    asr[i] = s;
                    anr[i] = nn;
                }
            });
        self.validate()
    }

    /// An all-zero operator of the given shape (coarse levels fill it in).
    pub(crate) fn zeros(nx: usize, ny: usize, periodic_x: bool, periodic_y: bool) -> Self {
        let n = nx * ny;
        Self {
            nx,
            ny,
            periodic_x,
            periodic_y,
            diag: vec![0.0; n],
            aw: vec![0.0; n],
            ae: vec![0.0; n],
            as_: vec![0.0; n],
            an: vec![0.0; n],
            land: vec![false; n],
            symmetric: false,
            rpb: rows_per_block(nx, ny),
            compact: None,
        }
    }

    /// Checks the rules of the module doc and records whether the operator is symmetric.
    fn validate(&mut self) -> Result<(), SolveError> {
        let ny = self.ny;
        // Rows are checked in parallel; the first failing row (south first) is reported, as
        // a sequential check would.
        let this = &*self;
        let rows: Vec<Result<bool, SolveError>> = (0..ny)
            .into_par_iter()
            .with_min_len(ROWS_MIN)
            .map(|j| this.validate_row(j))
            .collect();
        let mut symmetric = true;
        for r in rows {
            symmetric &= r?;
        }
        self.symmetric = symmetric;
        // Exact (bit-for-bit) matrix-free form when the coefficients allow it.
        self.compact = None;
        self.compact = Compact::detect(&self.coefficients(), 1.0, None, 0.0);
        Ok(())
    }

    /// Checks row `j` (see [`Self::validate`]); returns whether it is symmetric with its west
    /// and south neighbours.
    fn validate_row(&self, j: usize) -> Result<bool, SolveError> {
        let (nx, ny) = (self.nx, self.ny);
        let mut symmetric = true;
        for i in 0..nx {
            let k = j * nx + i;
            let (d, w, e, s, n) = (self.diag[k], self.aw[k], self.ae[k], self.as_[k], self.an[k]);
            let at = || format!("cell (i = {i}, j = {j})");
            if !(d.is_finite() && w.is_finite() && e.is_finite() && s.is_finite() && n.is_finite()) {
                return Err(SolveError::InvalidOperator(format!(
                    "non-finite coefficient at {}",
                    at()
                )));
            }
            if self.land[k] {
                if d != 1.0 || w != 0.0 || e != 0.0 || s != 0.0 || n != 0.0 {
                    return Err(SolveError::InvalidOperator(format!(
                        "land {} must be an identity row (diag 1, no couplings)",
                        at()
                    )));
                }
                continue;
            }
            if !(d > 0.0) {
                return Err(SolveError::InvalidOperator(format!(
                    "water {} has diagonal {d}, must be > 0",
                    at()
                )));
            }
            let closed = |c: f64, edge: bool, periodic: bool, what: &str| {
                if c != 0.0 && edge && !periodic {
                    return Err(SolveError::InvalidOperator(format!(
                        "{} couples {what} across a non-periodic side ({c})",
                        at()
                    )));
                }
                Ok(())
            };
            closed(w, i == 0, self.periodic_x, "west")?;
            closed(e, i + 1 == nx, self.periodic_x, "east")?;
            closed(s, j == 0, self.periodic_y, "south")?;
            closed(n, j + 1 == ny, self.periodic_y, "north")?;
            let west = j * nx + if i > 0 { i - 1 } else { nx - 1 };
            let east = j * nx + if i + 1 < nx { i + 1 } else { 0 };
            let south = if j > 0 { j - 1 } else { ny - 1 } * nx + i;
            let north = if j + 1 < ny { j + 1 } else { 0 } * nx + i;
            for (c, nb, what) in [
                (w, west, "west"),
                (e, east, "east"),
                (s, south, "south"),
                (n, north, "north"),
            ] {
                if c != 0.0 && self.land[nb] {
                    return Err(SolveError::InvalidOperator(format!(
                        "{} couples to a land cell on its {what} ({c})",
                        at()
                    )));
                }
            }
            if w != self.ae[west] || s != self.an[south] {
                symmetric = false;
            }
        }
        Ok(symmetric)
    }

    /// Whether products and residuals run matrix-free (constant couplings, flags per cell),
    /// which reads about a fifth of the memory of the stored coefficients. The results are the
    /// same bit for bit either way.
    pub fn is_matrix_free(&self) -> bool {
        self.compact.is_some()
    }

    /// Cells along x.
    pub fn nx(&self) -> usize {
        self.nx
    }

    /// Cells along y.
    pub fn ny(&self) -> usize {
        self.ny
    }

    /// Number of unknowns, `nx * ny`.
    pub fn cells(&self) -> usize {
        self.nx * self.ny
    }

    /// Whether x and y wrap.
    pub fn periodic(&self) -> (bool, bool) {
        (self.periodic_x, self.periodic_y)
    }

    /// Whether the matrix is exactly symmetric (aw of a cell equals ae of its west neighbour
    /// and as equals an of its south neighbour, bit for bit).
    pub fn is_symmetric(&self) -> bool {
        self.symmetric
    }

    /// Diagonal coefficients.
    pub fn diag(&self) -> &[f64] {
        &self.diag
    }

    /// West couplings.
    pub fn aw(&self) -> &[f64] {
        &self.aw
    }

    /// East couplings.
    pub fn ae(&self) -> &[f64] {
        &self.ae
    }

    /// South couplings.
    pub fn as_(&self) -> &[f64] {
        &self.as_
    }

    /// North couplings.
    pub fn an(&self) -> &[f64] {
        &self.an
    }

    /// Land flags (identity rows).
    pub fn land(&self) -> &[bool] {
        &self.land
    }

    #[inline(always)]
    pub(crate) fn row(&self, j: usize) -> Row<'_> {
        let (a, b) = (j * self.nx, (j + 1) * self.nx);
        Row {
            d: &self.diag[a..b],
            w: &self.aw[a..b],
            e: &self.ae[a..b],
            s: &self.as_[a..b],
            n: &self.an[a..b],
        }
    }

    /// The rows south and north of row `j` (wrapped; across closed sides their couplings are
    /// zero).
    #[inline(always)]
    pub(crate) fn nb_rows(&self, j: usize) -> (usize, usize) {
        let s = if j > 0 { j - 1 } else { self.ny - 1 };
        let n = if j + 1 < self.ny { j + 1 } else { 0 };
        (s, n)
    }

    /// `y = A x`.
    pub fn apply(&self, x: &[f64], y: &mut [f64]) -> Result<(), SolveError> {
        check_len("x", x, self.cells())?;
        check_len("y", y, self.cells())?;
        self.apply_dot(x, y);
        Ok(())
    }

    /// `||b - A x||_2`.
    pub fn residual_norm(&self, b: &[f64], x: &[f64]) -> Result<f64, SolveError> {
        check_len("b", b, self.cells())?;
        check_len("x", x, self.cells())?;
        Ok(self.residual_sq(b, x).sqrt())
    }

    /// `y = A x`, returning `x . y`.
    pub(crate) fn apply_dot(&self, x: &[f64], y: &mut [f64]) -> f64 {
        let nx = self.nx;
        if let Some(c) = &self.compact {
            return sum_rows_mut(y, nx, self.rpb, |j0, out| {
                let mut dot = 0.0;
                for (r, yr) in out.chunks_exact_mut(nx).enumerate() {
                    let j = j0 + r;
                    let (js, jn) = self.nb_rows(j);
                    dot += compact::apply_row(
                        &c.k,
                        c.rows[j],
                        &c.flags[j * nx..(j + 1) * nx],
                        &x[js * nx..(js + 1) * nx],
                        &x[j * nx..(j + 1) * nx],
                        &x[jn * nx..(jn + 1) * nx],
                        yr,
                    );
                }
                dot
            });
        }
        sum_rows_mut(y, nx, self.rpb, |j0, out| {
            let mut dot = 0.0;
            for (r, yr) in out.chunks_exact_mut(nx).enumerate() {
                let j = j0 + r;
                let (js, jn) = self.nb_rows(j);
                let xr = &x[j * nx..(j + 1) * nx];
                apply_row(
                    self.row(j),
                    &x[js * nx..(js + 1) * nx],
                    xr,
                    &x[jn * nx..(jn + 1) * nx],
                    yr,
                );
                dot += xr.iter().zip(yr.iter()).map(|(a, b)| a * b).sum::<f64>();
            }
            dot
        })
    }

    /// `||b - A x||^2` without storing the residual.
    pub(crate) fn residual_sq(&self, b: &[f64], x: &[f64]) -> f64 {
        let nx = self.nx;
        if let Some(c) = &self.compact {
            return sum_rows(self.ny, self.rpb, |j0, j1| {
                let mut acc = 0.0;
                for j in j0..j1 {
                    let (js, jn) = self.nb_rows(j);
                    acc += compact::residual_row_sq(
                        &c.k,
                        c.rows[j],
                        &c.flags[j * nx..(j + 1) * nx],
                        &x[js * nx..(js + 1) * nx],
                        &x[j * nx..(j + 1) * nx],
                        &x[jn * nx..(jn + 1) * nx],
                        &b[j * nx..(j + 1) * nx],
                    );
                }
                acc
            });
        }
        sum_rows(self.ny, self.rpb, |j0, j1| {
            let mut acc = 0.0;
            for j in j0..j1 {
                let (js, jn) = self.nb_rows(j);
                acc += residual_row_sq(
                    self.row(j),
                    &x[js * nx..(js + 1) * nx],
                    &x[j * nx..(j + 1) * nx],
                    &x[jn * nx..(jn + 1) * nx],
                    &b[j * nx..(j + 1) * nx],
                );
            }
            acc
        })
    }

    /// `r = b - A x`, returning `||r||^2`.
    pub(crate) fn residual_into(&self, b: &[f64], x: &[f64], r: &mut [f64]) -> f64 {
        let nx = self.nx;
        if let Some(c) = &self.compact {
            return sum_rows_mut(r, nx, self.rpb, |j0, out| {
                let mut acc = 0.0;
                for (k, rr) in out.chunks_exact_mut(nx).enumerate() {
                    let j = j0 + k;
                    let (js, jn) = self.nb_rows(j);
                    compact::residual_row(
                        &c.k,
                        c.rows[j],
                        &c.flags[j * nx..(j + 1) * nx],
                        &x[js * nx..(js + 1) * nx],
                        &x[j * nx..(j + 1) * nx],
                        &x[jn * nx..(jn + 1) * nx],
                        &b[j * nx..(j + 1) * nx],
                        rr,
                    );
                    acc += dot_lanes(rr, rr);
                }
                acc
            });
        }
        sum_rows_mut(r, nx, self.rpb, |j0, out| {
            let mut acc = 0.0;
            for (k, rr) in out.chunks_exact_mut(nx).enumerate() {
                let j = j0 + k;
                let (js, jn) = self.nb_rows(j);
                apply_row(
                    self.row(j),
                    &x[js * nx..(js + 1) * nx],
                    &x[j * nx..(j + 1) * nx],
                    &x[jn * nx..(jn + 1) * nx],
                    rr,
                );
                for (v, &bb) in rr.iter_mut().zip(&b[j * nx..(j + 1) * nx]) {
                    *v = bb - *v;
                    acc += *v * *v;
                }
            }
            acc
        })
    }

    /// Rows per parallel block.
    pub(crate) fn rpb(&self) -> usize {
        self.rpb
    }
}

/// `y = A x` on one row: `xs`, `x`, `xn` are the south, own and north rows of x.
#[inline(always)]
pub(crate) fn apply_row(c: Row, xs: &[f64], x: &[f64], xn: &[f64], y: &mut [f64]) {
    let n = x.len();
    let (d, w, e, s, nn) = (&c.d[..n], &c.w[..n], &c.e[..n], &c.s[..n], &c.n[..n]);
    let (xs, xn, y) = (&xs[..n], &xn[..n], &mut y[..n]);
    if n == 1 {
        y[0] = d[0] * x[0] - ((w[0] + e[0]) * x[0] + s[0] * xs[0] + nn[0] * xn[0]);
        return;
    }
    y[0] = d[0] * x[0] - (w[0] * x[n - 1] + e[0] * x[1] + s[0] * xs[0] + nn[0] * xn[0]);
    {
        // Interior cells on slices of equal length, so the loop has no bounds checks and
        // vectorises.
        let m = n - 2;
        let (d, w, e, s, nn) = (&d[1..=m], &w[1..=m], &e[1..=m], &s[1..=m], &nn[1..=m]);
        let (xw, xc, xe, xs, xn) = (&x[..m], &x[1..=m], &x[2..], &xs[1..=m], &xn[1..=m]);
        let y = &mut y[1..=m];
        for i in 0..m {
            y[i] = d[i] * xc[i] - (w[i] * xw[i] + e[i] * xe[i] + s[i] * xs[i] + nn[i] * xn[i]);
        }
    }
    let l = n - 1;
    y[l] = d[l] * x[l] - (w[l] * x[l - 1] + e[l] * x[0] + s[l] * xs[l] + nn[l] * xn[l]);
}

/// Sum of squares of `b - A x` on one row.
#[inline(always)]
fn residual_row_sq(c: Row, xs: &[f64], x: &[f64], xn: &[f64], b: &[f64]) -> f64 {
    let n = x.len();
    let (d, w, e, s, nn) = (&c.d[..n], &c.w[..n], &c.e[..n], &c.s[..n], &c.n[..n]);
    let (xs, xn, b) = (&xs[..n], &xn[..n], &b[..n]);
    let r = |i: usize, xw: f64, xe: f64| b[i] - (d[i] * x[i] - (w[i] * xw + e[i] * xe + s[i] * xs[i] + nn[i] * xn[i]));
    if n == 1 {
        let v = r(0, x[0], x[0]);
        return v * v;
    }
    let mut acc = 0.0;
    let v0 = r(0, x[n - 1], x[1]);
    acc += v0 * v0;
    {
        let m = n - 2;
        let (d, w, e, s, nn) = (&d[1..=m], &w[1..=m], &e[1..=m], &s[1..=m], &nn[1..=m]);
        let (xw, xc, xe, xs, xn, b) = (&x[..m], &x[1..=m], &x[2..], &xs[1..=m], &xn[1..=m], &b[1..=m]);
        for i in 0..m {
            let v = b[i] - (d[i] * xc[i] - (w[i] * xw[i] + e[i] * xe[i] + s[i] * xs[i] + nn[i] * xn[i]));
            acc += v * v;
        }
    }
    let v1 = r(n - 1, x[n - 2], x[0]);
    acc + v1 * v1
}
