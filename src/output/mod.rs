//! Output writers for tinct. This module depends on no other tinct module.
//!
//! - [`atomic`]: atomic file replacement ([`write_atomic`], [`write_atomic_with`],
//!   [`AtomicFile`]), used by every writer below.
//! - [`error`]: [`OutputError`], naming the file in every variant.

pub mod atomic;
pub mod error;

pub use atomic::{write_atomic, write_atomic_with, AtomicFile};
pub use error::OutputError;
