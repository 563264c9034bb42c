//! PNG concentration frames: a north-up map of the field, a colour bar with
//! tick labels, the tracer name with units, the simulated time and an
//! optional title; with a geographic extent, axes in metres, a scale bar, a north arrow
//! and source and receptor markers (drawn by [`decor`](super::decor)).
//!
//! Layout (see [`frame_layout`]): a title band on top (always reserved, so
//! every frame of a run has the same size), the map below it with room on its left for the
//! y-axis labels, a band for the x-axis labels, a band for the scale bar and north arrow
//! (both bands reserved whether or not an extent is given), then a
//! strip with the colour bar, its tick labels and one caption line holding
//! `tracer [units]` on the left and `t = ...` on the right. Image width and
//! height are even, so frame sequences can be assembled into animations by common encoders.
//!
//! This file holds the frame description, the layout constants and the pixel layout;
//! `render.rs` draws a frame and writes it as PNG, `labels.rs` formats the time and the
//! colour-bar ticks.

mod labels;
mod render;
#[cfg(test)]
mod tests;

pub use self::labels::format_time;
pub use self::render::{render_frame, write_frame_png};

use super::colour::ColourScale;
use super::decor::{Extent, Marker};

/// Background colour of the frame outside the map.
const BACKGROUND: [u8; 3] = [255, 255, 255];
/// Right margin in pixels.
const MARGIN: u32 = 24;
/// Room left of the map for the y-axis tick labels.
pub(crate) const AXIS_LEFT: u32 = 76;
/// Band under the map for the x-axis ticks and labels.
pub(crate) const AXIS_BAND: u32 = 22;
/// Band under the axis labels for the scale bar and the north arrow.
pub(crate) const DECOR_BAND: u32 = 30;
/// Height of the title band above the map.
const TITLE_BAND: u32 = 44;
/// Minimum image width, so the colour bar and labels always fit.
const MIN_WIDTH: u32 = 640;
/// Cells per side above which the map is sampled instead of scaled up.
const SAMPLE_ABOVE: usize = 1000;
/// Target long side of the map for small grids.
const TARGET_LONG: usize = 900;
/// Horizontal inset of the colour bar from the image edges.
const BAR_INSET: u32 = 40;
const BAR_GAP: u32 = 18;
const BAR_H: u32 = 18;
const TICK_LEN: u32 = 5;
const TICK_PX: f32 = 14.0;
const TICK_LINE: u32 = 18;
const CAPTION_GAP: u32 = 10;
const CAPTION_PX: f32 = 16.0;
const CAPTION_LINE: u32 = 22;
const BOTTOM: u32 = 12;
const TITLE_PX: f32 = 20.0;

/// Everything needed to draw one frame.
#[derive(Debug, Clone, Copy)]
pub struct FrameSpec<'a> {
    /// Cells in x (west to east).
    pub nx: usize,
    /// Cells in y (south to north).
    pub ny: usize,
    /// `nx * ny` values, row-major, row 0 = south row, i fastest.
    pub values: &'a [f64],
    /// `nx * ny` wet flags (false = land, drawn in [`LAND_RGB`](super::colour::LAND_RGB)); `None` = all water.
    pub wet: Option<&'a [bool]>,
    /// Tracer name shown in the caption, e.g. `dye`.
    pub tracer: &'a str,
    /// Units shown in brackets after the tracer name, e.g. `kg/m3`.
    pub units: &'a str,
    /// Simulated time in seconds, written on the image.
    pub time_s: f64,
    /// Linear or logarithmic colour scale.
    pub scale: ColourScale,
    /// Value range of the colour bar; `None` = automatic from the wet cells
    /// (linear: min..max; log: max * 1e-4 .. max).
    pub range: Option<(f64, f64)>,
    /// Title drawn at the top (e.g. the scenario name).
    pub title: Option<&'a str>,
    /// Outer cell edges in metres; `Some` draws axes, scale bar and north arrow.
    pub extent: Option<Extent>,
    /// Sources and receptors drawn on the map (only with an extent; points outside it are
    /// skipped).
    pub markers: &'a [Marker],
}

/// Pixel geometry of a frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FrameLayout {
    /// Image width in pixels.
    pub width: u32,
    /// Image height in pixels.
    pub height: u32,
    /// Left edge of the map area.
    pub map_x: u32,
    /// Top edge of the map area.
    pub map_y: u32,
    /// Map area width.
    pub map_w: u32,
    /// Map area height.
    pub map_h: u32,
    /// Top of the strip under the map's axis and scale-bar bands (colour bar, legend).
    pub strip_y: u32,
}

/// Geometry of the strip below the map (private; tests use it).
#[derive(Debug, Clone, Copy)]
struct Strip {
    bar_x: u32,
    bar_y: u32,
    bar_w: u32,
    tick_label_y: u32,
    caption_y: u32,
}

impl FrameLayout {
    fn strip(&self) -> Strip {
        let bar_y = self.strip_y + BAR_GAP;
        let tick_label_y = bar_y + BAR_H + TICK_LEN + 1;
        Strip {
            bar_x: BAR_INSET,
            bar_y,
            bar_w: self.width.saturating_sub(2 * BAR_INSET).max(2),
            tick_label_y,
            caption_y: tick_label_y + TICK_LINE + CAPTION_GAP,
        }
    }
}

/// Size of the map in pixels for an `nx` x `ny` grid.
///
/// Up to [`SAMPLE_ABOVE`] cells on the long side each cell is an integer
/// `k x k` pixel block with the long side near [`TARGET_LONG`] pixels (so
/// the aspect is exact). Larger grids are sampled to a long side of
/// [`SAMPLE_ABOVE`] pixels with the short side rounded, keeping the aspect
/// within one pixel.
fn map_size(nx: usize, ny: usize) -> (u32, u32) {
    let (nx, ny) = (nx.max(1), ny.max(1));
    let long = nx.max(ny);
    if long <= SAMPLE_ABOVE {
        let k = (TARGET_LONG / long).max(1);
        ((nx * k) as u32, (ny * k) as u32)
    } else {
        let s = SAMPLE_ABOVE as f64 / long as f64;
        let w = ((nx as f64 * s).round() as u32).clamp(1, SAMPLE_ABOVE as u32);
        let h = ((ny as f64 * s).round() as u32).clamp(1, SAMPLE_ABOVE as u32);
        (w, h)
    }
}

/// Pixel layout of a frame for an `nx` x `ny` grid (zero sizes are treated
/// as one). Independent of the title, so all frames of a run match.
pub fn frame_layout(nx: usize, ny: usize) -> FrameLayout {
    let (map_w, map_h) = map_size(nx, ny);
    let mut width = (map_w + AXIS_LEFT + MARGIN).max(MIN_WIDTH);
    width += width % 2;
    let map_x = AXIS_LEFT + (width - AXIS_LEFT - MARGIN - map_w) / 2;
    let map_y = TITLE_BAND;
    let strip_y = map_y + map_h + AXIS_BAND + DECOR_BAND;
    let mut height = strip_y + BAR_GAP + BAR_H + TICK_LEN + 1 + TICK_LINE + CAPTION_GAP + CAPTION_LINE + BOTTOM;
    height += height % 2;
    FrameLayout {
        width,
        height,
        map_x,
        map_y,
        map_w,
        map_h,
        strip_y,
    }
}
