//! Diagnostics of fields and runs: error norms against a reference, plume moments and the
//! effective diffusivity they imply, the regime of every cell (Peclet and Courant numbers,
//! stable steps, upwind numerical diffusivity) and the advice drawn from it.

pub mod advice;
pub mod moments;
pub mod norms;
pub mod regime;
