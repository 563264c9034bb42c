//! tinct: 2D transient scalar transport on structured grids.

pub mod output;
