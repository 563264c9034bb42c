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
//! a per-thread cached copy of a block of rows, large fields streamed back ([`on_rows`](self::solve::on_rows)).
//! Fields under 8 rows high are left to the multigrid path.
//!
//! Which operators qualify is decided from the matrix-free form's per-cell flags, which
//! reproduce the stored operator exactly, so the transform solves the same matrix.
//!
//! This file holds the [`Transform`] solver's data, the qualifying test and the set-up;
//! `axis.rs` has the transform along x ([`Axis`]), `tridiag.rs` the elimination along y
//! ([`Tridiag`]), `xlines.rs` the tridiagonal solves along x of the eliminated rows
//! ([`XLines`]) and `solve.rs` the solve itself ([`Transform::solve`]).

mod axis;
mod solve;
#[cfg(test)]
mod tests;
mod tridiag;
mod xlines;

use self::axis::{Axis, Ends};
use self::tridiag::Tridiag;
use self::xlines::XLines;
use super::compact::{Compact, DX, DY, E, LAND, N, S, W};
use super::Stencil5;
use rustfft::num_complex::Complex;
use rustfft::FftPlanner;

/// Most lines per parallel block.
const BLOCK_LINES: usize = 64;

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
    /// [`STREAM_BYTES`]; see [`on_rows`](self::solve::on_rows)).
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
/// [`on_rows`](self::solve::on_rows)): with the right-hand side as large, the two no longer fit a 32 MiB shared
/// cache, so each row written by an ordinary store would first be read from memory. Smaller
/// fields keep ordinary stores, which leave the solution cached for whatever reads it next
/// (streaming it too measured no faster at 1024 by 1024 cells).
const STREAM_BYTES: usize = 16 << 20;

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
