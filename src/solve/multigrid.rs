//! Geometric multigrid for [`Stencil5`] operators on the structured grid, used as a
//! preconditioner (one V-cycle from a zero initial guess).
//!
//! * **Coarsening:** cell-centred, 2x2 aggregation (a direction of fewer than 3 cells is not
//!   coarsened; an odd count leaves a one-cell-wide last aggregate). A coarse cell is land when
//!   all its fine cells are land.
//! * **Transfer:** piecewise-constant prolongation P over the water cells of each aggregate
//!   and restriction R = P^T (summation of fine residuals). With R = P^T the V-cycle is
//!   symmetric when the smoothing is, so it can precondition conjugate gradients.
//! * **Coarse operator:** the Galerkin product A_c = P^T A P (Galerkin coarse operator; with
//!   piecewise-constant P it keeps the 5-point structure: Wesseling, "An Introduction to
//!   Multigrid Methods", 1992, on cell-centred coarsening; Braess 1995 on aggregation, both
//!   recalled from memory). A coarse coupling is the sum of the fine couplings crossing the
//!   aggregate face, so closed faces and land stay closed on every level, row sums (and hence
//!   conservation) are kept, and symmetric or M-matrix operators stay so. Because plain
//!   aggregation over-weights diffusion by a factor of about 2 on the coarse grid (Braess
//!   1995), symmetric (diffusion) operators get their coarse couplings halved with row sums
//!   kept (`coarse_coupling_scale`), which for constant coefficients is the rediscretised
//!   coarse operator; non-symmetric ones keep the plain Galerkin product.
//! * **Smoother:** red-black Gauss–Seidel (Trottenberg, Oosterlee & Schüller, "Multigrid",
//!   2001, §3.3); symmetric ordering (red, black before; black, red after). It converges for
//!   any M-matrix, including upwind convection-diffusion, parallelises over rows, and with
//!   equal pre- and post-sweeps gives a symmetric V-cycle. With an odd periodic count the
//!   colouring breaks across the wrap, so the last row/column is relaxed in a sequential
//!   Gauss–Seidel pass (forward before, backward after, which keeps the symmetry).
//! * **Coarsest level:** dense LU with partial pivoting (at most `coarse_max` cells); if it is
//!   singular, many symmetric Gauss–Seidel sweeps instead.

use super::blocks::{for_rows, rows_per_block};
use super::stencil::{Row, Stencil5};
use super::{check_len, SolveError};
use rayon::prelude::*;

/// Knobs of the multigrid hierarchy and V-cycle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MultigridParams {
    /// Red-black Gauss–Seidel sweeps before the coarse correction (>= 1).
    pub pre_sweeps: usize,
    /// Sweeps after it (>= 1; equal to `pre_sweeps` for a symmetric V-cycle).
    pub post_sweeps: usize,
    /// Coarsen until a level has at most this many cells, then solve it directly (<= 4096).
    pub coarse_max: usize,
    /// Most levels, the finest included (>= 1).
    pub max_levels: usize,
    /// Factor on the Galerkin coarse couplings, row sums kept (1 = pure Galerkin; in (0, 1]).
    /// `None` (default): 0.5 for symmetric operators, whose couplings are diffusive and which
    /// plain aggregation over-weights by about 2, and 1 otherwise, since Galerkin aggregation
    /// sums convective face fluxes with the right weight (measured: it keeps BiCGStab at
    /// Courant 5 near 10-15 iterations where 0.5 needs 40-100).
    pub coarse_coupling_scale: Option<f64>,
}

impl Default for MultigridParams {
    fn default() -> Self {
        Self {
            pre_sweeps: 1,
            post_sweeps: 1,
            coarse_max: 64,
            max_levels: 32,
            coarse_coupling_scale: None,
        }
    }
}

impl MultigridParams {
    fn validate(&self) -> Result<(), SolveError> {
        let bad = |what, value: String, allowed| Err(SolveError::InvalidParameter { what, value, allowed });
        if self.pre_sweeps == 0 {
            return bad("pre_sweeps", "0".into(), ">= 1");
        }
        if self.post_sweeps == 0 {
            return bad("post_sweeps", "0".into(), ">= 1");
        }
        if self.coarse_max == 0 || self.coarse_max > 4096 {
            return bad("coarse_max", self.coarse_max.to_string(), "in 1..=4096");
        }
        if self.max_levels == 0 {
            return bad("max_levels", "0".into(), ">= 1");
        }
        if let Some(s) = self.coarse_coupling_scale {
            if !(s > 0.0 && s <= 1.0) {
                return bad("coarse_coupling_scale", s.to_string(), "in (0, 1]");
            }
        }
        Ok(())
    }
}

/// Per-level data other than the operator and vectors.
#[derive(Debug, Clone)]
struct Level {
    nx: usize,
    ny: usize,
    rpb: usize,
    /// Reciprocal diagonal.
    inv: Vec<f64>,
    /// Last row is relaxed sequentially (periodic in y with odd ny).
    green_row: bool,
    /// Last column is relaxed sequentially (periodic in x with odd nx).
    green_col: bool,
    /// Aggregation shifts to the next level (1: pairs, 0: not coarsened).
    sx: u32,
    sy: u32,
    /// Two ghost rows per block for the parallel colour passes.
    ghosts: Vec<f64>,
}

impl Level {
    fn new(nx: usize, ny: usize, px: bool, py: bool) -> Self {
        let green_row = py && ny % 2 == 1;
        let rows = if green_row { ny - 1 } else { ny };
        let rpb = rows_per_block(nx, rows.max(1));
        let nb = rows.div_ceil(rpb).max(1);
        Self {
            nx,
            ny,
            rpb,
            inv: vec![0.0; nx * ny],
            green_row,
            green_col: px && nx % 2 == 1,
            sx: 0,
            sy: 0,
            ghosts: vec![0.0; 2 * nb * nx],
        }
    }

    fn refresh_inv(&mut self, a: &Stencil5) {
        for (v, &d) in self.inv.iter_mut().zip(&a.diag) {
            *v = 1.0 / d;
        }
    }

    /// Rows handled by the parallel colour passes.
    fn colour_rows(&self) -> usize {
        if self.green_row {
            self.ny - 1
        } else {
            self.ny
        }
    }

    /// Columns handled by the colour passes.
    fn colour_cols(&self) -> usize {
        if self.green_col {
            self.nx - 1
        } else {
            self.nx
        }
    }

    /// First red half-sweep from a zero guess: red cells get `b / diag`, all others 0.
    fn red_from_zero(&self, b: &[f64], x: &mut [f64]) {
        let (nx, rows, cols) = (self.nx, self.colour_rows(), self.colour_cols());
        let inv = &self.inv;
        for_rows(x, nx, self.rpb, |j0, chunk| {
            for (r, xr) in chunk.chunks_exact_mut(nx).enumerate() {
                let j = j0 + r;
                xr.fill(0.0);
                if j >= rows {
                    continue;
                }
                let (br, ir) = (&b[j * nx..(j + 1) * nx], &inv[j * nx..(j + 1) * nx]);
                let mut i = j % 2;
                while i < cols {
                    xr[i] = br[i] * ir[i];
                    i += 2;
                }
            }
        });
    }

    /// One colour half-sweep (colour 0 = red, cells with i + j even) over all rows but a
    /// green one, parallel over row blocks; rows of other blocks are read from ghost copies.
    fn colour_pass(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], colour: usize) {
        let (nx, ny, rows, cols, rpb) = (self.nx, self.ny, self.colour_rows(), self.colour_cols(), self.rpb);
        if rows == 0 || cols == 0 {
            return;
        }
        let nb = rows.div_ceil(rpb);
        for blk in 0..nb {
            let j0 = blk * rpb;
            let j1 = (j0 + rpb).min(rows);
            let js = if j0 > 0 { j0 - 1 } else { ny - 1 };
            let jn = j1 % ny;
            let g = &mut self.ghosts[2 * blk * nx..(2 * blk + 2) * nx];
            g[..nx].copy_from_slice(&x[js * nx..(js + 1) * nx]);
            g[nx..].copy_from_slice(&x[jn * nx..(jn + 1) * nx]);
        }
        let inv = &self.inv;
        let work = |blk: usize, chunk: &mut [f64], g: &[f64]| {
            let j0 = blk * rpb;
            let nrows = chunk.len() / nx;
            for r in 0..nrows {
                let j = j0 + r;
                let (before, rest) = chunk.split_at_mut(r * nx);
                let (xr, after) = rest.split_at_mut(nx);
                let xs: &[f64] = if r > 0 { &before[(r - 1) * nx..] } else { &g[..nx] };
                let xn: &[f64] = if r + 1 < nrows { &after[..nx] } else { &g[nx..] };
                relax_row(
                    a.row(j),
                    &inv[j * nx..(j + 1) * nx],
                    &b[j * nx..(j + 1) * nx],
                    xs,
                    xr,
                    xn,
                    (j + colour) % 2,
                    cols,
                );
            }
        };
        let body = &mut x[..rows * nx];
        if nb == 1 {
            work(0, body, &self.ghosts[..2 * nx]);
        } else {
            body.par_chunks_mut(rpb * nx)
                .zip(self.ghosts.par_chunks(2 * nx))
                .enumerate()
                .for_each(|(blk, (chunk, g))| work(blk, chunk, g));
        }
    }

    /// Sequential Gauss–Seidel over the green cells (last row, then last column), forward or
    /// backward.
    fn green_pass(&self, a: &Stencil5, b: &[f64], x: &mut [f64], forward: bool) {
        let (nx, ny) = (self.nx, self.ny);
        let ncol = if self.green_col { self.colour_rows() } else { 0 };
        let nrow = if self.green_row { nx } else { 0 };
        let total = nrow + ncol;
        for t in 0..total {
            let t = if forward { t } else { total - 1 - t };
            let (i, j) = if t < nrow { (t, ny - 1) } else { (nx - 1, t - nrow) };
            relax_cell(a, &self.inv, b, x, i, j);
        }
    }

    fn pre_smooth(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], sweeps: usize) {
        for s in 0..sweeps {
            if s == 0 {
                self.red_from_zero(b, x);
            } else {
                self.colour_pass(a, b, x, 0);
            }
            self.colour_pass(a, b, x, 1);
            self.green_pass(a, b, x, true);
        }
    }

    fn post_smooth(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], sweeps: usize) {
        for _ in 0..sweeps {
            self.green_pass(a, b, x, false);
            self.colour_pass(a, b, x, 1);
            self.colour_pass(a, b, x, 0);
        }
    }

    /// `bc = R (b - A x)`: the fine residual summed over each aggregate, parallel over
    /// coarse rows. Land residuals are zero after any smoothing (identity rows), so no mask is
    /// needed.
    fn restrict_residual(&self, a: &Stencil5, b: &[f64], x: &[f64], bc: &mut [f64], ncx: usize, crpb: usize) {
        let (nx, ny, sx, sy) = (self.nx, self.ny, self.sx, self.sy);
        for_rows(bc, ncx, crpb, |jc0, chunk| {
            for (r, out) in chunk.chunks_exact_mut(ncx).enumerate() {
                let jc = jc0 + r;
                out.fill(0.0);
                let jf0 = jc << sy;
                let jf1 = ((jc + 1) << sy).min(ny);
                for j in jf0..jf1 {
                    let (js, jn) = a.nb_rows(j);
                    residual_restrict_row(
                        a.row(j),
                        &x[js * nx..(js + 1) * nx],
                        &x[j * nx..(j + 1) * nx],
                        &x[jn * nx..(jn + 1) * nx],
                        &b[j * nx..(j + 1) * nx],
                        out,
                        sx,
                    );
                }
            }
        });
    }

    /// `x += P xc`.
    fn prolongate(&self, xc: &[f64], x: &mut [f64], ncx: usize) {
        let (nx, sx, sy) = (self.nx, self.sx, self.sy);
        for_rows(x, nx, self.rpb, |j0, chunk| {
            for (r, xr) in chunk.chunks_exact_mut(nx).enumerate() {
                let jc = (j0 + r) >> sy;
                let cr = &xc[jc * ncx..(jc + 1) * ncx];
                if sx == 1 {
                    for (pair, &c) in xr.chunks_mut(2).zip(cr) {
                        for v in pair {
                            *v += c;
                        }
                    }
                } else {
                    for (v, &c) in xr.iter_mut().zip(cr) {
                        *v += c;
                    }
                }
            }
        });
    }
}

/// Gauss–Seidel update of the cells of one colour in a row: `start` is the first column of the
/// colour, `cols` the end of the columns relaxed. Neighbours across the row ends wrap (their
/// couplings are zero unless periodic).
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn relax_row(c: Row, inv: &[f64], b: &[f64], xs: &[f64], x: &mut [f64], xn: &[f64], start: usize, cols: usize) {
    let n = x.len();
    let (w, e, s, nn) = (&c.w[..n], &c.e[..n], &c.s[..n], &c.n[..n]);
    let (inv, b, xs, xn) = (&inv[..n], &b[..n], &xs[..n], &xn[..n]);
    let mut i = start;
    if i == 0 && cols > 0 {
        let xe = if n > 1 { x[1] } else { x[0] };
        x[0] = (b[0] + w[0] * x[n - 1] + e[0] * xe + s[0] * xs[0] + nn[0] * xn[0]) * inv[0];
        i = 2;
    }
    let mid_end = cols.min(n - 1);
    while i < mid_end {
        // SAFETY: 1 <= i < mid_end <= n - 1, so i - 1, i and i + 1 are below n, the length of
        // every slice here (all were cut to n above).
        unsafe {
            let v = (b.get_unchecked(i)
                + w.get_unchecked(i) * x.get_unchecked(i - 1)
                + e.get_unchecked(i) * x.get_unchecked(i + 1)
                + s.get_unchecked(i) * xs.get_unchecked(i)
                + nn.get_unchecked(i) * xn.get_unchecked(i))
                * inv.get_unchecked(i);
            *x.get_unchecked_mut(i) = v;
        }
        i += 2;
    }
    if i == n - 1 && i < cols && i > 0 {
        x[i] = (b[i] + w[i] * x[i - 1] + e[i] * x[0] + s[i] * xs[i] + nn[i] * xn[i]) * inv[i];
    }
}

/// Gauss–Seidel update of one cell, any position.
#[inline]
fn relax_cell(a: &Stencil5, inv: &[f64], b: &[f64], x: &mut [f64], i: usize, j: usize) {
    let nx = a.nx;
    let k = j * nx + i;
    let iw = if i > 0 { i - 1 } else { nx - 1 };
    let ie = if i + 1 < nx { i + 1 } else { 0 };
    let (js, jn) = a.nb_rows(j);
    let sum = b[k]
        + a.aw[k] * x[j * nx + iw]
        + a.ae[k] * x[j * nx + ie]
        + a.as_[k] * x[js * nx + i]
        + a.an[k] * x[jn * nx + i];
    x[k] = sum * inv[k];
}

/// Adds the residual `b - A x` of one fine row into the coarse row `out` (`sx` = 1: pairs).
#[inline(always)]
fn residual_restrict_row(c: Row, xs: &[f64], x: &[f64], xn: &[f64], b: &[f64], out: &mut [f64], sx: u32) {
    let n = x.len();
    let (d, w, e, s, nn) = (&c.d[..n], &c.w[..n], &c.e[..n], &c.s[..n], &c.n[..n]);
    let (xs, xn, b) = (&xs[..n], &xn[..n], &b[..n]);
    let res =
        |i: usize, xw: f64, xe: f64| b[i] - (d[i] * x[i] - (w[i] * xw + e[i] * xe + s[i] * xs[i] + nn[i] * xn[i]));
    if n == 1 {
        out[0] += res(0, x[0], x[0]);
        return;
    }
    out[0] += res(0, x[n - 1], x[1]);
    if sx == 1 {
        // Interior cells 1..n-1, two per aggregate (cell i belongs to aggregate i / 2).
        let out = &mut out[..n.div_ceil(2)];
        let r = |i: usize| b[i] - (d[i] * x[i] - (w[i] * x[i - 1] + e[i] * x[i + 1] + s[i] * xs[i] + nn[i] * xn[i]));
        out[0] += r(1);
        let pairs = (n - 2) / 2;
        for (k, o) in out.iter_mut().enumerate().take(pairs + 1).skip(1) {
            let i = 2 * k;
            if i + 1 < n - 1 {
                *o += r(i) + r(i + 1);
            } else if i < n - 1 {
                *o += r(i);
            }
        }
    } else {
        let out = &mut out[..n];
        for i in 1..n - 1 {
            out[i] += b[i] - (d[i] * x[i] - (w[i] * x[i - 1] + e[i] * x[i + 1] + s[i] * xs[i] + nn[i] * xn[i]));
        }
    }
    out[(n - 1) >> sx] += res(n - 1, x[n - 2], x[0]);
}

/// Dense LU factorisation with partial pivoting of the coarsest operator.
#[derive(Debug, Clone)]
struct Dense {
    n: usize,
    lu: Vec<f64>,
    perm: Vec<usize>,
    ok: bool,
}

impl Dense {
    fn new(n: usize) -> Self {
        Self {
            n,
            lu: vec![0.0; n * n],
            perm: vec![0; n],
            ok: false,
        }
    }

    /// Factorises `a` (Golub & Van Loan, "Matrix Computations", Alg. 3.4.1, partial pivoting);
    /// marks the factorisation unusable if a pivot is negligible.
    fn factor(&mut self, a: &Stencil5) {
        let n = self.n;
        let nx = a.nx;
        let m = &mut self.lu;
        m.fill(0.0);
        let mut scale = 0.0f64;
        for k in 0..n {
            let (i, j) = (k % nx, k / nx);
            let iw = if i > 0 { i - 1 } else { nx - 1 };
            let ie = if i + 1 < nx { i + 1 } else { 0 };
            let (js, jn) = a.nb_rows(j);
            m[k * n + k] += a.diag[k];
            m[k * n + j * nx + iw] -= a.aw[k];
            m[k * n + j * nx + ie] -= a.ae[k];
            m[k * n + js * nx + i] -= a.as_[k];
            m[k * n + jn * nx + i] -= a.an[k];
            scale = scale.max(a.diag[k].abs());
        }
        self.ok = true;
        for (k, p) in self.perm.iter_mut().enumerate() {
            *p = k;
        }
        for col in 0..n {
            let mut piv = col;
            for r in col + 1..n {
                if m[r * n + col].abs() > m[piv * n + col].abs() {
                    piv = r;
                }
            }
            if !(m[piv * n + col].abs() > 1e-13 * scale) {
                self.ok = false;
                return;
            }
            if piv != col {
                for c in 0..n {
                    m.swap(piv * n + c, col * n + c);
                }
                self.perm.swap(piv, col);
            }
            let p = m[col * n + col];
            for r in col + 1..n {
                let f = m[r * n + col] / p;
                m[r * n + col] = f;
                if f != 0.0 {
                    for c in col + 1..n {
                        m[r * n + c] -= f * m[col * n + c];
                    }
                }
            }
        }
    }

    fn solve(&self, b: &[f64], x: &mut [f64]) {
        let n = self.n;
        let m = &self.lu;
        for k in 0..n {
            x[k] = b[self.perm[k]];
        }
        for r in 0..n {
            let mut s = x[r];
            for c in 0..r {
                s -= m[r * n + c] * x[c];
            }
            x[r] = s;
        }
        for r in (0..n).rev() {
            let mut s = x[r];
            for c in r + 1..n {
                s -= m[r * n + c] * x[c];
            }
            x[r] = s / m[r * n + r];
        }
    }
}

/// Sweeps of symmetric Gauss–Seidel used on the coarsest level when its LU is singular.
const COARSE_FALLBACK_SWEEPS: usize = 50;

/// A multigrid hierarchy for one operator, with all its scratch.
#[derive(Debug, Clone)]
pub struct Multigrid {
    params: MultigridParams,
    levels: Vec<Level>,
    /// Operators of levels 1.. (level 0 is the caller's).
    coarse: Vec<Stencil5>,
    /// Right-hand sides and solutions of levels 1.. (index l - 1).
    bs: Vec<Vec<f64>>,
    xs: Vec<Vec<f64>>,
    dense: Dense,
    fine_shape: (usize, usize, bool, bool),
}

impl Multigrid {
    /// Builds the hierarchy for `a`: levels, Galerkin coarse operators, the coarsest LU and all
    /// vectors the V-cycle needs.
    pub fn new(a: &Stencil5, params: MultigridParams) -> Result<Self, SolveError> {
        params.validate()?;
        let (px, py) = a.periodic();
        let mut levels = vec![Level::new(a.nx, a.ny, px, py)];
        let mut coarse = Vec::new();
        let (mut nx, mut ny) = (a.nx, a.ny);
        while nx * ny > params.coarse_max && levels.len() < params.max_levels && (nx >= 3 || ny >= 3) {
            let sx = u32::from(nx >= 3);
            let sy = u32::from(ny >= 3);
            let last = levels.last_mut().expect("at least one level");
            last.sx = sx;
            last.sy = sy;
            nx = nx.div_ceil(1 << sx);
            ny = ny.div_ceil(1 << sy);
            levels.push(Level::new(nx, ny, px, py));
            coarse.push(Stencil5::zeros(nx, ny, px, py));
        }
        let bs = coarse.iter().map(|c| vec![0.0; c.cells()]).collect();
        let xs = coarse.iter().map(|c| vec![0.0; c.cells()]).collect();
        let dense = Dense::new(if nx * ny <= params.coarse_max { nx * ny } else { 0 });
        let mut mg = Self {
            params,
            levels,
            coarse,
            bs,
            xs,
            dense,
            fine_shape: (a.nx, a.ny, px, py),
        };
        mg.update(a)?;
        Ok(mg)
    }

    /// Recomputes the coarse operators, reciprocal diagonals and the coarsest LU for new
    /// coefficients of an operator of the same shape (no allocation).
    pub fn update(&mut self, a: &Stencil5) -> Result<(), SolveError> {
        let (px, py) = a.periodic();
        if (a.nx, a.ny, px, py) != self.fine_shape {
            return Err(SolveError::InvalidOperator(format!(
                "multigrid built for a {:?} operator updated with a {} x {} (periodic {px}, {py}) one",
                self.fine_shape, a.nx, a.ny
            )));
        }
        self.levels[0].refresh_inv(a);
        let scale = self
            .params
            .coarse_coupling_scale
            .unwrap_or(if a.is_symmetric() { 0.5 } else { 1.0 });
        for l in 0..self.coarse.len() {
            let (fine, rest) = self.coarse.split_at_mut(l);
            let f: &Stencil5 = if l == 0 { a } else { &fine[l - 1] };
            galerkin(f, &mut rest[0], self.levels[l].sx, self.levels[l].sy, scale);
            self.levels[l + 1].refresh_inv(&rest[0]);
        }
        let last = self.coarse.last().unwrap_or(a);
        if last.cells() == self.dense.n {
            self.dense.factor(last);
        } else {
            self.dense.ok = false;
        }
        Ok(())
    }

    /// Number of levels, the finest included.
    pub fn levels(&self) -> usize {
        self.levels.len()
    }

    /// Grid size of every level, finest first.
    pub fn level_sizes(&self) -> Vec<(usize, usize)> {
        self.levels.iter().map(|l| (l.nx, l.ny)).collect()
    }

    /// The operator of level `l >= 1` (for inspection and tests).
    pub fn coarse_operator(&self, l: usize) -> Option<&Stencil5> {
        l.checked_sub(1).and_then(|k| self.coarse.get(k))
    }

    /// One V-cycle from a zero guess: `z = M r`, with `a` the operator the hierarchy was built
    /// (or last updated) for.
    pub fn apply(&mut self, a: &Stencil5, r: &[f64], z: &mut [f64]) -> Result<(), SolveError> {
        check_len("r", r, a.cells())?;
        check_len("z", z, a.cells())?;
        if (a.nx, a.ny) != (self.fine_shape.0, self.fine_shape.1) {
            return Err(SolveError::InvalidOperator(
                "operator shape differs from the hierarchy's".into(),
            ));
        }
        self.vcycle(a, r, z);
        Ok(())
    }

    /// The V-cycle (no checks).
    pub(crate) fn vcycle(&mut self, a: &Stencil5, r: &[f64], z: &mut [f64]) {
        let nl = self.levels.len();
        let (pre, post) = (self.params.pre_sweeps, self.params.post_sweeps);
        // Down.
        for l in 0..nl - 1 {
            let (bl, xl, bnext): (&[f64], &[f64], &mut [f64]) = if l == 0 {
                self.levels[0].pre_smooth(a, r, z, pre);
                (r, &*z, &mut self.bs[0])
            } else {
                let (bh, bt) = self.bs.split_at_mut(l);
                let op = &self.coarse[l - 1];
                self.levels[l].pre_smooth(op, &bh[l - 1], &mut self.xs[l - 1], pre);
                (&bh[l - 1], &self.xs[l - 1], &mut bt[0])
            };
            let op = if l == 0 { a } else { &self.coarse[l - 1] };
            let (ncx, crpb) = (self.levels[l + 1].nx, self.levels[l + 1].rpb);
            self.levels[l].restrict_residual(op, bl, xl, bnext, ncx, crpb);
        }
        // Coarsest.
        {
            let l = nl - 1;
            let (op, b, x): (&Stencil5, &[f64], &mut [f64]) = if l == 0 {
                (a, r, &mut *z)
            } else {
                (&self.coarse[l - 1], &self.bs[l - 1], &mut self.xs[l - 1])
            };
            if self.dense.ok {
                self.dense.solve(b, x);
            } else {
                let lev = &mut self.levels[l];
                lev.pre_smooth(op, b, x, COARSE_FALLBACK_SWEEPS);
                lev.post_smooth(op, b, x, COARSE_FALLBACK_SWEEPS);
            }
        }
        // Up.
        for l in (0..nl - 1).rev() {
            let ncx = self.levels[l + 1].nx;
            let (xh, xt) = self.xs.split_at_mut(l);
            let xc = &xt[0];
            if l == 0 {
                self.levels[0].prolongate(xc, z, ncx);
                self.levels[0].post_smooth(a, r, z, post);
            } else {
                let xl = &mut xh[l - 1];
                self.levels[l].prolongate(xc, xl, ncx);
                self.levels[l].post_smooth(&self.coarse[l - 1], &self.bs[l - 1], xl, post);
            }
        }
    }
}

/// The Galerkin coarse operator `P^T A P` for piecewise-constant P over water cells, with
/// aggregation shifts `sx`, `sy`, and coarse couplings scaled by `scale` (row sums kept).
fn galerkin(f: &Stencil5, c: &mut Stencil5, sx: u32, sy: u32, scale: f64) {
    let (nx, ny, ncx) = (f.nx, f.ny, c.nx);
    c.diag.fill(0.0);
    c.aw.fill(0.0);
    c.ae.fill(0.0);
    c.as_.fill(0.0);
    c.an.fill(0.0);
    c.land.fill(true);
    for j in 0..ny {
        let jc = j >> sy;
        let (js, jn) = f.nb_rows(j);
        for i in 0..nx {
            let k = j * nx + i;
            if f.land[k] {
                continue;
            }
            let ic = i >> sx;
            let kc = jc * ncx + ic;
            c.land[kc] = false;
            c.diag[kc] += f.diag[k];
            let iw = if i > 0 { i - 1 } else { nx - 1 };
            let ie = if i + 1 < nx { i + 1 } else { 0 };
            // West and east: the neighbour's aggregate is either this one or the one beside.
            if f.aw[k] != 0.0 {
                if iw >> sx == ic {
                    c.diag[kc] -= f.aw[k];
                } else {
                    c.aw[kc] += f.aw[k];
                }
            }
            if f.ae[k] != 0.0 {
                if ie >> sx == ic {
                    c.diag[kc] -= f.ae[k];
                } else {
                    c.ae[kc] += f.ae[k];
                }
            }
            if f.as_[k] != 0.0 {
                if js >> sy == jc {
                    c.diag[kc] -= f.as_[k];
                } else {
                    c.as_[kc] += f.as_[k];
                }
            }
            if f.an[k] != 0.0 {
                if jn >> sy == jc {
                    c.diag[kc] -= f.an[k];
                } else {
                    c.an[kc] += f.an[k];
                }
            }
        }
    }
    for kc in 0..c.cells() {
        if c.land[kc] {
            c.diag[kc] = 1.0;
        } else if scale != 1.0 {
            let off = c.aw[kc] + c.ae[kc] + c.as_[kc] + c.an[kc];
            c.diag[kc] -= (1.0 - scale) * off;
            c.aw[kc] *= scale;
            c.ae[kc] *= scale;
            c.as_[kc] *= scale;
            c.an[kc] *= scale;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dense_of(a: &Stencil5) -> Vec<Vec<f64>> {
        let n = a.cells();
        (0..n)
            .map(|c| {
                let mut e = vec![0.0; n];
                e[c] = 1.0;
                let mut y = vec![0.0; n];
                a.apply(&e, &mut y).unwrap();
                y
            })
            .collect() // column c of A
    }

    fn test_op(nx: usize, ny: usize, px: bool, py: bool, symmetric: bool) -> Stencil5 {
        let n = nx * ny;
        let mut land = vec![false; n];
        for k in [nx + 1, nx + 2, 2 * nx + 2, n - 1] {
            land[k] = true;
        }
        let mut c = [vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]];
        for j in 0..ny {
            for i in 0..nx {
                let k = j * nx + i;
                if land[k] {
                    c[0][k] = 1.0;
                    continue;
                }
                let iw = if i > 0 { i - 1 } else { nx - 1 };
                let ie = if i + 1 < nx { i + 1 } else { 0 };
                let js = if j > 0 { j - 1 } else { ny - 1 };
                let jn = if j + 1 < ny { j + 1 } else { 0 };
                let f = |a: usize, b: usize| 0.5 + ((a * 7 + b * 3) % 5) as f64 * 0.25;
                let (kw, ke, ks, kn) = (j * nx + iw, j * nx + ie, js * nx + i, jn * nx + i);
                let open = |nb: usize, edge: bool, p: bool| !land[nb] && (!edge || p);
                let skew = if symmetric { 0.0 } else { 0.3 };
                c[1][k] = if open(kw, i == 0, px) {
                    f(k.min(kw), k.max(kw)) + skew
                } else {
                    0.0
                };
                c[2][k] = if open(ke, i + 1 == nx, px) {
                    f(k.min(ke), k.max(ke))
                } else {
                    0.0
                };
                c[3][k] = if open(ks, j == 0, py) {
                    f(k.min(ks), k.max(ks))
                } else {
                    0.0
                };
                c[4][k] = if open(kn, j + 1 == ny, py) {
                    f(k.min(kn), k.max(kn)) + skew
                } else {
                    0.0
                };
                c[0][k] = 1.0 + c[1][k] + c[2][k] + c[3][k] + c[4][k];
            }
        }
        let [d, w, e, s, nn] = c;
        Stencil5::new(nx, ny, px, py, d, w, e, s, nn, Some(land)).unwrap()
    }

    /// The coarse operator equals P^T A P formed densely (Galerkin; common practice), for odd
    /// and even sizes, periodic or not, with land.
    #[test]
    fn galerkin_matches_dense_product() {
        for (nx, ny, px, py) in [(7, 6, false, false), (7, 5, true, true), (6, 9, true, false)] {
            for symmetric in [true, false] {
                let a = test_op(nx, ny, px, py, symmetric);
                let params = MultigridParams {
                    coarse_max: 4,
                    coarse_coupling_scale: Some(1.0),
                    ..Default::default()
                };
                let mg = Multigrid::new(&a, params).unwrap();
                let ac = mg.coarse_operator(1).unwrap();
                let (ncx, sx, sy) = (ac.nx(), mg.levels[0].sx, mg.levels[0].sy);
                let agg = |k: usize| ((k / nx) >> sy) * ncx + ((k % nx) >> sx);
                let cols = dense_of(&a);
                let mut pap = vec![vec![0.0; ac.cells()]; ac.cells()];
                for (c, col) in cols.iter().enumerate() {
                    for (r, &v) in col.iter().enumerate() {
                        if !a.land()[r] && !a.land()[c] {
                            pap[agg(r)][agg(c)] += v;
                        }
                    }
                }
                let ccols = dense_of(ac);
                for (cc, col) in ccols.iter().enumerate() {
                    for (rc, &v) in col.iter().enumerate() {
                        let expect = if ac.land()[rc] && rc == cc { 1.0 } else { pap[rc][cc] };
                        assert!((v - expect).abs() < 1e-12, "{nx}x{ny} ({rc},{cc}): {v} vs {expect}");
                    }
                }
            }
        }
    }

    /// With equal pre- and post-sweeps the V-cycle is a symmetric operator (needed by
    /// preconditioned CG; common practice): (M u, v) = (u, M v), also with odd periodic sizes.
    #[test]
    fn vcycle_is_symmetric() {
        for (nx, ny, px, py) in [(16, 12, false, false), (15, 13, true, true), (9, 20, true, false)] {
            let a = test_op(nx, ny, px, py, true);
            assert!(a.is_symmetric());
            let mut mg = Multigrid::new(
                &a,
                MultigridParams {
                    coarse_max: 8,
                    ..Default::default()
                },
            )
            .unwrap();
            let n = a.cells();
            let u: Vec<f64> = (0..n)
                .map(|k| ((k * 37 % 11) as f64 - 5.0) * if a.land()[k] { 0.0 } else { 1.0 })
                .collect();
            let v: Vec<f64> = (0..n)
                .map(|k| ((k * 13 % 7) as f64 - 3.0) * if a.land()[k] { 0.0 } else { 1.0 })
                .collect();
            let (mut mu, mut mv) = (vec![0.0; n], vec![0.0; n]);
            mg.apply(&a, &u, &mut mu).unwrap();
            mg.apply(&a, &v, &mut mv).unwrap();
            let d1: f64 = mu.iter().zip(&v).map(|(a, b)| a * b).sum();
            let d2: f64 = u.iter().zip(&mv).map(|(a, b)| a * b).sum();
            assert!((d1 - d2).abs() < 1e-12 * d1.abs().max(1.0), "{nx}x{ny}: {d1} vs {d2}");
            let d3: f64 = mu.iter().zip(&u).map(|(a, b)| a * b).sum();
            assert!(d3 > 0.0);
        }
    }
}
