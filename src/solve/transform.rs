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
//! Buzbee, Golub & Nielson 1970, SIAM J. Numer. Anal. 7, 627-656).
//!
//! One or two steps of cyclic reduction in y come first (FACR(l): Hockney 1970, Methods in
//! Computational Physics 9, 135-211; Swarztrauber 1977, SIAM Review 19, 490-501): the first
//! eliminates the even rows and the second every other odd row, so only a half or a quarter
//! of the rows are transformed, and the eliminated rows are recovered afterwards by
//! tridiagonal solves along x ([`XLines`]), which cost less than the row transforms they
//! replace. The second step's round-off grows as the square of the spread of the x operator's
//! eigenvalues, so it is taken only where that spread is small ([`MAX_SPREAD`]; always for
//! square cells). The elimination along y runs block by block while the rows are in cache,
//! the blocks linked by a short sweep (the partition method). Cost `O(N log nx)`: FFTs of a
//! quarter (or half) of the rows in parallel, no transposes, two passes over the field, each on
//! a per-thread cached copy of a block of rows, large fields streamed back ([`on_rows`]).
//! Fields under 8 rows high are left to the multigrid path.
//!
//! Which operators qualify is decided from the matrix-free form's per-cell flags, which
//! reproduce the stored operator exactly, so the transform solves the same matrix.

use super::blocks::dot_lanes;
use super::compact::{self, Compact, DX, DY, E, LAND, N, S, W};
use super::stream;
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

/// Relative distance from the limit at which a pivot of the y recurrence counts as settled.
const SETTLED: f64 = 4e-15;

/// Which x operator a row uses ([`XLines`]): the interior rows', the south end row's, the
/// north end row's, and the two factors `T - sqrt2 cy` and `T + sqrt2 cy` of the operator
/// `T^2 - 2 cy^2` of the rows the second reduction eliminates.
const INTERIOR: usize = 0;
const SOUTH_END: usize = 1;
const NORTH_END: usize = 2;
const LOWER: usize = 3;
const UPPER: usize = 4;
/// How many x operators [`XLines`] factors.
const KINDS: usize = 5;

/// The kind of x operator of row `j` of a field `ny` rows high.
fn row_kind(j: usize, ny: usize) -> usize {
    match j {
        0 => SOUTH_END,
        j if j + 1 == ny => NORTH_END,
        _ => INTERIOR,
    }
}

/// Columns per piece of the sweeps along y inside a block, so that the rows' pieces and the
/// per-mode sums of a sweep stay in L1 whatever `nx` (4 KiB per row piece).
const COLUMNS: usize = 512;

/// Rows solved together by [`XLines::solve_rows`] (independent recurrences in flight).
const GROUP: usize = 4;

/// The x operators of single rows, `T_j = (m + y_j) I + cx Lx` with `y_j` the y part of row
/// `j`'s diagonal (`2 cy` inside, `cy` plus `gy` at a fixed end row, `cy` at a closed one),
/// and the factors `T -+ sqrt2 cy I` of `T^2 - 2 cy^2 I` (`T` the interior one), factored for
/// the Thomas algorithm (diagonally dominant, so no pivoting). The cyclic reduction multiplies
/// the kept rows by the interior `T` (then by `T^2 - 2 cy^2`) and recovers the eliminated rows
/// by solves with their own operators.
#[derive(Debug, Clone)]
struct XLines {
    cx: f64,
    /// `cx` times the extra end weight of `Lx` (`2 cx` at fixed ends, 0 at closed ones).
    ends: f64,
    /// The diagonal less that of `cx Lx` (`m + y_j`, or `m + (2 -+ sqrt2) cy`) of each kind.
    b: [f64; KINDS],
    /// Reciprocal pivots of each kind.
    q: [Vec<f64>; KINDS],
    /// `cx` times the reciprocal pivots.
    e: [Vec<f64>; KINDS],
    /// A row of zeros (the missing neighbour of an end row).
    zero: Vec<f64>,
}

impl XLines {
    fn new(n: usize) -> Self {
        let v = || vec![0.0; n];
        Self {
            cx: 0.0,
            ends: 0.0,
            b: [0.0; KINDS],
            q: std::array::from_fn(|_| v()),
            e: std::array::from_fn(|_| v()),
            zero: v(),
        }
    }

    /// Factors the three kinds for couplings `cx` (x) and `cy` (y), identity weight `m`, and
    /// the extra weights `gs`, `gn` of the south and north end rows.
    ///
    /// Pivots are carried as `p_i = cx + r_i` with `r_0 = b + ends`,
    /// `r_i = b + cx r_{i-1} / p_{i-1}`, and the last `b + ends + cx r / p` of the row before:
    /// positive terms only, as in [`Tridiag::factor`].
    fn factor(&mut self, m: f64, cx: f64, cy: f64, fixed: bool, gs: f64, gn: f64) {
        self.cx = cx;
        self.ends = if fixed { 2.0 * cx } else { 0.0 };
        let r2 = std::f64::consts::SQRT_2;
        self.b = [
            m + 2.0 * cy,
            m + cy + gs,
            m + cy + gn,
            m + (2.0 - r2) * cy,
            m + (2.0 + r2) * cy,
        ];
        let n = self.zero.len();
        for k in 0..KINDS {
            let (b, q, e) = (self.b[k], &mut self.q[k], &mut self.e[k]);
            let mut r = b + self.ends;
            q[0] = 1.0 / (cx + r);
            for i in 1..n - 1 {
                r = b + cx * r * q[i - 1];
                q[i] = 1.0 / (cx + r);
            }
            q[n - 1] = 1.0 / (b + self.ends + cx * r * q[n - 2]);
            for (e, &q) in e.iter_mut().zip(q.iter()) {
                *e = cx * q;
            }
        }
    }

    /// `out = T f + cy (hs + hn)` with the interior `T`: the right-hand side of a kept row
    /// (`hs`, `hn` its eliminated neighbours' right-hand sides, brought to the interior
    /// operator).
    fn kept_rhs(&self, out: &mut [f64], f: &[f64], hs: &[f64], hn: &[f64], cy: f64) {
        let n = self.zero.len();
        let (hs, hn) = (&hs[..n], &hn[..n]);
        self.apply_t(out, f, |i| cy * (hs[i] + hn[i]));
    }

    /// `out_i = (T f)_i + y(i)` with the interior `T`.
    #[inline(always)]
    fn apply_t(&self, out: &mut [f64], f: &[f64], y: impl Fn(usize) -> f64) {
        let n = self.zero.len();
        let (out, f) = (&mut out[..n], &f[..n]);
        let (cx, b) = (self.cx, self.b[INTERIOR]);
        let (d, dend) = (b + 2.0 * cx, b + cx + self.ends);
        out[0] = dend * f[0] - cx * f[1] + y(0);
        for i in 1..n - 1 {
            out[i] = d * f[i] - cx * (f[i - 1] + f[i + 1]) + y(i);
        }
        out[n - 1] = dend * f[n - 1] - cx * f[n - 2] + y(n - 1);
    }

    /// `out = D f + c (fs + fn) = T (T f) + c (fs + fn - 2 f)` with `D = T^2 - 2 c`, `c = cy^2`
    /// and the interior `T`: the right-hand side of a row the second reduction keeps (`f` its
    /// first-reduction right-hand side, `fs`, `fn` those of its eliminated neighbours). `t` is
    /// scratch.
    fn reduced_rhs(&self, out: &mut [f64], f: &[f64], fs: &[f64], fn_: &[f64], c: f64, t: &mut [f64]) {
        let n = self.zero.len();
        self.apply_t(t, f, |_| 0.0);
        let (f, fs, fn_) = (&f[..n], &fs[..n], &fn_[..n]);
        self.apply_t(out, t, |i| c * (fs[i] + fn_[i] - 2.0 * f[i]));
    }

    /// Solves `T_kind out_r = f_r + cy (s_r + n_r)` for `R` rows at once (their recurrences
    /// interleave, so the latency of one hides behind the others).
    #[inline]
    fn solve_rows<const R: usize>(
        &self,
        kind: usize,
        out: [&mut [f64]; R],
        f: [&[f64]; R],
        s: [&[f64]; R],
        nb: [&[f64]; R],
        cy: f64,
    ) {
        let n = self.zero.len();
        let (q, e) = (&self.q[kind][..n], &self.e[kind][..n]);
        let out = out.map(|o| &mut o[..n]);
        let (f, s, nb) = (f.map(|v| &v[..n]), s.map(|v| &v[..n]), nb.map(|v| &v[..n]));
        let mut g = [0.0; R];
        // g_i = q_i rhs_i + e_i g_{i-1}: one fused multiply-add on each recurrence, whose
        // latency the other rows' recurrences hide.
        for i in 0..n {
            let (qi, ei) = (q[i], e[i]);
            for r in 0..R {
                // SAFETY: every slice was cut to length n above and i < n.
                let v = unsafe {
                    let rhs = *f[r].get_unchecked(i) + cy * (*s[r].get_unchecked(i) + *nb[r].get_unchecked(i));
                    let v = ei.mul_add(g[r], rhs * qi);
                    *out[r].get_unchecked_mut(i) = v;
                    v
                };
                g[r] = v;
            }
        }
        for i in (0..n - 1).rev() {
            let ei = e[i];
            for r in 0..R {
                // SAFETY: as above.
                let v = unsafe {
                    let o = out[r].get_unchecked_mut(i);
                    *o = ei.mul_add(g[r], *o);
                    *o
                };
                g[r] = v;
            }
        }
    }

    /// `w = T_kind^-1 T f`: an eliminated end row's right-hand side brought to the interior
    /// operator (`t` is scratch).
    fn end_rhs(&self, kind: usize, w: &mut [f64], f: &[f64], t: &mut [f64]) {
        let z = &self.zero;
        self.kept_rhs(t, f, z, z, 0.0);
        self.solve_rows::<1>(kind, [w], [&*t], [z], [z], 0.0);
    }
}

/// The y systems left after one or two steps of cyclic reduction, one per x mode, factored.
///
/// Row `j` of the transformed operator reads `-cy u_{j-1} + tau_j u_j - cy u_{j+1} = f_j` with
/// `tau_j = a + y_j` (`a = m + lx_k`, `y_j` as in [`XLines`]). The first step eliminates the
/// even rows (`u_e = (f_e + cy u_{e-1} + cy u_{e+1}) / tau_e`) and multiplies by the interior
/// `tau`, which leaves on the odd rows `i = 0 .. n1` (row `j = 2 i + 1`) the tridiagonal
/// system `-c1 u_{i-1} + delta_i u_i - c1 u_{i+1} = F_i` with `c1 = cy^2`,
/// `delta = D = tau^2 - 2 c1` inside, and end rows `delta_0`, `delta_{n1-1}` adjusted for the
/// end `tau`s; once reduced, this is the system solved. The second step (twice reduced)
/// eliminates its even rows `i` again: the inside ones
/// (`D u_i = F_i + c1 (u_{i-1} + u_{i+1})`, solved along x after the transform) and the end
/// rows among them in the transformed space (`u_i = (F_i + c1 u_{i+-1}) / delta_i`). Multiplied
/// by `D`, the odd rows `i = 2 k + 1` (field row `4 k + 3`) then read
/// `-c u_{k-1} + (D^2 - 2 c) u_k - c u_{k+1} = D F_i + c1 (F_{i-1} + F_{i+1})` with `c = c1^2`,
/// and their end rows absorb the end rows eliminated in the transformed space. This is solved
/// by Gaussian elimination without pivoting (the Thomas algorithm; the Schur complement of a
/// diagonally dominant matrix is one too) with pivots `p_0`, `p_k = d_k - c^2 / p_{k-1}`, which
/// converge geometrically to the larger root of `p^2 - d p + c^2 = 0` inside; the reciprocal
/// pivots are stored only until every mode has settled to [`SETTLED`], so the table is a few
/// dozen rows unless `cy / m` is very large.
#[derive(Debug, Clone)]
struct Tridiag {
    /// Cyclic reduction steps: 1, or 2 when the round-off allows (see [`MAX_SPREAD`]).
    levels: usize,
    /// Rows of the solved system: the once-reduced one (field rows `2 k + 1`) or the
    /// twice-reduced one (field rows `4 k + 3`).
    n: usize,
    /// Rows of the once-reduced system (the odd rows of the field).
    n1: usize,
    /// The solved system's off-diagonal coupling: `cy^2` once reduced, `cy^4` twice.
    c: f64,
    /// The once-reduced system's coupling `cy^2`.
    c1: f64,
    /// Reciprocal pivots of rows `0 .. rows` (then constant up to row `n - 2`), `nx` each.
    inv: Vec<f64>,
    rows: usize,
    /// Reciprocal pivots of the last row.
    last: Vec<f64>,
    /// Scratch of [`Self::factor`]: the pivots less `c` of the row being factored.
    r: Vec<f64>,
    /// Per mode, the once-reduced row 0 (field row 1), which the second step eliminates in
    /// the transformed space: `c1 D / delta_0` (its weight in the first kept row's
    /// right-hand side) and `1 / delta_0`.
    south: [Vec<f64>; 2],
    /// The same for the once-reduced last row when the second step eliminates it (`n1` odd).
    north: [Vec<f64>; 2],
}

impl Tridiag {
    /// The reduced systems of a field `ny >= 8` rows high.
    fn new(nx: usize, ny: usize) -> Self {
        let n1 = ny / 2;
        let v = || vec![0.0; nx];
        Self {
            levels: 1,
            n: n1,
            n1,
            c: 0.0,
            c1: 0.0,
            // Zeroed memory is mapped lazily, so rows never reached cost nothing.
            inv: vec![0.0; nx * (n1 - 1)],
            rows: 1,
            last: v(),
            r: v(),
            south: [v(), v()],
            north: [v(), v()],
        }
    }

    /// Whether the second step eliminates the once-reduced last row in the transformed space
    /// (else it is the last kept row).
    fn north_spectral(&self) -> bool {
        self.n1 % 2 == 1
    }

    /// Factors the once-reduced system (`levels = 1`) or the twice-reduced one (`levels = 2`)
    /// for identity weight `m`, x eigenvalues `lam` (times `cx`), coupling `cy`, and the extra
    /// weights `gs`, `gn` of the south and north end rows, on a field `ny` rows high.
    ///
    /// The pivots are carried as `p_k = c + r_k`, with `r_k = rho + c r_{k-1} / p_{k-1}` inside
    /// and the end rows' `d - c` written as sums of positive terms. Once reduced: `c = c1`,
    /// `rho = rho1 = D - 2 c1 = a (a + 4 cy)`, and the end rows have `delta - c1 = r1` with
    /// `r1 = (a^3 + 5 a^2 cy + 5 a c1 + g (a^2 + 4 a cy + 2 c1)) / tau_end` beside an eliminated
    /// end row and `a^2 + 3 a cy + g (a + 2 cy)` at a kept one (`g` the end's extra weight).
    /// Twice reduced: `c = c1^2`, `rho = rho2 = D^2 - 4 c1^2 = rho1 (rho1 + 4 c1)`; an end row
    /// that absorbs a once-reduced end row has `d - c = (c1 rho1 (D + c1) + r1 (rho2 + 2 c)) /
    /// (c1 + r1)`, and the last kept row when it is the once-reduced last row, `c1 rho1 + D r1`.
    /// So nothing cancels even when `cy / m` is huge and mode 0 between closed ends is nearly
    /// singular.
    #[allow(clippy::too_many_arguments)]
    fn factor(&mut self, m: f64, lam: &[f64], cy: f64, gs: f64, gn: f64, ny: usize, levels: usize) {
        let n1 = self.n1;
        let c1 = cy * cy;
        let twice = levels == 2;
        let (n, c) = if twice { (n1 / 2, c1 * c1) } else { (n1, c1) };
        (self.levels, self.n, self.c, self.c1) = (levels, n, c, c1);
        let nx = lam.len();
        // delta - c1 of a once-reduced row next to an eliminated end row with extra weight g.
        let beside_end = |a: f64, g: f64| {
            let poly = a * a * a + 5.0 * a * a * cy + 5.0 * a * c1 + g * (a * a + 4.0 * a * cy + 2.0 * c1);
            poly / (a + cy + g)
        };
        let north_r1 = |a: f64| {
            if ny.is_multiple_of(2) {
                a * a + 3.0 * a * cy + gn * (a + 2.0 * cy)
            } else {
                beside_end(a, gn)
            }
        };
        // (rho1, D, rho2) of a mode.
        let parts = |a: f64| {
            let rho1 = a * (a + 4.0 * cy);
            (rho1, rho1 + 2.0 * c1, rho1 * (rho1 + 4.0 * c1))
        };
        // d - c of a twice-reduced end row that absorbs a once-reduced end row with r1.
        let absorbs = |a: f64, r1: f64| {
            let (rho1, d, rho2) = parts(a);
            (c1 * rho1 * (d + c1) + r1 * (rho2 + 2.0 * c)) / (c1 + r1)
        };
        let north_spectral = twice && self.north_spectral();
        // The solved system's first row's r, interior rho and last row's d - c of a mode.
        let first = |a: f64| {
            if twice {
                absorbs(a, beside_end(a, gs))
            } else {
                beside_end(a, gs)
            }
        };
        let rho = |a: f64| if twice { parts(a).2 } else { parts(a).0 };
        let last = |a: f64| match (twice, north_spectral) {
            (false, _) => north_r1(a),
            (true, true) => absorbs(a, north_r1(a)),
            (true, false) => {
                let (rho1, d, _) = parts(a);
                c1 * rho1 + d * north_r1(a)
            }
        };
        if twice {
            for (k, &l) in lam.iter().enumerate() {
                let a = m + l;
                let (_, d, _) = parts(a);
                let (rs, rn) = (beside_end(a, gs), north_r1(a));
                self.south[0][k] = c1 * d / (c1 + rs);
                self.south[1][k] = 1.0 / (c1 + rs);
                if north_spectral {
                    self.north[0][k] = c1 * d / (c1 + rn);
                    self.north[1][k] = 1.0 / (c1 + rn);
                }
            }
        }
        let r = &mut self.r;
        let (row0, rest) = self.inv.split_at_mut(nx);
        for ((p, rk), &l) in row0.iter_mut().zip(r.iter_mut()).zip(lam) {
            *rk = first(m + l);
            *p = 1.0 / (c + *rk);
        }
        self.rows = 1;
        // Rows 1 ..= n - 2 are interior; stop once every mode's pivot has settled at the
        // larger root of p^2 - d p + c^2, that is p = c + (rho + sqrt(rho^2 + 4 rho c)) / 2.
        let mut prev: &[f64] = row0;
        for (i, row) in rest.chunks_exact_mut(nx).enumerate().take(n.saturating_sub(2)) {
            let mut settled = true;
            for (((p, &q), rk), &l) in row.iter_mut().zip(prev).zip(r.iter_mut()).zip(lam) {
                let rho = rho(m + l);
                *rk = rho + c * *rk * q;
                let piv = c + *rk;
                *p = 1.0 / piv;
                let lim = c + 0.5 * (rho + (rho * (rho + 4.0 * c)).sqrt());
                settled &= (piv - lim).abs() <= SETTLED * lim || *p == q;
            }
            self.rows = i + 2;
            prev = row;
            if settled {
                break;
            }
        }
        // `r` now belongs to the last stored row, which stands for row n - 2.
        let b0 = (n - 2).min(self.rows - 1) * nx;
        let before = &self.inv[b0..b0 + nx];
        for (((p, &q), &rk), &l) in self.last.iter_mut().zip(before).zip(self.r.iter()).zip(lam) {
            *p = 1.0 / (last(m + l) + c * rk * q);
        }
    }

    /// Field rows per solved row: 2 once reduced, 4 twice; solved row `k` is field row
    /// `stride k + stride - 1`.
    fn stride(&self) -> usize {
        2 * self.levels
    }

    /// Reciprocal pivots of row `i < n - 1` (all `nx` modes).
    #[inline]
    fn row(&self, i: usize) -> &[f64] {
        let nx = self.last.len();
        let r = i.min(self.rows - 1);
        &self.inv[r * nx..(r + 1) * nx]
    }

    /// Reciprocal pivots of row `i` (the last row's own when `i = n - 1`).
    #[inline]
    fn pivots(&self, i: usize) -> &[f64] {
        if i + 1 == self.n {
            &self.last
        } else {
            self.row(i)
        }
    }

    /// Forward elimination within one block of solved rows, in place on `rows` (field rows from row
    /// `stride i0` on, so rows `stride - 1, 2 stride - 1, ...` of `rows` are solved rows `i0 ..`;
    /// see [`Self::stride`]), as if the row before the block were zero, with the right-hand side
    /// scaled by `s`: `h_i = (s f_i + c h_{i-1}) / p_i`. The true forward values are `g_i = h_i +
    /// E_i G` with `G` the block below's last `g`, `E_i = e_{i0} ... e_i` and `e_i = c / p_i` (the
    /// partition method: blocks eliminate independently and are linked by a short sweep,
    /// [`Self::link`]). For the back substitution `u_i = g_i + e_i u_{i+1}` it sums, for all modes,
    /// `H = sum_i P_i h_i`, `K = sum_i P_i P_{i+1}` and `P = P_{i1}` with `P_{i0} = 1`, `P_{i+1} =
    /// P_i e_i`, so that the block's first `u` is `H + K G + P u_{i1}`. `zero` is a row of zeros
    /// (the forward value before the block).
    fn eliminate_block(&self, rows: &mut [f64], i0: usize, s: f64, sums: [&mut [f64]; 3], zero: &[f64]) {
        let (nx, c, st) = (self.last.len(), self.c, self.stride());
        let [sh, sk, sp] = sums;
        sh.fill(0.0);
        sk.fill(0.0);
        sp.fill(1.0);
        for k0 in (0..nx).step_by(COLUMNS) {
            let k = k0..(k0 + COLUMNS).min(nx);
            let (sh, sk, sp) = (&mut sh[k.clone()], &mut sk[k.clone()], &mut sp[k.clone()]);
            let mut prev: Option<&[f64]> = None;
            for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st) {
                let (g, piv) = (&mut row[k.clone()], &self.pivots(i0 + t / st)[k.clone()]);
                // The row before the block counts as zero.
                let q = prev.unwrap_or(&zero[..g.len()]);
                eliminate_row(g, q, piv, [&mut *sh, &mut *sk, &mut *sp], s, c);
                prev = Some(g);
            }
        }
    }

    /// Links the blocks of modes `k0 .. k0 + w` after [`Self::eliminate_block`]: up the
    /// blocks, each block's incoming `G` (the block below's last `g`: `G_0 = 0`,
    /// `G_{B+1} = h_last + P_B G_B`) into `incoming`; then down the blocks, each block's first
    /// `u` (`H + K G + P u` of the block above's first row) into `firsts`, which held `H`.
    ///
    /// `ends[b]` is one past block `b`'s last reduced row.
    ///
    /// # Safety
    /// `x` must point to `nx * ny` values and `firsts`, `cross`, `prods`, `incoming` to `nx`
    /// times the block count, `k0 + w <= nx`, and no other thread may access columns
    /// `k0 .. k0 + w` of any of them meanwhile.
    #[allow(clippy::too_many_arguments)]
    unsafe fn link(
        &self,
        x: SyncPtr,
        (k0, w): (usize, usize),
        ends: &[usize],
        firsts: SyncPtr,
        cross: SyncPtr,
        prods: SyncPtr,
        incoming: SyncPtr,
    ) {
        let (nx, st) = (self.last.len(), self.stride());
        // SAFETY: row j's part lies inside its array and belongs to this caller alone; the
        // parts borrowed at once are different rows or different arrays.
        let part = |p: SyncPtr, j: usize| unsafe { std::slice::from_raw_parts_mut(p.ptr().add(j * nx + k0), w) };
        let blocks = ends.len();
        part(incoming, 0).fill(0.0);
        for (blk, &end) in ends.iter().enumerate().take(blocks.saturating_sub(1)) {
            let last = end - 1;
            let (h, p, g, next) = (
                &*part(x, st * last + st - 1),
                &*part(prods, blk),
                &*part(incoming, blk),
                part(incoming, blk + 1),
            );
            for (((o, &h), &p), &g) in next.iter_mut().zip(h).zip(p).zip(g) {
                *o = h + p * g;
            }
        }
        for blk in (0..blocks).rev() {
            let (u, k, g, p) = (
                part(firsts, blk),
                &*part(cross, blk),
                &*part(incoming, blk),
                &*part(prods, blk),
            );
            if blk + 1 < blocks {
                let up = &*part(firsts, blk + 1);
                for ((((u, &k), &g), &p), &a) in u.iter_mut().zip(k).zip(g).zip(p).zip(up) {
                    *u += k * g;
                    *u += p * a;
                }
            } else {
                // Nothing above the top block.
                for ((u, &k), &g) in u.iter_mut().zip(k).zip(g) {
                    *u += k * g;
                }
            }
        }
    }

    /// Finishes the reduced rows among `rows` (as in [`Self::eliminate_block`], first reduced
    /// row `i0`): `g_i = h_i + E_i G` with `incoming` the block's `G`, then the back
    /// substitution `u_i = g_i + (c / p_i) u_{i+1}` from the top row down, with `above` the
    /// value `u` of the reduced row after them (`None` at the top of the field). `e` is
    /// scratch.
    fn back_block(&self, rows: &mut [f64], i0: usize, incoming: &[f64], above: Option<&[f64]>, e: &mut [f64]) {
        let (nx, c, st) = (self.last.len(), self.c, self.stride());
        for k0 in (0..nx).step_by(COLUMNS) {
            let k = k0..(k0 + COLUMNS).min(nx);
            if i0 > 0 {
                let (e, incoming) = (&mut e[k.clone()], &incoming[k.clone()]);
                e.fill(1.0);
                for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st) {
                    let piv = &self.pivots(i0 + t / st)[k.clone()];
                    for (((v, f), &p), &a) in row[k.clone()].iter_mut().zip(e.iter_mut()).zip(piv).zip(incoming) {
                        *f *= c * p;
                        *v += *f * a;
                    }
                }
            }
            let mut next: Option<&[f64]> = above.map(|a| &a[k.clone()]);
            for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st).rev() {
                let u = &mut row[k.clone()];
                if let Some(q) = next {
                    for ((v, &q), &p) in u.iter_mut().zip(q).zip(&self.pivots(i0 + t / st)[k.clone()]) {
                        *v += c * p * q;
                    }
                }
                next = Some(u);
            }
        }
    }
}

/// One row of [`Tridiag::eliminate_block`]: `g = (s g + c q) piv` and the sums
/// `H += P g`, `K += P P'`, `P = P'` with `P' = P c piv`. A function of its own, so the
/// compiler knows the slices apart and vectorises the loop.
#[inline]
fn eliminate_row(g: &mut [f64], q: &[f64], piv: &[f64], sums: [&mut [f64]; 3], s: f64, c: f64) {
    let w = g.len();
    let [sh, sk, sp] = sums;
    let (q, piv, sh, sk, sp) = (&q[..w], &piv[..w], &mut sh[..w], &mut sk[..w], &mut sp[..w]);
    for j in 0..w {
        let v = (s * g[j] + c * q[j]) * piv[j];
        g[j] = v;
        let f = sp[j];
        let next = f * (c * piv[j]);
        sh[j] += f * v;
        sk[j] += f * next;
        sp[j] = next;
    }
}

/// A fast-transform solver for one qualifying operator, with all its scratch.
#[derive(Debug, Clone)]
pub(crate) struct Transform {
    nx: usize,
    ny: usize,
    x: Axis,
    y: Tridiag,
    /// The single-row x operators of the eliminated rows.
    xl: XLines,
    /// The y coupling.
    cy: f64,
    /// Fixed values at the south and north ends.
    south: bool,
    north: bool,
    /// Rows per parallel block: a multiple of 4 and at least 8, so blocks start on a row
    /// `4 k` and only their first three rows need the block below (the last block takes up to
    /// 7 rows more rather than leave a shorter one).
    lines: usize,
    /// Per block: its field rows `j0 .. j1`.
    blocks: Vec<(usize, usize)>,
    /// Per block: one past its last solved row (see [`Tridiag::stride`]).
    ends: Vec<usize>,
    /// Column ranges of [`Tridiag::link`], one parallel task each.
    columns: Vec<(usize, usize)>,
    /// Per block: the complex line and the FFT scratch.
    scratch: Vec<Complex<f64>>,
    scratch_len: usize,
    /// Per block: [`SCRATCH_LINES`] real lines (right-hand sides, end-row terms and the
    /// back substitution's running products).
    lines_scratch: Vec<f64>,
    /// Per row block: partial sums of `b . b` and of the squared residual.
    partial: Vec<[f64; 2]>,
    /// Per block of reduced rows, all modes (see [`Tridiag::eliminate_block`] and
    /// [`Tridiag::link`]): `H` and then `u` at its first row, `K`, the product `P` of its
    /// `e_i`, and the incoming `G`.
    firsts: Vec<f64>,
    cross: Vec<f64>,
    prods: Vec<f64>,
    incoming: Vec<f64>,
    /// Whether the two full passes stream their results out of the stage (fields over
    /// [`STREAM_BYTES`]; see [`on_rows`]).
    streaming: bool,
}

/// The largest spread `T_max / T_min` of the interior x operator `T = (m + 2 cy) I + cx Lx`
/// for which the solver takes the second cyclic reduction step. Its round-off grows as the
/// spread squared (the twice-reduced right-hand sides `(T^2 - 2 cy^2) F` are formed before
/// the transform, so rounding relative to the largest modes lands on the smallest), the first
/// step's as the spread: at spread 11 the relative residual measured 4e-14 twice reduced and
/// 2e-15 once (`solves_closed_and_fixed_rectangles`), so at 16 it stays near 1e-13. Isotropic
/// cells never exceed 3; only cells much wider than tall with large time steps do.
const MAX_SPREAD: f64 = 16.0;

/// Fields larger than this many bytes are streamed out of the solve's two full passes (see
/// [`on_rows`]): with the right-hand side as large, the two no longer fit a 32 MiB shared
/// cache, so each row written by an ordinary store would first be read from memory. Smaller
/// fields keep ordinary stores, which leave the solution cached for whatever reads it next
/// (streaming it too measured no faster at 1024 by 1024 cells).
const STREAM_BYTES: usize = 16 << 20;

thread_local! {
    /// Per thread: the rows of the block that [`on_rows`] is working on (grown to the largest
    /// block the thread has seen, and kept for the thread's life).
    static STAGE: std::cell::RefCell<Vec<f64>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// Runs `f` on a copy of a block's `rows` (of `nx` values) in this thread's stage, which first
/// takes the rows `load` of `rows` and afterwards gives back the rows `store`, by streaming
/// stores when `streaming`. The stage stays in cache from block to block (at 1024 by 1024 cells
/// the solve measured 1.09 times faster than in place, median of seven sittings, 0.98 to 1.15),
/// and streamed rows are not read from memory before they are written. `f` must not wait on
/// rayon work (the thread could run another block's `on_rows` meanwhile, and the stage's second
/// borrow would panic).
fn on_rows(
    streaming: bool,
    rows: &mut [f64],
    nx: usize,
    load: impl Iterator<Item = usize>,
    store: impl Iterator<Item = usize>,
    f: impl FnOnce(&mut [f64]),
) {
    STAGE.with_borrow_mut(|stage| {
        if stage.len() < rows.len() {
            stage.resize(rows.len(), 0.0);
        }
        let st = &mut stage[..rows.len()];
        for t in load {
            st[t * nx..(t + 1) * nx].copy_from_slice(&rows[t * nx..(t + 1) * nx]);
        }
        f(st);
        for t in store {
            let (to, from) = (&mut rows[t * nx..(t + 1) * nx], &st[t * nx..(t + 1) * nx]);
            if streaming {
                stream::stream_copy(to, from);
            } else {
                to.copy_from_slice(from);
            }
        }
        if streaming {
            stream::fence();
        }
    });
}

/// Real scratch lines per block of [`Transform::solve`].
const SCRATCH_LINES: usize = 7;

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
        // Two steps of cyclic reduction need at least two rows kept by both.
        if ny < 8 {
            return None;
        }
        if !(c.k.m > 0.0 && c.k.cx >= 0.0 && c.k.cy >= 0.0 && c.k.gy >= 0.0) {
            return None;
        }
        let mut planner = FftPlanner::new();
        let x = Axis::new(&mut planner, ex, nx, c.k.cx);
        let threads = rayon::current_num_threads().max(1);
        // Rows per block: a few blocks per thread, at most BLOCK_LINES.
        let lines = ny.div_ceil(4 * threads).clamp(8, BLOCK_LINES).next_multiple_of(4);
        // Column ranges: one per thread, widths a multiple of 8 values (whole cache lines).
        let width = nx.div_ceil(threads).next_multiple_of(8);
        let columns = (0..nx).step_by(width).map(|k0| (k0, width.min(nx - k0))).collect();
        let mut t = Self {
            nx,
            ny,
            y: Tridiag::new(nx, ny),
            xl: XLines::new(nx),
            x,
            cy: 0.0,
            south,
            north,
            lines,
            blocks: Vec::new(),
            ends: Vec::new(),
            columns,
            scratch: Vec::new(),
            scratch_len: 0,
            lines_scratch: Vec::new(),
            partial: Vec::new(),
            firsts: Vec::new(),
            cross: Vec::new(),
            prods: Vec::new(),
            incoming: Vec::new(),
            streaming: nx * ny * std::mem::size_of::<f64>() > STREAM_BYTES,
        };
        t.set_lines(lines);
        t.refresh(a).then_some(t)
    }

    /// Blocks of `lines` rows (rounded up to a multiple of 4, at least 8; the last block takes
    /// a remainder under 8 rows) from now on.
    fn set_lines(&mut self, lines: usize) {
        let (nx, ny) = (self.nx, self.ny);
        let lines = lines.max(8).next_multiple_of(4);
        self.lines = lines;
        self.blocks.clear();
        let mut j0 = 0;
        while j0 < ny {
            // A remainder shorter than 8 rows joins the block before it.
            let j1 = if ny - j0 < lines + 8 { ny } else { j0 + lines };
            self.blocks.push((j0, j1));
            j0 = j1;
        }
        self.set_ends();
        let blocks = self.blocks.len();
        self.scratch_len = nx + self.x.scratch_len;
        self.scratch.resize(blocks * self.scratch_len, Complex::new(0.0, 0.0));
        self.lines_scratch.resize(blocks * SCRATCH_LINES * nx, 0.0);
        self.partial.resize(blocks, [0.0; 2]);
        for v in [&mut self.firsts, &mut self.cross, &mut self.prods, &mut self.incoming] {
            v.resize(blocks * self.nx, 0.0);
        }
    }

    /// Takes the coefficients of `a` if it qualifies with the same shape and sides (no
    /// allocation); `false` (and `self` unchanged) otherwise.
    pub fn refresh(&mut self, a: &Stencil5) -> bool {
        self.refresh_levels(a, None)
    }

    /// [`Self::refresh`] with the number of cyclic reduction steps given (1 or 2) or chosen
    /// from the spread of the x operator's eigenvalues (see [`MAX_SPREAD`]).
    fn refresh_levels(&mut self, a: &Stencil5, levels: Option<usize>) -> bool {
        if a.periodic_x || a.periodic_y || (a.nx, a.ny) != (self.nx, self.ny) {
            return false;
        }
        let Some(c) = a.compact.as_ref() else { return false };
        let same = qualifying_ends(c, a.nx, a.ny) == Some((self.x.ends(), self.south, self.north));
        if !(same && c.k.m > 0.0 && c.k.cx >= 0.0 && c.k.cy >= 0.0 && c.k.gy >= 0.0) {
            return false;
        }
        let k = c.k;
        let (gs, gn) = (if self.south { k.gy } else { 0.0 }, if self.north { k.gy } else { 0.0 });
        self.cy = k.cy;
        self.x.set_coupling(k.cx);
        // The spread of the interior x operator's eigenvalues decides the reduction steps.
        let (lo, hi) = self
            .x
            .lam
            .iter()
            .fold((f64::MAX, 0.0f64), |(lo, hi), &l| (lo.min(l), hi.max(l)));
        let t0 = k.m + 2.0 * k.cy;
        let levels = levels.unwrap_or(if (t0 + hi) / (t0 + lo) <= MAX_SPREAD { 2 } else { 1 });
        self.y.factor(k.m, &self.x.lam, k.cy, gs, gn, self.ny, levels);
        self.xl.factor(k.m, k.cx, k.cy, self.x.ends() == Ends::Fixed, gs, gn);
        self.set_ends();
        true
    }

    /// One past each block's last solved row.
    fn set_ends(&mut self) {
        let (st, n) = (self.y.stride(), self.y.n);
        self.ends.clear();
        self.ends.extend(self.blocks.iter().map(|&(_, j1)| (j1 / st).min(n)));
    }

    /// `x = A^-1 b` for the operator `a` the solver was built or refreshed for (no allocation
    /// but each thread's stage the first time); returns `(b . b, ||b - A x||^2)`, both summed
    /// per row block in block order.
    ///
    /// One or two steps of cyclic reduction in y first (FACR(l): Hockney 1970, Methods in
    /// Computational Physics 9, 135-211; Swarztrauber 1977, SIAM Review 19, 490-501): only the odd
    /// rows, or the rows `4 k + 3` (and field row 1, and the last odd row when the odd rows are an
    /// odd count), are transformed, and the others are recovered by tridiagonal solves along x (see
    /// [`Tridiag`]). Two passes over the field, with short ones between and after: blocks of rows
    /// form the reduced right-hand sides, transform them along x (and sum `b . b`) and eliminate
    /// them along y while in cache, as if the block below were zero (every mode at once, so the
    /// loops vectorise); column ranges link the blocks (one row per block, see [`Tridiag::link`]);
    /// blocks of rows finish the elimination and back-substitute, transform back, recover their
    /// rows but the first one (three, twice reduced) along x and sum their residual rows while in
    /// cache; and those first rows of each block are recovered and the rows around them summed
    /// last.
    pub fn solve(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64]) -> (f64, f64) {
        let Self {
            nx,
            ny,
            x: ax,
            y: ty,
            xl,
            cy,
            blocks,
            ends,
            columns,
            scratch,
            scratch_len,
            lines_scratch,
            partial,
            firsts,
            cross,
            prods,
            incoming,
            streaming,
            ..
        } = self;
        let (nx, ny, sl, cy, streaming) = (*nx, *ny, *scratch_len, *cy, *streaming);
        let Some(comp) = a.compact.as_ref() else {
            return (f64::NAN, f64::NAN);
        };
        let (ax, xl, ty, blocks, ends) = (&*ax, &*xl, &*ty, &blocks[..], &ends[..]);
        let brow = |j: usize| &b[j * nx..(j + 1) * nx];
        // The inverse transform returns nx times the line, hence the scale.
        let scale = 1.0 / nx as f64;
        let (c1, nb, zero) = (ty.c1, blocks.len(), &xl.zero[..]);
        // The odd rows the second step eliminates in the transformed space: field row 1, and
        // the last odd row when the odd rows are an odd count.
        let (st, twice) = (ty.stride(), ty.levels == 2);
        let top = (twice && ty.north_spectral()).then(|| 2 * ty.n1 - 1);
        let spectral = |j: usize| twice && (j == 1 || Some(j) == top);
        // Rows at the start of each block that need the block below, recovered last: the
        // first even row, and twice reduced also the row 4 k + 1 after it and the even row
        // after that.
        let edge = if twice { 3 } else { 1 };
        // Each such row with the kept row beside it and its weights (see `Tridiag::south`).
        let spectral_rows = [(1, 3, &ty.south)]
            .into_iter()
            .filter(|_| twice)
            .chain(top.map(|j| (j, j - 2, &ty.north)));
        let xp = SyncPtr(x.as_mut_ptr());
        // SAFETY: the blocks are disjoint row ranges of the nx * ny field at `xp`, and each
        // parallel task below takes its own block's only.
        let block_rows = |blk: usize| {
            let (j0, j1) = blocks[blk];
            unsafe { std::slice::from_raw_parts_mut(xp.ptr().add(j0 * nx), (j1 - j0) * nx) }
        };
        // The first pass on one block, whose rows are `rows` (a stage copy, see `on_rows`).
        let first = |blk: usize,
                     rows: &mut [f64],
                     s: &mut [Complex<f64>],
                     w: &mut [f64],
                     part: &mut [f64; 2],
                     [sh, sk, sp]: [&mut [f64]; 3]| {
            let (j0, j1) = blocks[blk];
            let h = j1 - j0;
            let (z, fs) = s.split_at_mut(nx);
            let [ws, wn, fj, tl, up, ra, rb] = lines_of::<SCRATCH_LINES>(w, nx);
            let src = &b[j0 * nx..j1 * nx];
            part[0] = dot_lanes(src, src);
            // The eliminated end rows' right-hand sides, for the odd rows beside them.
            if j0 == 0 {
                xl.end_rhs(SOUTH_END, ws, brow(0), tl);
            }
            if ny % 2 == 1 && (j0..=j1 + 1).contains(&(ny - 2)) {
                xl.end_rhs(NORTH_END, wn, brow(ny - 1), tl);
            }
            let (ws, wn) = (&*ws, &*wn);
            // The first step's right-hand side of odd row j.
            let once = |out: &mut [f64], j: usize| {
                let hs = if j == 1 { ws } else { brow(j - 1) };
                let hn = match j + 1 {
                    n if n == ny => zero,
                    n if n == ny - 1 => wn,
                    n => brow(n),
                };
                xl.kept_rhs(out, brow(j), hs, hn, cy);
            };
            // Rows 4 k + 1 (twice reduced): the first step's right-hand sides, in place.
            if twice {
                for t in (1..h).step_by(4) {
                    once(row_mut(rows, t, nx), j0 + t);
                }
            }
            // The solved rows' right-hand sides, transformed in pairs: the first step's (odd
            // rows, once reduced) or the second step's (rows 4 k + 3, twice reduced; the
            // first step's one above the block's last row formed again here).
            let mut rhs = |out: &mut [f64], rows: &[f64], t: usize| {
                let j = j0 + t;
                if !twice {
                    once(out, j);
                    return;
                }
                once(fj, j);
                let line = |r: usize| &rows[r * nx..(r + 1) * nx];
                let lower = if spectral(j - 2) { zero } else { line(t - 2) };
                let upper = if j + 2 >= ny || spectral(j + 2) {
                    zero
                } else if t + 2 < h {
                    line(t + 2)
                } else {
                    once(up, j + 2);
                    &*up
                };
                xl.reduced_rhs(out, fj, lower, upper, c1, tl);
            };
            for t in (st - 1..h).step_by(2 * st) {
                rhs(ra, rows, t);
                if t + st < h {
                    rhs(rb, rows, t + st);
                    let (pa, pb) = two_rows(rows, t, t + st, nx);
                    ax.forward_from(ra, Some(rb), pa, Some(pb), z, fs);
                } else {
                    ax.forward_from(ra, None, row_mut(rows, t, nx), None, z, fs);
                }
            }
            // The odd rows eliminated in the transformed space: transformed in place, and
            // added to the kept row beside them.
            for (j, kept, weights) in spectral_rows.clone() {
                if (j0..j1).contains(&j) {
                    ax.forward(row_mut(rows, j - j0, nx), None, z, fs);
                    let (f, v) = two_rows(rows, j - j0, kept - j0, nx);
                    for ((v, &f), &w) in v.iter_mut().zip(f.iter()).zip(&weights[0]) {
                        *v += w * f;
                    }
                }
            }
            // The block's elimination along y while its rows are in cache.
            ty.eliminate_block(rows, j0 / st, scale, [sh, sk, sp], zero);
        };
        (0..nb)
            .into_par_iter()
            .zip(scratch.par_chunks_mut(sl))
            .zip(lines_scratch.par_chunks_mut(SCRATCH_LINES * nx))
            .zip(partial.par_iter_mut())
            .zip(
                firsts
                    .par_chunks_mut(nx)
                    .zip(cross.par_chunks_mut(nx))
                    .zip(prods.par_chunks_mut(nx)),
            )
            .for_each(|((((blk, s), w), part), ((sh, sk), sp))| {
                let rows = block_rows(blk);
                // The first pass writes only odd rows.
                let odd = (1..rows.len() / nx).step_by(2);
                on_rows(streaming, rows, nx, 0..0, odd, |rows| {
                    first(blk, rows, s, w, part, [sh, sk, sp])
                });
            });
        let ptrs = [&mut *firsts, &mut *cross, &mut *prods, &mut *incoming].map(|v| SyncPtr(v.as_mut_ptr()));
        columns.par_iter().for_each(|&(k0, w)| {
            // SAFETY: the column ranges are disjoint and inside the nx * ny field at `xp` and
            // the nx-wide per-block rows of the four sums.
            unsafe { ty.link(xp, (k0, w), ends, ptrs[0], ptrs[1], ptrs[2], ptrs[3]) }
        });
        let (firsts, incoming): (&[f64], &[f64]) = (firsts, incoming);
        let res_row = |j: usize, xs: &[f64], xm: &[f64], xn: &[f64]| {
            let c = j * nx..(j + 1) * nx;
            compact::residual_row_sq(&comp.k, comp.rows[j], &comp.flags[c.clone()], xs, xm, xn, &b[c])
        };
        // The last full pass on one block, whose rows are `rows` (a stage copy, see `on_rows`):
        // its odd rows hold the first pass's results, and all but its edge rows are final after it.
        let last = |blk: usize, rows: &mut [f64], s: &mut [Complex<f64>], w: &mut [f64], part: &mut [f64; 2]| {
            let (j0, j1) = blocks[blk];
            let h = j1 - j0;
            let (z, fs) = s.split_at_mut(nx);
            let above = (blk + 1 < nb).then(|| &firsts[(blk + 1) * nx..(blk + 2) * nx]);
            let g = &incoming[blk * nx..(blk + 1) * nx];
            ty.back_block(rows, j0 / st, g, above, &mut w[..nx]);
            // The odd rows eliminated in the transformed space, from the kept row beside
            // them, and back along x.
            for (j, kept, weights) in spectral_rows.clone() {
                if (j0..j1).contains(&j) {
                    let (v, u) = two_rows(rows, j - j0, kept - j0, nx);
                    for ((v, &u), &d) in v.iter_mut().zip(u.iter()).zip(&weights[1]) {
                        *v = (scale * *v + c1 * u) * d;
                    }
                    ax.inverse(v, None, z, fs);
                }
            }
            // The solved rows back along x, in pairs.
            for t in (st - 1..h).step_by(2 * st) {
                if t + st < h {
                    let (pa, pb) = two_rows(rows, t, t + st, nx);
                    ax.inverse(pa, Some(pb), z, fs);
                } else {
                    ax.inverse(row_mut(rows, t, nx), None, z, fs);
                }
            }
            // Rows 4 k + 1 but the first (twice reduced) from the kept rows beside them.
            let inside = |t: usize| twice && t < h && !spectral(j0 + t);
            let mut t = 5;
            while t < h {
                if (0..GROUP).all(|r| inside(t + 4 * r)) {
                    solve_twice::<GROUP>(xl, rows, t, nx, c1, w);
                    t += 4 * GROUP;
                } else {
                    if inside(t) {
                        solve_twice::<1>(xl, rows, t, nx, c1, w);
                    }
                    t += 4;
                }
            }
            // Even rows but the edge rows: both neighbours are in the block (or beyond the
            // north end).
            let mut t = edge + 1;
            while t < h {
                if t + 2 * GROUP <= h {
                    solve_even::<GROUP>(xl, rows, t, INTERIOR, nx, brow, j0, cy);
                    t += 2 * GROUP;
                } else {
                    solve_even::<1>(xl, rows, t, row_kind(j0 + t, ny), nx, brow, j0, cy);
                    t += 2;
                }
            }
            // The residual of the rows whose neighbours are final (the block's last row's
            // upper one is not, unless it lies beyond the north end).
            let line = |r: usize| if r < h { &rows[r * nx..(r + 1) * nx] } else { zero };
            let stop = if blk + 1 == nb { h } else { h - 1 };
            part[1] = (edge + 1..stop)
                .map(|r| res_row(j0 + r, line(r - 1), line(r), line(r + 1)))
                .sum();
        };
        (0..nb)
            .into_par_iter()
            .zip(scratch.par_chunks_mut(sl))
            .zip(lines_scratch.par_chunks_mut(SCRATCH_LINES * nx))
            .zip(partial.par_iter_mut())
            .for_each(|(((blk, s), w), part)| {
                let rows = block_rows(blk);
                let h = rows.len() / nx;
                // All rows back but the even edge rows, which the edge pass writes (the odd ones
                // below `edge` are final or hold what the edge pass needs).
                let back = (1..edge).step_by(2).chain(edge..h);
                on_rows(streaming, rows, nx, (1..h).step_by(2), back, |rows| {
                    last(blk, rows, s, w, part)
                });
            });
        // Each block's edge rows, then the residual rows around them.
        partial
            .par_iter_mut()
            .zip(lines_scratch.par_chunks_mut(SCRATCH_LINES * nx))
            .enumerate()
            .for_each(|(blk, (part, w))| {
                let j0 = blocks[blk].0;
                // SAFETY: this task alone writes rows j0 .. j0 + edge (edge <= 3) in this pass; it
                // reads rows j0 - 2 ..= j0 + edge + 1 (inside the field), which no other task
                // writes in this pass
                // (blocks are at least 8 rows, so the nearest rows other tasks write are j0 - 6
                // and j0 + 8).
                let row = |j: usize| unsafe { std::slice::from_raw_parts(xp.ptr().add(j * nx), nx) };
                let out = |j: usize| unsafe { std::slice::from_raw_parts_mut(xp.ptr().add(j * nx), nx) };
                if twice && j0 > 0 {
                    let (mid, _) = w.split_at_mut(nx);
                    xl.solve_rows::<1>(LOWER, [&mut *mid], [row(j0 + 1)], [row(j0 - 1)], [row(j0 + 3)], c1);
                    xl.solve_rows::<1>(UPPER, [out(j0 + 1)], [&*mid], [zero], [zero], 0.0);
                }
                for j in (j0..j0 + edge).step_by(2) {
                    let s = if j > 0 { row(j - 1) } else { zero };
                    xl.solve_rows::<1>(row_kind(j, ny), [out(j)], [brow(j)], [s], [row(j + 1)], cy);
                }
                // The field's end rows get zeros for their missing neighbour (their coefficient
                // is zero), not the row across the field, which another task may be writing.
                for j in j0.saturating_sub(1)..=j0 + edge {
                    let xs = if j > 0 { row(j - 1) } else { zero };
                    let xn = if j + 1 < ny { row(j + 1) } else { zero };
                    part[1] += res_row(j, xs, row(j), xn);
                }
            });
        partial.iter().fold((0.0, 0.0), |(bb, rr), p| (bb + p[0], rr + p[1]))
    }
}

/// The first `K` lines of `nx` values of `w`.
fn lines_of<const K: usize>(w: &mut [f64], nx: usize) -> [&mut [f64]; K] {
    let mut it = w.chunks_exact_mut(nx);
    std::array::from_fn(|_| it.next().expect("enough scratch lines"))
}

/// Row `t` of `rows` (rows of `nx`).
fn row_mut(rows: &mut [f64], t: usize, nx: usize) -> &mut [f64] {
    &mut rows[t * nx..(t + 1) * nx]
}

/// Rows `t1` and `t2 != t1` of `rows` (rows of `nx`), in that order.
fn two_rows(rows: &mut [f64], t1: usize, t2: usize, nx: usize) -> (&mut [f64], &mut [f64]) {
    assert_ne!(t1, t2, "two different rows");
    let (lo, hi) = rows.split_at_mut(t1.max(t2) * nx);
    let (low, high) = (&mut lo[t1.min(t2) * nx..(t1.min(t2) + 1) * nx], &mut hi[..nx]);
    if t1 < t2 {
        (low, high)
    } else {
        (high, low)
    }
}

/// Solves `R` even rows of a block, `t, t + 2, ...` (local row numbers, from 2 on), of kind
/// `kind`, from the odd rows beside them (the row beyond the north end taken as zero).
#[allow(clippy::too_many_arguments)]
#[inline]
fn solve_even<'b, const R: usize>(
    xl: &XLines,
    rows: &mut [f64],
    t: usize,
    kind: usize,
    nx: usize,
    brow: impl Fn(usize) -> &'b [f64],
    j0: usize,
    cy: f64,
) {
    let h = rows.len() / nx;
    assert!(t >= 1 && t + 2 * (R - 1) < h, "even rows inside the block");
    let p = rows.as_mut_ptr();
    let zero = &xl.zero[..];
    // SAFETY: the rows written (t + 2 r) and read (t + 2 r +- 1) are distinct rows inside
    // `rows`, which this call borrows mutably; the asserts above keep them in range.
    let row = |r: usize| -> &[f64] {
        if r < h {
            unsafe { std::slice::from_raw_parts(p.add(r * nx), nx) }
        } else {
            zero
        }
    };
    let out: [&mut [f64]; R] =
        std::array::from_fn(|r| unsafe { std::slice::from_raw_parts_mut(p.add((t + 2 * r) * nx), nx) });
    let f = std::array::from_fn(|r| brow(j0 + t + 2 * r));
    let s = std::array::from_fn(|r| row(t + 2 * r - 1));
    let n = std::array::from_fn(|r| row(t + 2 * r + 1));
    xl.solve_rows::<R>(kind, out, f, s, n, cy);
}

/// Solves `R` rows of a block that the second step eliminated, `t, t + 4, ...` (local row
/// numbers), from the rows two below and above them: `D u = F + c1 (u_s + u_n)` with `F` in
/// place, by the two factors of `D = T^2 - 2 c1` in turn (`w` holds at least `R` scratch
/// lines).
#[inline]
fn solve_twice<const R: usize>(xl: &XLines, rows: &mut [f64], t: usize, nx: usize, c1: f64, w: &mut [f64]) {
    let h = rows.len() / nx;
    assert!(t >= 2 && t + 4 * (R - 1) + 2 < h, "rows inside the block");
    let p = rows.as_mut_ptr();
    // SAFETY: the rows written (t + 4 r) and read (t + 4 r, t + 4 r +- 2) are inside `rows`,
    // which this call borrows mutably; the ones read by the first solve are only read, and
    // each row the second writes is read by neither solve meanwhile.
    let row = |r: usize| -> &[f64] { unsafe { std::slice::from_raw_parts(p.add(r * nx), nx) } };
    let mut lines = w.chunks_exact_mut(nx);
    let mid: [&mut [f64]; R] = std::array::from_fn(|_| lines.next().expect("enough scratch lines"));
    let f = std::array::from_fn(|r| row(t + 4 * r));
    let s = std::array::from_fn(|r| row(t + 4 * r - 2));
    let n = std::array::from_fn(|r| row(t + 4 * r + 2));
    xl.solve_rows::<R>(LOWER, mid, f, s, n, c1);
    let mut lines = w.chunks_exact(nx);
    let mid: [&[f64]; R] = std::array::from_fn(|_| lines.next().expect("enough scratch lines"));
    let out: [&mut [f64]; R] =
        std::array::from_fn(|r| unsafe { std::slice::from_raw_parts_mut(p.add((t + 4 * r) * nx), nx) });
    let zeros = [&xl.zero[..]; R];
    xl.solve_rows::<R>(UPPER, out, mid, zeros, zeros, 0.0);
}

/// A raw pointer that rayon tasks may share (each accesses a disjoint part).
#[derive(Clone, Copy)]
struct SyncPtr(*mut f64);
// SAFETY: used only for accesses to disjoint entries from different tasks (see
// `Tridiag::link` and the first rows of `Transform::solve`).
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
                        for levels in [1, 2] {
                            assert!(t.refresh_levels(&a, Some(levels)));
                            // Field rows per solved row.
                            let st = 2 * levels;
                            if kx < 100.0 && ny > 100 {
                                assert!(t.y.rows < ny / (2 * st), "pivots settle: {} rows", t.y.rows);
                            }
                            if kx > 100.0 && !fx {
                                // Mode 0 between closed x ends has pivots creeping by m per row.
                                assert_eq!(t.y.rows, ny / st - 1, "huge couplings never settle");
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
                            let case =
                                format!("{nx}x{ny} fixed x {fx}, south {fs}, north {fn_}, k {kx:e}, {levels} steps");
                            // Normwise backward error (Higham 2002, Accuracy and Stability of
                            // Numerical Algorithms, eq. 1.2 and ch. 7): the residual against
                            // ||A|| ||x|| + ||b||, which is what round-off alone allows when the
                            // couplings dwarf the identity.
                            let c = a.compact.as_ref().unwrap().k;
                            let norm_a = c.m + 2.0 * (c.cx + c.gx) + 2.0 * (c.cy + c.gy);
                            let xn = x.iter().map(|v| v * v).sum::<f64>().sqrt();
                            let back = a.residual_sq(&b, &x).sqrt() / (norm_a * xn + bn);
                            // Twice reduced, round-off grows as the square of the spread of the
                            // x operator (see MAX_SPREAD); measured 3.3e-15 at spread 11 here.
                            let t0 = c.m + 2.0 * c.cy;
                            let spread = (t0 + 4.0 * c.cx) / t0;
                            let bound = if levels == 1 {
                                1e-15
                            } else {
                                (spread * spread * f64::EPSILON).max(1e-15)
                            };
                            assert!(back < bound, "{case}: backward error {back:e}");
                            if kx < 100.0 {
                                assert!(rel < 1e-13, "{case}: relative residual {rel:e}");
                            }
                        }
                    }
                }
            }
        }
    }

    /// Short fields, where the cyclic reduction leaves two or three rows and the end rows are
    /// eliminated or kept at each step (heights 8 to 17: every residue of `ny` modulo 4, the
    /// shortest the solver takes; and the narrowest, 3 cells wide), solve to round-off with
    /// every pair of y ends.
    #[test]
    fn solves_short_fields() {
        for (nx, ny) in (8..=17).map(|ny| (7, ny)).chain([(3, 8), (3, 13)]) {
            let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
            let mask = Mask::all_water(&grid);
            for (fs, fn_) in [(false, false), (true, false), (false, true), (true, true)] {
                let mut sides = Sides::closed();
                let fixed = crate::solve::SideCoupling::Dirichlet;
                if fs {
                    sides.south = fixed;
                }
                if fn_ {
                    sides.north = fixed;
                }
                let a = Stencil5::diffusion(&grid, &mask, sides, 4.0, 11.0).unwrap();
                let mut t = Transform::new(&a).expect("qualifies");
                for levels in [1, 2] {
                    assert!(t.refresh_levels(&a, Some(levels)));
                    let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 17) % 7) as f64 - 2.5).collect();
                    let mut x = vec![0.0; nx * ny];
                    let (bb, rr) = t.solve(&a, &b, &mut x);
                    let rel = a.residual_sq(&b, &x).sqrt() / bb.sqrt();
                    assert!(
                        rel < 1e-14,
                        "ny {ny} south {fs} north {fn_}, {levels} steps: residual {rel:e}"
                    );
                    assert!((rr.sqrt() / bb.sqrt() - rel).abs() <= 1e-3 * rel + 1e-18);
                }
            }
        }
    }

    /// Streaming the results out of the stage gives exactly what ordinary stores give, over
    /// repeated solves (the stage holds the previous block's rows meanwhile).
    #[test]
    fn streaming_matches_cached_stores() {
        // Both parities of height and width, both reduction levels, several blocks.
        for (nx, ny) in [(30, 72), (31, 77)] {
            let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
            let mask = Mask::all_water(&grid);
            let mut sides = Sides::closed();
            sides.south = crate::solve::SideCoupling::Dirichlet;
            let a = Stencil5::diffusion(&grid, &mask, sides, 6.0, 9.0).unwrap();
            let mut t = Transform::new(&a).expect("qualifies");
            t.set_lines(8);
            for levels in [1, 2] {
                assert!(t.refresh_levels(&a, Some(levels)));
                // Repeated solves from the previous solution, as a run makes them.
                let mut b: Vec<f64> = (0..nx * ny).map(|k| ((k * 29) % 13) as f64 - 6.0).collect();
                let (mut x0, mut x1) = (vec![1.0; nx * ny], vec![-3.0; nx * ny]);
                for step in 0..4 {
                    t.streaming = false;
                    let r0 = t.solve(&a, &b, &mut x0);
                    t.streaming = true;
                    let r1 = t.solve(&a, &b, &mut x1);
                    assert_eq!(r0, r1, "{nx} x {ny}, {levels} steps, solve {step}: sums");
                    assert!(x0 == x1, "{nx} x {ny}, {levels} steps, solve {step}: solutions");
                    b.copy_from_slice(&x0);
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
        for levels in [1, 2] {
            assert!(t.refresh_levels(&a, Some(levels)));
            let mut first: Option<Vec<f64>> = None;
            for lines in [42, 4, 8, 12, 16, 20, 36] {
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
    }

    /// Cells much wider than tall with a large time step spread the x operator's eigenvalues
    /// widely: the solver then takes one reduction step, whose round-off grows only as the
    /// spread, and two steps (whose round-off grows as its square) would leave a residual many
    /// times larger; isotropic cells take two.
    #[test]
    fn chooses_the_reduction_steps_by_spread() {
        let b = |n: usize| (0..n).map(|k| ((k * 23) % 17) as f64 - 8.0).collect::<Vec<f64>>();
        let solve = |t: &mut Transform, a: &Stencil5| {
            let (nx, ny) = (a.nx, a.ny);
            let b = b(nx * ny);
            let mut x = vec![0.0; nx * ny];
            let (bb, _) = t.solve(a, &b, &mut x);
            a.residual_sq(&b, &x).sqrt() / bb.sqrt()
        };
        // Isotropic: spread (1 + 20 + 40) / 21 < 3.
        let grid = Grid::new(48, 40, 1.0, 1.0, 0.0, 0.0).unwrap();
        let a = Stencil5::diffusion(&grid, &Mask::all_water(&grid), Sides::closed(), 10.0, 10.0).unwrap();
        let mut t = Transform::new(&a).expect("qualifies");
        assert_eq!(t.y.levels, 2);
        assert!(solve(&mut t, &a) < 1e-14);
        // cx = 1000, cy = 10 / 9: spread about 1250.
        let grid = Grid::new(48, 40, 0.1, 3.0, 0.0, 0.0).unwrap();
        let a = Stencil5::diffusion(&grid, &Mask::all_water(&grid), Sides::closed(), 10.0, 10.0).unwrap();
        let mut t = Transform::new(&a).expect("qualifies");
        assert_eq!(t.y.levels, 1);
        let once = solve(&mut t, &a);
        assert!(t.refresh_levels(&a, Some(2)));
        let twice = solve(&mut t, &a);
        assert!(once < 1e-12 && twice > 10.0 * once, "once {once:e}, twice {twice:e}");
    }

    /// Land, periodic sides, a fixed value on one x side only and fields under 8 rows high are
    /// refused (the multigrid path handles them).
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
        let short = Grid::new(12, 7, 1.0, 1.0, 0.0, 0.0).unwrap();
        let a = Stencil5::diffusion(&short, &Mask::all_water(&short), Sides::closed(), 5.0, 5.0).unwrap();
        assert!(Transform::new(&a).is_none());
    }
}
