//! Exact solves by fast cosine and sine transforms for the operators that allow them: the
//! constant-coefficient 5-point operator `m I + cx Lx + cy Ly` on a rectangle of water (no
//! land) whose x sides are both closed or both fixed, and likewise its y sides (not periodic).
//! These are the implicit diffusion matrices of [`super::Stencil5::diffusion`] with uniform
//! diffusivity on an open-water domain.
//!
//! The cell-centred 1D operator with closed (zero-flux) ends is diagonalised by the DCT-II,
//! with eigenvalues `2 - 2 cos(pi k / n)`, `k = 0..n`; with fixed values at the end faces
//! (ghost value mirrored with a change of sign, so the end rows carry `3` on the diagonal) by
//! the DST-II, with eigenvalues `2 - 2 cos(pi (k + 1) / n)`. The 2D operator is the Kronecker
//! sum, so `A^-1 b` is: transform the rows, transform the columns, divide by
//! `m + cx lx_i + cy ly_j`, transform back (the fast Poisson solvers of Hockney 1965 and of
//! Buzbee, Golub & Nielson 1970, SIAM J. Numer. Anal. 7, 627-656; the eigenpairs are standard,
//! e.g. Strang 1999, "The discrete cosine transform", SIAM Review 41, 135-147; recalled from
//! memory). Cost `O(N log N)` with the transforms of the `rustdct` crate, rows in parallel,
//! and two cache-blocked transposes.
//!
//! Which operators qualify is decided from the matrix-free form's per-cell flags, which
//! reproduce the stored operator exactly, so the transform solves the same matrix.

use super::blocks::{dot_lanes, prefetch_part};
use super::compact::{self, Compact, DX, DY, E, LAND, N, S, W};
use super::Stencil5;
use rayon::prelude::*;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// Lines per tile of the transposing gathers.
const TILE: usize = 8;

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
    #[inline]
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

/// A fast-transform solver for one qualifying operator, with all its scratch.
#[derive(Debug, Clone)]
pub(crate) struct Transform {
    nx: usize,
    ny: usize,
    m: f64,
    x: Axis,
    y: Axis,
    /// The transposed field (`nx` lines of `ny`).
    work: Vec<f64>,
    /// Lines per parallel block (even, so pairs stay in one block) along x and along y.
    lines_x: usize,
    lines_y: usize,
    /// Per block: the complex line and the FFT scratch.
    scratch: Vec<Complex<f64>>,
    scratch_len: usize,
    /// Per row block: partial sums of `b . b` and of the squared residual.
    partial: Vec<[f64; 2]>,
    /// Per row block: [`TILE`] transformed rows on their way to `work`.
    group: Vec<f64>,
}

/// The ends of both axes if `c` (on `nx` by `ny` cells, not periodic) is a rectangle of water
/// with closed or fixed sides in pairs, else `None`.
fn qualifying_ends(c: &Compact, nx: usize, ny: usize) -> Option<(Ends, Ends)> {
    let ends_of = |f: u8, bit: u8| if f & bit != 0 { Ends::Fixed } else { Ends::Closed };
    let ex = ends_of(c.flags[0], DX);
    let ey = ends_of(c.flags[0], DY);
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
            if ey == Ends::Fixed && (j == 0 || j + 1 == ny) {
                want |= DY;
            }
            let f = c.flags[j * nx + i];
            if f & LAND != 0 || f != want {
                return None;
            }
        }
    }
    // Fixed ends must carry twice the coupling on the diagonal (a value at the face).
    let fixed_ok = |e: Ends, g: f64, cc: f64| e == Ends::Closed || g == 2.0 * cc;
    if !fixed_ok(ex, c.k.gx, c.k.cx) || !fixed_ok(ey, c.k.gy, c.k.cy) {
        return None;
    }
    Some((ex, ey))
}

impl Transform {
    /// The solver for `a`, or `None` if `a` does not qualify (see the module doc).
    pub fn new(a: &Stencil5) -> Option<Self> {
        let (nx, ny) = (a.nx, a.ny);
        if a.periodic_x || a.periodic_y {
            return None;
        }
        let c = a.compact.as_ref()?;
        let (ex, ey) = qualifying_ends(c, nx, ny)?;
        if !(c.k.m > 0.0 && c.k.cx >= 0.0 && c.k.cy >= 0.0) {
            return None;
        }
        let mut planner = FftPlanner::new();
        let x = Axis::new(&mut planner, ex, nx, c.k.cx);
        let y = Axis::new(&mut planner, ey, ny, c.k.cy);
        let scratch_len = nx.max(ny) + x.scratch_len.max(y.scratch_len);
        let threads = rayon::current_num_threads().max(1);
        // Lines per block: a few blocks per thread, at most BLOCK_LINES so that a block of
        // columns stays in cache between its gather and its transforms.
        let lines = |n: usize| n.div_ceil(4 * threads).clamp(2, BLOCK_LINES).next_multiple_of(2);
        let (lines_x, lines_y) = (lines(ny), lines(nx));
        let blocks = ny.div_ceil(lines_x).max(nx.div_ceil(lines_y));
        Some(Self {
            nx,
            ny,
            m: c.k.m,
            x,
            y,
            work: crate::field::huge_filled(nx * ny, 0.0),
            lines_x,
            lines_y,
            scratch: vec![Complex::new(0.0, 0.0); blocks * scratch_len],
            scratch_len,
            partial: vec![[0.0; 2]; ny.div_ceil(lines_x)],
            group: vec![0.0; ny.div_ceil(lines_x) * TILE * nx],
        })
    }

    /// Takes the coefficients of `a` if it qualifies with the same shape and sides (no
    /// allocation); `false` (and `self` unchanged) otherwise.
    pub fn refresh(&mut self, a: &Stencil5) -> bool {
        if a.periodic_x || a.periodic_y || (a.nx, a.ny) != (self.nx, self.ny) {
            return false;
        }
        let Some(c) = a.compact.as_ref() else { return false };
        if qualifying_ends(c, a.nx, a.ny) != Some((self.x.ends(), self.y.ends())) || !(c.k.m > 0.0) {
            return false;
        }
        self.m = c.k.m;
        self.x.set_coupling(c.k.cx);
        self.y.set_coupling(c.k.cy);
        true
    }

    /// `x = A^-1 b` for the operator `a` the solver was built or refreshed for (no
    /// allocation); returns `(b . b, ||b - A x||^2)`, both summed per row block in block order.
    /// Three parallel passes: groups of [`TILE`] rows of `b` transformed along x (in a small
    /// per-block buffer) and scattered as columns into `work` (column-major); blocks of columns of `work` transformed along y,
    /// divided by the eigenvalue sums and transformed back in place; blocks of rows gathered
    /// back from `work` into `x`, transformed back along x, and their residual rows summed
    /// while in cache (a block's first and last rows, whose neighbours another block writes,
    /// afterwards). The scatter and the gather are the transposes, done in small tiles while
    /// the block is in cache; only `work` is accessed across lines (it is backed by huge pages
    /// where the system allows, which keeps those accesses off the page-table walker).
    pub fn solve(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64]) -> (f64, f64) {
        let Self {
            nx,
            ny,
            m,
            x: ax,
            y: ay,
            work,
            lines_x,
            lines_y,
            scratch,
            scratch_len,
            partial,
            group,
        } = self;
        let (nx, ny, m, sl) = (*nx, *ny, *m, *scratch_len);
        let (lx, ly) = (*lines_x, *lines_y);
        let Some(comp) = a.compact.as_ref() else {
            return (f64::NAN, f64::NAN);
        };
        let wp = SyncPtr(work.as_mut_ptr());
        b.par_chunks(lx * nx)
            .zip(group.par_chunks_mut(TILE * nx))
            .zip(scratch.par_chunks_mut(sl))
            .zip(partial.par_iter_mut())
            .enumerate()
            .for_each(|(blk, (((src, rows), s), part))| {
                part[0] = dot_lanes(src, src);
                let (z, fs) = s.split_at_mut(nx);
                // Groups of TILE rows: transformed into the group buffer (in L1/L2), then
                // scattered as one cache line per column.
                for (g, sg) in src.chunks(TILE * nx).enumerate() {
                    let rows = &mut rows[..sg.len()];
                    in_pairs(rows, nx, |k, a, b| {
                        let sb = b.as_ref().map(|_| &sg[(k + 1) * nx..(k + 2) * nx]);
                        ax.forward_from(&sg[k * nx..(k + 1) * nx], sb, a, b, z, fs);
                    });
                    // SAFETY: block `blk` writes only the entries (c, r) of `work` with r in
                    // its own rows, which no other block writes, and nothing reads `work`
                    // until the pass ends; `work` holds nx * ny values.
                    unsafe { scatter(rows, nx, blk * lx + g * TILE, wp, ny) };
                }
            });
        // Each inverse returns its length times the line, hence the factor.
        let scale = 1.0 / (nx as f64 * ny as f64);
        let lam_y = &ay.lam;
        let divide = |col: &mut [f64], i: usize| {
            let d = m + ax.lam[i];
            for (v, &l) in col.iter_mut().zip(lam_y) {
                *v *= scale / (d + l);
            }
        };
        work.par_chunks_mut(ly * ny)
            .zip(scratch.par_chunks_mut(sl))
            .enumerate()
            .for_each(|(blk, (cols, s))| {
                let c0 = blk * ly;
                let (z, fs) = s.split_at_mut(ny);
                in_pairs(cols, ny, |k, a, mut b| {
                    ay.forward(a, b.as_deref_mut(), z, fs);
                    divide(a, c0 + k);
                    if let Some(b) = b.as_deref_mut() {
                        divide(b, c0 + k + 1);
                    }
                    ay.inverse(a, b, z, fs);
                });
            });
        let wr: &[f64] = work;
        let res_row = |j: usize, xs: &[f64], xm: &[f64], xn: &[f64]| {
            let c = j * nx..(j + 1) * nx;
            compact::residual_row_sq(&comp.k, comp.rows[j], &comp.flags[c.clone()], xs, xm, xn, &b[c])
        };
        x.par_chunks_mut(lx * nx)
            .zip(scratch.par_chunks_mut(sl))
            .zip(partial.par_iter_mut())
            .enumerate()
            .for_each(|(blk, ((rows, s), part))| {
                gather(wr, ny, blk * lx, rows, nx);
                let (z, fs) = s.split_at_mut(nx);
                in_pairs(rows, nx, |_, a, b| ax.inverse(a, b, z, fs));
                let h = rows.len() / nx;
                let line = |t: usize| &rows[t * nx..(t + 1) * nx];
                part[1] = (1..h.saturating_sub(1))
                    .map(|t| res_row(blk * lx + t, line(t - 1), line(t), line(t + 1)))
                    .sum();
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

/// A raw pointer that rayon tasks may share (each writes a disjoint part).
#[derive(Clone, Copy)]
struct SyncPtr(*mut f64);
// SAFETY: used only for writes to disjoint entries from different tasks (see `scatter`).
unsafe impl Send for SyncPtr {}
// SAFETY: as above.
unsafe impl Sync for SyncPtr {}

/// Transposing scatter, the inverse of [`gather`]: the lines of `rows` (each `width` long)
/// become entries `r0 ..` of every column line of `dst` (lines of `n`):
/// `dst[c n + r0 + t] = rows[t width + c]`, in tiles of [`TILE`].
///
/// # Safety
/// `dst` must point to `width * n` writable values, `r0 + rows.len() / width <= n`, and no
/// other thread may access entries `r0 .. r0 + rows.len() / width` of any column meanwhile.
unsafe fn scatter(rows: &[f64], width: usize, r0: usize, dst: SyncPtr, n: usize) {
    let h = rows.len() / width;
    for c0 in (0..width).step_by(TILE) {
        for t0 in (0..h).step_by(TILE) {
            for c in c0..(c0 + TILE).min(width) {
                for t in t0..(t0 + TILE).min(h) {
                    // SAFETY: c < width and r0 + t < n by the caller's contract.
                    unsafe { *dst.0.add(c * n + r0 + t) = rows[t * width + c] };
                }
            }
        }
    }
}

/// Transposing gather: `out` holds `out.len() / n` lines of `n`, and line `k` gets column
/// `c0 + k` of `src` (lines of `width`, `n` of them): `out[k n + r] = src[r width + c0 + k]`.
/// Runs in tiles of [`TILE`] lines of `src`, so each tile's reads and writes stay in cache.
fn gather(src: &[f64], width: usize, c0: usize, out: &mut [f64], n: usize) {
    let w = out.len() / n;
    // Tiles of TILE x TILE: with power-of-two line lengths the lines of a tile map to few
    // cache sets, so a tile must be small enough for them all to stay in L1. The next band
    // of lines is prefetched while one is copied (short pieces of many lines are otherwise
    // read at memory latency).
    for r0 in (0..n).step_by(TILE) {
        let r1 = (r0 + TILE).min(n);
        for r in r1..(r1 + TILE).min(n) {
            prefetch_part(&src[r * width + c0..r * width + c0 + w], 0, 1);
        }
        for k0 in (0..w).step_by(TILE) {
            for k in k0..(k0 + TILE).min(w) {
                let o = &mut out[k * n + r0..k * n + r1];
                for (t, v) in o.iter_mut().enumerate() {
                    *v = src[(r0 + t) * width + c0 + k];
                }
            }
        }
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

    /// The transposing gather of a block of columns is exact for awkward sizes.
    #[test]
    fn gather_transposes_exactly() {
        for (r, c, c0, w) in [(1, 1, 0, 1), (3, 70, 5, 60), (70, 3, 1, 2), (33, 65, 64, 1)] {
            let src: Vec<f64> = (0..r * c).map(|k| k as f64).collect();
            let mut out = vec![f64::NAN; w * r];
            gather(&src, c, c0, &mut out, r);
            for k in 0..w {
                for i in 0..r {
                    assert_eq!(out[k * r + i], src[i * c + c0 + k]);
                }
            }
        }
    }

    /// The solution satisfies `A x = b` to round-off for closed and fixed sides (in every
    /// combination) and a square and an odd-sized rectangle; the eigenpairs are those of the
    /// module doc, so an error there would leave a residual of order one.
    #[test]
    fn solves_closed_and_fixed_rectangles() {
        for (nx, ny) in [(16, 16), (37, 23)] {
            let grid = Grid::new(nx, ny, 2.0, 3.0, 0.0, 0.0).unwrap();
            let mask = Mask::all_water(&grid);
            for (fx, fy) in [(false, false), (true, false), (false, true), (true, true)] {
                let mut sides = Sides::closed();
                if fx {
                    sides.west = crate::solve::SideCoupling::Dirichlet;
                    sides.east = crate::solve::SideCoupling::Dirichlet;
                }
                if fy {
                    sides.south = crate::solve::SideCoupling::Dirichlet;
                    sides.north = crate::solve::SideCoupling::Dirichlet;
                }
                let a = Stencil5::diffusion(&grid, &mask, sides, 25.0, 7.0).unwrap();
                let mut t = Transform::new(&a).expect("qualifies");
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
                assert!(rel < 1e-13, "{nx}x{ny} fixed {fx},{fy}: relative residual {rel:e}");
            }
        }
    }

    /// Land, periodic sides and one-sided fixed values are refused (the multigrid path
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
        let mask = Mask::all_water(&grid)
            .with_land(&grid, |x, y| (4.0..5.0).contains(&x) && (4.0..5.0).contains(&y))
            .unwrap();
        assert!(mask.has_land());
        let l = Stencil5::diffusion(&grid, &mask, Sides::closed(), 5.0, 5.0).unwrap();
        assert!(Transform::new(&l).is_none());
    }
}
