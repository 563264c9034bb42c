//! Map decoration shared by concentration frames and diagnostic maps: axes in metres (or
//! kilometres for extents over 5 km) along the bottom and left of the map, a scale bar of a
//! round length (1, 2 or 5 x 10^k m) about a fifth of the map wide, a north arrow (y is north
//! in tinct) and point markers for sources and receptors with their labels.
//!
//! Everything is drawn from a [`FrameLayout`] (the map's pixel rectangle and the bands
//! reserved under it) and an [`Extent`] (the map's outer cell edges in metres); nothing
//! here fails: non-finite or empty extents draw no axes, markers outside the extent are
//! skipped, and all pixels are clipped to the image.

use image::RgbImage;

use super::draw::{put, INK};
use super::frame::{FrameLayout, AXIS_BAND};
use super::text::{draw_text, text_width};

/// Outer edges of the mapped area in metres: west `x0`, east `x1`, south `y0`, north `y1`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Extent {
    /// Western edge, m.
    pub x0: f64,
    /// Eastern edge, m.
    pub x1: f64,
    /// Southern edge, m.
    pub y0: f64,
    /// Northern edge, m.
    pub y1: f64,
}

impl Extent {
    /// True when all edges are finite and the extent has a positive width and height.
    pub fn is_usable(&self) -> bool {
        [self.x0, self.x1, self.y0, self.y1].iter().all(|v| v.is_finite())
            && self.x1 - self.x0 > 0.0
            && self.y1 - self.y0 > 0.0
            && (self.x1 - self.x0).is_finite()
            && (self.y1 - self.y0).is_finite()
    }

    /// True when axis labels are in kilometres (the larger side exceeds 5 km).
    pub fn in_km(&self) -> bool {
        (self.x1 - self.x0).max(self.y1 - self.y0) > 5000.0
    }
}

/// What a marker stands for; each kind has its own symbol.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MarkerKind {
    /// A release point: a filled triangle, apex north.
    Source,
    /// A point where the concentration is recorded: a light ring around a dark centre dot.
    Receptor,
}

/// A labelled point on the map.
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// Easting, m.
    pub x: f64,
    /// Northing, m.
    pub y: f64,
    /// Text drawn next to the symbol.
    pub label: String,
    /// Which symbol.
    pub kind: MarkerKind,
}

/// Fill of the source triangle: a saturated signal orange that lies on neither ramp.
pub const SOURCE_RGB: [u8; 3] = [240, 96, 24];
/// Fill of the receptor ring.
pub const RECEPTOR_RGB: [u8; 3] = [255, 255, 255];
/// Halo drawn around marker labels and behind the scale bar's light half.
const HALO: [u8; 3] = [255, 255, 255];

/// Axis label size, pixels per em.
pub(crate) const AXIS_PX: f32 = 12.0;
const AXIS_TICK: u32 = 4;
/// Smallest spacing of x and y tick labels, pixels.
const X_SPACING: f64 = 90.0;
const Y_SPACING: f64 = 40.0;
const MARKER_PX: f32 = 13.0;
const TRI_HALF: f64 = 7.0;
const RING_OUT: f64 = 6.5;
const RING_IN: f64 = 3.5;

/// Smallest 1-2-5 step (m) whose spacing on a `span_m` wide axis of `pixels` is at least
/// `min_px`; `None` for an unusable axis.
fn tick_step(span_m: f64, pixels: u32, min_px: f64) -> Option<f64> {
    if !(span_m > 0.0 && span_m.is_finite()) || pixels == 0 {
        return None;
    }
    let raw = span_m * min_px / f64::from(pixels);
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|&s| s >= raw * (1.0 - 1e-12))
        .filter(|s| s.is_normal())
}

/// Ticks along one axis as (value in m, pixel offset from the low edge, label).
pub(crate) fn axis_ticks(lo: f64, hi: f64, pixels: u32, min_px: f64, km: bool) -> Vec<(f64, f64, String)> {
    let Some(step) = tick_step(hi - lo, pixels, min_px) else {
        return Vec::new();
    };
    let (a, b) = ((lo / step - 1e-9).ceil(), (hi / step + 1e-9).floor());
    if !(a.is_finite() && b.is_finite()) || b - a > 200.0 {
        return Vec::new();
    }
    let unit_step = if km { step / 1000.0 } else { step };
    let decimals = (-unit_step.log10().floor()).max(0.0) as usize;
    let scale = f64::from(pixels) / (hi - lo);
    (a as i64..=b as i64)
        .map(|k| {
            let v = k as f64 * step;
            let shown = if km { v / 1000.0 } else { v };
            let mut label = format!("{shown:.decimals$}");
            if label.starts_with('-') && label[1..].chars().all(|c| c == '0' || c == '.') {
                label.remove(0);
            }
            (v, (v - lo) * scale, label)
        })
        .collect()
}

/// The scale bar for a map `map_w` pixels wide showing `span_m` metres: its length in metres
/// (1, 2 or 5 x 10^k, the largest not longer than a fifth of the map, at least 60 pixels
/// aimed for on narrow maps) and in pixels.
pub fn scale_bar(span_m: f64, map_w: u32) -> Option<(f64, f64)> {
    if !(span_m > 0.0 && span_m.is_finite()) || map_w == 0 {
        return None;
    }
    let m_per_px = span_m / f64::from(map_w);
    let target_px = (f64::from(map_w) / 5.0).max(60.0);
    let target_m = target_px * m_per_px;
    let mag = 10f64.powf(target_m.log10().floor());
    let len = [5.0, 2.0, 1.0]
        .iter()
        .map(|m| m * mag)
        .find(|&l| l <= target_m * (1.0 + 1e-12))?;
    (len.is_normal()).then_some((len, len / m_per_px))
}

/// Text of a length: `500 m`, `2 km`, `0.5 m`.
pub fn length_label(m: f64) -> String {
    let trim = |s: String| {
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    };
    if m >= 1000.0 {
        format!("{} km", trim(format!("{:.3}", m / 1000.0)))
    } else {
        format!("{} m", trim(format!("{m:.6}")))
    }
}

/// Pixel (column, row) of the point (`x`, `y`) on the map, `None` outside the extent.
pub fn marker_pixel(l: &FrameLayout, e: &Extent, x: f64, y: f64) -> Option<(u32, u32)> {
    if !(e.is_usable() && x.is_finite() && y.is_finite()) {
        return None;
    }
    if x < e.x0 || x > e.x1 || y < e.y0 || y > e.y1 {
        return None;
    }
    let fx = (x - e.x0) / (e.x1 - e.x0) * f64::from(l.map_w);
    let fy = (e.y1 - y) / (e.y1 - e.y0) * f64::from(l.map_h);
    let px = (fx.floor() as u32).min(l.map_w.saturating_sub(1));
    let py = (fy.floor() as u32).min(l.map_h.saturating_sub(1));
    Some((l.map_x + px, l.map_y + py))
}

/// Draws the axes, the scale bar and the north arrow for `extent` (nothing for an unusable one).
pub fn draw_decor(img: &mut RgbImage, l: &FrameLayout, extent: &Extent) {
    if !extent.is_usable() {
        return;
    }
    let km = extent.in_km();
    let bottom = l.map_y + l.map_h;
    // x axis: ticks down from the map's bottom edge, labels centred under them.
    let xt = axis_ticks(extent.x0, extent.x1, l.map_w, X_SPACING, km);
    let mut last_end = 0.0f32;
    for (_, off, label) in &xt {
        let x = i64::from(l.map_x) + (off.round() as i64).min(i64::from(l.map_w.saturating_sub(1)));
        for d in 1..=AXIS_TICK {
            put(img, x, i64::from(bottom + d), INK);
        }
        let w = text_width(label, AXIS_PX);
        let lx = (x as f32 - w / 2.0).clamp(2.0, (img.width() as f32 - w - 2.0).max(2.0));
        draw_text(img, label, lx, (bottom + AXIS_TICK + 1) as f32, AXIS_PX, INK);
        last_end = lx + w;
    }
    let unit = if km { "km" } else { "m" };
    // The unit right of the map, clear of the last tick label.
    let unit_x = ((l.map_x + l.map_w + 8) as f32).max(last_end + 6.0);
    if unit_x + text_width(unit, AXIS_PX) < img.width() as f32 {
        draw_text(img, unit, unit_x, (bottom + AXIS_TICK + 1) as f32, AXIS_PX, INK);
    }
    // y axis: ticks left of the map's west edge, labels right-aligned against them.
    let yt = axis_ticks(extent.y0, extent.y1, l.map_h, Y_SPACING, km);
    for (_, off, label) in &yt {
        let y = i64::from(bottom) - 1 - (off.round() as i64).min(i64::from(l.map_h.saturating_sub(1)));
        for d in 1..=AXIS_TICK {
            put(img, i64::from(l.map_x) - 1 - i64::from(d), y, INK);
        }
        let w = text_width(label, AXIS_PX);
        let lx = (l.map_x as f32 - AXIS_TICK as f32 - 4.0 - w).max(2.0);
        draw_text(img, label, lx, y as f32 - AXIS_PX * 0.6, AXIS_PX, INK);
    }
    let uw = text_width(unit, AXIS_PX);
    draw_text(
        img,
        unit,
        (l.map_x as f32 - AXIS_TICK as f32 - 4.0 - uw).max(2.0),
        l.map_y as f32 - AXIS_PX - 6.0,
        AXIS_PX,
        INK,
    );
    // Scale bar and north arrow in the band under the axis labels.
    let band = bottom + AXIS_BAND;
    if let Some((len, px)) = scale_bar(extent.x1 - extent.x0, l.map_w) {
        draw_scale_bar(img, l.map_x, band + 8, px, &length_label(len));
    }
    let ax = i64::from(l.width) - 40 - 8;
    draw_north_arrow(img, ax, i64::from(band) + 2);
}

/// Scale bar starting at (`x`, `y`): `px` long, two halves (dark, light) 6 pixels high in a
/// dark outline, the length label to its right.
fn draw_scale_bar(img: &mut RgbImage, x: u32, y: u32, px: f64, label: &str) {
    let len = px.round().max(2.0) as i64;
    let (x, y) = (i64::from(x), i64::from(y));
    let half = len / 2;
    for dy in 0..6 {
        for dx in 0..len {
            let c = if dy == 0 || dy == 5 || dx == 0 || dx == len - 1 || dx < half {
                INK
            } else {
                HALO
            };
            put(img, x + dx, y + dy, c);
        }
    }
    // End ticks, so the measured length reads from tick to tick.
    for dy in -3..0 {
        put(img, x, y + dy, INK);
        put(img, x + len - 1, y + dy, INK);
    }
    draw_text(img, label, (x + len + 8) as f32, (y - 5) as f32, AXIS_PX + 1.0, INK);
}

/// North arrow with its top-left near (`x`, `y`): an "N" and, right of it, an upward arrow
/// 26 pixels tall (half dark, half light, dark outline).
fn draw_north_arrow(img: &mut RgbImage, x: i64, y: i64) {
    let n_w = text_width("N", AXIS_PX + 2.0);
    draw_text(img, "N", x as f32, (y + 6) as f32, AXIS_PX + 2.0, INK);
    let cx = x + n_w.ceil() as i64 + 12;
    let (top, h, half_w) = (y, 26i64, 9i64);
    for dy in 0..h {
        // Arrow head widens linearly over the full height (a slim kite).
        let w = (half_w * dy) / (h - 1);
        for dx in -w..=w {
            let edge = dx == -w || dx == w || dy == h - 1;
            let c = if edge || dx <= 0 { INK } else { HALO };
            put(img, cx + dx, top + dy, c);
        }
    }
}

/// Draws every marker inside `extent` with its label; others are skipped.
pub fn draw_markers(img: &mut RgbImage, l: &FrameLayout, extent: &Extent, markers: &[Marker]) {
    for m in markers {
        let Some((px, py)) = marker_pixel(l, extent, m.x, m.y) else {
            continue;
        };
        let (cx, cy) = (f64::from(px) + 0.5, f64::from(py) + 0.5);
        match m.kind {
            MarkerKind::Source => {
                fill_triangle(img, cx, cy, TRI_HALF + 1.5, INK);
                fill_triangle(img, cx, cy, TRI_HALF, SOURCE_RGB);
            }
            MarkerKind::Receptor => {
                fill_disc(img, cx, cy, RING_OUT + 1.2, RING_IN - 1.2, INK);
                fill_disc(img, cx, cy, RING_OUT, RING_IN, RECEPTOR_RGB);
                fill_disc(img, cx, cy, 1.6, -1.0, INK);
            }
        }
        draw_label(img, px, py, &m.label);
    }
}

/// Label right of the symbol, or left of it when it would leave the image; a white halo
/// keeps it legible on any colour.
fn draw_label(img: &mut RgbImage, px: u32, py: u32, label: &str) {
    if label.is_empty() {
        return;
    }
    let w = text_width(label, MARKER_PX);
    let (iw, ih) = (img.width() as f32, img.height() as f32);
    let mut x = px as f32 + 11.0;
    if x + w + 2.0 > iw {
        x = px as f32 - 11.0 - w;
    }
    let x = x.clamp(2.0, (iw - w - 2.0).max(2.0));
    let y = (py as f32 - MARKER_PX * 0.6).clamp(1.0, (ih - MARKER_PX - 4.0).max(1.0));
    for (dx, dy) in [
        (-1.0, 0.0),
        (1.0, 0.0),
        (0.0, -1.0),
        (0.0, 1.0),
        (-1.0, -1.0),
        (1.0, 1.0),
        (-1.0, 1.0),
        (1.0, -1.0),
    ] {
        draw_text(img, label, x + dx, y + dy, MARKER_PX, HALO);
    }
    draw_text(img, label, x, y, MARKER_PX, INK);
}

/// Fills the upward triangle whose centroid is (`cx`, `cy`) and half base `s`.
fn fill_triangle(img: &mut RgbImage, cx: f64, cy: f64, s: f64, rgb: [u8; 3]) {
    // Equilateral-ish: height 1.8 s, centroid one third above the base.
    let h = 1.8 * s;
    let (top, base) = (cy - 2.0 * h / 3.0, cy + h / 3.0);
    for y in top.floor() as i64..=base.ceil() as i64 {
        let yc = y as f64 + 0.5;
        if yc < top || yc > base {
            continue;
        }
        let w = s * (yc - top) / h;
        for x in (cx - w).floor() as i64..=(cx + w).ceil() as i64 {
            let xc = x as f64 + 0.5;
            if (xc - cx).abs() <= w {
                put(img, x, y, rgb);
            }
        }
    }
}

/// Fills the ring between radii `r_in` and `r_out` around (`cx`, `cy`) (a disc for `r_in < 0`).
fn fill_disc(img: &mut RgbImage, cx: f64, cy: f64, r_out: f64, r_in: f64, rgb: [u8; 3]) {
    let r = r_out.ceil() as i64 + 1;
    let (ix, iy) = (cx.floor() as i64, cy.floor() as i64);
    for y in iy - r..=iy + r {
        for x in ix - r..=ix + r {
            let d = ((x as f64 + 0.5 - cx).powi(2) + (y as f64 + 0.5 - cy).powi(2)).sqrt();
            if d <= r_out && d >= r_in {
                put(img, x, y, rgb);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::output::frame::frame_layout;

    #[test]
    fn scale_bar_length_in_pixels_states_true_length() {
        // Common practice: a scale bar states true length. Its pixels times the map's metres
        // per pixel must give the label's length to within one pixel.
        for (span, map_w) in [
            (1000.0, 900u32),
            (12_345.0, 617),
            (3.0, 40),
            (250_000.0, 1000),
            (1.0, 1),
        ] {
            let (len, px) = scale_bar(span, map_w).unwrap();
            let m_per_px = span / f64::from(map_w);
            assert!(
                (px.round() * m_per_px - len).abs() <= m_per_px,
                "{span} {map_w}: {len} {px}"
            );
            let mant = len / 10f64.powf(len.log10().floor());
            assert!([1.0, 2.0, 5.0].iter().any(|m| (mant - m).abs() < 1e-9), "{len}");
            // About a fifth of the map (at least 60 px aimed for): within 0.4..1 of the target.
            let target = (f64::from(map_w) / 5.0).max(60.0);
            assert!(px <= target * (1.0 + 1e-9) && px >= 0.4 * target, "{px} vs {target}");
        }
        assert_eq!(length_label(500.0), "500 m");
        assert_eq!(length_label(2000.0), "2 km");
        assert_eq!(length_label(0.5), "0.5 m");
        assert!(scale_bar(f64::NAN, 10).is_none() && scale_bar(10.0, 0).is_none());
    }

    #[test]
    fn drawn_scale_bar_spans_its_pixels() {
        let l = frame_layout(100, 50);
        let e = Extent {
            x0: 0.0,
            x1: 1000.0,
            y0: 0.0,
            y1: 500.0,
        };
        let mut img = RgbImage::from_pixel(l.width, l.height, image::Rgb([255, 255, 255]));
        draw_decor(&mut img, &l, &e);
        let (_, px) = scale_bar(1000.0, l.map_w).unwrap();
        let y = l.map_y + l.map_h + AXIS_BAND + 8 + 2;
        // Dark outline from the first to the last pixel of the bar, background just beyond.
        let len = px.round() as u32;
        assert_eq!(img.get_pixel(l.map_x, y).0, INK);
        assert_eq!(img.get_pixel(l.map_x + len - 1, y).0, INK);
        assert_eq!(img.get_pixel(l.map_x + len + 1, y).0, [255, 255, 255]);
    }

    #[test]
    fn tick_labels_fall_at_their_columns() {
        // 0..1000 m over 900 px: ticks every 100 m (90 px minimum), at 0, 90, 180, ... px.
        let t = axis_ticks(0.0, 1000.0, 900, X_SPACING, false);
        assert_eq!(t.len(), 11);
        for (k, (v, off, label)) in t.iter().enumerate() {
            assert_eq!(*v, 100.0 * k as f64);
            assert!((off - 90.0 * k as f64).abs() < 1e-9, "{off}");
            assert_eq!(label, &format!("{}", 100 * k));
        }
        // Kilometres with an offset origin: 502 300 .. 514 600 m over 600 px.
        let t = axis_ticks(502_300.0, 514_600.0, 600, X_SPACING, true);
        assert_eq!(t[0].2, "504");
        assert!((t[0].1 - (504_000.0 - 502_300.0) * 600.0 / 12_300.0).abs() < 1e-9);
        // The drawn tick mark sits in that column under the map.
        let l = frame_layout(90, 45);
        let e = Extent {
            x0: 0.0,
            x1: 900.0,
            y0: 0.0,
            y1: 450.0,
        };
        let mut img = RgbImage::from_pixel(l.width, l.height, image::Rgb([255, 255, 255]));
        draw_decor(&mut img, &l, &e);
        for (_, off, _) in axis_ticks(0.0, 900.0, l.map_w, X_SPACING, false) {
            let x = l.map_x + (off.round() as u32).min(l.map_w - 1);
            assert_eq!(img.get_pixel(x, l.map_y + l.map_h + 2).0, INK, "column {x}");
        }
        assert!(axis_ticks(0.0, f64::INFINITY, 100, 90.0, false).is_empty());
        assert!(axis_ticks(5.0, 5.0, 100, 90.0, false).is_empty());
    }

    #[test]
    fn markers_sit_at_their_pixel_and_outside_ones_are_skipped() {
        let l = frame_layout(50, 40);
        let e = Extent {
            x0: 100.0,
            x1: 600.0,
            y0: 0.0,
            y1: 400.0,
        };
        let bg = [10, 120, 10];
        let mut img = RgbImage::from_pixel(l.width, l.height, image::Rgb(bg));
        let ms = [
            Marker {
                x: 225.0,
                y: 100.0,
                label: "outfall".into(),
                kind: MarkerKind::Source,
            },
            Marker {
                x: 480.0,
                y: 330.0,
                label: "beach".into(),
                kind: MarkerKind::Receptor,
            },
            Marker {
                x: 700.0,
                y: 100.0,
                label: "far".into(),
                kind: MarkerKind::Source,
            },
            Marker {
                x: f64::NAN,
                y: 1.0,
                label: "nan".into(),
                kind: MarkerKind::Receptor,
            },
        ];
        draw_markers(&mut img, &l, &e, &ms);
        let (sx, sy) = marker_pixel(&l, &e, 225.0, 100.0).unwrap();
        // 125 m of 500 m east, 300 m of 400 m down from the north edge.
        assert_eq!(sx, l.map_x + l.map_w / 4);
        assert_eq!(sy, l.map_y + 3 * l.map_h / 4);
        assert_eq!(img.get_pixel(sx, sy).0, SOURCE_RGB);
        let (rx, ry) = marker_pixel(&l, &e, 480.0, 330.0).unwrap();
        assert_eq!(img.get_pixel(rx, ry).0, INK);
        assert_eq!(img.get_pixel(rx + 5, ry).0, RECEPTOR_RGB);
        assert!(marker_pixel(&l, &e, 700.0, 100.0).is_none());
        // Nothing drawn for the skipped ones: the map's east part keeps its colour except labels.
        let changed = img.pixels().filter(|p| p.0 != bg).count();
        let mut only_two = RgbImage::from_pixel(l.width, l.height, image::Rgb(bg));
        draw_markers(&mut only_two, &l, &e, &ms[..2]);
        assert_eq!(changed, only_two.pixels().filter(|p| p.0 != bg).count());
        // Corners: the east and north edges map inside the map.
        assert_eq!(
            marker_pixel(&l, &e, 600.0, 400.0),
            Some((l.map_x + l.map_w - 1, l.map_y))
        );
    }
}
