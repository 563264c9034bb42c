//! Output writers for tinct. This module depends on no other tinct module.
//!
//! - [`atomic`]: atomic file replacement ([`write_atomic`], [`write_atomic_with`],
//!   [`AtomicFile`]), used by every writer below.
//! - [`colour`]: the project's own colour ramps ([`Ramp`], [`ramp_rgb`]),
//!   [`ColourScale`] and [`normalise`], the land shade [`LAND_RGB`].
//! - [`decor`]: axes in metres, scale bar, north arrow and source/receptor markers
//!   ([`Extent`], [`Marker`], [`MarkerKind`]), shared by frames and maps.
//! - [`frame`]: PNG concentration frames ([`FrameSpec`], [`render_frame`],
//!   [`write_frame_png`], [`frame_layout`], [`format_time`]).
//! - [`maps`]: PNG maps of per-cell diagnostics (categorical with a legend, continuous with a
//!   colour bar) for `tinct check`.
//! - [`netcdf`]: CF-1.8 NetCDF-3 field files ([`FieldsWriter`], [`FieldMeta`],
//!   [`FILL_VALUE`]), written record by record.
//! - [`ncmaps`]: CF-1.8 NetCDF-3 files of several 2D `(y, x)` maps ([`ncmaps::write_maps`]).
//! - [`chart`]: line charts drawn with plotters ([`chart::Chart`]: linear or log axes,
//!   reference lines, marked points, a legend sized from its text).
//! - [`plot`]: study panels of equally scaled map tiles and the PNG writer [`plot::write_png`].
//! - [`error`]: [`OutputError`], naming the file in every variant.
//! - `text` (private): antialiased text drawing with the embedded DejaVu Sans.

pub mod animation;
pub mod atomic;
pub mod chart;
pub mod colour;
pub mod decor;
mod draw;
pub mod error;
pub mod frame;
pub mod maps;
pub mod ncmaps;
pub mod netcdf;
pub mod plot;
mod text;

pub use atomic::{write_atomic, write_atomic_with, AtomicFile};
pub use colour::{normalise, ramp_rgb, ColourScale, Ramp, LAND_RGB, NAN_RGB};
pub use decor::{Extent, Marker, MarkerKind};
pub use error::OutputError;
pub use frame::{format_time, frame_layout, render_frame, write_frame_png, FrameLayout, FrameSpec};
pub use netcdf::{FieldMeta, FieldsWriter, FILL_VALUE};
