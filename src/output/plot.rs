//! Study panels drawn directly into RGB images with the embedded font: equally scaled map tiles
//! with labels (`compare/panel.png`) on the project's sequential ramp, and the PNG writer shared
//! by frames, maps, panels and charts. Line charts live in [`super::chart`].

use std::path::Path;

use image::{Rgb, RgbImage};
use ndarray::ArrayView2;

use super::colour::{normalise, ColourScale, Ramp, RampLut, LAND_RGB};
use super::draw::{outline, INK};
use super::text::{draw_text, text_width};
use super::{write_atomic, OutputError};

const BACKGROUND: [u8; 3] = [255, 255, 255];
/// Largest long side of one tile, pixels.
const TILE_LONG: usize = 260;
const TILE_GAP: u32 = 16;
const LABEL_PX: f32 = 14.0;
const LABEL_LINE: u32 = 18;
const TITLE_BAND: u32 = 40;
const BAR_H: u32 = 16;

/// One map tile: values (shape (ny, nx), (y, x) order, row 0 south) and the label lines
/// under it.
#[derive(Debug, Clone)]
pub struct Tile<'a> {
    /// The field.
    pub values: ArrayView2<'a, f64>,
    /// Text lines drawn under the tile.
    pub lines: Vec<String>,
}

/// Pixel geometry of a panel.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PanelLayout {
    /// Image width.
    pub width: u32,
    /// Image height.
    pub height: u32,
    /// Tiles per row.
    pub cols: u32,
    /// Rows of tiles.
    pub rows: u32,
    /// Tile map width.
    pub tile_w: u32,
    /// Tile map height.
    pub tile_h: u32,
    /// Top-left corner of each tile's map, in tile order.
    pub origins: Vec<(u32, u32)>,
}

/// Layout of a panel of `n` tiles of an `nx` by `ny` grid: up to four tiles per row.
pub fn panel_layout(n: usize, nx: usize, ny: usize) -> PanelLayout {
    let (nx, ny, n) = (nx.max(1), ny.max(1), n.max(1));
    let long = nx.max(ny);
    let (tile_w, tile_h) = if long <= TILE_LONG {
        let k = (TILE_LONG / long).max(1);
        ((nx * k) as u32, (ny * k) as u32)
    } else {
        let s = TILE_LONG as f64 / long as f64;
        (
            ((nx as f64 * s).round() as u32).max(1),
            ((ny as f64 * s).round() as u32).max(1),
        )
    };
    let cols = n.min(4) as u32;
    let rows = n.div_ceil(4) as u32;
    let cell_w = tile_w.max(180) + TILE_GAP;
    let cell_h = tile_h + 2 * LABEL_LINE + 8 + TILE_GAP;
    let width = cols * cell_w + TILE_GAP;
    let height = TITLE_BAND + rows * cell_h + BAR_H + 48;
    let origins = (0..n as u32)
        .map(|k| {
            let (c, r) = (k % cols, k / cols);
            (TILE_GAP + c * cell_w, TITLE_BAND + r * cell_h)
        })
        .collect();
    PanelLayout {
        width: width + width % 2,
        height: height + height % 2,
        cols,
        rows,
        tile_w,
        tile_h,
        origins,
    }
}

/// Short number for labels.
fn fmt_num(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if (1e-3..1e4).contains(&v.abs()) {
        let s = format!("{v:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.2e}")
    }
}

/// Renders the panel: every tile on the colour range `range` mapped by `scale` (a log scale
/// needs a positive `lo`; values at or below it take the bottom colour), labels under each
/// tile, the title on top and one colour bar with `caption` at the bottom. `wet` (shape
/// (ny, nx)) shades land; a tile of another shape is left blank.
#[allow(clippy::too_many_arguments)]
pub fn render_panel(
    nx: usize,
    ny: usize,
    wet: Option<ArrayView2<bool>>,
    tiles: &[Tile],
    range: (f64, f64),
    scale: ColourScale,
    title: &str,
    caption: &str,
) -> RgbImage {
    let lay = panel_layout(tiles.len(), nx, ny);
    let mut img = RgbImage::from_pixel(lay.width, lay.height, Rgb(BACKGROUND));
    let lut = RampLut::new(Ramp::Sequential);
    let (lo, hi) = range;
    draw_text(&mut img, title, TILE_GAP as f32, 10.0, 18.0, INK);
    for (tile, &(ox, oy)) in tiles.iter().zip(&lay.origins) {
        if tile.values.dim() != (ny, nx) || wet.is_some_and(|w| w.dim() != (ny, nx)) {
            continue;
        }
        for py in 0..lay.tile_h {
            let j = ny - 1 - ((py as usize * ny) / lay.tile_h as usize).min(ny - 1);
            for px in 0..lay.tile_w {
                let i = ((px as usize * nx) / lay.tile_w as usize).min(nx - 1);
                let rgb = match wet {
                    Some(w) if !w[[j, i]] => LAND_RGB,
                    _ => lut.get(normalise(tile.values[[j, i]], lo, hi, scale)),
                };
                img.put_pixel(ox + px, oy + py, Rgb(rgb));
            }
        }
        outline(
            &mut img,
            i64::from(ox) - 1,
            i64::from(oy) - 1,
            i64::from(lay.tile_w) + 2,
            i64::from(lay.tile_h) + 2,
            INK,
        );
        for (n, line) in tile.lines.iter().enumerate() {
            let y = oy + lay.tile_h + 4 + n as u32 * LABEL_LINE;
            draw_text(&mut img, line, ox as f32, y as f32, LABEL_PX, INK);
        }
    }
    // Colour bar.
    let bar_y = lay.height - BAR_H - 40;
    let bar_x = TILE_GAP;
    let bar_w = (lay.width - 2 * TILE_GAP).max(2);
    for x in 0..bar_w {
        let rgb = lut.get(f64::from(x) / f64::from(bar_w - 1));
        for y in 0..BAR_H {
            img.put_pixel(bar_x + x, bar_y + y, Rgb(rgb));
        }
    }
    outline(
        &mut img,
        i64::from(bar_x) - 1,
        i64::from(bar_y) - 1,
        i64::from(bar_w) + 2,
        i64::from(BAR_H) + 2,
        INK,
    );
    let lo_s = fmt_num(lo);
    let hi_s = fmt_num(hi);
    let ty = (bar_y + BAR_H + 4) as f32;
    draw_text(&mut img, &lo_s, bar_x as f32, ty, LABEL_PX, INK);
    let w = text_width(&hi_s, LABEL_PX);
    draw_text(&mut img, &hi_s, (bar_x + bar_w) as f32 - w, ty, LABEL_PX, INK);
    let cw = text_width(caption, LABEL_PX);
    draw_text(&mut img, caption, (lay.width as f32 - cw) / 2.0, ty, LABEL_PX, INK);
    img
}

/// Writes `img` as a PNG file at `path`, atomically.
pub fn write_png(path: &Path, img: &RgbImage) -> Result<(), OutputError> {
    use image::codecs::png::{CompressionType, FilterType, PngEncoder};
    use image::ImageEncoder;
    let mut bytes = Vec::new();
    PngEncoder::new_with_quality(&mut bytes, CompressionType::Fast, FilterType::Adaptive)
        .write_image(img.as_raw(), img.width(), img.height(), image::ExtendedColorType::Rgb8)
        .map_err(|e| OutputError::invalid(path, format!("PNG encoding failed: {e}")))?;
    write_atomic(path, &bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn panel_has_one_tile_per_field_and_draws_them() {
        let lay = panel_layout(5, 40, 20);
        assert_eq!(lay.origins.len(), 5);
        assert_eq!((lay.cols, lay.rows), (4, 2));
        let vals = ndarray::Array2::from_shape_fn((20, 40), |(j, i)| (j * 40 + i) as f64);
        let tiles: Vec<Tile> = (0..5)
            .map(|k| Tile {
                values: vals.view(),
                lines: vec![format!("tile {k}")],
            })
            .collect();
        let img = render_panel(40, 20, None, &tiles, (0.0, 799.0), ColourScale::Linear, "t", "c");
        assert_eq!((img.width(), img.height()), (lay.width, lay.height));
        for &(x, y) in &lay.origins {
            // Bottom-left of a tile is the south-west cell (value 0, darkest).
            let p = img.get_pixel(x, y + lay.tile_h - 1).0;
            assert_ne!(p, BACKGROUND);
        }
    }

    #[test]
    fn log_panel_shows_a_faint_plume_that_linear_hides() {
        // A plume at 1e-3 of the peak: on a linear scale from 0 it is 0.1 % of the ramp (the
        // bottom colour, as the background water); on the frames' log scale (four decades
        // under the peak, DESIGN §5 frames) it sits a quarter of the way up.
        let (nx, ny) = (20, 10);
        let mut vals = ndarray::Array2::zeros((ny, nx));
        vals[[5, 15]] = 1.0; // the peak
        vals[[5, 4]] = 1e-3; // the faint plume, cell (4, 5)
        let tiles = [Tile {
            values: vals.view(),
            lines: vec![],
        }];
        let lay = panel_layout(1, nx, ny);
        let (ox, oy) = lay.origins[0];
        let k = lay.tile_w / nx as u32;
        // Centre of cell (4, 5): column 4, row ny - 1 - 5 from the top.
        let (px, py) = (ox + 4 * k + k / 2, oy + (ny as u32 - 1 - 5) * k + k / 2);
        let (wx, wy) = (ox + k / 2, oy + k / 2); // cell (0, ny - 1): background water
        let lin = render_panel(nx, ny, None, &tiles, (0.0, 1.0), ColourScale::Linear, "t", "c");
        let (a, b) = (lin.get_pixel(px, py).0, lin.get_pixel(wx, wy).0);
        assert!(a.iter().zip(b).all(|(x, y)| x.abs_diff(y) <= 2), "{a:?} {b:?}");
        let log = render_panel(nx, ny, None, &tiles, (1e-4, 1.0), ColourScale::Log, "t", "c");
        assert_ne!(log.get_pixel(px, py), log.get_pixel(wx, wy));
        assert_eq!(log.get_pixel(px, py).0, RampLut::new(Ramp::Sequential).get(0.25));
    }
}
