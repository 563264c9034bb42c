//! Drawing a frame: the colour-bar range, input checks, the map (north up, scaled or
//! sampled), the colour bar with its ticks, the caption and title, the axes, scale bar, north
//! arrow and markers when an extent is given, and the PNG file.

use std::path::{Path, PathBuf};

use image::RgbImage;
use rayon::prelude::*;

use super::super::colour::{normalise, ColourScale, Ramp, RampLut, LAND_RGB};
use super::super::decor::{draw_decor, draw_markers};
use super::super::draw::{outline_ink as draw_rect_outline, put, INK};
use super::super::text::{draw_text, text_width};
use super::super::OutputError;
use super::labels::ticks;
use super::{
    format_time, frame_layout, FrameLayout, FrameSpec, BACKGROUND, BAR_H, CAPTION_PX, MARGIN, TICK_LEN, TICK_PX,
    TITLE_PX,
};

/// The colour-bar range actually used for `spec`.
pub(super) fn effective_range(spec: &FrameSpec) -> (f64, f64) {
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

    if let Some(extent) = spec.extent {
        draw_decor(&mut img, &layout, &extent);
        draw_markers(&mut img, &layout, &extent, spec.markers);
    }

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
    let img = render_inner(spec).map_err(|m| OutputError::invalid(path, m))?;
    crate::output::maps::save(path, &img)
}
