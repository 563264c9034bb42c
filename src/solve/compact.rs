//! Matrix-free form of a 5-point operator with constant couplings: one byte of flags per cell
//! and six scalars instead of five `f64` coefficient arrays (40 bytes per cell). It covers the
//! diffusion operators of [`Stencil5::diffusion`] with uniform `theta dt K` on a uniform grid
//! (land, closed, periodic and Dirichlet sides included) and, in the all-water case, their
//! multigrid coarse operators, whose couplings stay constant under 2x2 aggregation with halved
//! couplings.
//!
//! Row `k` of the operator is `diag_k x_k - (w x_W + e x_E + s x_S + n x_N)` with
//! `w, e = cx` or 0, `s, n = cy` or 0 by the open-face bits, and
//! `diag_k = m + w + e + s + n + [gx] + [gy]` (the bracketed terms when the cell has a
//! Dirichlet face in x or y), added in that order, which is the order of the assembly in
//! [`Stencil5::assemble`]. Adding a zero and multiplying by a zero coupling are exact in IEEE
//! arithmetic, so on the fine level this form reproduces the stored-coefficient product bit
//! for bit. Land cells are identity rows. The byte also lets the kernels run on whole rows with
//! selects instead of branches, so they vectorise.
//!
//! [`Stencil5::diffusion`]: super::Stencil5::diffusion
//! [`Stencil5::assemble`]: super::Stencil5::assemble

use super::blocks::{dot_lanes, LANES};

/// West face open.
pub(crate) const W: u8 = 1;
/// East face open.
pub(crate) const E: u8 = 2;
/// South face open.
pub(crate) const S: u8 = 4;
/// North face open.
pub(crate) const N: u8 = 8;
/// A Dirichlet face on a west or east side (adds `gx` to the diagonal).
pub(crate) const DX: u8 = 16;
/// A Dirichlet face on a south or north side (adds `gy`).
pub(crate) const DY: u8 = 32;
/// Land: identity row.
pub(crate) const LAND: u8 = 64;

/// The scalars of a compact operator.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Consts {
    pub m: f64,
    pub cx: f64,
    pub cy: f64,
    pub gx: f64,
    pub gy: f64,
}

/// Marks a row whose interior cells (all but the first and last) do not share one flag byte.
pub(crate) const MIXED: u8 = 0xFF;

/// Entries of the reciprocal-diagonal table: every value of the seven flag bits.
pub(crate) const FLAG_VALUES: usize = 128;

/// A compact operator: flags per cell plus [`Consts`], per row the flag byte shared by all its
/// interior cells ([`MIXED`] if none), so uniform rows run a select-free loop, and the
/// reciprocal diagonal of every flag value, so the smoother reads no per-cell diagonal array
/// (on the fine level each entry is `1 / diag` of the stored operator, bit for bit).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Compact {
    pub k: Consts,
    pub flags: Vec<u8>,
    pub rows: Vec<u8>,
    pub inv: Box<[f64; FLAG_VALUES]>,
}

impl Consts {
    /// `1 / diag(f)` for every flag value `f` (index = the flag byte).
    pub fn inv_table(&self) -> Box<[f64; FLAG_VALUES]> {
        let mut t = Box::new([0.0; FLAG_VALUES]);
        for (f, v) in t.iter_mut().enumerate() {
            *v = 1.0 / self.diag(f as u8);
        }
        t
    }
}

impl Consts {
    /// The diagonal of a cell with flags `f`, summed in the assembly's order.
    #[inline(always)]
    pub fn diag(&self, f: u8) -> f64 {
        let w = if f & W != 0 { self.cx } else { 0.0 };
        let e = if f & E != 0 { self.cx } else { 0.0 };
        let s = if f & S != 0 { self.cy } else { 0.0 };
        let n = if f & N != 0 { self.cy } else { 0.0 };
        let dx = if f & DX != 0 { self.gx } else { 0.0 };
        let dy = if f & DY != 0 { self.gy } else { 0.0 };
        let d = self.m + w + e + s + n + dx + dy;
        if f & LAND != 0 {
            1.0
        } else {
            d
        }
    }

    /// `(diag, w, e, s, n)` of a cell with flags `f` (the same values the selects give).
    #[inline(always)]
    pub fn coefs(&self, f: u8) -> (f64, f64, f64, f64, f64) {
        let w = if f & W != 0 { self.cx } else { 0.0 };
        let e = if f & E != 0 { self.cx } else { 0.0 };
        let s = if f & S != 0 { self.cy } else { 0.0 };
        let n = if f & N != 0 { self.cy } else { 0.0 };
        (self.diag(f), w, e, s, n)
    }

    /// `w x_W + e x_E + s x_S + n x_N` for a cell with flags `f`.
    #[inline(always)]
    pub fn nb(&self, f: u8, xw: f64, xe: f64, xs: f64, xn: f64) -> f64 {
        let w = if f & W != 0 { self.cx } else { 0.0 };
        let e = if f & E != 0 { self.cx } else { 0.0 };
        let s = if f & S != 0 { self.cy } else { 0.0 };
        let n = if f & N != 0 { self.cy } else { 0.0 };
        w * xw + e * xe + s * xs + n * xn
    }
}

/// The coefficients of a 5-point operator as [`Compact::detect`] reads them (each `nx * ny`,
/// row-major, row 0 south; `Stencil5::coefficients` lends them).
#[derive(Debug, Clone, Copy)]
pub struct Coefficients<'a> {
    /// Cells in x.
    pub nx: usize,
    /// Cells in y.
    pub ny: usize,
    /// Periodic in x.
    pub periodic_x: bool,
    /// Periodic in y.
    pub periodic_y: bool,
    /// Diagonal.
    pub diag: &'a [f64],
    /// West coupling.
    pub aw: &'a [f64],
    /// East coupling.
    pub ae: &'a [f64],
    /// South coupling.
    pub as_: &'a [f64],
    /// North coupling.
    pub an: &'a [f64],
    /// Land flags.
    pub land: &'a [bool],
}

impl Compact {
    /// The compact form of `a` if its coefficients fit it with identity weight `m` and
    /// Dirichlet diagonal terms `gx`, `gy` (taken as twice the couplings when `None`). With
    /// `tol = 0` every diagonal must match bit for bit; otherwise within `tol` relative (used on
    /// coarse levels, where the form only serves the preconditioner). Needs at least 3 cells
    /// each way (so a cell touches at most one x side and one y side) and land only when
    /// `m = 1`.
    pub fn detect(a: &Coefficients, m: f64, g: Option<(f64, f64)>, tol: f64) -> Option<Self> {
        let (nx, ny) = (a.nx, a.ny);
        if nx < 3 || ny < 3 {
            return None;
        }
        let mut cx = 0.0f64;
        let mut cy = 0.0f64;
        for k in 0..nx * ny {
            if cx == 0.0 {
                cx = a.aw[k].max(a.ae[k]);
            }
            if cy == 0.0 {
                cy = a.as_[k].max(a.an[k]);
            }
            if cx != 0.0 && cy != 0.0 {
                break;
            }
        }
        let (gx, gy) = g.unwrap_or((2.0 * cx, 2.0 * cy));
        let k = Consts { m, cx, cy, gx, gy };
        let mut flags = vec![0u8; nx * ny];
        let close = |v: f64, want: f64| v == want || (tol > 0.0 && (v - want).abs() <= tol * want.abs());
        for j in 0..ny {
            for i in 0..nx {
                let c = j * nx + i;
                if a.land[c] {
                    if m != 1.0 {
                        return None;
                    }
                    flags[c] = LAND;
                    continue;
                }
                let mut f = 0u8;
                for (v, bit, want) in [(a.aw[c], W, cx), (a.ae[c], E, cx), (a.as_[c], S, cy), (a.an[c], N, cy)] {
                    if v != 0.0 {
                        if !close(v, want) {
                            return None;
                        }
                        f |= bit;
                    }
                }
                // Dirichlet terms only where the cell lies on a non-periodic side.
                let x_edge = !a.periodic_x && (i == 0 || i + 1 == nx);
                let y_edge = !a.periodic_y && (j == 0 || j + 1 == ny);
                let mut found = false;
                for (dx, dy) in [(false, false), (true, false), (false, true), (true, true)] {
                    if (dx && !x_edge) || (dy && !y_edge) {
                        continue;
                    }
                    let ff = f | if dx { DX } else { 0 } | if dy { DY } else { 0 };
                    if close(a.diag[c], k.diag(ff)) {
                        f = ff;
                        found = true;
                        break;
                    }
                }
                if !found {
                    return None;
                }
                flags[c] = f;
            }
        }
        let rows = flags
            .chunks_exact(nx)
            .map(|r| {
                let inner = &r[1..nx - 1];
                if inner.iter().all(|&f| f == inner[0]) {
                    inner[0]
                } else {
                    MIXED
                }
            })
            .collect();
        Some(Self {
            inv: k.inv_table(),
            k,
            flags,
            rows,
        })
    }
}

/// `y = A x` on one row (`u`: the row's shared interior flags or [`MIXED`]; `xs`, `x`, `xn`: south, own and north rows; neighbours across the row
/// ends wrap, their couplings are zero unless periodic). Returns `x . y` on the row.
#[inline(always)]
pub(crate) fn apply_row(k: &Consts, u: u8, f: &[u8], xs: &[f64], x: &[f64], xn: &[f64], y: &mut [f64]) -> f64 {
    let n = x.len();
    let (f, xs, xn, y) = (&f[..n], &xs[..n], &xn[..n], &mut y[..n]);
    if n < 3 {
        let mut dot = 0.0;
        for i in 0..n {
            let (xw, xe) = (x[(i + n - 1) % n], x[(i + 1) % n]);
            y[i] = k.diag(f[i]) * x[i] - k.nb(f[i], xw, xe, xs[i], xn[i]);
            dot += x[i] * y[i];
        }
        return dot;
    }
    let l = n - 1;
    y[0] = k.diag(f[0]) * x[0] - k.nb(f[0], x[l], x[1], xs[0], xn[0]);
    {
        let m = n - 2;
        let (f, xw, xc, xe, xs, xn, y) = (
            &f[1..=m],
            &x[..m],
            &x[1..=m],
            &x[2..],
            &xs[1..=m],
            &xn[1..=m],
            &mut y[1..=m],
        );
        if u != MIXED {
            let (d, cw, ce, cs, cn) = k.coefs(u);
            for i in 0..m {
                y[i] = d * xc[i] - (cw * xw[i] + ce * xe[i] + cs * xs[i] + cn * xn[i]);
            }
        } else {
            for i in 0..m {
                y[i] = k.diag(f[i]) * xc[i] - k.nb(f[i], xw[i], xe[i], xs[i], xn[i]);
            }
        }
    }
    y[l] = k.diag(f[l]) * x[l] - k.nb(f[l], x[l - 1], x[0], xs[l], xn[l]);
    dot_lanes(x, y)
}

/// `r = b - A x` on one row (`u`: the row's shared interior flags or [`MIXED`]).
#[allow(clippy::too_many_arguments)]
#[inline(always)]
pub(crate) fn residual_row(k: &Consts, u: u8, f: &[u8], xs: &[f64], x: &[f64], xn: &[f64], b: &[f64], r: &mut [f64]) {
    let n = x.len();
    let (f, xs, xn, b, r) = (&f[..n], &xs[..n], &xn[..n], &b[..n], &mut r[..n]);
    let l = n - 1;
    r[0] = b[0] - (k.diag(f[0]) * x[0] - k.nb(f[0], x[l], x[1 % n], xs[0], xn[0]));
    if n < 3 {
        if n == 2 {
            r[1] = b[1] - (k.diag(f[1]) * x[1] - k.nb(f[1], x[0], x[0], xs[1], xn[1]));
        }
        return;
    }
    {
        let m = n - 2;
        let (f, xw, xc, xe, xs, xn, b, r) = (
            &f[1..=m],
            &x[..m],
            &x[1..=m],
            &x[2..],
            &xs[1..=m],
            &xn[1..=m],
            &b[1..=m],
            &mut r[1..=m],
        );
        if u != MIXED {
            let (d, cw, ce, cs, cn) = k.coefs(u);
            let done = simd::residual(&[cw, ce, cs, cn, d], [b, xw, xc, xe, xs, xn], r);
            for i in done..m {
                r[i] = b[i] - (d * xc[i] - (cw * xw[i] + ce * xe[i] + cs * xs[i] + cn * xn[i]));
            }
        } else {
            for i in 0..m {
                r[i] = b[i] - (k.diag(f[i]) * xc[i] - k.nb(f[i], xw[i], xe[i], xs[i], xn[i]));
            }
        }
    }
    r[l] = b[l] - (k.diag(f[l]) * x[l] - k.nb(f[l], x[l - 1], x[0], xs[l], xn[l]));
}

/// `||b - A x||^2` on one row (`u`: the row's shared interior flags or [`MIXED`]).
#[inline(always)]
pub(crate) fn residual_row_sq(k: &Consts, u: u8, f: &[u8], xs: &[f64], x: &[f64], xn: &[f64], b: &[f64]) -> f64 {
    let n = x.len();
    let (f, xs, xn, b) = (&f[..n], &xs[..n], &xn[..n], &b[..n]);
    let l = n - 1;
    let res = |i: usize, xw: f64, xe: f64| b[i] - (k.diag(f[i]) * x[i] - k.nb(f[i], xw, xe, xs[i], xn[i]));
    if n < 3 {
        return (0..n).map(|i| res(i, x[(i + n - 1) % n], x[(i + 1) % n]).powi(2)).sum();
    }
    let v0 = res(0, x[l], x[1]);
    let mut acc = v0 * v0;
    {
        let m = n - 2;
        let (f, xw, xc, xe, xs, xn, b) = (
            &f[1..=m],
            &x[..m],
            &x[1..=m],
            &x[2..],
            &xs[1..=m],
            &xn[1..=m],
            &b[1..=m],
        );
        acc += if u != MIXED {
            let (d, cw, ce, cs, cn) = k.coefs(u);
            sum_sq_lanes(m, |i| {
                b[i] - (d * xc[i] - (cw * xw[i] + ce * xe[i] + cs * xs[i] + cn * xn[i]))
            })
        } else {
            sum_sq_lanes(m, |i| {
                b[i] - (k.diag(f[i]) * xc[i] - k.nb(f[i], xw[i], xe[i], xs[i], xn[i]))
            })
        };
    }
    let v1 = res(l, x[l - 1], x[0]);
    acc + v1 * v1
}

/// `sum_i v(i)^2` over `0..m` in `LANES` interleaved partial sums (so the loop vectorises),
/// added in a fixed order, then the tail.
#[inline(always)]
fn sum_sq_lanes(m: usize, v: impl Fn(usize) -> f64) -> f64 {
    let mut lanes = [0.0f64; LANES];
    let whole = m / LANES * LANES;
    for c in (0..whole).step_by(LANES) {
        for (t, lane) in lanes.iter_mut().enumerate() {
            let r = v(c + t);
            *lane += r * r;
        }
    }
    let mut acc = 0.0;
    for s in lanes {
        acc += s;
    }
    for i in whole..m {
        let r = v(i);
        acc += r * r;
    }
    acc
}

/// One colour of a red-black Gauss–Seidel half-sweep on a row, out of place: cells with
/// `i % 2 == start` get `(b + neighbours) / diag`, the others copy `x`. The reciprocal
/// diagonal comes from the flag table `inv` (a scalar on uniform rows). Rows have >= 3 cells.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
pub(crate) fn relax_row(
    k: &Consts,
    u: u8,
    f: &[u8],
    inv: &[f64; FLAG_VALUES],
    b: &[f64],
    xs: &[f64],
    x: &[f64],
    xn: &[f64],
    out: &mut [f64],
    start: usize,
) {
    let n = x.len();
    let (f, b, xs, xn, out) = (&f[..n], &b[..n], &xs[..n], &xn[..n], &mut out[..n]);
    let l = n - 1;
    let iv = |g: u8| inv[usize::from(g) % FLAG_VALUES];
    let upd = |i: usize, xw: f64, xe: f64| (b[i] + k.nb(f[i], xw, xe, xs[i], xn[i])) * iv(f[i]);
    out[0] = if start == 0 { upd(0, x[l], x[1]) } else { x[0] };
    {
        let m = n - 2;
        let (f, b, xw, xc, xe, xs, xn, out) = (
            &f[1..=m],
            &b[1..=m],
            &x[..m],
            &x[1..=m],
            &x[2..],
            &xs[1..=m],
            &xn[1..=m],
            &mut out[1..=m],
        );
        // Interior cell i + 1 is relaxed when (i + 1) % 2 == start.
        let par = 1 - start;
        if u != MIXED {
            let (_, cw, ce, cs, cn) = k.coefs(u);
            let d = iv(u);
            let done = simd::relax(&[cw, ce, cs, cn, d], [b, xw, xc, xe, xs, xn], out, par);
            for i in done..m {
                let v = (b[i] + (cw * xw[i] + ce * xe[i] + cs * xs[i] + cn * xn[i])) * d;
                out[i] = if i & 1 == par { v } else { xc[i] };
            }
        } else {
            for i in 0..m {
                let v = (b[i] + k.nb(f[i], xw[i], xe[i], xs[i], xn[i])) * iv(f[i]);
                out[i] = if i & 1 == par { v } else { xc[i] };
            }
        }
    }
    out[l] = if l % 2 == start { upd(l, x[l - 1], x[0]) } else { x[l] };
}

/// The first red-black half-sweep from a zero guess on a row: cells with `i % 2 == start` get
/// `b / diag` (from the flag table), the others 0. Rows have >= 3 cells.
#[inline(always)]
pub(crate) fn first_colour_row(u: u8, f: &[u8], inv: &[f64; FLAG_VALUES], b: &[f64], out: &mut [f64], start: usize) {
    let n = out.len();
    let (f, b) = (&f[..n], &b[..n]);
    let iv = |g: u8| inv[usize::from(g) % FLAG_VALUES];
    let l = n - 1;
    out[0] = if start == 0 { b[0] * iv(f[0]) } else { 0.0 };
    {
        let m = n - 2;
        let (f, b, out) = (&f[1..=m], &b[1..=m], &mut out[1..=m]);
        let par = 1 - start;
        if u != MIXED {
            let d = iv(u);
            for i in 0..m {
                out[i] = if i & 1 == par { b[i] * d } else { 0.0 };
            }
        } else {
            for i in 0..m {
                out[i] = if i & 1 == par { b[i] * iv(f[i]) } else { 0.0 };
            }
        }
    }
    out[l] = if l % 2 == start { b[l] * iv(f[l]) } else { 0.0 };
}

/// Explicit 512-bit kernels for the interior of rows of one flag value, where the compiler's
/// own vectorisation stays at 256 bits (its tuning for this CPU). They do the scalar loops'
/// operations in the same order, without fused multiply-adds, so the results are the same bit
/// for bit; they return how many leading cells they did (a multiple of 8), the caller does the
/// rest. Without AVX-512 at compile time they do nothing.
mod simd {
    /// `cw xw + ce xe + cs xs + cn xn` at cells `i..i + 8` of `r = [b, xw, xc, xe, xs, xn]`,
    /// summed in the scalar loops' order.
    ///
    /// # Safety
    /// AVX-512F must be available and `i + 8` must not exceed the length of `r[1]`, `r[3]`,
    /// `r[4]` and `r[5]`.
    #[cfg(all(target_arch = "x86_64", target_feature = "avx512f"))]
    #[inline(always)]
    unsafe fn neighbours(c: [std::arch::x86_64::__m512d; 4], r: &[&[f64]; 6], i: usize) -> std::arch::x86_64::__m512d {
        use std::arch::x86_64::*;
        let [cw, ce, cs, cn] = c;
        let ld = |v: &[f64]| _mm512_loadu_pd(v.as_ptr().add(i));
        _mm512_add_pd(
            _mm512_add_pd(
                _mm512_add_pd(_mm512_mul_pd(cw, ld(r[1])), _mm512_mul_pd(ce, ld(r[3]))),
                _mm512_mul_pd(cs, ld(r[4])),
            ),
            _mm512_mul_pd(cn, ld(r[5])),
        )
    }

    /// `c = [cw, ce, cs, cn, d]`; `r = [b, xw, xc, xe, xs, xn]`, each at least `out.len()`
    /// long. Cell `i` of `out` gets `(b + cw xw + ce xe + cs xs + cn xn) d` when
    /// `i % 2 == par`, else `xc`.
    #[inline(always)]
    pub(super) fn relax(c: &[f64; 5], r: [&[f64]; 6], out: &mut [f64], par: usize) -> usize {
        #[cfg(all(target_arch = "x86_64", target_feature = "avx512f"))]
        {
            use std::arch::x86_64::*;
            let m = out.len();
            if r.iter().any(|v| v.len() < m) {
                return 0;
            }
            // SAFETY: AVX-512F is enabled at compile time (the cfg above).
            let [cw, ce, cs, cn, d] = c.map(|v| unsafe { _mm512_set1_pd(v) });
            let mask: __mmask8 = if par == 0 { 0x55 } else { 0xAA };
            let mut i = 0;
            while i + 8 <= m {
                // SAFETY: AVX-512F is enabled at compile time, and i + 8 <= m <= the length of
                // every slice read or written.
                unsafe {
                    let ld = |v: &[f64]| _mm512_loadu_pd(v.as_ptr().add(i));
                    let nb = neighbours([cw, ce, cs, cn], &r, i);
                    let v = _mm512_mul_pd(_mm512_add_pd(ld(r[0]), nb), d);
                    _mm512_storeu_pd(out.as_mut_ptr().add(i), _mm512_mask_blend_pd(mask, ld(r[2]), v));
                }
                i += 8;
            }
            i
        }
        #[cfg(not(all(target_arch = "x86_64", target_feature = "avx512f")))]
        {
            let _ = (c, r, out, par);
            0
        }
    }

    /// `c = [cw, ce, cs, cn, d]`; `r = [b, xw, xc, xe, xs, xn]`, each at least `out.len()`
    /// long: `out = b - (d xc - (cw xw + ce xe + cs xs + cn xn))`.
    #[inline(always)]
    pub(super) fn residual(c: &[f64; 5], r: [&[f64]; 6], out: &mut [f64]) -> usize {
        #[cfg(all(target_arch = "x86_64", target_feature = "avx512f"))]
        {
            use std::arch::x86_64::*;
            let m = out.len();
            if r.iter().any(|v| v.len() < m) {
                return 0;
            }
            // SAFETY: AVX-512F is enabled at compile time (the cfg above).
            let [cw, ce, cs, cn, d] = c.map(|v| unsafe { _mm512_set1_pd(v) });
            let mut i = 0;
            while i + 8 <= m {
                // SAFETY: AVX-512F is enabled at compile time, and i + 8 <= m <= the length of
                // every slice read or written.
                unsafe {
                    let ld = |v: &[f64]| _mm512_loadu_pd(v.as_ptr().add(i));
                    let nb = neighbours([cw, ce, cs, cn], &r, i);
                    let ax = _mm512_sub_pd(_mm512_mul_pd(d, ld(r[2])), nb);
                    _mm512_storeu_pd(out.as_mut_ptr().add(i), _mm512_sub_pd(ld(r[0]), ax));
                }
                i += 8;
            }
            i
        }
        #[cfg(not(all(target_arch = "x86_64", target_feature = "avx512f")))]
        {
            let _ = (c, r, out);
            0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The half-sweep and residual rows (512-bit interior where available, scalar tail) equal
    /// a plain scalar evaluation bit for bit, for every row length from 3 to 40, both colours,
    /// and interior flags with and without each face.
    #[test]
    fn row_kernels_match_scalar_reference() {
        let k = Consts {
            m: 1.0,
            cx: 3.25,
            cy: 0.7,
            gx: 6.5,
            gy: 1.4,
        };
        let inv = k.inv_table();
        let val = |s: usize, i: usize| ((i * 37 + s * 11) % 17) as f64 * 0.37 - 2.1;
        for u in [W | E | S | N, W | E | N, E | S | N, W | E] {
            for n in 3..=40 {
                let f = vec![u; n];
                let (b, xs, x, xn): (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>) = (
                    (0..n).map(|i| val(0, i)).collect(),
                    (0..n).map(|i| val(1, i)).collect(),
                    (0..n).map(|i| val(2, i)).collect(),
                    (0..n).map(|i| val(3, i)).collect(),
                );
                let (d, cw, ce, cs, cn) = k.coefs(u);
                for start in 0..2 {
                    let mut out = vec![f64::NAN; n];
                    relax_row(&k, u, &f, &inv, &b, &xs, &x, &xn, &mut out, start);
                    for i in 1..n - 1 {
                        let v =
                            (b[i] + (cw * x[i - 1] + ce * x[i + 1] + cs * xs[i] + cn * xn[i])) * inv[usize::from(u)];
                        let want = if i % 2 == start { v } else { x[i] };
                        assert_eq!(out[i].to_bits(), want.to_bits(), "relax {u} n {n} start {start} i {i}");
                    }
                }
                let mut r = vec![f64::NAN; n];
                residual_row(&k, u, &f, &xs, &x, &xn, &b, &mut r);
                for i in 1..n - 1 {
                    let want = b[i] - (d * x[i] - (cw * x[i - 1] + ce * x[i + 1] + cs * xs[i] + cn * xn[i]));
                    assert_eq!(r[i].to_bits(), want.to_bits(), "residual {u} n {n} i {i}");
                }
            }
        }
    }
}
