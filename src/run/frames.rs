//! The pictures of a run's fields: concentration frames and the envelope map. Frames are drawn
//! after the march from the records in `fields.nc`, so every frame shares one colour range
//! (known only once the run is over) and they can be compared and animated; they are drawn in
//! parallel.

use crate::output::animation::{gif_frame, GifFrame, GifPalette};
use crate::output::colour::{ColourScale, Ramp};
use crate::output::{self, Extent, FrameSpec, Marker, OutputError, FILL_VALUE};
use crate::scenario::Scenario;
use image::RgbImage;
use rayon::prelude::*;
use std::path::Path;

/// Name of the concentration variable in `fields.nc`.
pub const FIELD: &str = "c";

/// The colour range of every frame and of the envelope: the scenario's `output.range` when
/// given, else linear `min(0, lowest) .. peak` or log `peak * 1e-4 .. peak`, with `peak` the
/// largest value any water cell reached at any step and `lowest` the smallest logged value.
/// `None` (each frame then scales itself) when the peak is not a positive finite number.
pub fn run_range(scn: &Scenario, peak: f64, lowest: f64) -> Option<(f64, f64)> {
    if let Some(r) = scn.output.range {
        return Some(r);
    }
    if !(peak.is_finite() && peak > 0.0) {
        return None;
    }
    Some(match scn.output.colour {
        ColourScale::Log => (peak * 1e-4, peak),
        ColourScale::Linear => (if lowest.is_finite() { lowest.min(0.0) } else { 0.0 }, peak),
    })
}

/// What every frame of a run shares.
pub struct FrameStyle<'a> {
    /// The scenario (grid, tracer, colour scale).
    pub scn: &'a Scenario,
    /// Wet flags, `nx * ny`.
    pub wet: &'a [bool],
    /// The colour range for every frame (`None` = per frame).
    pub range: Option<(f64, f64)>,
    /// Title on every frame.
    pub title: &'a str,
    /// Also reduce every frame for `animation.gif`.
    pub animate: bool,
    /// The grid's extent, m (axes, scale bar).
    pub extent: Extent,
    /// Sources and receptors drawn on every frame and the envelope.
    pub markers: Vec<Marker>,
}

/// Draws frames `00000.png ..` into `frames_dir` from the first `count` records of the finished
/// `fields.nc` at `nc`; with `style.animate`, also returns them mapped onto one palette for
/// the GIF (learnt from the first frame).
pub fn render_frames(
    nc: &Path,
    frames_dir: &Path,
    count: usize,
    style: &FrameStyle,
) -> Result<Option<(GifPalette, Vec<GifFrame>)>, OutputError> {
    let mut palette: Option<GifPalette> = None;
    let mut gif = Vec::new();
    let read_err = |e: netcdf3::ReadError| OutputError::invalid(nc, format!("reading the fields back: {e:?}"));
    let mut reader = netcdf3::FileReader::open(nc).map_err(read_err)?;
    let times = reader.read_var_f64("time").map_err(read_err)?;
    let batch = 2 * rayon::current_num_threads().max(1);
    let mut k0 = 0;
    while k0 < count {
        // The first frame alone, so the palette exists before the others are mapped.
        let k1 = if k0 == 0 { 1 } else { (k0 + batch).min(count) };
        let mut records = Vec::with_capacity(k1 - k0);
        for k in k0..k1 {
            let rec = reader.read_record(FIELD, k).map_err(read_err)?;
            let mut values = rec
                .get_f64_into()
                .map_err(|_| OutputError::invalid(nc, "the field is not stored as doubles"))?;
            for v in &mut values {
                if *v == FILL_VALUE {
                    *v = f64::NAN;
                }
            }
            records.push((k, times.get(k).copied().unwrap_or(f64::NAN), values));
        }
        let drawn = records
            .par_iter()
            .map(|(k, t, values)| draw_frame(&frames_dir.join(format!("{k:05}.png")), *t, values, style))
            .collect::<Result<Vec<RgbImage>, OutputError>>()?;
        if style.animate {
            let pal = palette.get_or_insert_with(|| GifPalette::learn(&drawn[0]));
            let pal = &*pal;
            let mapped = drawn
                .par_iter()
                .zip(k0..k1)
                .map(|(img, k)| {
                    gif_frame(img, pal).map_err(|m| OutputError::invalid(frames_dir.join(format!("{k:05}.png")), m))
                })
                .collect::<Result<Vec<GifFrame>, OutputError>>()?;
            gif.extend(mapped);
        }
        k0 = k1;
    }
    Ok(palette.map(|p| (p, gif)))
}

fn draw_frame(path: &Path, t: f64, values: &[f64], style: &FrameStyle) -> Result<RgbImage, OutputError> {
    let scn = style.scn;
    let g = &scn.model.grid;
    let spec = FrameSpec {
        nx: g.nx,
        ny: g.ny,
        values,
        wet: Some(style.wet),
        tracer: &scn.tracer.name,
        units: &scn.tracer.units,
        time_s: t,
        scale: scn.output.colour,
        range: style.range,
        title: Some(style.title),
        extent: Some(style.extent),
        markers: &style.markers,
    };
    let img = output::render_frame(&spec)?;
    output::maps::save(path, &img)?;
    Ok(img)
}

/// `envelope.png`: the largest concentration each cell reached, in the run's colour range.
pub fn write_envelope_png(scn: &Scenario, c_max: &[f64], style: &FrameStyle, path: &Path) -> Result<(), OutputError> {
    let g = &scn.model.grid;
    let range = style.range.unwrap_or(match scn.output.colour {
        ColourScale::Log => (1e-4, 1.0),
        ColourScale::Linear => (0.0, 1.0),
    });
    let caption = format!("highest {} [{}] at any step", scn.tracer.name, scn.tracer.units);
    let title = format!("{}: envelope", scn.name);
    let map = output::maps::ScalarMap {
        nx: g.nx,
        ny: g.ny,
        values: c_max,
        wet: Some(style.wet),
        range,
        scale: scn.output.colour,
        ramp: Ramp::Sequential,
        caption: &caption,
        title: &title,
        extent: Some(style.extent),
        markers: &style.markers,
    };
    output::maps::write_scalar_png(path, &map)
}
