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
//!
//! This file holds the parameters, the per-level data and the [`Multigrid`] hierarchy with its
//! V-cycle; `hierarchy.rs` sets the levels up (Galerkin coarse operators, coarsest LU),
//! `smooth.rs` has the stored-coefficient passes (smoothing, residual restriction,
//! prolongation) and `fused.rs` the matrix-free fused sweeps.

mod fused;
mod hierarchy;
mod smooth;
#[cfg(test)]
mod tests;

use self::fused::MAX_FUSED_SWEEPS;
use self::hierarchy::{galerkin, Dense};
use super::compact::{Compact, Consts};
use super::stencil::Stencil5;
use super::{check_len, SolveError};

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
                    Compact::detect(&self.coarse[l - 1].coefficients(), m, Some(g), 1e-10)
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
