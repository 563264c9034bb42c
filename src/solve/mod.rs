//! Linear solvers for the implicit time steppers: 5-point operators on the structured grid
//! ([`Stencil5`]), geometric multigrid on the same grid with land masks ([`Multigrid`]), and
//! Krylov drivers preconditioned by one multigrid V-cycle ([`Solver`]: conjugate gradients for
//! symmetric operators, BiCGStab for non-symmetric ones). Uniform diffusion on a rectangle of
//! water with closed or fixed sides in pairs is solved exactly by fast cosine/sine transforms
//! instead ([`Method::Transform`], which [`Method::Auto`] picks when the operator qualifies).
//!
//! Vectors handed to the solvers are the interior cells only, `nx * ny` values, row-major,
//! row 0 south, i fastest (not the padded layout of [`crate::grid::Grid::idx`]). Land cells
//! are identity rows, so the solution there is the right-hand side. All work arrays are
//! allocated when a solver is built; a solve call allocates nothing (but for the multigrid
//! hierarchy, built the first time a transform solve hands over to CG). Work is split over
//! blocks of contiguous rows with rayon; every reduction sums per-block partials in a fixed
//! order, so results do not depend on thread scheduling.
//!
//! ```
//! use tinct::grid::{Grid, Mask};
//! use tinct::solve::{Sides, Solver, SolverParams, Stencil5};
//! let grid = Grid::new(32, 32, 1.0, 1.0, 0.0, 0.0).unwrap();
//! let mask = Mask::all_water(&grid);
//! // Backward Euler for diffusion with K dt = 10 m2 (diffusion number 10), walls all round.
//! let a = Stencil5::diffusion(&grid, &mask, Sides::closed(), 10.0, 10.0).unwrap();
//! let mut solver = Solver::new(&a, SolverParams::default()).unwrap();
//! let b: Vec<f64> = (0..grid.cells()).map(|k| (k % 7) as f64).collect();
//! let mut x = b.clone(); // previous solution as the initial guess
//! let stats = solver.solve(&a, &b, &mut x).unwrap();
//! assert!(stats.relative_residual <= 1e-10);
//! ```

pub mod bench;
pub(crate) mod blocks;
mod compact;
pub mod krylov;
pub mod multigrid;
pub mod stencil;
mod stream;
mod transform;

pub use krylov::{Method, SolveStats, Solver, SolverParams};
pub use multigrid::{Multigrid, MultigridParams};
pub use stencil::{ExtraCoefs, SideCoupling, Sides, Stencil5};

/// Why a solve or a solver set-up failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SolveError {
    /// The iteration cap was reached before the requested tolerance.
    #[error(
        "the linear solver did not converge: after {iterations} iterations the relative residual \
         ||b - A x||/||b|| is {relative_residual:.3e}, above the tolerance {rtol:.1e}; try a larger \
         max_iter or a looser rtol, a smaller time step (a smaller diffusion or Courant number), \
         or check that the matrix is non-singular and, for conjugate gradients, symmetric"
    )]
    NotConverged {
        /// Iterations done.
        iterations: usize,
        /// True relative residual ||b - A x||/||b|| reached (recomputed, not the recurrence).
        relative_residual: f64,
        /// The tolerance asked for.
        rtol: f64,
    },
    /// A vector or coefficient array has the wrong length.
    #[error("{what} has {got} values, expected {expected}")]
    SizeMismatch {
        /// The array.
        what: &'static str,
        /// Length required.
        expected: usize,
        /// Length given.
        got: usize,
    },
    /// The operator breaks one of the rules of [`Stencil5`].
    #[error("invalid operator: {0}")]
    InvalidOperator(String),
    /// A parameter is out of range.
    #[error("solver parameter {what} = {value} is not allowed: must be {allowed}")]
    InvalidParameter {
        /// The parameter.
        what: &'static str,
        /// Its value as text.
        value: String,
        /// What is allowed.
        allowed: &'static str,
    },
    /// The right-hand side or the initial guess holds a NaN or an infinity.
    #[error("{0} holds a non-finite value")]
    NonFinite(&'static str),
}

pub(crate) fn check_len(what: &'static str, v: &[f64], expected: usize) -> Result<(), SolveError> {
    if v.len() != expected {
        return Err(SolveError::SizeMismatch {
            what,
            expected,
            got: v.len(),
        });
    }
    Ok(())
}
