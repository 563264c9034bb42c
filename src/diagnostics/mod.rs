//! Diagnostics of fields and runs: error norms against a reference, plume moments and the
//! effective diffusivity they imply, the regime of every cell (Peclet and Courant numbers,
//! stable steps, upwind numerical diffusivity), the advice drawn from it, and the
//! grid-convergence index of Celik et al. (2008).

pub mod advice;
pub mod flushing;
pub mod gci;
pub mod moments;
pub mod norms;
pub mod regime;
