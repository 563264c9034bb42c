//! The physical operators, one module each: limiters, convection, diffusion, sources and decay,
//! and side conditions.

pub mod boundary;
pub mod convection;
pub mod diffusion;
pub mod limiter;
pub mod sources;
