//! PNG concentration frames: a north-up map of the field, a colour bar with
//! tick labels, the tracer name with units, the simulated time and an
//! optional title.
//!
//! Layout (see [`frame_layout`]): a title band on top (always reserved, so
//! every frame of a run has the same size), the map centred below it, then a
//! strip with the colour bar, its tick labels and one caption line holding
//! `tracer [units]` on the left and `t = ...` on the right. Image width and
//! height are even, so frame sequences can be assembled into animations by common encoders.

use std::path::{Path, PathBuf};

use image::RgbImage;
use rayon::prelude::*;

use super::colour::{normalise, ColourScale, Ramp, RampLut, LAND_RGB};
use super::draw::{outline_ink as draw_rect_outline, put, INK};
use super::text::{draw_text, text_width};
use super::{write_atomic, OutputError};

/// Background colour of the frame outside the map.
const BACKGROUND: [u8; 3] = [255, 255, 255];
/// Colour of text, ticks and outlines.
/// Side margin in pixels.
const MARGIN: u32 = 24;
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
    /// `nx * ny` wet flags (false = land, drawn in [`LAND_RGB`]); `None` = all water.
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
        let bar_y = self.map_y + self.map_h + BAR_GAP;
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
    let mut width = (map_w + 2 * MARGIN).max(MIN_WIDTH);
    width += width % 2;
    let map_x = (width - map_w) / 2;
    let map_y = TITLE_BAND;
    let mut height = map_y + map_h + BAR_GAP + BAR_H + TICK_LEN + 1 + TICK_LINE + CAPTION_GAP + CAPTION_LINE + BOTTOM;
    height += height % 2;
    FrameLayout {
        width,
        height,
        map_x,
        map_y,
        map_w,
        map_h,
    }
}

/// Readable simulated time: `12.5 s`, `0.25 s`, `5 min 07 s`, `6 h 05 min`,
/// `2 d 03 h 10 min` (negative times get a leading `-`; non-finite give `?`).
/// The frame writes it as `t = <this>`.
pub fn format_time(seconds: f64) -> String {
    if !seconds.is_finite() {
        return "?".to_string();
    }
    let sign = if seconds < 0.0 { "-" } else { "" };
    let s = seconds.abs();
    if s < 1.0 {
        let txt = trim_zeros(&format!("{s:.3}"));
        return format!("{sign}{txt} s");
    }
    if s < 59.95 {
        let txt = trim_zeros(&format!("{s:.1}"));
        return format!("{sign}{txt} s");
    }
    let whole = s.round();
    if whole < 3600.0 {
        let w = whole as u64;
        return format!("{sign}{} min {:02} s", w / 60, w % 60);
    }
    let minutes = (s / 60.0).round();
    if minutes < 1440.0 {
        let m = minutes as u64;
        return format!("{sign}{} h {:02} min", m / 60, m % 60);
    }
    if minutes < 1e15 {
        let m = minutes as u64;
        return format!("{sign}{} d {:02} h {:02} min", m / 1440, (m % 1440) / 60, m % 60);
    }
    format!("{sign}{s:.3e} s")
}

fn trim_zeros(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s.to_string()
    }
}

/// Number of decimals needed to write multiples of `step` exactly (0..=6).
fn decimals_for(step: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() < 1e-6 * scaled.abs().max(1.0)
        })
        .unwrap_or(6)
}

/// Formats tick values. `resolution(v)` is the smallest difference that must
/// stay visible at `v` (the tick step, or `v` itself for decade ticks). All
/// labels of one bar share one style: fixed-point when every nonzero value
/// lies in [1e-3, 1e5), scientific (`2.5e6`, `1e-4`) otherwise.
fn format_ticks(values: &[f64], resolution: impl Fn(f64) -> f64) -> Vec<String> {
    let fixed = values.iter().all(|v| *v == 0.0 || (1e-3..1e5).contains(&v.abs()));
    values
        .iter()
        .map(|&v| {
            if !v.is_finite() {
                return "?".to_string();
            }
            let r = resolution(v);
            let res = if r.is_finite() && r > 0.0 {
                r
            } else {
                v.abs().max(1e-300)
            };
            let v = if (v / res).abs() < 1e15 {
                (v / res).round() * res
            } else {
                v
            } + 0.0;
            if fixed {
                let d = decimals_for(res);
                format!("{v:.d$}")
            } else if v == 0.0 {
                "0".to_string()
            } else {
                let e = (v.abs().log10() + 1e-9).floor();
                let p = (e - (res.log10() + 1e-9).floor()).clamp(0.0, 6.0) as usize;
                let txt = format!("{v:.p$e}");
                // Drop trailing zeros of the mantissa (2.50e6 -> 2.5e6).
                match txt.split_once('e') {
                    Some((m, "0")) => trim_zeros(m),
                    Some((m, x)) => format!("{}e{x}", trim_zeros(m)),
                    None => txt,
                }
            }
        })
        .collect()
}

/// Tick values and labels for the colour bar.
fn ticks(lo: f64, hi: f64, scale: ColourScale) -> Vec<(f64, String)> {
    if !(lo.is_finite() && hi.is_finite()) {
        return Vec::new();
    }
    if hi <= lo {
        return single_tick(lo);
    }
    if scale == ColourScale::Log && lo > 0.0 {
        let e0 = (lo.log10() - 1e-9).ceil() as i32;
        let e1 = (hi.log10() + 1e-9).floor() as i32;
        let n = e1 - e0 + 1;
        if n >= 2 {
            let step = ((n + 4) / 5).max(1);
            let vals: Vec<f64> = (e0..=e1).step_by(step as usize).map(|e| 10f64.powi(e)).collect();
            let labels = format_ticks(&vals, |v| v);
            return vals.into_iter().zip(labels).collect();
        }
    }
    linear_ticks(lo, hi)
}

fn single_tick(v: f64) -> Vec<(f64, String)> {
    let label = format_ticks(&[v], |v| v.abs() * 1e-3);
    vec![(v, label.into_iter().next().unwrap_or_default())]
}

/// "Nice" ticks (1, 2 or 5 times a power of ten, 2.5 as a fallback),
/// preferring 3 to 5 ticks.
fn linear_ticks(lo: f64, hi: f64) -> Vec<(f64, String)> {
    let span = hi - lo;
    if !(span.is_finite() && span > 0.0) {
        return single_tick(lo);
    }
    let mag = 10f64.powf((span / 4.0).log10().floor());
    let count = |step: f64| ((hi / step).floor() - (lo / step).ceil() + 1.0).max(0.0);
    let candidates = [1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 2.5, 25.0].map(|m| m * mag);
    let step = candidates
        .iter()
        .copied()
        .find(|&s| (3.0..=5.0).contains(&count(s)))
        .or_else(|| candidates.iter().copied().find(|&s| count(s) <= 5.0))
        .unwrap_or(span);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    let vals: Vec<f64> = (first..=last).map(|k| k as f64 * step).collect();
    let labels = format_ticks(&vals, |_| step);
    vals.into_iter().zip(labels).collect()
}

/// The colour-bar range actually used for `spec`.
fn effective_range(spec: &FrameSpec) -> (f64, f64) {
    let auto = || {
        let (mn, mx) = finite_min_max(spec.values, spec.wet);
        match spec.scale {
            ColourScale::Linear => {
                if mn <= mx {
                    (mn, mx)
                } else {
                    (0.0, 1.0)
                }
            }
            ColourScale::Log => {
                if mx > 0.0 {
                    (mx * 1e-4, mx)
                } else {
                    (1e-4, 1.0)
                }
            }
        }
    };
    match spec.range {
        Some((lo, hi)) if lo.is_finite() && hi.is_finite() => match spec.scale {
            ColourScale::Log if lo <= 0.0 => {
                if hi > 0.0 {
                    (hi * 1e-4, hi)
                } else {
                    auto()
                }
            }
            _ => (lo.min(hi), lo.max(hi)),
        },
        _ => auto(),
    }
}

/// Minimum and maximum of the finite wet values (min > max if none).
fn finite_min_max(values: &[f64], wet: Option<&[bool]>) -> (f64, f64) {
    const CHUNK: usize = 1 << 16;
    let fold = |(mn, mx): (f64, f64), v: f64| {
        if v.is_finite() {
            (mn.min(v), mx.max(v))
        } else {
            (mn, mx)
        }
    };
    let empty = (f64::INFINITY, f64::NEG_INFINITY);
    let merge = |a: (f64, f64), b: (f64, f64)| (a.0.min(b.0), a.1.max(b.1));
    match wet {
        None => values
            .par_chunks(CHUNK)
            .map(|c| c.iter().copied().fold(empty, fold))
            .reduce(|| empty, merge),
        Some(w) => values
            .par_chunks(CHUNK)
            .zip(w.par_chunks(CHUNK))
            .map(|(c, w)| {
                c.iter()
                    .zip(w)
                    .filter(|(_, &wet)| wet)
                    .map(|(&v, _)| v)
                    .fold(empty, fold)
            })
            .reduce(|| empty, merge),
    }
}

/// Pixel index -> cell index along one axis (nearest cell centre).
fn index_map(cells: usize, pixels: u32) -> Vec<usize> {
    let pixels = pixels as usize;
    (0..pixels)
        .map(|p| (((2 * p + 1) * cells) / (2 * pixels)).min(cells - 1))
        .collect()
}

fn validate(spec: &FrameSpec) -> Result<(), String> {
    if spec.nx == 0 || spec.ny == 0 {
        return Err(format!("empty grid {}x{}", spec.nx, spec.ny));
    }
    let n = spec
        .nx
        .checked_mul(spec.ny)
        .ok_or_else(|| format!("grid {}x{} too large", spec.nx, spec.ny))?;
    if spec.values.len() != n {
        return Err(format!(
            "values has {} entries, expected nx*ny = {n}",
            spec.values.len()
        ));
    }
    if let Some(w) = spec.wet {
        if w.len() != n {
            return Err(format!("wet has {} entries, expected nx*ny = {n}", w.len()));
        }
    }
    Ok(())
}

/// Renders a frame to an RGB image. Fails only on inconsistent input
/// (empty grid, slice lengths not equal to `nx * ny`).
pub fn render_frame(spec: &FrameSpec) -> Result<RgbImage, OutputError> {
    render_inner(spec).map_err(|m| OutputError::invalid(PathBuf::from("<in-memory frame>"), m))
}

fn render_inner(spec: &FrameSpec) -> Result<RgbImage, String> {
    validate(spec)?;
    let layout = frame_layout(spec.nx, spec.ny);
    let lut = RampLut::new(Ramp::Sequential);
    let (lo, hi) = effective_range(spec);
    let mut img = RgbImage::from_pixel(layout.width, layout.height, image::Rgb(BACKGROUND));

    draw_map(&mut img, &layout, spec, &lut, lo, hi);
    draw_rect_outline(
        &mut img,
        layout.map_x as i64 - 1,
        layout.map_y as i64 - 1,
        layout.map_w + 2,
        layout.map_h + 2,
    );

    // Colour bar.
    let strip = layout.strip();
    let denom = (strip.bar_w - 1) as f64;
    let row: Vec<u8> = (0..strip.bar_w).flat_map(|bx| lut.get(bx as f64 / denom)).collect();
    let stride = layout.width as usize * 3;
    for y in strip.bar_y..strip.bar_y + BAR_H {
        let start = y as usize * stride + strip.bar_x as usize * 3;
        img.as_mut()[start..start + row.len()].copy_from_slice(&row);
    }
    draw_rect_outline(
        &mut img,
        strip.bar_x as i64 - 1,
        strip.bar_y as i64 - 1,
        strip.bar_w + 2,
        BAR_H + 2,
    );

    // Ticks and labels.
    for (v, label) in ticks(lo, hi, spec.scale) {
        let t = normalise(v, lo, hi, spec.scale);
        if t.is_nan() {
            continue;
        }
        let x = strip.bar_x + (t * denom).round() as u32;
        for y in strip.bar_y + BAR_H..strip.bar_y + BAR_H + TICK_LEN {
            put(&mut img, x as i64, y as i64, INK);
        }
        let w = text_width(&label, TICK_PX);
        let lx = (x as f32 - w / 2.0).clamp(2.0, (layout.width as f32 - w - 2.0).max(2.0));
        draw_text(&mut img, &label, lx, strip.tick_label_y as f32, TICK_PX, INK);
    }

    // Caption: tracer [units] on the left, time on the right.
    let mut caption = spec.tracer.to_string();
    if !spec.units.is_empty() {
        caption.push_str(&format!(" [{}]", spec.units));
    }
    if spec.scale == ColourScale::Log {
        caption.push_str(", log scale");
    }
    draw_text(
        &mut img,
        &caption,
        strip.bar_x as f32,
        strip.caption_y as f32,
        CAPTION_PX,
        INK,
    );
    let time = format!("t = {}", format_time(spec.time_s));
    let tw = text_width(&time, CAPTION_PX);
    draw_text(
        &mut img,
        &time,
        (strip.bar_x + strip.bar_w) as f32 - tw,
        strip.caption_y as f32,
        CAPTION_PX,
        INK,
    );

    if let Some(title) = spec.title {
        let w = text_width(title, TITLE_PX);
        let x = ((layout.width as f32 - w) / 2.0).max(MARGIN as f32);
        draw_text(&mut img, title, x, 12.0, TITLE_PX, INK);
    }
    Ok(img)
}

/// Fills the map area, north up, one row of pixels per task.
fn draw_map(img: &mut RgbImage, layout: &FrameLayout, spec: &FrameSpec, lut: &RampLut, lo: f64, hi: f64) {
    let cols = index_map(spec.nx, layout.map_w);
    let rows = index_map(spec.ny, layout.map_h);
    let stride = layout.width as usize * 3;
    let x0 = layout.map_x as usize * 3;
    let y0 = layout.map_y as usize;
    let buf: &mut [u8] = img.as_mut();
    let map_rows = &mut buf[y0 * stride..(y0 + layout.map_h as usize) * stride];
    let (nx, ny) = (spec.nx, spec.ny);
    map_rows.par_chunks_mut(stride).enumerate().for_each(|(py, line)| {
        // Top pixel row shows the northernmost grid row.
        let j = ny - 1 - rows[py];
        let vals = &spec.values[j * nx..(j + 1) * nx];
        let wet = spec.wet.map(|w| &w[j * nx..(j + 1) * nx]);
        let out = &mut line[x0..x0 + cols.len() * 3];
        for (px, &i) in out.chunks_exact_mut(3).zip(cols.iter()) {
            let rgb = match wet {
                Some(w) if !w[i] => LAND_RGB,
                _ => lut.get(normalise(vals[i], lo, hi, spec.scale)),
            };
            px.copy_from_slice(&rgb);
        }
    });
}

/// Renders `spec` and writes it atomically as a PNG file at `path`.
pub fn write_frame_png(path: &Path, spec: &FrameSpec) -> Result<(), OutputError> {
    use image::codecs::png::{CompressionType, FilterType, PngEncoder};
    use image::ImageEncoder;
    let img = render_inner(spec).map_err(|m| OutputError::invalid(path, m))?;
    let mut bytes = Vec::with_capacity(img.as_raw().len() / 4);
    PngEncoder::new_with_quality(&mut bytes, CompressionType::Fast, FilterType::Adaptive)
        .write_image(img.as_raw(), img.width(), img.height(), image::ExtendedColorType::Rgb8)
        .map_err(|source| OutputError::Png {
            path: path.to_path_buf(),
            source,
        })?;
    write_atomic(path, &bytes)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::colour::ramp_rgb;

    fn spec<'a>(nx: usize, ny: usize, values: &'a [f64], wet: Option<&'a [bool]>) -> FrameSpec<'a> {
        FrameSpec {
            nx,
            ny,
            values,
            wet,
            tracer: "dye",
            units: "kg/m3",
            time_s: 21900.0,
            scale: ColourScale::Linear,
            range: None,
            title: Some("harbour test"),
        }
    }

    /// Pixel at the centre of cell (i, j) (j counted from the south).
    fn cell_pixel(img: &RgbImage, l: &FrameLayout, nx: usize, ny: usize, i: usize, j: usize) -> [u8; 3] {
        let x = l.map_x + ((2 * i + 1) as u32 * l.map_w) / (2 * nx as u32);
        let y_from_south = ((2 * j + 1) as u32 * l.map_h) / (2 * ny as u32);
        let y = l.map_y + l.map_h - 1 - y_from_south;
        img.get_pixel(x, y).0
    }

    #[test]
    fn image_size_matches_layout_and_north_is_up() {
        let (nx, ny) = (40, 20);
        // Value increases northward.
        let values: Vec<f64> = (0..nx * ny).map(|k| (k / nx) as f64).collect();
        let img = render_frame(&spec(nx, ny, &values, None)).unwrap();
        let l = frame_layout(nx, ny);
        assert_eq!(img.dimensions(), (l.width, l.height));
        assert_eq!(l.width % 2, 0);
        assert_eq!(l.height % 2, 0);
        // Top-left map pixel is the north row (maximum), bottom-left the south row.
        assert_eq!(img.get_pixel(l.map_x, l.map_y).0, ramp_rgb(Ramp::Sequential, 1.0));
        assert_eq!(
            img.get_pixel(l.map_x, l.map_y + l.map_h - 1).0,
            ramp_rgb(Ramp::Sequential, 0.0)
        );
    }

    #[test]
    fn map_keeps_grid_aspect() {
        for (nx, ny) in [
            (200, 100),
            (1, 50),
            (50, 1),
            (3000, 1000),
            (1000, 3000),
            (37, 911),
            (1, 1),
            (4096, 4096),
            (1, 5000),
        ] {
            let l = frame_layout(nx, ny);
            let (w, h) = (f64::from(l.map_w), f64::from(l.map_h));
            if nx >= ny {
                assert!((h - w * ny as f64 / nx as f64).abs() <= 1.0, "{nx}x{ny}: {l:?}");
            } else {
                assert!((w - h * nx as f64 / ny as f64).abs() <= 1.0, "{nx}x{ny}: {l:?}");
            }
            let long = l.map_w.max(l.map_h);
            assert!(long <= 1000, "{nx}x{ny}: {l:?}");
            if nx.max(ny) <= 1000 {
                // Integer cell size: exact aspect, long side of a useful size.
                assert_eq!(l.map_w as usize % nx, 0, "{nx}x{ny}");
                assert_eq!(l.map_w as usize / nx, l.map_h as usize / ny, "{nx}x{ny}");
                assert!(long >= 450, "{nx}x{ny}: {l:?}");
            }
            assert!(l.map_x + l.map_w <= l.width && l.map_y + l.map_h < l.height);
        }
    }

    #[test]
    fn land_cells_are_land_grey_and_max_is_top_colour() {
        let (nx, ny) = (10, 8);
        let values: Vec<f64> = (0..nx * ny).map(|k| k as f64 * 0.5).collect();
        let mut wet = vec![true; nx * ny];
        wet[3 * nx + 4] = false; // cell (4, 3)
        wet[nx * ny - 1] = false; // the maximum is on land: not part of the range
        let img = render_frame(&spec(nx, ny, &values, Some(&wet))).unwrap();
        let l = frame_layout(nx, ny);
        assert_eq!(cell_pixel(&img, &l, nx, ny, 4, 3), LAND_RGB);
        assert_eq!(cell_pixel(&img, &l, nx, ny, nx - 1, ny - 1), LAND_RGB);
        // Highest wet value maps to the top of the ramp, lowest to the bottom.
        assert_eq!(
            cell_pixel(&img, &l, nx, ny, nx - 2, ny - 1),
            ramp_rgb(Ramp::Sequential, 1.0)
        );
        assert_eq!(cell_pixel(&img, &l, nx, ny, 0, 0), ramp_rgb(Ramp::Sequential, 0.0));
        assert_ne!(cell_pixel(&img, &l, nx, ny, 5, 3), LAND_RGB);
    }

    #[test]
    fn time_label_pixels_appear_in_the_strip() {
        let (nx, ny) = (30, 30);
        let values = vec![1.0; nx * ny];
        let l = frame_layout(nx, ny);
        let s = l.strip();
        let mut a = spec(nx, ny, &values, None);
        a.time_s = 12.5;
        let mut b = a;
        b.time_s = 3.0 * 86400.0 + 7.0 * 3600.0;
        let ia = render_frame(&a).unwrap();
        let ib = render_frame(&b).unwrap();
        // Right half of the caption line, where the time label is drawn.
        let region = |img: &RgbImage| -> Vec<[u8; 3]> {
            let mut px = Vec::new();
            for y in s.caption_y..s.caption_y + CAPTION_LINE {
                for x in s.bar_x + s.bar_w / 2..s.bar_x + s.bar_w {
                    px.push(img.get_pixel(x, y).0);
                }
            }
            px
        };
        let (ra, rb) = (region(&ia), region(&ib));
        let inked = |r: &[[u8; 3]]| r.iter().filter(|p| **p != BACKGROUND).count();
        assert!(inked(&ra) > 20, "no text pixels for the time label");
        assert!(inked(&rb) > inked(&ra), "longer label should ink more pixels");
        assert_ne!(ra, rb);
        // Tick labels below the bar are drawn too.
        let mut tick_ink = 0;
        for y in s.tick_label_y..s.tick_label_y + TICK_LINE {
            for x in 0..l.width {
                tick_ink += usize::from(ia.get_pixel(x, y).0 != BACKGROUND);
            }
        }
        assert!(tick_ink > 20);
    }

    #[test]
    fn log_scale_maps_decades() {
        // Cells hold 1e-3, 1e-2, 1e-1, 1, 10 from west to east.
        let values: Vec<f64> = (0..5).map(|i| 10f64.powi(i - 3)).collect();
        let mut sp = spec(5, 1, &values, None);
        sp.scale = ColourScale::Log;
        sp.range = Some((1e-3, 10.0));
        let img = render_frame(&sp).unwrap();
        let l = frame_layout(5, 1);
        let lut = RampLut::new(Ramp::Sequential);
        for i in 0..5 {
            assert_eq!(cell_pixel(&img, &l, 5, 1, i, 0), lut.get(i as f64 / 4.0), "cell {i}");
        }
        let labels: Vec<String> = ticks(1e-3, 10.0, ColourScale::Log).into_iter().map(|t| t.1).collect();
        assert_eq!(labels, ["0.001", "0.01", "0.1", "1", "10"]);
        let labels: Vec<String> = ticks(1e-8, 1.0, ColourScale::Log).into_iter().map(|t| t.1).collect();
        assert_eq!(labels, ["1e-8", "1e-6", "1e-4", "1e-2", "1"]);
    }

    #[test]
    fn automatic_log_range_spans_four_decades_below_max() {
        let values = [0.0, 2e-4, 2e-2, 2.0];
        let mut sp = spec(4, 1, &values, None);
        sp.scale = ColourScale::Log;
        let (lo, hi) = effective_range(&sp);
        assert_eq!(hi, 2.0);
        assert!((lo - 2e-4).abs() < 1e-18);
    }

    #[test]
    fn linear_ticks_are_nice() {
        let t = linear_ticks(0.0, 1.0);
        let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
        assert!((3..=5).contains(&labels.len()), "{labels:?}");
        assert_eq!(labels, ["0.0", "0.5", "1.0"]);
        let t = linear_ticks(-0.3, 0.7);
        assert!(t.iter().all(|(_, s)| s.len() <= 4 && !s.contains("0000")), "{t:?}");
        assert!(t.iter().any(|(_, s)| s == "0.0"), "{t:?}");
        assert!(!t
            .iter()
            .any(|(_, s)| s.starts_with('-') && s.trim_matches(['-', '0', '.']).is_empty()));
        let t = linear_ticks(1.0e6, 3.5e6);
        let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
        assert_eq!(labels, ["1e6", "2e6", "3e6"]);
        let t = linear_ticks(1.0e6, 2.0e6);
        assert!(t.iter().any(|(_, s)| s == "1.5e6"), "{t:?}");
        let t = linear_ticks(0.0, 2.5e-3);
        let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
        assert_eq!(labels, ["0.000", "0.001", "0.002"]);
        let t = linear_ticks(0.0, 2.5e-5);
        assert!(t.iter().all(|(_, s)| s.contains('e') || s == "0"), "{t:?}");
    }

    #[test]
    fn format_time_examples() {
        assert_eq!(format_time(12.5), "12.5 s");
        assert_eq!(format_time(12.0), "12 s");
        assert_eq!(format_time(0.25), "0.25 s");
        assert_eq!(format_time(0.0), "0 s");
        assert_eq!(format_time(307.0), "5 min 07 s");
        assert_eq!(format_time(6.0 * 3600.0 + 5.0 * 60.0), "6 h 05 min");
        assert_eq!(format_time(3599.7), "1 h 00 min");
        assert_eq!(format_time(59.99), "1 min 00 s");
        assert_eq!(format_time(2.0 * 86400.0 + 3.0 * 3600.0 + 600.0), "2 d 03 h 10 min");
        assert_eq!(format_time(-30.0), "-30 s");
        assert_eq!(format_time(f64::NAN), "?");
    }

    #[test]
    fn degenerate_inputs_do_not_panic() {
        let nan = vec![f64::NAN; 12];
        let uniform = vec![3.0; 12];
        let land = vec![false; 12];
        let inf = vec![f64::INFINITY, f64::NEG_INFINITY, 0.0, 1.0];
        for scale in [ColourScale::Linear, ColourScale::Log] {
            for range in [
                None,
                Some((2.0, 2.0)),
                Some((-1.0, 5.0)),
                Some((f64::NAN, 1.0)),
                Some((5.0, -5.0)),
            ] {
                let mut s = spec(4, 3, &nan, None);
                s.scale = scale;
                s.range = range;
                let img = render_frame(&s).unwrap();
                let l = frame_layout(4, 3);
                assert_eq!(img.get_pixel(l.map_x, l.map_y).0, crate::output::NAN_RGB);
                s.values = &uniform;
                render_frame(&s).unwrap();
                s.wet = Some(&land);
                let img = render_frame(&s).unwrap();
                assert_eq!(img.get_pixel(l.map_x, l.map_y).0, LAND_RGB);
                let mut s = spec(2, 2, &inf, None);
                s.scale = scale;
                s.range = range;
                s.time_s = f64::INFINITY;
                render_frame(&s).unwrap();
            }
        }
        let one = [1.0];
        render_frame(&spec(1, 1, &one, None)).unwrap();
        assert!(render_frame(&spec(2, 1, &one, None)).is_err());
        assert!(render_frame(&spec(0, 1, &[], None)).is_err());
        assert!(render_frame(&spec(1, 1, &one, Some(&[true, false]))).is_err());
    }

    #[test]
    fn large_grid_is_sampled_and_png_is_written() {
        let (nx, ny) = (3000, 1000);
        let values: Vec<f64> = (0..nx * ny).map(|k| (k % nx) as f64).collect();
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("frame.png");
        write_frame_png(&p, &spec(nx, ny, &values, None)).unwrap();
        let back = image::open(&p).unwrap().to_rgb8();
        let l = frame_layout(nx, ny);
        assert_eq!(back.dimensions(), (l.width, l.height));
        assert_eq!((l.map_w, l.map_h), (1000, 333));
        // West edge lowest, east edge highest.
        assert_eq!(back.get_pixel(l.map_x, l.map_y + 5).0, ramp_rgb(Ramp::Sequential, 0.0));
        let east = back.get_pixel(l.map_x + l.map_w - 1, l.map_y + 5).0;
        assert!(srgb_dist(east, ramp_rgb(Ramp::Sequential, 1.0)) <= 6, "{east:?}");
        let err = write_frame_png(&d.path().join("x.png"), &spec(2, 2, &values[..3], None)).unwrap_err();
        assert!(err.to_string().contains("x.png"), "{err}");
    }

    fn srgb_dist(a: [u8; 3], b: [u8; 3]) -> u32 {
        (0..3).map(|k| u32::from(a[k].abs_diff(b[k]))).sum()
    }

    /// Timing of full renders; run with `cargo test --release -- --ignored --nocapture`.
    #[test]
    #[ignore]
    fn render_timing() {
        for n in [1024usize, 4096] {
            let values: Vec<f64> = (0..n * n).map(|k| ((k % n) as f64 * 0.01).sin().abs()).collect();
            let wet: Vec<bool> = (0..n * n).map(|k| k % 97 != 0).collect();
            let mut times = Vec::new();
            for _ in 0..3 {
                let t0 = std::time::Instant::now();
                let img = render_frame(&spec(n, n, &values, Some(&wet))).unwrap();
                times.push(t0.elapsed().as_secs_f64());
                assert!(img.width() > 0);
            }
            times.sort_by(f64::total_cmp);
            println!("render {n}x{n}: median {:.1} ms ({times:?})", times[1] * 1e3);
        }
    }
}
