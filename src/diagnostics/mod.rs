//! Diagnostics of fields and runs: error norms against a reference, plume moments and the
//! effective diffusivity they imply.

pub mod gci;
pub mod moments;
pub mod norms;
