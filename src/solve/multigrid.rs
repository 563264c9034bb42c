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
//! * **Matrix-free fused sweeps:** on levels whose operator has constant couplings (the
//!   diffusion operator with uniform coefficients, and its all-water coarse operators; see
//!   `compact.rs`), equal pre- and post-sweeps (at most 3), 2x2 coarsening and no sequential
//!   row or column, the pre-smoothing from zero, residual and restriction run as one pass over
//!   the right-hand side, and the prolongation and post-smoothing as one pass writing the
//!   result, row by row through small ring buffers, one stage per half-sweep (each row block
//!   recomputes its few halo rows). The second pass recomputes the pre-smoothing but its last
//!   (black) half-sweep, which the first post-smoothing (black) half-sweep would overwrite
//!   without reading. They compute the same V-cycle as the stored-coefficient passes, to
//!   round-off; on the finest level the second pass also returns `r . z` for conjugate
//!   gradients. The reciprocal diagonal comes from a 128-entry table indexed by the cell's
//!   flag byte (a scalar on rows of one flag value), not from a per-cell array, and the rows
//!   two ahead of the right-hand side and the flags are software-prefetched in pieces between
//!   the stages of each row: the sweeps otherwise stall on the first loads of every row
//!   (memory latency). Other levels use the stored coefficients.
//! * **Coarsest level:** dense LU with partial pivoting (at most `coarse_max` cells); if it is
//!   singular, many symmetric Gauss–Seidel sweeps instead.

use super::blocks::{dot_lanes, for_rows, prefetch_part, rows_per_block, MAX_BLOCKS, PREFETCH_ROWS};
use super::compact::{self, Compact, Consts};
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
    pub(crate) fn validate(&self) -> Result<(), SolveError> {
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
    /// Matrix-free form of this level's operator (levels >= 1; level 0 uses the caller's).
    compact: Option<Compact>,
    /// The level runs the fused matrix-free sweeps ([`fused_down`], [`fused_up`]).
    fused: bool,
    /// Coarse rows per block of the fused sweeps (fine rows: twice that).
    cb: usize,
    /// Ring rows per block of the fused sweeps.
    ring: Vec<f64>,
    /// Pre- and post-sweeps of the fused sweeps.
    sweeps: usize,
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
            compact: None,
            fused: false,
            cb: 1,
            ring: Vec::new(),
            sweeps: 1,
        }
    }

    /// Sets up the fused sweeps (if `on`) with `sweeps` pre- and post-sweeps for coarsening to
    /// `ncy` coarse rows: block size and ring scratch (allocated on the first call only).
    fn setup_fused(&mut self, on: bool, sweeps: usize, ncy: usize) {
        self.fused = on;
        if !on {
            return;
        }
        self.sweeps = sweeps;
        let rpb = rows_per_block(self.nx, self.ny);
        self.cb = rpb.div_ceil(2).max(ncy.div_ceil(MAX_BLOCKS)).max(1);
        let nb = ncy.div_ceil(self.cb);
        let want = nb * ring_rows(sweeps) * self.nx;
        if self.ring.len() != want {
            self.ring = vec![0.0; want];
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
    /// Use the matrix-free fused sweeps where possible (tests switch it off to compare).
    matrix_free: bool,
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
            matrix_free: true,
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
        self.setup_matrix_free(a);
        let last = self.coarse.last().unwrap_or(a);
        if last.cells() == self.dense.n {
            self.dense.factor(last);
        } else {
            self.dense.ok = false;
        }
        Ok(())
    }

    /// Finds which levels have a matrix-free form and which run the fused sweeps: a level with
    /// a compact operator, coarsened 2x2, not the coarsest, one pre- and one post-sweep, and no
    /// sequential (odd periodic) row or column.
    fn setup_matrix_free(&mut self, a: &Stencil5) {
        let nl = self.levels.len();
        let sweeps = self.params.pre_sweeps;
        let fusable = sweeps == self.params.post_sweeps && sweeps <= MAX_FUSED_SWEEPS && self.matrix_free;
        // Identity weight and Dirichlet terms of the aggregated operators.
        let mut k: Option<Consts> = a.compact.as_ref().map(|c| c.k);
        for l in 0..nl {
            if l > 0 {
                let (sx, sy) = (self.levels[l - 1].sx, self.levels[l - 1].sy);
                let found = k.and_then(|kk| {
                    let m = kk.m * f64::from(1u32 << (sx + sy));
                    let g = (kk.gx * f64::from(1u32 << sy), kk.gy * f64::from(1u32 << sx));
                    Compact::detect(&self.coarse[l - 1], m, Some(g), 1e-10)
                });
                k = found.as_ref().map(|c| c.k);
                self.levels[l].compact = found;
            }
            let lev = &self.levels[l];
            let on =
                fusable && k.is_some() && l + 1 < nl && lev.sx == 1 && lev.sy == 1 && !lev.green_row && !lev.green_col;
            let ncy = if l + 1 < nl { self.levels[l + 1].ny } else { 1 };
            self.levels[l].setup_fused(on, sweeps, ncy);
        }
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

    /// The V-cycle (no checks). Returns `r . z` when the finest level ran the fused sweeps
    /// (which form it on the way), else `None`.
    pub(crate) fn vcycle(&mut self, a: &Stencil5, r: &[f64], z: &mut [f64]) -> Option<f64> {
        let nl = self.levels.len();
        let (pre, post) = (self.params.pre_sweeps, self.params.post_sweeps);
        let fused = |lev: &Level, l: usize| lev.fused && (l > 0 || a.compact.is_some());
        // Down.
        for l in 0..nl - 1 {
            let (ncx, crpb) = (self.levels[l + 1].nx, self.levels[l + 1].rpb);
            if fused(&self.levels[l], l) {
                let (bh, bt) = self.bs.split_at_mut(l);
                let b: &[f64] = if l == 0 { r } else { &bh[l - 1] };
                self.levels[l].down_fused(a.compact.as_ref(), l == 0, b, &mut bt[0], ncx);
                continue;
            }
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
        let mut dot = None;
        for l in (0..nl - 1).rev() {
            let ncx = self.levels[l + 1].nx;
            let (xh, xt) = self.xs.split_at_mut(l);
            let xc = &xt[0];
            if fused(&self.levels[l], l) {
                let (b, x): (&[f64], &mut [f64]) = if l == 0 {
                    (r, &mut *z)
                } else {
                    (&self.bs[l - 1], &mut xh[l - 1])
                };
                let d = self.levels[l].up_fused(a.compact.as_ref(), l == 0, b, xc, x, ncx);
                if l == 0 {
                    dot = Some(d);
                }
                continue;
            }
            if l == 0 {
                self.levels[0].prolongate(xc, z, ncx);
                self.levels[0].post_smooth(a, r, z, post);
            } else {
                let xl = &mut xh[l - 1];
                self.levels[l].prolongate(xc, xl, ncx);
                self.levels[l].post_smooth(&self.coarse[l - 1], &self.bs[l - 1], xl, post);
            }
        }
        dot
    }
}

/// Ring rows per block of the fused sweeps with `sweeps` pre- and post-sweeps: three rows for
/// each stage of the up sweep but the last (which writes the result), or for each half-sweep
/// of the down sweep plus one residual row.
fn ring_rows(sweeps: usize) -> usize {
    (3 * (4 * sweeps - 2)).max(6 * sweeps + 1)
}

/// Most pre- (and post-) sweeps the fused sweeps run; more use the stored passes.
const MAX_FUSED_SWEEPS: usize = 3;

/// Pieces each prefetched row is issued in, one before each of the first pipeline stages.
const PREFETCH_PARTS: usize = 4;

/// Row `t` of a level with `ny` rows, wrapped when periodic in y, `None` outside otherwise.
#[inline(always)]
fn wrap_row(t: isize, ny: usize, py: bool) -> Option<usize> {
    if t >= 0 && (t as usize) < ny {
        Some(t as usize)
    } else if py {
        Some(t.rem_euclid(ny as isize) as usize)
    } else {
        None
    }
}

/// Ring slot of row `t` (three slots per stage).
#[inline(always)]
fn slot(t: isize) -> usize {
    t.rem_euclid(3) as usize
}

/// The data of a fused sweep over one level.
struct Fused<'a> {
    k: &'a Consts,
    rows: &'a [u8],
    flags: &'a [u8],
    inv: &'a [f64; compact::FLAG_VALUES],
    nx: usize,
    ny: usize,
    py: bool,
}

impl Fused<'_> {
    /// The grid row of pipeline row `t` (`None` outside a non-periodic grid).
    #[inline(always)]
    fn row(&self, t: isize) -> Option<usize> {
        wrap_row(t, self.ny, self.py)
    }

    /// Prefetches part `part` of `parts` of row `t` of `v` (and of the flags when `flags`), if
    /// the row exists.
    #[inline(always)]
    fn prefetch(&self, t: isize, v: &[f64], flags: bool, part: usize, parts: usize) {
        if let Some(j) = self.row(t) {
            let nx = self.nx;
            prefetch_part(&v[j * nx..(j + 1) * nx], part, parts);
            if flags {
                prefetch_part(&self.flags[j * nx..(j + 1) * nx], part, parts);
            }
        }
    }

    /// Stage R: the red half-sweep from zero on grid row `j` (right-hand side row `b`) into
    /// `out` (zeros outside the grid).
    #[inline(always)]
    fn red0(&self, j: Option<usize>, b: &[f64], out: &mut [f64]) {
        let nx = self.nx;
        match j {
            Some(j) => {
                let c = j * nx..(j + 1) * nx;
                compact::first_colour_row(self.rows[j], &self.flags[c], self.inv, b, out, j % 2);
            }
            None => out.fill(0.0),
        }
    }

    /// A colour half-sweep on grid row `j` (colour 0 red, 1 black; right-hand side row `b`)
    /// from the rows `xs`, `x`, `xn` (zeros outside the grid).
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn relax(&self, j: Option<usize>, colour: usize, b: &[f64], xs: &[f64], x: &[f64], xn: &[f64], out: &mut [f64]) {
        let nx = self.nx;
        match j {
            Some(j) => {
                let c = j * nx..(j + 1) * nx;
                compact::relax_row(
                    self.k,
                    self.rows[j],
                    &self.flags[c],
                    self.inv,
                    b,
                    xs,
                    x,
                    xn,
                    out,
                    (j + colour) % 2,
                );
            }
            None => out.fill(0.0),
        }
    }
}

/// Ring slot `s` of a stage's three rows.
#[inline(always)]
fn ring_row(ring: &[f64], s: usize, nx: usize) -> &[f64] {
    &ring[s * nx..(s + 1) * nx]
}

/// Row `j` of `v` (`nx` values; empty for `None`).
#[inline(always)]
fn vrow(v: &[f64], j: Option<usize>, nx: usize) -> &[f64] {
    match j {
        Some(j) => &v[j * nx..(j + 1) * nx],
        None => &[],
    }
}

impl Level {
    /// Fused pre-smoothing, residual and restriction (one read of `b`, no fine vector
    /// written): from a zero guess, the red then black half-sweep, then `bc = R (b - A x)`,
    /// row by row through ring buffers; each block recomputes the two rows beyond its ends.
    /// Rows two ahead are prefetched in two parts.
    fn down_fused(&mut self, fine: Option<&Compact>, finest: bool, b: &[f64], bc: &mut [f64], ncx: usize) {
        let Level {
            nx,
            ny,
            compact,
            cb,
            ring,
            sweeps,
            ..
        } = self;
        let (nx, ny, cb, sweeps) = (*nx, *ny, *cb, *sweeps);
        let comp = if finest { fine } else { compact.as_ref() };
        let Some(comp) = comp else { return };
        let py = comp_periodic_y(comp, nx, ny);
        let f = Fused {
            k: &comp.k,
            rows: &comp.rows,
            flags: &comp.flags,
            inv: &comp.inv,
            nx,
            ny,
            py,
        };
        let ks = 2 * sweeps as isize;
        let ring_len = ring_rows(sweeps) * nx;
        let work = |blk: usize, out: &mut [f64], ring: &mut [f64]| {
            out.fill(0.0);
            let (a, e) = (
                (2 * blk * cb) as isize,
                ((2 * (blk * cb + out.len() / ncx)).min(ny)) as isize,
            );
            // Stage k < ks: the k-th half-sweep (red from zero, then black, red, ...) of row
            // t - k into ring k; stage ks: residual and restriction of row t - ks.
            let (rings, rest) = ring.split_at_mut(3 * nx * ks as usize);
            let res = &mut rest[..nx];
            let parts = (ks as usize + 1).min(PREFETCH_PARTS);
            for t in a - ks..e + ks {
                let pf = t + PREFETCH_ROWS;
                f.prefetch(pf, b, true, 0, parts);
                let jt = f.row(t);
                f.red0(jt, vrow(b, jt, nx), &mut rings[slot(t) * nx..(slot(t) + 1) * nx]);
                for k in 1..ks {
                    if (k as usize) < parts {
                        f.prefetch(pf, b, true, k as usize, parts);
                    }
                    let u = t - k;
                    if u >= a - ks + k {
                        let ju = f.row(u);
                        let (prev, cur) = rings.split_at_mut(3 * nx * k as usize);
                        let src = &prev[3 * nx * (k as usize - 1)..];
                        f.relax(
                            ju,
                            (k % 2) as usize,
                            vrow(b, ju, nx),
                            ring_row(src, slot(u - 1), nx),
                            ring_row(src, slot(u), nx),
                            ring_row(src, slot(u + 1), nx),
                            &mut cur[slot(u) * nx..(slot(u) + 1) * nx],
                        );
                    }
                }
                if (ks as usize) < parts {
                    f.prefetch(pf, b, true, ks as usize, parts);
                }
                let v = t - ks;
                if v >= a {
                    let j = v as usize;
                    let c = j * nx..(j + 1) * nx;
                    let src = &rings[3 * nx * (ks as usize - 1)..];
                    compact::residual_row(
                        f.k,
                        f.rows[j],
                        &f.flags[c.clone()],
                        ring_row(src, slot(v - 1), nx),
                        ring_row(src, slot(v), nx),
                        ring_row(src, slot(v + 1), nx),
                        &b[c.clone()],
                        res,
                    );
                    let o = &mut out[(j / 2 - blk * cb) * ncx..][..ncx];
                    restrict_pairs(res, o);
                }
            }
        };
        let chunk = cb * ncx;
        if bc.len() <= chunk {
            work(0, bc, &mut ring[..ring_len]);
        } else {
            bc.par_chunks_mut(chunk)
                .zip(ring.par_chunks_mut(ring_len))
                .enumerate()
                .for_each(|(blk, (o, rg))| work(blk, o, rg));
        }
    }

    /// Fused prolongation and post-smoothing, writing `x` once: recomputes the pre-smoothed
    /// rows from `b` (all half-sweeps but the last, black one, whose values the first
    /// post-smoothing half-sweep overwrites without reading), adds `P xc`, then the black and
    /// red half-sweeps. Returns `b . x`. Rows two ahead are prefetched in parts, one per stage.
    fn up_fused(
        &mut self,
        fine: Option<&Compact>,
        finest: bool,
        b: &[f64],
        xc: &[f64],
        x: &mut [f64],
        ncx: usize,
    ) -> f64 {
        let Level {
            nx,
            ny,
            compact,
            cb,
            ring,
            sweeps,
            ..
        } = self;
        let (nx, ny, cb, sweeps) = (*nx, *ny, *cb, *sweeps);
        let comp = if finest { fine } else { compact.as_ref() };
        let Some(comp) = comp else { return 0.0 };
        let py = comp_periodic_y(comp, nx, ny);
        let f = Fused {
            k: &comp.k,
            rows: &comp.rows,
            flags: &comp.flags,
            inv: &comp.inv,
            nx,
            ny,
            py,
        };
        let rows = 2 * cb;
        let last = 4 * sweeps as isize - 2;
        let pre = 2 * sweeps as isize - 1;
        let ring_len = ring_rows(sweeps) * nx;
        let work = |blk: usize, out: &mut [f64], ring: &mut [f64]| -> f64 {
            let (a, e) = ((blk * rows) as isize, (blk * rows + out.len() / nx) as isize);
            // Stage k < pre: the pre-smoothing half-sweeps recomputed (red from zero, black,
            // red, ...) but the last (black) one, `P xc` added after them; stages pre..=last:
            // the post-smoothing half-sweeps (black, red, ...), the last one written to `out`.
            // The skipped black half-sweep would be overwritten by the first post-smoothing
            // one, which reads only red cells, so the result is the same bit for bit.
            let rings = &mut ring[..3 * nx * last as usize];
            let parts = (last as usize + 1).min(PREFETCH_PARTS);
            let mut dot = 0.0;
            for t in a - last..e + last {
                let pf = t + PREFETCH_ROWS;
                f.prefetch(pf, b, true, 0, parts);
                let jt = f.row(t);
                let r0 = &mut rings[slot(t) * nx..(slot(t) + 1) * nx];
                f.red0(jt, vrow(b, jt, nx), r0);
                if let (Some(j), 1) = (jt, pre) {
                    prolong_pairs(&xc[(j / 2) * ncx..(j / 2 + 1) * ncx], r0);
                }
                for k in 1..=last {
                    if (k as usize) < parts {
                        f.prefetch(pf, b, true, k as usize, parts);
                    }
                    let u = t - k;
                    if u < a - last + k {
                        continue;
                    }
                    let colour = if k < pre { k % 2 } else { (k - pre + 1) % 2 } as usize;
                    let ju = f.row(u);
                    let (prev, cur) = rings.split_at_mut(3 * nx * k as usize);
                    let src = &prev[3 * nx * (k as usize - 1)..];
                    let (xs, xm, xn) = (
                        ring_row(src, slot(u - 1), nx),
                        ring_row(src, slot(u), nx),
                        ring_row(src, slot(u + 1), nx),
                    );
                    if k == last {
                        let o = &mut out[(u - a) as usize * nx..][..nx];
                        f.relax(ju, colour, vrow(b, ju, nx), xs, xm, xn, o);
                        if let Some(j) = ju {
                            dot += dot_lanes(&b[j * nx..(j + 1) * nx], o);
                        }
                    } else {
                        let dst = &mut cur[slot(u) * nx..(slot(u) + 1) * nx];
                        f.relax(ju, colour, vrow(b, ju, nx), xs, xm, xn, dst);
                        if let (Some(j), true) = (ju, k == pre - 1) {
                            prolong_pairs(&xc[(j / 2) * ncx..(j / 2 + 1) * ncx], dst);
                        }
                    }
                }
            }
            dot
        };
        let chunk = rows * nx;
        if x.len() <= chunk {
            return work(0, x, &mut ring[..ring_len]);
        }
        let nb = x.len().div_ceil(chunk);
        let mut partial = [0.0f64; MAX_BLOCKS];
        x.par_chunks_mut(chunk)
            .zip(ring.par_chunks_mut(ring_len))
            .zip(partial[..nb].par_iter_mut())
            .enumerate()
            .for_each(|(blk, ((o, rg), p))| *p = work(blk, o, rg));
        partial[..nb].iter().sum()
    }
}
/// Whether the compact operator couples across the south/north sides (periodic in y).
fn comp_periodic_y(c: &Compact, nx: usize, ny: usize) -> bool {
    (0..nx).any(|i| c.flags[i] & compact::S != 0 || c.flags[(ny - 1) * nx + i] & compact::N != 0)
}

/// `out[i / 2] += res[i]`.
#[inline(always)]
fn restrict_pairs(res: &[f64], out: &mut [f64]) {
    let n = res.len();
    let h = n / 2;
    let (pairs, out_h) = (&res[..2 * h], &mut out[..h]);
    for (o, p) in out_h.iter_mut().zip(pairs.chunks_exact(2)) {
        *o += p[0] + p[1];
    }
    if n % 2 == 1 {
        out[h] += res[n - 1];
    }
}

/// `z[i] += xc[i / 2]`.
#[inline(always)]
fn prolong_pairs(xc: &[f64], z: &mut [f64]) {
    let n = z.len();
    let h = n / 2;
    for (p, &c) in z[..2 * h].chunks_exact_mut(2).zip(&xc[..h]) {
        p[0] += c;
        p[1] += c;
    }
    if n % 2 == 1 {
        z[n - 1] += xc[h];
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
            couple(f.aw[k], iw >> sx == ic, &mut c.diag[kc], &mut c.aw[kc]);
            couple(f.ae[k], ie >> sx == ic, &mut c.diag[kc], &mut c.ae[kc]);
            couple(f.as_[k], js >> sy == jc, &mut c.diag[kc], &mut c.as_[kc]);
            couple(f.an[k], jn >> sy == jc, &mut c.diag[kc], &mut c.an[kc]);
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

/// Galerkin coupling of a fine face into the coarse operator: a face inside one aggregate
/// cancels on the coarse diagonal, a face between aggregates adds to the coarse coupling.
#[inline]
fn couple(a: f64, same_aggregate: bool, diag: &mut f64, off: &mut f64) {
    if a != 0.0 {
        if same_aggregate {
            *diag -= a;
        } else {
            *off += a;
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

    /// The fused matrix-free sweeps compute the same V-cycle as the stored-coefficient passes
    /// (red from zero, black, residual, restriction; prolongation, black, red), to round-off,
    /// with land, every side kind and even and odd sizes (odd periodic sizes fall back).
    #[test]
    fn fused_vcycle_matches_stored_path() {
        use crate::grid::{Grid, Mask};
        use crate::solve::{SideCoupling, Sides};
        let sides = [
            Sides::closed(),
            Sides::periodic(),
            Sides::uniform(SideCoupling::Dirichlet),
            Sides {
                west: SideCoupling::Dirichlet,
                east: SideCoupling::Closed,
                south: SideCoupling::Periodic,
                north: SideCoupling::Periodic,
            },
        ];
        let mut fused_seen = 0;
        for (nx, ny) in [(64, 48), (45, 38), (33, 31)] {
            let grid = Grid::new(nx, ny, 1.0, 1.5, 0.0, 0.0).unwrap();
            let mut wet = vec![true; nx * ny];
            for j in ny / 3..ny / 2 {
                for i in nx / 4..nx / 3 {
                    wet[j * nx + i] = false;
                }
            }
            for mask in [Mask::all_water(&grid), Mask::from_wet(&grid, wet.clone()).unwrap()] {
                for (s, sweeps) in sides.into_iter().flat_map(|s| (1..=3).map(move |k| (s, k))) {
                    let a = Stencil5::diffusion(&grid, &mask, s, 20.0, 7.0).unwrap();
                    assert!(a.is_matrix_free());
                    let params = MultigridParams {
                        coarse_max: 16,
                        pre_sweeps: sweeps,
                        post_sweeps: sweeps,
                        ..Default::default()
                    };
                    let mut fast = Multigrid::new(&a, params).unwrap();
                    let mut slow = Multigrid::new(&a, params).unwrap();
                    slow.matrix_free = false;
                    slow.update(&a).unwrap();
                    assert!(slow.levels.iter().all(|l| !l.fused));
                    fused_seen += usize::from(fast.levels[0].fused);
                    let n = a.cells();
                    let r: Vec<f64> = (0..n).map(|k| ((k * 37 % 11) as f64 - 5.0) + 0.01 * k as f64).collect();
                    let (mut z1, mut z2) = (vec![0.0; n], vec![0.0; n]);
                    let d = fast.vcycle(&a, &r, &mut z1);
                    slow.vcycle(&a, &r, &mut z2);
                    let scale = z2.iter().fold(0.0f64, |m, v| m.max(v.abs()));
                    for k in 0..n {
                        assert!(
                            (z1[k] - z2[k]).abs() <= 1e-12 * scale,
                            "{nx}x{ny} {s:?} {sweeps} sweeps cell {k}: {} vs {}",
                            z1[k],
                            z2[k]
                        );
                    }
                    if let Some(d) = d {
                        let e: f64 = r.iter().zip(&z2).map(|(a, b)| a * b).sum();
                        assert!((d - e).abs() <= 1e-12 * e.abs().max(1.0), "{d} vs {e}");
                    }
                }
            }
        }
        assert!(fused_seen >= 24, "fused sweeps used on {fused_seen} cases only");
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

    /// On the fine level the fused sweeps' reciprocal-diagonal table equals the stored
    /// `1 / diag` bit for bit, with land and every side kind.
    #[test]
    fn inverse_diagonal_table_matches_stored() {
        use crate::grid::{Grid, Mask};
        use crate::solve::{SideCoupling, Sides};
        let (nx, ny) = (40, 30);
        let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut wet = vec![true; nx * ny];
        for j in ny / 3..ny / 2 {
            wet[j * nx + nx / 2] = false;
        }
        for mask in [Mask::all_water(&grid), Mask::from_wet(&grid, wet.clone()).unwrap()] {
            for s in [
                Sides::closed(),
                Sides::periodic(),
                Sides::uniform(SideCoupling::Dirichlet),
            ] {
                let a = Stencil5::diffusion(&grid, &mask, s, 9.0, 4.0).unwrap();
                let c = a.compact.as_ref().unwrap();
                let mg = Multigrid::new(&a, MultigridParams::default()).unwrap();
                for k in 0..a.cells() {
                    assert_eq!(c.inv[usize::from(c.flags[k])].to_bits(), mg.levels[0].inv[k].to_bits());
                }
            }
        }
    }
}
