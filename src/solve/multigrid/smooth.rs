//! The stored-coefficient passes of a level: red-black Gauss–Seidel smoothing (parallel over
//! row blocks, with the sequential row or column of odd periodic counts), the restriction of
//! the residual and the prolongation of the coarse correction.

use super::Level;
use crate::solve::blocks::for_rows;
use crate::solve::stencil::{Row, Stencil5};
use rayon::prelude::*;

impl Level {
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

    pub(super) fn pre_smooth(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], sweeps: usize) {
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

    pub(super) fn post_smooth(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], sweeps: usize) {
        for _ in 0..sweeps {
            self.green_pass(a, b, x, false);
            self.colour_pass(a, b, x, 1);
            self.colour_pass(a, b, x, 0);
        }
    }

    /// `bc = R (b - A x)`: the fine residual summed over each aggregate, parallel over
    /// coarse rows. Land residuals are zero after any smoothing (identity rows), so no mask is
    /// needed.
    pub(super) fn restrict_residual(
        &self,
        a: &Stencil5,
        b: &[f64],
        x: &[f64],
        bc: &mut [f64],
        ncx: usize,
        crpb: usize,
    ) {
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
    pub(super) fn prolongate(&self, xc: &[f64], x: &mut [f64], ncx: usize) {
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
