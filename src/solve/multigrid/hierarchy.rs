//! Building the multigrid hierarchy: the per-level set-up (reciprocal diagonal, colouring,
//! fused-sweep scratch), the Galerkin coarse operators and the coarsest level's dense LU.

use super::fused::ring_rows;
use super::Level;
use crate::solve::blocks::{rows_per_block, MAX_BLOCKS};
use crate::solve::stencil::Stencil5;
use rayon::prelude::*;

impl Level {
    pub(super) fn new(nx: usize, ny: usize, px: bool, py: bool) -> Self {
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
    pub(super) fn setup_fused(&mut self, on: bool, sweeps: usize, ncy: usize) {
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

    pub(super) fn refresh_inv(&mut self, a: &Stencil5) {
        for (v, &d) in self.inv.iter_mut().zip(&a.diag) {
            *v = 1.0 / d;
        }
    }

    /// Rows handled by the parallel colour passes.
    pub(super) fn colour_rows(&self) -> usize {
        if self.green_row {
            self.ny - 1
        } else {
            self.ny
        }
    }

    /// Columns handled by the colour passes.
    pub(super) fn colour_cols(&self) -> usize {
        if self.green_col {
            self.nx - 1
        } else {
            self.nx
        }
    }
}

/// Dense LU factorisation with partial pivoting of the coarsest operator.
#[derive(Debug, Clone)]
pub(super) struct Dense {
    pub(super) n: usize,
    lu: Vec<f64>,
    perm: Vec<usize>,
    pub(super) ok: bool,
}

impl Dense {
    pub(super) fn new(n: usize) -> Self {
        Self {
            n,
            lu: vec![0.0; n * n],
            perm: vec![0; n],
            ok: false,
        }
    }

    /// Factorises `a` (Golub & Van Loan, "Matrix Computations", Alg. 3.4.1, partial pivoting);
    /// marks the factorisation unusable if a pivot is negligible.
    pub(super) fn factor(&mut self, a: &Stencil5) {
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

    pub(super) fn solve(&self, b: &[f64], x: &mut [f64]) {
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

/// The Galerkin coarse operator `P^T A P` for piecewise-constant P over water cells, with
/// aggregation shifts `sx`, `sy`, and coarse couplings scaled by `scale` (row sums kept). Coarse
/// rows are formed in parallel, each from its own fine rows in order (no allocation).
pub(super) fn galerkin(f: &Stencil5, c: &mut Stencil5, sx: u32, sy: u32, scale: f64) {
    let ncx = c.nx;
    let rows = c
        .diag
        .par_chunks_mut(ncx)
        .zip(c.aw.par_chunks_mut(ncx))
        .zip(c.ae.par_chunks_mut(ncx))
        .zip(c.as_.par_chunks_mut(ncx))
        .zip(c.an.par_chunks_mut(ncx))
        .zip(c.land.par_chunks_mut(ncx));
    rows.with_min_len(4)
        .enumerate()
        .for_each(|(jc, (((((d, aw), ae), as_), an), land))| {
            let mut row = CoarseRow {
                d,
                aw,
                ae,
                as_,
                an,
                land,
            };
            galerkin_row(f, &mut row, jc, sx, sy, scale);
        });
}

/// One coarse row's coefficients.
struct CoarseRow<'a> {
    d: &'a mut [f64],
    aw: &'a mut [f64],
    ae: &'a mut [f64],
    as_: &'a mut [f64],
    an: &'a mut [f64],
    land: &'a mut [bool],
}

/// Coarse row `jc` of [`galerkin`], summed from its fine rows south to north.
fn galerkin_row(f: &Stencil5, c: &mut CoarseRow, jc: usize, sx: u32, sy: u32, scale: f64) {
    let (nx, ny) = (f.nx, f.ny);
    c.d.fill(0.0);
    c.aw.fill(0.0);
    c.ae.fill(0.0);
    c.as_.fill(0.0);
    c.an.fill(0.0);
    c.land.fill(true);
    for j in (jc << sy)..((jc + 1) << sy).min(ny) {
        let (js, jn) = f.nb_rows(j);
        for i in 0..nx {
            let k = j * nx + i;
            if f.land[k] {
                continue;
            }
            let ic = i >> sx;
            c.land[ic] = false;
            c.d[ic] += f.diag[k];
            let iw = if i > 0 { i - 1 } else { nx - 1 };
            let ie = if i + 1 < nx { i + 1 } else { 0 };
            // West and east: the neighbour's aggregate is either this one or the one beside.
            couple(f.aw[k], iw >> sx == ic, &mut c.d[ic], &mut c.aw[ic]);
            couple(f.ae[k], ie >> sx == ic, &mut c.d[ic], &mut c.ae[ic]);
            couple(f.as_[k], js >> sy == jc, &mut c.d[ic], &mut c.as_[ic]);
            couple(f.an[k], jn >> sy == jc, &mut c.d[ic], &mut c.an[ic]);
        }
    }
    for ic in 0..c.d.len() {
        if c.land[ic] {
            c.d[ic] = 1.0;
        } else if scale != 1.0 {
            let off = c.aw[ic] + c.ae[ic] + c.as_[ic] + c.an[ic];
            c.d[ic] -= (1.0 - scale) * off;
            c.aw[ic] *= scale;
            c.ae[ic] *= scale;
            c.as_[ic] *= scale;
            c.an[ic] *= scale;
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
