//! Strip plots of the receptor quantities, one PNG per quantity (`receptor_<quantity>.png`):
//! one column per receptor, one dot per finished member (spread sideways by a fixed,
//! deterministic offset so equal values stay visible), the 5 %, 50 % and 95 % quantiles as
//! bars across the column (the median thicker) and, for the peak, the receptor's threshold as
//! a dashed red bar. Members without a value (never arrived) are counted under the column's
//! name. Drawn with plotters and the charts' embedded font (`output::chart`).

use super::stats::{Quantity, ReceptorGather};
use crate::output::chart::{axis_range, ensure_font, fmt_tick, time_unit, Axis, INK, PALETTE};
use crate::output::OutputError;
use plotters::prelude::*;
use std::path::Path;

const FONT: &str = "sans-serif";
const WIDTH_PER: u32 = 150;
const MIN_WIDTH: u32 = 640;
const HEIGHT: u32 = 480;

fn err(path: &Path, e: impl std::fmt::Debug) -> OutputError {
    OutputError::invalid(path, format!("plot drawing failed: {e:?}"))
}

/// Writes one strip plot per quantity into `dir` (none when there are no receptors).
pub fn write_plots(
    dir: &Path,
    receptors: &[ReceptorGather],
    units: &str,
    files: &mut Vec<String>,
) -> Result<(), OutputError> {
    if receptors.is_empty() {
        return Ok(());
    }
    for q in Quantity::ALL {
        let name = format!("receptor_{}.png", q.key());
        let path = dir.join(&name);
        let img = draw(&path, receptors, q, units)?;
        crate::output::maps::save(&path, &img)?;
        files.push(format!("{}/{name}", super::GATHER_DIR));
    }
    Ok(())
}

/// Deterministic sideways offset of the `k`-th dot, within +-0.22 of the column centre.
fn jitter(k: usize) -> f64 {
    ((k as f64 * 0.618_033_988_749_895).fract() - 0.5) * 0.44
}

fn draw(path: &Path, receptors: &[ReceptorGather], q: Quantity, units: &str) -> Result<image::RgbImage, OutputError> {
    ensure_font().map_err(|e| err(path, e))?;
    let n = receptors.len();
    let width = (WIDTH_PER * n as u32 + 160).max(MIN_WIDTH);
    let all: Vec<f64> = receptors
        .iter()
        .flat_map(|r| r.get(q).values.iter().filter_map(|v| v.1))
        .chain(
            receptors
                .iter()
                .filter(|_| q == Quantity::Peak)
                .filter_map(|r| r.threshold),
        )
        .filter(|v| v.is_finite())
        .collect();
    let hi = all.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let lo = all.iter().copied().fold(f64::INFINITY, f64::min);
    let (scale, unit) = if q.is_time() {
        let (f, u) = time_unit(if hi.is_finite() { hi } else { 0.0 });
        (f, u.to_string())
    } else {
        (
            1.0,
            if units.is_empty() {
                "tracer units".to_string()
            } else {
                units.to_string()
            },
        )
    };
    let (ya, yb) = axis_range(&Axis::linear(""), lo.min(0.0) / scale, hi / scale, true);
    let members = receptors.iter().map(|r| r.members).max().unwrap_or(0);
    let title = format!("{} at each receptor, {members} members", q.words());
    let mut buf = vec![255u8; width as usize * HEIGHT as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (width, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| err(path, e))?;
        let ink = RGBColor(INK[0], INK[1], INK[2]);
        let mut chart = ChartBuilder::on(&root)
            .caption(&title, (FONT, 18).into_font().color(&ink))
            .margin(16)
            .x_label_area_size(48)
            .y_label_area_size(84)
            .build_cartesian_2d(-0.5..(n as f64 - 0.5), ya..yb)
            .map_err(|e| err(path, e))?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(0)
            .x_label_formatter(&|_| String::new())
            .y_label_formatter(&|v| fmt_tick(*v))
            .y_desc(format!("{} [{unit}]", q.key().replace('_', " ")))
            .label_style((FONT, 13).into_font().color(&ink))
            .axis_desc_style((FONT, 14).into_font().color(&ink))
            .light_line_style(WHITE)
            .bold_line_style(RGBColor(222, 222, 226))
            .draw()
            .map_err(|e| err(path, e))?;
        let dot = RGBColor(PALETTE[1][0], PALETTE[1][1], PALETTE[1][2]);
        for (i, r) in receptors.iter().enumerate() {
            let g = r.get(q);
            let x = i as f64;
            chart
                .draw_series(g.values.iter().enumerate().filter_map(|(k, v)| {
                    v.1.filter(|v| v.is_finite())
                        .map(|v| Circle::new((x + jitter(k), v / scale), 3, dot.mix(0.7).filled()))
                }))
                .map_err(|e| err(path, e))?;
            if let Some(d) = g.dist {
                for (v, w) in [(d.p5, 1), (d.p50, 3), (d.p95, 1)] {
                    let pts = vec![(x - 0.32, v / scale), (x + 0.32, v / scale)];
                    chart
                        .draw_series(std::iter::once(PathElement::new(pts, ink.stroke_width(w))))
                        .map_err(|e| err(path, e))?;
                }
            }
            if let (Quantity::Peak, Some(t)) = (q, r.threshold) {
                let pts = vec![(x - 0.45, t), (x + 0.45, t)];
                let red = RGBColor(PALETTE[6][0], PALETTE[6][1], PALETTE[6][2]);
                chart
                    .draw_series(std::iter::once(plotters::element::DashedPathElement::new(
                        pts,
                        6,
                        4,
                        red.stroke_width(2),
                    )))
                    .map_err(|e| err(path, e))?;
            }
            let (px, py) = chart.backend_coord(&(x, ya));
            let mut label = r.name.clone();
            if g.missing > 0 {
                let what = if q == Quantity::Arrival && r.threshold.is_some() {
                    "never"
                } else {
                    "no value"
                };
                label = format!("{label} ({what}: {})", g.missing);
            }
            let font = (FONT, 13).into_font().color(&ink);
            let w = root.estimate_text_size(&label, &font).map(|s| s.0 as i32).unwrap_or(0);
            root.draw(&Text::new(label, (px - w / 2, py + 10), font))
                .map_err(|e| err(path, e))?;
        }
        root.draw(&Text::new(
            "dots: members; bars: 5 %, 50 % (thick), 95 % quantiles".to_string(),
            (16, HEIGHT as i32 - 18),
            (FONT, 12).into_font().color(&ink),
        ))
        .map_err(|e| err(path, e))?;
        root.present().map_err(|e| err(path, e))?;
    }
    image::RgbImage::from_raw(width, HEIGHT, buf).ok_or_else(|| err(path, "buffer size"))
}
