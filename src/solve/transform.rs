//! Exact solves by a fast cosine (or sine) transform along x and Gaussian elimination along
//! y for the operators that allow them: the constant-coefficient 5-point operator
//! `m I + cx Lx + cy Ly` on a rectangle of water (no land) whose x sides are both closed or
//! both fixed, and whose y ends are each closed or fixed (not periodic). These are the
//! implicit diffusion matrices of [`super::Stencil5::diffusion`] with uniform diffusivity on
//! an open-water domain.
//!
//! The cell-centred 1D operator with closed (zero-flux) ends is diagonalised by the DCT-II,
//! with eigenvalues `2 - 2 cos(pi k / n)`, `k = 0..n`; with fixed values at the end faces
//! (ghost value mirrored with a change of sign, so the end rows carry `3` on the diagonal) by
//! the DST-II, with eigenvalues `2 - 2 cos(pi (k + 1) / n)` (the eigenpairs are standard,
//! e.g. Strang 1999, "The discrete cosine transform", SIAM Review 41, 135-147; recalled from
//! memory). Transforming the rows splits the 2D operator into one tridiagonal system along y
//! per x mode, `(m + cx lx_k) I + cy Ly`, solved by elimination with pivots factored once
//! per operator; transforming back gives `A^-1 b` (the Fourier-analysis-and-tridiagonal fast
//! Poisson solver of Hockney 1965, Methods in Computational Physics 9, 135-211; see also
//! Buzbee, Golub & Nielson 1970, SIAM J. Numer. Anal. 7, 627-656). Cost `O(N log nx)`: FFTs
//! of rows in parallel and elimination sweeps over contiguous rows in parallel over column
//! ranges, with no transposes.
//!
//! Which operators qualify is decided from the matrix-free form's per-cell flags, which
//! reproduce the stored operator exactly, so the transform solves the same matrix.

use super::blocks::dot_lanes;
use super::compact::{self, Compact, DX, DY, E, LAND, N, S, W};
use super::Stencil5;
use rayon::prelude::*;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// Most lines per parallel block.
const BLOCK_LINES: usize = 64;

/// How one axis ends, as the transform sees it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Ends {
    /// Both ends closed (zero flux): DCT-II.
    Closed,
    /// Both ends at fixed values (Dirichlet at the end faces): DST-II.
    Fixed,
}

/// The cosine (or sine) transform of one axis, two real lines per complex FFT.
///
/// The DCT-II `X_k = sum_n x_n cos(pi k (2n + 1) / 2N)` is computed by Makhoul's (1980, IEEE
/// Trans. ASSP 28, 27-34) reordering `v = (x_0, x_2, ..., x_3, x_1)`, one complex FFT of
/// length `N`, and the twiddle `X_k = Re(exp(-i pi k / 2N) V_k)`; the inverse runs the same
/// steps backwards (`V_k = exp(i pi k / 2N) (X_k - i X_{N-k})`). Two real lines share one
/// FFT as its real and imaginary parts (their spectra are separated by the conjugate
/// symmetry of real sequences). The DST-II is the DCT-II of `(-1)^n x_n` read backwards, so
/// a fixed-ends axis flips the sign of odd entries and keeps the DCT ordering, with
/// eigenvalues `2 + 2 cos(pi m / N)` at DCT index `m` (that is, `2 - 2 cos(pi (k + 1) / N)`
/// at DST index `k = N - 1 - m`).
#[derive(Clone)]
struct Axis {
    n: usize,
    fixed: bool,
    fwd: Arc<dyn Fft<f64>>,
    inv: Arc<dyn Fft<f64>>,
    /// `exp(-i pi k / 2N)`.
    w: Vec<Complex<f64>>,
    /// `c lambda` at each DCT index (coupling times eigenvalue).
    lam: Vec<f64>,
    /// Complex scratch the FFTs ask for.
    scratch_len: usize,
}

impl std::fmt::Debug for Axis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Axis")
            .field("n", &self.n)
            .field("fixed", &self.fixed)
            .finish()
    }
}

impl Axis {
    fn new(planner: &mut FftPlanner<f64>, ends: Ends, n: usize, c: f64) -> Self {
        let fwd = planner.plan_fft_forward(n);
        let inv = planner.plan_fft_inverse(n);
        let scratch_len = fwd.get_inplace_scratch_len().max(inv.get_inplace_scratch_len());
        let w = (0..n)
            .map(|k| Complex::from_polar(1.0, -std::f64::consts::PI * k as f64 / (2 * n) as f64))
            .collect();
        let mut a = Self {
            n,
            fixed: ends == Ends::Fixed,
            fwd,
            inv,
            w,
            lam: vec![0.0; n],
            scratch_len,
        };
        a.set_coupling(c);
        a
    }

    fn ends(&self) -> Ends {
        if self.fixed {
            Ends::Fixed
        } else {
            Ends::Closed
        }
    }

    fn set_coupling(&mut self, c: f64) {
        let n = self.n as f64;
        let sign = if self.fixed { -1.0 } else { 1.0 };
        for (m, l) in self.lam.iter_mut().enumerate() {
            *l = c * (2.0 - sign * 2.0 * (std::f64::consts::PI * m as f64 / n).cos());
        }
    }

    /// Reorders lines `a` and `b` (`b` absent: zeros) into `z` as real and imaginary parts,
    /// flipping odd entries on a fixed-ends axis.
    #[inline]
    fn load(&self, a: &[f64], b: Option<&[f64]>, z: &mut [Complex<f64>]) {
        let n = self.n;
        let odd = if self.fixed { -1.0 } else { 1.0 };
        let (a, z) = (&a[..n], &mut z[..n]);
        let (h, t) = (n.div_ceil(2), n / 2);
        let (front, back) = z.split_at_mut(h);
        match b {
            Some(b) => {
                let b = &b[..n];
                for (p, zp) in front.iter_mut().enumerate() {
                    *zp = Complex::new(a[2 * p], b[2 * p]);
                }
                for (q, zq) in back.iter_mut().enumerate() {
                    // back[q] = z[h + q] holds x[2p + 1] with p = n - 1 - h - q.
                    let p = t - 1 - q;
                    *zq = Complex::new(odd * a[2 * p + 1], odd * b[2 * p + 1]);
                }
            }
            None => {
                for (p, zp) in front.iter_mut().enumerate() {
                    *zp = Complex::new(a[2 * p], 0.0);
                }
                for (q, zq) in back.iter_mut().enumerate() {
                    let p = t - 1 - q;
                    *zq = Complex::new(odd * a[2 * p + 1], 0.0);
                }
            }
        }
    }

    /// Forward transform of `a` and `b` (`b` absent: one line) in place.
    #[cfg(test)]
    fn forward(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        self.load(a, b.as_deref(), z);
        self.transform_unpack(a, b, z, s);
    }

    /// Forward transform of `src_a` and `src_b` into `a` and `b`.
    #[inline]
    fn forward_from(
        &self,
        src_a: &[f64],
        src_b: Option<&[f64]>,
        a: &mut [f64],
        b: Option<&mut [f64]>,
        z: &mut [Complex<f64>],
        s: &mut [Complex<f64>],
    ) {
        self.load(src_a, src_b, z);
        self.transform_unpack(a, b, z, s);
    }

    /// The FFT of the loaded `z`, unpacked into the two lines' transforms.
    #[inline]
    fn transform_unpack(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        let n = self.n;
        self.fwd.process_with_scratch(&mut z[..n], s);
        let (a, w, z) = (&mut a[..n], &self.w[..n], &z[..n]);
        match b {
            Some(b) => {
                let b = &mut b[..n];
                // Spectra of the real and imaginary parts: (z_k + conj z_{n-k}) / 2 and
                // (z_k - conj z_{n-k}) / 2i; z_0 pairs with itself.
                a[0] = z[0].re;
                b[0] = z[0].im;
                for k in 1..n {
                    let (zk, zc) = (z[k], z[n - k]);
                    let (sr, si) = (0.5 * (zk.re + zc.re), 0.5 * (zk.im - zc.im));
                    let (dr, di) = (0.5 * (zk.im + zc.im), 0.5 * (zc.re - zk.re));
                    let wk = w[k];
                    a[k] = wk.re * sr - wk.im * si;
                    b[k] = wk.re * dr - wk.im * di;
                }
            }
            None => {
                for k in 0..n {
                    a[k] = w[k].re * z[k].re - w[k].im * z[k].im;
                }
            }
        }
    }

    /// Inverse of [`Self::forward`] times `N`, in place.
    #[inline]
    fn inverse(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        let n = self.n;
        let (z, w) = (&mut z[..n], &self.w[..n]);
        {
            // V_k = conj(w_k) (X_k - i X_{n-k}), X_n taken as 0.
            let a = &a[..n];
            let spec =
                |xk: f64, xb: f64, wk: Complex<f64>| Complex::new(wk.re * xk - wk.im * xb, -wk.re * xb - wk.im * xk);
            match b.as_deref() {
                Some(b) => {
                    let b = &b[..n];
                    z[0] = Complex::new(a[0], b[0]);
                    for k in 1..n {
                        let (va, vb) = (spec(a[k], a[n - k], w[k]), spec(b[k], b[n - k], w[k]));
                        // va + i vb
                        z[k] = Complex::new(va.re - vb.im, va.im + vb.re);
                    }
                }
                None => {
                    z[0] = Complex::new(a[0], 0.0);
                    for k in 1..n {
                        z[k] = spec(a[k], a[n - k], w[k]);
                    }
                }
            }
        }
        self.inv.process_with_scratch(z, s);
        let odd = if self.fixed { -1.0 } else { 1.0 };
        let (h, t) = (n.div_ceil(2), n / 2);
        let (front, back) = z.split_at(h);
        // Undo the reordering of `load`: the real parts are line `a`, the imaginary ones `b`.
        let unload = |out: &mut [f64], part: fn(&Complex<f64>) -> f64| {
            let out = &mut out[..n];
            for (p, zp) in front.iter().enumerate() {
                out[2 * p] = part(zp);
            }
            for (q, zq) in back.iter().enumerate() {
                out[2 * (t - 1 - q) + 1] = odd * part(zq);
            }
        };
        unload(a, |c| c.re);
        if let Some(b) = b {
            unload(b, |c| c.im);
        }
    }
}

/// Runs `f` on the lines of `lines` (each `n` long) two at a time, the odd one out alone.
#[inline]
fn in_pairs(lines: &mut [f64], n: usize, mut f: impl FnMut(usize, &mut [f64], Option<&mut [f64]>)) {
    let mut it = lines.chunks_exact_mut(n).enumerate();
    while let Some((k, a)) = it.next() {
        match it.next() {
            Some((_, b)) => f(k, a, Some(b)),
            None => f(k, a, None),
        }
    }
}

/// Relative distance from the limit at which a pivot of the y recurrence counts as settled.
const SETTLED: f64 = 4e-15;

/// The y systems of every x mode, factored: mode `k` solves
/// `-cy u_{j-1} + (m + lx_k + y_j) u_j - cy u_{j+1} = f_j`, where `y_j` is the y part of row
/// `j`'s diagonal (`2 cy` inside, `cy` plus `gy` at a fixed end, `cy` at a closed one).
/// Gaussian elimination without pivoting (the Thomas algorithm; the matrix is diagonally
/// dominant, so it is stable) has pivots `p_0 = d_0`, `p_j = d_j - cy^2 / p_{j-1}`, which
/// converge geometrically to the larger root of `p^2 - d p + cy^2 = 0` in the interior; the
/// reciprocal pivots are stored only until every mode has settled to [`SETTLED`], so the
/// table is a few dozen rows unless `cy / m` is very large.
#[derive(Debug, Clone)]
struct Tridiag {
    ny: usize,
    cy: f64,
    /// Reciprocal pivots of rows `0 .. rows` (then constant up to row `ny - 2`), `nx` each.
    inv: Vec<f64>,
    rows: usize,
    /// Reciprocal pivots of the last row.
    last: Vec<f64>,
    /// Scratch of [`Self::factor`]: the pivots less `cy` of the row being factored.
    r: Vec<f64>,
}

impl Tridiag {
    fn new(nx: usize, ny: usize) -> Self {
        Self {
            ny,
            cy: 0.0,
            // Zeroed memory is mapped lazily, so rows never reached cost nothing.
            inv: vec![0.0; nx * (ny - 1)],
            rows: 1,
            last: vec![0.0; nx],
            r: vec![0.0; nx],
        }
    }

    /// Factors for identity weight `m`, x eigenvalues `lam` (times `cx`), coupling `cy`, and
    /// fixed ends (adding `gy`) at the south and north rows as flagged.
    ///
    /// The pivots are carried as `p_j = cy + r_j` with `r_0 = m + lx + [gy]` and
    /// `r_j = m + lx + cy r_{j-1} / p_{j-1}`, and the last pivot as
    /// `m + lx + [gy] + cy r / p` of the row before: all terms are positive, so nothing
    /// cancels even when `cy / m` is huge and mode 0 between closed ends is nearly singular
    /// (the textbook recurrence `d - cy^2 / p` loses `cy / m` ulps there).
    fn factor(&mut self, m: f64, lam: &[f64], cy: f64, gy: f64, south: bool, north: bool) {
        let ny = self.ny;
        self.cy = cy;
        let (gs, gn) = (if south { gy } else { 0.0 }, if north { gy } else { 0.0 });
        let r = &mut self.r;
        let (first, rest) = self.inv.split_at_mut(lam.len());
        for ((p, rk), &l) in first.iter_mut().zip(r.iter_mut()).zip(lam) {
            *rk = m + l + gs;
            *p = 1.0 / (cy + *rk);
        }
        self.rows = 1;
        // Rows 1 ..= ny - 2 are interior; stop once every mode's pivot has settled at the
        // larger root of p^2 - d p + cy^2 (d = m + lx + 2 cy).
        let mut prev: &[f64] = first;
        for (j, row) in rest.chunks_exact_mut(lam.len()).enumerate().take(ny.saturating_sub(2)) {
            let mut settled = true;
            for (((p, &q), rk), &l) in row.iter_mut().zip(prev).zip(r.iter_mut()).zip(lam) {
                let ml = m + l;
                *rk = ml + cy * *rk * q;
                let piv = cy + *rk;
                *p = 1.0 / piv;
                let lim = 0.5 * (ml + 2.0 * cy + (ml * (ml + 4.0 * cy)).sqrt());
                settled &= (piv - lim).abs() <= SETTLED * lim || *p == q;
            }
            self.rows = j + 2;
            prev = row;
            if settled {
                break;
            }
        }
        // `r` now belongs to the last stored row, which stands for row ny - 2.
        let nx = lam.len();
        let b0 = (ny - 2).min(self.rows - 1) * nx;
        let before = &self.inv[b0..b0 + nx];
        for (((p, &q), &rk), &l) in self.last.iter_mut().zip(before).zip(self.r.iter()).zip(lam) {
            *p = 1.0 / (m + l + gn + cy * rk * q);
        }
    }

    /// Reciprocal pivots of row `j < ny - 1` (all `nx` modes).
    #[inline]
    fn row(&self, j: usize) -> &[f64] {
        let nx = self.last.len();
        let r = j.min(self.rows - 1);
        &self.inv[r * nx..(r + 1) * nx]
    }

    /// Reciprocal pivots of row `j` (the last row's own when `j = ny - 1`).
    #[inline]
    fn pivots(&self, j: usize) -> &[f64] {
        if j + 1 == self.ny {
            &self.last
        } else {
            self.row(j)
        }
    }

    /// Forward elimination of modes `k0 .. k0 + w` (`cols`) in place on the row-major field at `x`
    /// (rows of `nx`), the right-hand side scaled by `s`: `g_j = (s f_j + cy g_{j-1}) / p_j`.
    /// On the way it prepares the back substitution `u_j = g_j + e_j u_{j+1}`
    /// (`e_j = cy / p_j`) to run block by block (blocks of `lines` rows): per block `B` with
    /// rows `j0 .. j1` it sums `S_B = sum_i P_i g_i` and `P_B = P_{j1}`, where
    /// `P_{j0} = 1` and `P_{i+1} = P_i e_i`, so that `u_{j0} = S_B + P_B u_{j1}`; a sweep down
    /// the blocks then leaves in `tops` row `B` the value `u` of row `j0` of block `B`, from
    /// which [`Self::back_block`] finishes block `B - 1` without the others. `tops` and `prods`
    /// hold one row of `nx` per block.
    ///
    /// # Safety
    /// `x` must point to `nx * ny` values and `tops`, `prods` to `nx` times the block count,
    /// `k0 + w <= nx`, and no other thread may access columns `k0 .. k0 + w` of any of them
    /// meanwhile.
    unsafe fn forward(&self, x: SyncPtr, (k0, w): (usize, usize), s: f64, lines: usize, tops: SyncPtr, prods: SyncPtr) {
        let (nx, ny, cy) = (self.last.len(), self.ny, self.cy);
        // SAFETY: row j's part lies inside its array and belongs to this caller alone; the
        // parts borrowed at once are different rows or different arrays.
        let part = |p: SyncPtr, j: usize| unsafe { std::slice::from_raw_parts_mut(p.ptr().add(j * nx + k0), w) };
        let blocks = ny.div_ceil(lines);
        for blk in 0..blocks {
            let (sum, prod) = (part(tops, blk), part(prods, blk));
            sum.fill(0.0);
            prod.fill(1.0);
            for j in blk * lines..((blk + 1) * lines).min(ny) {
                let (g, piv) = (part(x, j), &self.pivots(j)[k0..k0 + w]);
                if j == 0 {
                    for (v, &p) in g.iter_mut().zip(piv) {
                        *v *= s * p;
                    }
                } else {
                    let prev = &*part(x, j - 1);
                    for ((v, &q), &p) in g.iter_mut().zip(prev).zip(piv) {
                        *v = (s * *v + cy * q) * p;
                    }
                }
                for (((t, f), &v), &p) in sum.iter_mut().zip(prod.iter_mut()).zip(&*g).zip(piv) {
                    *t += *f * v;
                    *f *= cy * p;
                }
            }
        }
        // u at the first row of each block, from the top block down (nothing above row ny - 1).
        for blk in (0..blocks.saturating_sub(1)).rev() {
            let (up, sum, prod) = (&*part(tops, blk + 1), part(tops, blk), &*part(prods, blk));
            for ((t, &f), &u) in sum.iter_mut().zip(prod).zip(up) {
                *t += f * u;
            }
        }
    }

    /// Back substitution of the rows `rows` (rows `j0 ..` of the field, all modes, after
    /// [`Self::forward`]), with `above` the value `u` of the row after them (`None` at the
    /// top of the field): `u_j = g_j + (cy / p_j) u_{j+1}`, from the top row down.
    fn back_block(&self, rows: &mut [f64], j0: usize, above: Option<&[f64]>) {
        let (nx, cy) = (self.last.len(), self.cy);
        let mut next: Option<&[f64]> = above;
        for (t, u) in rows.chunks_exact_mut(nx).enumerate().rev() {
            if let Some(q) = next {
                for ((v, &q), &p) in u.iter_mut().zip(q).zip(self.pivots(j0 + t)) {
                    *v += cy * p * q;
                }
            }
            next = Some(u);
        }
    }
}

/// A fast-transform solver for one qualifying operator, with all its scratch.
#[derive(Debug, Clone)]
pub(crate) struct Transform {
    nx: usize,
    ny: usize,
    x: Axis,
    y: Tridiag,
    /// Fixed values at the south and north ends.
    south: bool,
    north: bool,
    /// Rows per parallel block (even, so pairs stay in one block).
    lines: usize,
    /// Column ranges of the y solves, one parallel task each.
    columns: Vec<(usize, usize)>,
    /// Per block: the complex line and the FFT scratch.
    scratch: Vec<Complex<f64>>,
    scratch_len: usize,
    /// Per row block: partial sums of `b . b` and of the squared residual.
    partial: Vec<[f64; 2]>,
    /// Per row block, all modes: `u` at its first row, and the product of the `e_j` of its
    /// rows (see [`Tridiag::forward`]).
    tops: Vec<f64>,
    prods: Vec<f64>,
}

/// How `c` (on `nx` by `ny` cells, not periodic) ends: the x ends as a pair and whether the
/// south and the north ends are fixed, if it is a rectangle of water with closed or fixed x
/// sides in pairs; else `None`.
fn qualifying_ends(c: &Compact, nx: usize, ny: usize) -> Option<(Ends, bool, bool)> {
    // Read off cells that touch one side only (a corner's Dirichlet bits are ambiguous when
    // gx = gy; the compact form needs at least 3 cells each way).
    if nx < 3 || ny < 3 {
        return None;
    }
    let ex = if c.flags[nx] & DX != 0 {
        Ends::Fixed
    } else {
        Ends::Closed
    };
    let south = c.flags[1] & DY != 0;
    let north = c.flags[(ny - 1) * nx + 1] & DY != 0;
    for j in 0..ny {
        for i in 0..nx {
            let mut want = 0u8;
            if i > 0 {
                want |= W;
            }
            if i + 1 < nx {
                want |= E;
            }
            if j > 0 {
                want |= S;
            }
            if j + 1 < ny {
                want |= N;
            }
            if ex == Ends::Fixed && (i == 0 || i + 1 == nx) {
                want |= DX;
            }
            if (south && j == 0) || (north && j + 1 == ny) {
                want |= DY;
            }
            // The open faces must match, and the diagonal (which is all the Dirichlet bits
            // mean to the operator).
            let f = c.flags[j * nx + i];
            let faces = W | E | S | N | LAND;
            if f & faces != want & faces || c.k.diag(f) != c.k.diag(want) {
                return None;
            }
        }
    }
    // Fixed x ends must carry twice the coupling on the diagonal (a value at the face).
    if ex == Ends::Fixed && c.k.gx != 2.0 * c.k.cx {
        return None;
    }
    Some((ex, south, north))
}

impl Transform {
    /// The solver for `a`, or `None` if `a` does not qualify (see the module doc).
    pub fn new(a: &Stencil5) -> Option<Self> {
        let (nx, ny) = (a.nx, a.ny);
        if a.periodic_x || a.periodic_y {
            return None;
        }
        let c = a.compact.as_ref()?;
        let (ex, south, north) = qualifying_ends(c, nx, ny)?;
        if !(c.k.m > 0.0 && c.k.cx >= 0.0 && c.k.cy >= 0.0 && c.k.gy >= 0.0) {
            return None;
        }
        let mut planner = FftPlanner::new();
        let x = Axis::new(&mut planner, ex, nx, c.k.cx);
        let mut y = Tridiag::new(nx, ny);
        y.factor(c.k.m, &x.lam, c.k.cy, c.k.gy, south, north);
        let scratch_len = nx + x.scratch_len;
        let threads = rayon::current_num_threads().max(1);
        // Rows per block: a few blocks per thread, at most BLOCK_LINES.
        let lines = ny.div_ceil(4 * threads).clamp(2, BLOCK_LINES).next_multiple_of(2);
        let blocks = ny.div_ceil(lines);
        // Column ranges: one per thread, widths a multiple of 8 values (whole cache lines).
        let width = nx.div_ceil(threads).next_multiple_of(8);
        let columns = (0..nx).step_by(width).map(|k0| (k0, width.min(nx - k0))).collect();
        Some(Self {
            nx,
            ny,
            x,
            y,
            south,
            north,
            lines,
            columns,
            scratch: vec![Complex::new(0.0, 0.0); blocks * scratch_len],
            scratch_len,
            partial: vec![[0.0; 2]; blocks],
            tops: vec![0.0; blocks * nx],
            prods: vec![0.0; blocks * nx],
        })
    }

    /// Blocks of `lines` rows (even) from now on.
    #[cfg(test)]
    fn set_lines(&mut self, lines: usize) {
        let blocks = self.ny.div_ceil(lines);
        self.lines = lines;
        self.scratch.resize(blocks * self.scratch_len, Complex::new(0.0, 0.0));
        self.partial.resize(blocks, [0.0; 2]);
        self.tops.resize(blocks * self.nx, 0.0);
        self.prods.resize(blocks * self.nx, 0.0);
    }

    /// Takes the coefficients of `a` if it qualifies with the same shape and sides (no
    /// allocation); `false` (and `self` unchanged) otherwise.
    pub fn refresh(&mut self, a: &Stencil5) -> bool {
        if a.periodic_x || a.periodic_y || (a.nx, a.ny) != (self.nx, self.ny) {
            return false;
        }
        let Some(c) = a.compact.as_ref() else { return false };
        let same = qualifying_ends(c, a.nx, a.ny) == Some((self.x.ends(), self.south, self.north));
        if !(same && c.k.m > 0.0 && c.k.gy >= 0.0) {
            return false;
        }
        self.x.set_coupling(c.k.cx);
        self.y
            .factor(c.k.m, &self.x.lam, c.k.cy, c.k.gy, self.south, self.north);
        true
    }

    /// `x = A^-1 b` for the operator `a` the solver was built or refreshed for (no
    /// allocation); returns `(b . b, ||b - A x||^2)`, both summed per row block in block order.
    /// Three parallel passes over `x`: blocks of rows of `b` transformed along x into `x`
    /// (and `b . b` summed); column ranges eliminated forward along y, every mode at once
    /// (contiguous rows, so the loops vectorise across modes), with the per-block sums that
    /// decouple the back substitution (see [`Tridiag::forward`]); blocks of rows
    /// back-substituted, transformed back along x and their residual rows summed while in
    /// cache (a block's first and last rows, whose neighbours another block writes,
    /// afterwards).
    pub fn solve(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64]) -> (f64, f64) {
        let Self {
            nx,
            ny,
            x: ax,
            y: ty,
            lines,
            columns,
            scratch,
            scratch_len,
            partial,
            tops,
            prods,
            ..
        } = self;
        let (nx, ny, sl, lx) = (*nx, *ny, *scratch_len, *lines);
        let Some(comp) = a.compact.as_ref() else {
            return (f64::NAN, f64::NAN);
        };
        let ax = &*ax;
        b.par_chunks(lx * nx)
            .zip(x.par_chunks_mut(lx * nx))
            .zip(scratch.par_chunks_mut(sl))
            .zip(partial.par_iter_mut())
            .for_each(|(((src, rows), s), part)| {
                let (z, fs) = s.split_at_mut(nx);
                let mut bb = 0.0;
                in_pairs(rows, nx, |k, a, b| {
                    // b . b summed while the rows are in L1.
                    let sa = &src[k * nx..(k + 1) * nx];
                    let sb = b.as_ref().map(|_| &src[(k + 1) * nx..(k + 2) * nx]);
                    bb += dot_lanes(sa, sa) + sb.map_or(0.0, |v| dot_lanes(v, v));
                    ax.forward_from(sa, sb, a, b, z, fs);
                });
                part[0] = bb;
            });
        // The inverse transform returns nx times the line, hence the scale.
        let scale = 1.0 / nx as f64;
        let xp = SyncPtr(x.as_mut_ptr());
        let (tp, pp) = (SyncPtr(tops.as_mut_ptr()), SyncPtr(prods.as_mut_ptr()));
        let ty = &*ty;
        columns.par_iter().for_each(|&(k0, w)| {
            // SAFETY: the column ranges are disjoint and inside the nx * ny field at `xp` and
            // the nx-wide per-block rows at `tp` and `pp`.
            unsafe { ty.forward(xp, (k0, w), scale, lx, tp, pp) }
        });
        let tops: &[f64] = tops;
        let res_row = |j: usize, xs: &[f64], xm: &[f64], xn: &[f64]| {
            let c = j * nx..(j + 1) * nx;
            compact::residual_row_sq(&comp.k, comp.rows[j], &comp.flags[c.clone()], xs, xm, xn, &b[c])
        };
        x.par_chunks_mut(lx * nx)
            .zip(scratch.par_chunks_mut(sl))
            .zip(partial.par_iter_mut())
            .enumerate()
            .for_each(|(blk, ((rows, s), part))| {
                let (z, fs) = s.split_at_mut(nx);
                let above = tops.get((blk + 1) * nx..(blk + 2) * nx);
                ty.back_block(rows, blk * lx, above);
                let h = rows.len() / nx;
                let mut rr = 0.0;
                let mut t = 0;
                // Rows transformed back in pairs; each interior row's residual is summed as
                // soon as its upper neighbour is final, so all three rows are still in L1/L2.
                while t < h {
                    let two = (h - t).min(2);
                    let (pa, pb) = rows[t * nx..(t + two) * nx].split_at_mut(nx);
                    ax.inverse(pa, (two == 2).then_some(pb), z, fs);
                    let ready = t + two;
                    let line = |r: usize| &rows[r * nx..(r + 1) * nx];
                    for r in t.saturating_sub(1).max(1)..(ready - 1).min(h - 1) {
                        rr += res_row(blk * lx + r, line(r - 1), line(r), line(r + 1));
                    }
                    t = ready;
                }
                part[1] = rr;
            });
        // The first and last row of every block, now that all rows are final.
        let xr: &[f64] = x;
        let line = |j: usize| &xr[j * nx..(j + 1) * nx];
        partial.par_iter_mut().enumerate().for_each(|(blk, part)| {
            let j0 = blk * lx;
            let j1 = (j0 + lx).min(ny) - 1;
            for j in [j0, j1].into_iter().take(if j1 > j0 { 2 } else { 1 }) {
                let (js, jn) = a.nb_rows(j);
                part[1] += res_row(j, line(js), line(j), line(jn));
            }
        });
        partial.iter().fold((0.0, 0.0), |(bb, rr), p| (bb + p[0], rr + p[1]))
    }
}

/// A raw pointer that rayon tasks may share (each accesses a disjoint part).
#[derive(Clone, Copy)]
struct SyncPtr(*mut f64);
// SAFETY: used only for accesses to disjoint entries from different tasks (see
// `Tridiag::solve_columns`).
unsafe impl Send for SyncPtr {}
// SAFETY: as above.
unsafe impl Sync for SyncPtr {}

impl SyncPtr {
    /// The pointer (a method, so closures capture the whole `Send` wrapper).
    #[inline(always)]
    fn ptr(self) -> *mut f64 {
        self.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Forward transforms of one and of two lines equal the DCT-II and DST-II of the `rustdct`
    /// crate (a general-purpose reference implementation), for even and odd lengths, and the
    /// inverse returns `N` times the line.
    #[test]
    fn axis_matches_rustdct_and_inverts() {
        let mut planner = FftPlanner::new();
        let mut reference = rustdct::DctPlanner::new();
        for n in [1usize, 2, 3, 8, 17, 64, 100] {
            for ends in [Ends::Closed, Ends::Fixed] {
                let ax = Axis::new(&mut planner, ends, n, 1.0);
                let mut z = vec![Complex::new(0.0, 0.0); n];
                let mut s = vec![Complex::new(0.0, 0.0); ax.scratch_len];
                let a0: Vec<f64> = (0..n).map(|i| ((i * 13 + 5) % 9) as f64 - 3.5).collect();
                let b0: Vec<f64> = (0..n).map(|i| ((i * 7 + 2) % 11) as f64 * 0.3).collect();
                let t = reference.plan_dct2(n);
                let want = |v: &[f64]| {
                    let mut w = v.to_vec();
                    match ends {
                        Ends::Closed => t.process_dct2(&mut w),
                        Ends::Fixed => t.process_dst2(&mut w),
                    }
                    // The DST's index k is the DCT ordering's N - 1 - k here.
                    if ends == Ends::Fixed {
                        w.reverse();
                    }
                    w
                };
                let (wa, wb) = (want(&a0), want(&b0));
                let (mut a, mut b) = (a0.clone(), b0.clone());
                ax.forward(&mut a, Some(&mut b), &mut z, &mut s);
                let mut one = a0.clone();
                ax.forward(&mut one, None, &mut z, &mut s);
                for k in 0..n {
                    for (got, w) in [(a[k], wa[k]), (b[k], wb[k]), (one[k], wa[k])] {
                        assert!(
                            (got - w).abs() <= 1e-12 * (1.0 + w.abs()),
                            "{ends:?} n {n} k {k}: {got} vs {w}"
                        );
                    }
                }
                ax.inverse(&mut a, Some(&mut b), &mut z, &mut s);
                ax.inverse(&mut one, None, &mut z, &mut s);
                for i in 0..n {
                    let nn = n as f64;
                    assert!((a[i] / nn - a0[i]).abs() < 1e-12, "{ends:?} n {n} inverse a");
                    assert!((b[i] / nn - b0[i]).abs() < 1e-12, "{ends:?} n {n} inverse b");
                    assert!((one[i] / nn - a0[i]).abs() < 1e-12, "{ends:?} n {n} inverse one");
                }
            }
        }
    }
    use crate::grid::{Grid, Mask};
    use crate::solve::Sides;

    /// The solution satisfies `A x = b` to round-off for closed and fixed x sides, every
    /// combination of closed and fixed y ends, squares, odd rectangles and a tall grid, and
    /// couplings from moderate (the pivot table settles within the grid) to huge (it never
    /// settles); the eigenpairs are those of the module doc and the elimination is exact
    /// Gaussian elimination, so an error in either would leave a residual of order one.
    #[test]
    fn solves_closed_and_fixed_rectangles() {
        for (nx, ny) in [(16, 16), (37, 23), (12, 300)] {
            let grid = Grid::new(nx, ny, 2.0, 3.0, 0.0, 0.0).unwrap();
            let mask = Mask::all_water(&grid);
            for fx in [false, true] {
                for (fs, fn_) in [(false, false), (true, false), (false, true), (true, true)] {
                    for (kx, ky) in [(25.0, 7.0), (3e6, 8e6)] {
                        let mut sides = Sides::closed();
                        let fixed = crate::solve::SideCoupling::Dirichlet;
                        if fx {
                            sides.west = fixed;
                            sides.east = fixed;
                        }
                        if fs {
                            sides.south = fixed;
                        }
                        if fn_ {
                            sides.north = fixed;
                        }
                        let a = Stencil5::diffusion(&grid, &mask, sides, kx, ky).unwrap();
                        let mut t = Transform::new(&a).expect("qualifies");
                        if kx < 100.0 && ny > 100 {
                            assert!(t.y.rows < ny / 2, "pivots settle: {} rows", t.y.rows);
                        }
                        if kx > 100.0 && !fx {
                            // Mode 0 between closed x ends has pivots creeping by m per row.
                            assert_eq!(t.y.rows, ny - 1, "huge couplings never settle");
                        }
                        let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 37) % 11) as f64 - 4.0).collect();
                        let mut x = vec![0.0; nx * ny];
                        let (bb, rr) = t.solve(&a, &b, &mut x);
                        let bn = b.iter().map(|v| v * v).sum::<f64>().sqrt();
                        let rel = a.residual_sq(&b, &x).sqrt() / bn;
                        // The sums formed on the way equal the plain ones to round-off.
                        assert!((bb.sqrt() - bn).abs() <= 1e-12 * bn);
                        assert!(
                            (rr.sqrt() / bn - rel).abs() <= 1e-3 * rel + 1e-18,
                            "{} vs {rel:e}",
                            rr.sqrt() / bn
                        );
                        let case = format!("{nx}x{ny} fixed x {fx}, south {fs}, north {fn_}, k {kx:e}");
                        // Normwise backward error (Higham 2002, Accuracy and Stability of
                        // Numerical Algorithms, eq. 1.2 and ch. 7): the residual against
                        // ||A|| ||x|| + ||b||, which is what round-off alone allows when the
                        // couplings dwarf the identity.
                        let c = a.compact.as_ref().unwrap().k;
                        let norm_a = c.m + 2.0 * (c.cx + c.gx) + 2.0 * (c.cy + c.gy);
                        let xn = x.iter().map(|v| v * v).sum::<f64>().sqrt();
                        let back = a.residual_sq(&b, &x).sqrt() / (norm_a * xn + bn);
                        assert!(back < 1e-15, "{case}: backward error {back:e}");
                        if kx < 100.0 {
                            assert!(rel < 1e-13, "{case}: relative residual {rel:e}");
                        }
                    }
                }
            }
        }
    }

    /// The block-wise back substitution gives the same solution for any block height,
    /// including a short last block and one block for the whole field.
    #[test]
    fn block_height_does_not_matter() {
        let (nx, ny) = (29, 41);
        let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mask = Mask::all_water(&grid);
        let mut sides = Sides::closed();
        sides.north = crate::solve::SideCoupling::Dirichlet;
        let a = Stencil5::diffusion(&grid, &mask, sides, 6.0, 9.0).unwrap();
        let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 29) % 13) as f64 - 6.0).collect();
        let mut t = Transform::new(&a).expect("qualifies");
        let mut first: Option<Vec<f64>> = None;
        for lines in [42, 2, 4, 6, 10, 40] {
            t.set_lines(lines);
            let mut x = vec![0.0; nx * ny];
            let (bb, rr) = t.solve(&a, &b, &mut x);
            let bn = bb.sqrt();
            let rel = a.residual_sq(&b, &x).sqrt() / bn;
            assert!(rel < 1e-13, "blocks of {lines} rows: residual {rel:e}");
            assert!((rr.sqrt() / bn - rel).abs() <= 1e-3 * rel + 1e-18);
            let one = first.get_or_insert_with(|| x.clone());
            let diff = x.iter().zip(one.iter()).map(|(p, q)| (p - q).abs()).fold(0.0, f64::max);
            assert!(diff < 1e-12, "blocks of {lines} rows: differs by {diff:e}");
        }
    }

    /// Land, periodic sides and a fixed value on one x side only are refused (the multigrid path
    /// handles them).
    #[test]
    fn refuses_what_it_cannot_diagonalise() {
        let grid = Grid::new(12, 10, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mask = Mask::all_water(&grid);
        let a = Stencil5::diffusion(&grid, &mask, Sides::closed(), 5.0, 5.0).unwrap();
        assert!(Transform::new(&a).is_some());
        let p = Stencil5::diffusion(&grid, &mask, Sides::periodic(), 5.0, 5.0).unwrap();
        assert!(Transform::new(&p).is_none());
        let mut one = Sides::closed();
        one.west = crate::solve::SideCoupling::Dirichlet;
        let o = Stencil5::diffusion(&grid, &mask, one, 5.0, 5.0).unwrap();
        assert!(Transform::new(&o).is_none());
        // One fixed y end is fine: the y direction is solved by elimination.
        let mut south = Sides::closed();
        south.south = crate::solve::SideCoupling::Dirichlet;
        let s = Stencil5::diffusion(&grid, &mask, south, 5.0, 5.0).unwrap();
        assert!(Transform::new(&s).is_some());
        let mask = Mask::all_water(&grid)
            .with_land(&grid, |x, y| (4.0..5.0).contains(&x) && (4.0..5.0).contains(&y))
            .unwrap();
        assert!(mask.has_land());
        let l = Stencil5::diffusion(&grid, &mask, Sides::closed(), 5.0, 5.0).unwrap();
        assert!(Transform::new(&l).is_none());
    }
}
