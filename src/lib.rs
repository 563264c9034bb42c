//! tinct: 2D transient scalar transport on structured grids.
//!
//! The library advances a passive scalar c (dye, heat, salinity, effluent) under
//! `d(h c)/dt + div(h u c) = div(h K grad c) - lambda h c + S` on a uniform rectangular grid
//! with a prescribed, staggered (C-grid) velocity field, with conservative finite volumes,
//! flux-limited convection and an exact mass budget.
//!
//! Conventions: SI units (m, s; concentration in the tracer's unit); cell (i, j) is centred at
//! (x0 + (i + 1/2) dx, y0 + (j + 1/2) dy), j = 0 the south row; `u` lives on west faces and `v`
//! on south faces of each cell; fluxes are positive along +x and +y.
//!
//! Fields cross the library boundary as [`ndarray`] arrays of shape (ny, nx) in (y, x) order,
//! row 0 south, as the variable `c(time, y, x)` in `fields.nc`: `field[[j, i]]` is cell (i, j).
//! Inside, fields are padded row-major `Vec<f64>` with a 2-cell halo ([`grid::Grid::idx`]) that
//! the kernels walk as contiguous slices; [`step::Simulation::field_view`] lends the interior
//! without copying (a strided view, [`grid::Grid::interior_view`]).
//!
//! ```
//! use tinct::{grid::Grid, model::{Model, ModelSpec}, flow::FlowSpec, ops::boundary::Boundaries,
//!             step::{Scheme, Simulation}};
//! let grid = Grid::new(64, 32, 1.0, 1.0, 0.0, 0.0).unwrap();
//! let spec = ModelSpec { grid, mask: None, depth: 2.0.into(), kx: 0.05, ky: 0.05, decay_rate: 0.0,
//!     flow: FlowSpec::uniform(0.1, 0.0), boundaries: Boundaries::periodic(), sources: vec![] };
//! let model = Model::new(spec).unwrap();
//! // An ndarray::Array2 of shape (ny, nx) = (32, 64): a puff on cell (20, 16).
//! let c0 = model.field_from(|x, y| (-((x - 20.5).powi(2) + (y - 16.5).powi(2)) / 18.0).exp());
//! assert_eq!(c0.dim(), (32, 64));
//! let mut sim = Simulation::new(model, Scheme::default(), c0).unwrap();
//! let m0 = sim.mass();
//! sim.advance_to(100.0, |_| std::ops::ControlFlow::Continue(())).unwrap();
//! assert!((sim.mass() - m0).abs() < 1e-12 * m0);
//! // A zero-copy view: the peak has drifted east by u t = 10 m, ten cells.
//! let c = sim.field_view();
//! let ((j, i), _) = c.indexed_iter().max_by(|a, b| a.1.total_cmp(b.1)).unwrap();
//! assert_eq!((i, j), (30, 16));
//! let row = c.row(j); // the values along x through the peak
//! assert_eq!(row.len(), 64);
//! ```

// `!(x <= limit)` is deliberate: it is true for NaN, which a `>` test would miss; and
// `min(..).max(0.0)` chains are kept over `clamp`, which propagates NaN instead of mapping it.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::manual_clamp)]
#![warn(missing_docs)]

pub mod adjoint;
pub mod bench;
pub mod budget;
pub mod depth;
pub mod diagnostics;
pub mod error;
pub mod field;
pub mod flow;
pub mod grid;
pub mod initial;
pub mod model;
pub mod ops;
pub mod output;
pub mod par;
pub mod particles;
pub mod report;
pub mod run;
pub mod scenario;
pub mod solve;
pub mod step;
pub mod studies;
pub mod sweep;

pub use error::{ModelError, RunError};
