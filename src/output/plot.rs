//! Study plots drawn directly into RGB images with the embedded font: a panel of equally scaled
//! map tiles with labels (`compare/panel.png`) and line plots with linear or logarithmic axes
//! (`compare/profiles.png`, the convergence plot).
//!
//! Maps use the project's sequential ramp; lines use a small palette of distinct hues chosen for
//! this project (dark ink for the emphasised reference line).

use std::path::Path;

use image::{Rgb, RgbImage};

use super::colour::{normalise, ColourScale, Ramp, RampLut, LAND_RGB};
use super::draw::{outline, put, INK};
use super::text::{draw_text, text_width};
use super::{write_atomic, OutputError};

const BACKGROUND: [u8; 3] = [255, 255, 255];
const GRID_RGB: [u8; 3] = [225, 225, 228];
/// Line colours, in order of use (the project's own choice of distinct hues).
const PALETTE: [[u8; 3]; 8] = [
    [204, 85, 0],
    [0, 114, 178],
    [0, 150, 110],
    [170, 60, 150],
    [200, 160, 0],
    [90, 90, 200],
    [160, 40, 40],
    [60, 160, 200],
];

/// Largest long side of one tile, pixels.
const TILE_LONG: usize = 260;
const TILE_GAP: u32 = 16;
const LABEL_PX: f32 = 14.0;
const LABEL_LINE: u32 = 18;
const TITLE_BAND: u32 = 40;
const BAR_H: u32 = 16;

/// One map tile: values (`nx * ny`, row-major, row 0 south) and the label lines under it.
#[derive(Debug, Clone)]
pub struct Tile<'a> {
    /// The field.
    pub values: &'a [f64],
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
/// tile, the title on top and one colour bar with `caption` at the bottom. `wet` (`nx * ny`)
/// shades land.
#[allow(clippy::too_many_arguments)]
pub fn render_panel(
    nx: usize,
    ny: usize,
    wet: Option<&[bool]>,
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
        if tile.values.len() != nx * ny {
            continue;
        }
        for py in 0..lay.tile_h {
            let j = ny - 1 - ((py as usize * ny) / lay.tile_h as usize).min(ny - 1);
            for px in 0..lay.tile_w {
                let i = ((px as usize * nx) / lay.tile_w as usize).min(nx - 1);
                let k = j * nx + i;
                let rgb = match wet {
                    Some(w) if !w[k] => LAND_RGB,
                    _ => lut.get(normalise(tile.values[k], lo, hi, scale)),
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

/// One line of a line plot.
#[derive(Debug, Clone, Copy)]
pub struct Series<'a> {
    /// Legend name.
    pub name: &'a str,
    /// Abscissae.
    pub x: &'a [f64],
    /// Ordinates (non-finite values, and non-positive ones on a log axis, break the line).
    pub y: &'a [f64],
    /// Drawn thicker in dark ink (the reference).
    pub emphasis: bool,
}

/// A line plot.
#[derive(Debug, Clone, Copy)]
pub struct LinePlot<'a> {
    /// Title on top.
    pub title: &'a str,
    /// Label of the x axis.
    pub x_label: &'a str,
    /// Label of the y axis.
    pub y_label: &'a str,
    /// The lines.
    pub series: &'a [Series<'a>],
    /// Logarithmic x axis.
    pub log_x: bool,
    /// Logarithmic y axis.
    pub log_y: bool,
}

const PLOT_W: u32 = 900;
const PLOT_H: u32 = 560;
const LEFT: u32 = 90;
const RIGHT: u32 = 220;
const TOP: u32 = 60;
const BOTTOM: u32 = 64;

/// Axis range and ticks (values and labels) for data in `[lo, hi]`.
fn axis(lo: f64, hi: f64, log: bool) -> ((f64, f64), Vec<(f64, String)>) {
    if log {
        let (a, b) = (lo.log10().floor(), hi.log10().ceil());
        let b = if b <= a { a + 1.0 } else { b };
        let step = ((b - a) / 6.0).ceil().max(1.0);
        let mut t = Vec::new();
        let mut e = a;
        while e <= b + 1e-9 {
            t.push((10f64.powf(e), format!("1e{}", e as i64)));
            e += step;
        }
        return ((10f64.powf(a), 10f64.powf(b)), t);
    }
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5 * lo.abs().max(1.0), hi + 0.5 * hi.abs().max(1.0))
    };
    let raw = (hi - lo) / 5.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|&s| s >= raw)
        .unwrap_or(10.0 * mag);
    let (a, b) = ((lo / step).floor() * step, (hi / step).ceil() * step);
    let mut t = Vec::new();
    let mut k = 0.0;
    while a + k * step <= b + 1e-9 * step {
        let v = a + k * step;
        let v = if v.abs() < 1e-12 * step { 0.0 } else { v };
        t.push((v, fmt_num(v)));
        k += 1.0;
    }
    ((a, b), t)
}

/// A line with a square brush of `w` pixels.
fn line(img: &mut RgbImage, (x0, y0): (f64, f64), (x1, y1): (f64, f64), w: i64, rgb: [u8; 3]) {
    let n = ((x1 - x0).abs().max((y1 - y0).abs()).ceil() as i64).clamp(1, 20_000);
    for k in 0..=n {
        let t = k as f64 / n as f64;
        let (x, y) = (x0 + t * (x1 - x0), y0 + t * (y1 - y0));
        for a in 0..w {
            for b in 0..w {
                put(img, x.round() as i64 + a - w / 2, y.round() as i64 + b - w / 2, rgb);
            }
        }
    }
}

/// Renders a line plot with a legend on the right.
pub fn render_line_plot(p: &LinePlot) -> RgbImage {
    let mut img = RgbImage::from_pixel(PLOT_W, PLOT_H, Rgb(BACKGROUND));
    let usable = |v: f64, log: bool| v.is_finite() && (!log || v > 0.0);
    let mut xr = (f64::INFINITY, f64::NEG_INFINITY);
    let mut yr = (f64::INFINITY, f64::NEG_INFINITY);
    for s in p.series {
        for (&x, &y) in s.x.iter().zip(s.y) {
            if usable(x, p.log_x) && usable(y, p.log_y) {
                xr = (xr.0.min(x), xr.1.max(x));
                yr = (yr.0.min(y), yr.1.max(y));
            }
        }
    }
    draw_text(&mut img, p.title, LEFT as f32, 12.0, 17.0, INK);
    if !(xr.0.is_finite() && yr.0.is_finite()) {
        draw_text(&mut img, "no data to plot", LEFT as f32, 200.0, 16.0, INK);
        return img;
    }
    let ((xa, xb), xt) = axis(xr.0, xr.1, p.log_x);
    let ((ya, yb), yt) = axis(yr.0, yr.1, p.log_y);
    let (pw, ph) = (f64::from(PLOT_W - LEFT - RIGHT), f64::from(PLOT_H - TOP - BOTTOM));
    let map = |v: f64, a: f64, b: f64, log: bool| {
        if log {
            (v.log10() - a.log10()) / (b.log10() - a.log10())
        } else {
            (v - a) / (b - a)
        }
    };
    let to_px = |x: f64, y: f64| {
        (
            f64::from(LEFT) + map(x, xa, xb, p.log_x) * pw,
            f64::from(TOP) + (1.0 - map(y, ya, yb, p.log_y)) * ph,
        )
    };
    for (v, label) in &xt {
        let (px, _) = to_px(*v, ya.max(f64::MIN_POSITIVE));
        line(&mut img, (px, f64::from(TOP)), (px, f64::from(TOP) + ph), 1, GRID_RGB);
        let w = text_width(label, 13.0);
        draw_text(
            &mut img,
            label,
            px as f32 - w / 2.0,
            (TOP as f32) + ph as f32 + 6.0,
            13.0,
            INK,
        );
    }
    for (v, label) in &yt {
        let (_, py) = to_px(xa.max(f64::MIN_POSITIVE), *v);
        line(&mut img, (f64::from(LEFT), py), (f64::from(LEFT) + pw, py), 1, GRID_RGB);
        let w = text_width(label, 13.0);
        draw_text(&mut img, label, LEFT as f32 - w - 6.0, py as f32 - 8.0, 13.0, INK);
    }
    outline(
        &mut img,
        i64::from(LEFT),
        i64::from(TOP),
        pw as i64 + 1,
        ph as i64 + 1,
        INK,
    );
    let xw = text_width(p.x_label, 14.0);
    draw_text(
        &mut img,
        p.x_label,
        LEFT as f32 + (pw as f32 - xw) / 2.0,
        (PLOT_H - BOTTOM + 28) as f32,
        14.0,
        INK,
    );
    draw_text(&mut img, p.y_label, 8.0, (TOP - 22) as f32, 13.0, INK);
    let mut colour_k = 0;
    for (k, s) in p.series.iter().enumerate() {
        let (rgb, w) = if s.emphasis {
            (INK, 3)
        } else {
            let c = PALETTE[colour_k % PALETTE.len()];
            colour_k += 1;
            (c, 2)
        };
        let mut prev: Option<(f64, f64)> = None;
        for (&x, &y) in s.x.iter().zip(s.y) {
            if !(usable(x, p.log_x) && usable(y, p.log_y)) {
                prev = None;
                continue;
            }
            let q = to_px(x, y);
            if let Some(a) = prev {
                line(&mut img, a, q, w, rgb);
            } else if s.x.len() <= 12 {
                line(&mut img, q, q, w + 3, rgb);
            }
            if s.x.len() <= 12 {
                line(&mut img, q, q, w + 3, rgb);
            }
            prev = Some(q);
        }
        let ly = TOP as f64 + 10.0 + 22.0 * k as f64;
        let lx = f64::from(PLOT_W - RIGHT) + 16.0;
        line(&mut img, (lx, ly + 8.0), (lx + 24.0, ly + 8.0), w, rgb);
        draw_text(&mut img, s.name, (lx + 30.0) as f32, ly as f32, 13.0, INK);
    }
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
        let vals: Vec<f64> = (0..800).map(|k| k as f64).collect();
        let tiles: Vec<Tile> = (0..5)
            .map(|k| Tile {
                values: &vals,
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
        let mut vals = vec![0.0; nx * ny];
        vals[5 * nx + 15] = 1.0; // the peak
        vals[5 * nx + 4] = 1e-3; // the faint plume, cell (4, 5)
        let tiles = [Tile {
            values: &vals,
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

    #[test]
    fn line_plot_draws_its_lines() {
        let x = [1.0, 2.0, 4.0];
        let y = [1.0, 0.25, 0.0625];
        let s = [Series {
            name: "a",
            x: &x,
            y: &y,
            emphasis: false,
        }];
        let img = render_line_plot(&LinePlot {
            title: "t",
            x_label: "h",
            y_label: "e",
            series: &s,
            log_x: true,
            log_y: true,
        });
        let coloured = img.pixels().filter(|p| p.0 == PALETTE[0]).count();
        assert!(coloured > 100, "{coloured}");
    }
}
