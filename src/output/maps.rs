//! PNG maps of per-cell diagnostics (`tinct check`): a categorical map with a legend and a
//! continuous map with a colour bar, both north up with the grid's aspect and the same page
//! geometry as the concentration frames ([`frame_layout`]).
//!
//! - [`write_category_png`]: one colour per class (e.g. the regime map), land in [`LAND_RGB`],
//!   a legend of swatches under the map.
//! - [`write_scalar_png`]: a value per cell on one of the project's ramps, linear or
//!   logarithmic, with decade (log) or rounded (linear) ticks; values outside the range take
//!   the end colours, infinite values the top colour, NaN the [`NAN_RGB`](super::colour::NAN_RGB) flag.
//!
//! With an [`Extent`] both draw axes in metres, a scale bar and a north arrow
//! ([`decor`](super::decor)); a scalar map also draws source and receptor [`Marker`]s.
//!
//! Like the rest of `output`, this depends on no other tinct module: callers pass plain slices.

use std::path::Path;

use image::RgbImage;

use super::colour::{normalise, ColourScale, Ramp, RampLut, LAND_RGB};
use super::decor::{draw_decor, draw_markers, Extent, Marker};
use super::draw::{outline_ink as outline, put, INK};
use super::frame::{frame_layout, FrameLayout};
use super::text::{draw_text, text_width};
use super::{write_atomic, OutputError};

const BACKGROUND: [u8; 3] = [255, 255, 255];
const TITLE_PX: f32 = 20.0;
const LABEL_PX: f32 = 15.0;
const BAR_INSET: u32 = 40;
const BAR_GAP: u32 = 18;
const BAR_H: u32 = 18;
const SWATCH: u32 = 16;

/// One class of a categorical map.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Category<'a> {
    /// Legend text.
    pub label: &'a str,
    /// Fill colour.
    pub rgb: [u8; 3],
}

/// A categorical map: `codes[k]` indexes `categories` (an out-of-range code is drawn in
/// [`LAND_RGB`]).
#[derive(Debug, Clone, Copy)]
pub struct CategoryMap<'a> {
    /// Cells along x (west to east).
    pub nx: usize,
    /// Cells along y (south to north).
    pub ny: usize,
    /// `nx * ny` class indices, row-major, row 0 south.
    pub codes: &'a [u8],
    /// The classes, in legend order.
    pub categories: &'a [Category<'a>],
    /// Title above the map.
    pub title: &'a str,
    /// Outer cell edges in metres; `Some` draws axes, scale bar and north arrow.
    pub extent: Option<Extent>,
}

/// A continuous map of one value per cell.
#[derive(Debug, Clone, Copy)]
pub struct ScalarMap<'a> {
    /// Cells along x (west to east).
    pub nx: usize,
    /// Cells along y (south to north).
    pub ny: usize,
    /// `nx * ny` values, row-major, row 0 south.
    pub values: &'a [f64],
    /// `nx * ny` wet flags (false: land, drawn in [`LAND_RGB`]); `None`: all water.
    pub wet: Option<&'a [bool]>,
    /// Colour-bar range (for a log scale `lo` must be positive).
    pub range: (f64, f64),
    /// Linear or logarithmic.
    pub scale: ColourScale,
    /// Which ramp.
    pub ramp: Ramp,
    /// Caption under the colour bar (quantity and meaning of the colours).
    pub caption: &'a str,
    /// Title above the map.
    pub title: &'a str,
    /// Outer cell edges in metres; `Some` draws axes, scale bar and north arrow.
    pub extent: Option<Extent>,
    /// Sources and receptors drawn on the map (only with an extent; points outside it are
    /// skipped).
    pub markers: &'a [Marker],
}

/// Pixel -> cell index along one axis (nearest cell centre).
fn index_map(cells: usize, pixels: u32) -> Vec<usize> {
    let pixels = pixels as usize;
    (0..pixels)
        .map(|p| (((2 * p + 1) * cells) / (2 * pixels)).min(cells - 1))
        .collect()
}

fn check_len(nx: usize, ny: usize, lens: &[usize]) -> Result<(), String> {
    if nx == 0 || ny == 0 {
        return Err(format!("empty grid {nx}x{ny}"));
    }
    let n = nx.checked_mul(ny).ok_or("grid too large")?;
    match lens.iter().find(|&&l| l != n) {
        Some(l) => Err(format!("a per-cell slice has {l} entries, expected nx*ny = {n}")),
        None => Ok(()),
    }
}

/// Paints the map area, north up, with `colour(k)` for cell index `k`.
fn paint(img: &mut RgbImage, l: &FrameLayout, nx: usize, ny: usize, colour: impl Fn(usize) -> [u8; 3]) {
    let cols = index_map(nx, l.map_w);
    let rows = index_map(ny, l.map_h);
    for (py, &r) in rows.iter().enumerate() {
        let j = ny - 1 - r;
        for (px, &i) in cols.iter().enumerate() {
            let rgb = colour(j * nx + i);
            img.put_pixel(l.map_x + px as u32, l.map_y + py as u32, image::Rgb(rgb));
        }
    }
    outline(img, l.map_x as i64 - 1, l.map_y as i64 - 1, l.map_w + 2, l.map_h + 2);
}

fn title(img: &mut RgbImage, text: &str) {
    let w = text_width(text, TITLE_PX);
    let x = ((img.width() as f32 - w) / 2.0).max(8.0);
    draw_text(img, text, x, 12.0, TITLE_PX, INK);
}

/// Renders a categorical map with its legend.
pub fn render_categories(map: &CategoryMap) -> Result<RgbImage, String> {
    check_len(map.nx, map.ny, &[map.codes.len()])?;
    let l = frame_layout(map.nx, map.ny);
    let mut img = RgbImage::from_pixel(l.width, l.height, image::Rgb(BACKGROUND));
    paint(&mut img, &l, map.nx, map.ny, |k| {
        map.categories.get(map.codes[k] as usize).map_or(LAND_RGB, |c| c.rgb)
    });
    if let Some(e) = map.extent {
        draw_decor(&mut img, &l, &e);
    }
    // Legend: swatches in rows under the map.
    let (mut x, mut y) = (BAR_INSET, l.strip_y + BAR_GAP);
    for c in map.categories {
        let w = SWATCH + 6 + text_width(c.label, LABEL_PX).ceil() as u32 + 24;
        if x + w > l.width - BAR_INSET / 2 && x > BAR_INSET {
            x = BAR_INSET;
            y += SWATCH + 14;
        }
        for dy in 0..SWATCH {
            for dx in 0..SWATCH {
                put(&mut img, i64::from(x + dx), i64::from(y + dy), c.rgb);
            }
        }
        outline(&mut img, i64::from(x), i64::from(y), SWATCH, SWATCH);
        draw_text(
            &mut img,
            c.label,
            (x + SWATCH + 6) as f32,
            y as f32 - 1.0,
            LABEL_PX,
            INK,
        );
        x += w;
    }
    title(&mut img, map.title);
    Ok(img)
}

/// Tick values for the colour bar: decades on a log scale, 1-2-5 steps on a linear one.
fn ticks(lo: f64, hi: f64, scale: ColourScale) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite() && hi > lo) {
        return Vec::new();
    }
    if scale == ColourScale::Log && lo > 0.0 {
        let (e0, e1) = ((lo.log10() - 1e-9).ceil() as i32, (hi.log10() + 1e-9).floor() as i32);
        let every = ((e1 - e0) / 6 + 1).max(1) as usize;
        return (e0..=e1).step_by(every).map(|e| 10f64.powi(e)).collect();
    }
    let raw = (hi - lo) / 5.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|&s| s >= raw)
        .unwrap_or(10.0 * mag);
    let (a, b) = ((lo / step - 1e-9).ceil(), (hi / step + 1e-9).floor());
    // A span too narrow for a normal step (zero, subnormal) or too wide to divide (overflow):
    // ticks at the two ends instead of an unbounded count.
    if !(step.is_normal() && a.is_finite() && b.is_finite() && b - a < 12.0) {
        return vec![lo, hi];
    }
    (a as i64..=b as i64).map(|k| k as f64 * step).collect()
}

fn tick_label(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if (1e-3..1e5).contains(&v.abs()) {
        let s = format!("{v:.3}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v:.0e}")
    }
}

/// Renders a continuous map with its colour bar, ticks and caption.
pub fn render_scalar(map: &ScalarMap) -> Result<RgbImage, String> {
    let mut lens = vec![map.values.len()];
    if let Some(w) = map.wet {
        lens.push(w.len());
    }
    check_len(map.nx, map.ny, &lens)?;
    let (lo, hi) = map.range;
    let l = frame_layout(map.nx, map.ny);
    let lut = RampLut::new(map.ramp);
    let mut img = RgbImage::from_pixel(l.width, l.height, image::Rgb(BACKGROUND));
    paint(&mut img, &l, map.nx, map.ny, |k| {
        if map.wet.is_some_and(|w| !w[k]) {
            LAND_RGB
        } else {
            lut.get(normalise(map.values[k], lo, hi, map.scale))
        }
    });
    if let Some(e) = map.extent {
        draw_decor(&mut img, &l, &e);
        draw_markers(&mut img, &l, &e, map.markers);
    }
    let bar_y = l.strip_y + BAR_GAP;
    let bar_w = l.width.saturating_sub(2 * BAR_INSET).max(2);
    let denom = f64::from(bar_w - 1);
    for bx in 0..bar_w {
        let rgb = lut.get(f64::from(bx) / denom);
        for by in 0..BAR_H {
            put(&mut img, i64::from(BAR_INSET + bx), i64::from(bar_y + by), rgb);
        }
    }
    outline(
        &mut img,
        i64::from(BAR_INSET) - 1,
        i64::from(bar_y) - 1,
        bar_w + 2,
        BAR_H + 2,
    );
    for v in ticks(lo, hi, map.scale) {
        let t = normalise(v, lo, hi, map.scale);
        if t.is_nan() {
            continue;
        }
        let x = BAR_INSET + (t * denom).round() as u32;
        for y in bar_y + BAR_H..bar_y + BAR_H + 5 {
            put(&mut img, i64::from(x), i64::from(y), INK);
        }
        let label = tick_label(v);
        let w = text_width(&label, LABEL_PX - 1.0);
        let lx = (x as f32 - w / 2.0).clamp(2.0, (l.width as f32 - w - 2.0).max(2.0));
        draw_text(&mut img, &label, lx, (bar_y + BAR_H + 6) as f32, LABEL_PX - 1.0, INK);
    }
    draw_text(
        &mut img,
        map.caption,
        BAR_INSET as f32,
        (bar_y + BAR_H + 34) as f32,
        LABEL_PX,
        INK,
    );
    title(&mut img, map.title);
    Ok(img)
}

/// Encodes `img` as a PNG (fast compression) and writes it atomically at `path`.
pub(crate) fn save(path: &Path, img: &RgbImage) -> Result<(), OutputError> {
    use image::codecs::png::{CompressionType, FilterType, PngEncoder};
    use image::ImageEncoder;
    let mut bytes = Vec::new();
    PngEncoder::new_with_quality(&mut bytes, CompressionType::Fast, FilterType::Adaptive)
        .write_image(img.as_raw(), img.width(), img.height(), image::ExtendedColorType::Rgb8)
        .map_err(|source| OutputError::Png {
            path: path.to_path_buf(),
            source,
        })?;
    write_atomic(path, &bytes)
}

/// Renders `map` and writes it atomically as a PNG at `path`.
pub fn write_category_png(path: &Path, map: &CategoryMap) -> Result<(), OutputError> {
    let img = render_categories(map).map_err(|m| OutputError::invalid(path, m))?;
    save(path, &img)
}

/// Renders `map` and writes it atomically as a PNG at `path`.
pub fn write_scalar_png(path: &Path, map: &ScalarMap) -> Result<(), OutputError> {
    let img = render_scalar(map).map_err(|m| OutputError::invalid(path, m))?;
    save(path, &img)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::colour::ramp_rgb;

    #[test]
    fn categories_are_north_up_with_land_grey() {
        let cats = [
            Category {
                label: "a",
                rgb: [200, 0, 0],
            },
            Category {
                label: "b",
                rgb: [0, 0, 200],
            },
        ];
        // 2 x 2: south row class 0, north row class 1, one out-of-range code (land).
        let codes = [0, 0, 1, 9];
        let m = CategoryMap {
            nx: 2,
            ny: 2,
            codes: &codes,
            categories: &cats,
            title: "t",
            extent: None,
        };
        let img = render_categories(&m).unwrap();
        let l = frame_layout(2, 2);
        let at = |fx: f64, fy: f64| {
            img.get_pixel(
                l.map_x + (fx * f64::from(l.map_w)) as u32,
                l.map_y + (fy * f64::from(l.map_h)) as u32,
            )
            .0
        };
        assert_eq!(at(0.25, 0.75), [200, 0, 0]); // south-west
        assert_eq!(at(0.25, 0.25), [0, 0, 200]); // north-west
        assert_eq!(at(0.75, 0.25), LAND_RGB); // north-east, code 9
        assert!(render_categories(&CategoryMap { codes: &[0], ..m }).is_err());
    }

    #[test]
    fn scalar_log_scale_puts_decades_at_their_place() {
        let values = [0.01, 1.0, 100.0, f64::INFINITY];
        let wet = [true, true, true, false];
        let m = ScalarMap {
            nx: 4,
            ny: 1,
            values: &values,
            wet: Some(&wet),
            range: (0.01, 100.0),
            scale: ColourScale::Log,
            ramp: Ramp::Diverging,
            caption: "x",
            title: "t",
            extent: None,
            markers: &[],
        };
        let img = render_scalar(&m).unwrap();
        let l = frame_layout(4, 1);
        let at = |i: u32| {
            img.get_pixel(l.map_x + i * l.map_w / 4 + l.map_w / 8, l.map_y + l.map_h / 2)
                .0
        };
        assert_eq!(at(0), ramp_rgb(Ramp::Diverging, 0.0));
        let mid = at(1);
        let centre = ramp_rgb(Ramp::Diverging, 0.5);
        assert!(mid.iter().zip(centre).all(|(a, b)| a.abs_diff(b) <= 2), "{mid:?}");
        assert_eq!(at(3), LAND_RGB);
        assert_eq!(ticks(0.01, 100.0, ColourScale::Log), vec![0.01, 0.1, 1.0, 10.0, 100.0]);
        let lin = ticks(0.0, 1.0, ColourScale::Linear);
        assert_eq!(lin.len(), 6);
        assert!(
            lin.iter().enumerate().all(|(k, &t)| (t - 0.2 * k as f64).abs() < 1e-12),
            "{lin:?}"
        );
    }
}
