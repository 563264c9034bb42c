//! Drawing a [`Chart`] with `plotters` into an RGB buffer: the embedded font registered once,
//! the axes and grid from plotters' mesh, lines split at undrawable values, reference lines,
//! marked points and the legend placed by [`Chart::layout`].

use std::sync::OnceLock;

use image::RgbImage;
use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;

use super::{axis_range, fmt_log_tick, fmt_tick, Chart, Dash, LineStyle, Rgb, INK, LABEL_PX};

const FONT: &str = "sans-serif";
const GRID: Rgb = [222, 222, 226];
const LIGHT_GRID: Rgb = [240, 240, 243];
const REF_GREY: Rgb = [90, 90, 96];

/// Registers the embedded DejaVu Sans with plotters once; later calls return the first result.
pub(crate) fn ensure_font() -> Result<(), String> {
    static DONE: OnceLock<Result<(), String>> = OnceLock::new();
    DONE.get_or_init(|| {
        plotters::style::register_font(FONT, FontStyle::Normal, dejavu::sans::regular())
            .map_err(|_| "the embedded font could not be read".to_string())
    })
    .clone()
}

fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c[0], c[1], c[2])
}

fn err<E: std::fmt::Debug>(e: E) -> String {
    format!("chart drawing failed: {e:?}")
}

/// Tick count asked of plotters: on a log axis enough for the 2 and 5 of each decade when the
/// range is short (only those and the decades get labels).
fn label_hint(log: bool, linear: usize) -> usize {
    if log {
        20
    } else {
        linear
    }
}

/// Draws `c` into a new image.
pub(super) fn render(c: &Chart) -> Result<RgbImage, String> {
    ensure_font()?;
    let lay = c.layout();
    // Ranges over every drawable point, reference level and marked point.
    let mut xr = (f64::INFINITY, f64::NEG_INFINITY);
    let mut yr = (f64::INFINITY, f64::NEG_INFINITY);
    for l in &c.lines {
        for (&x, &y) in l.x.iter().zip(&l.y) {
            // The x range covers every sample, drawable in y or not (a time axis keeps the
            // whole run).
            if c.x.usable(x) {
                xr = (xr.0.min(x), xr.1.max(x));
                if c.y.usable(y) {
                    yr = (yr.0.min(y), yr.1.max(y));
                }
            }
        }
    }
    for n in &c.notes {
        if c.x.usable(n.x) && c.y.usable(n.y) {
            xr = (xr.0.min(n.x), xr.1.max(n.x));
            yr = (yr.0.min(n.y), yr.1.max(n.y));
        }
    }
    for r in &c.refs {
        if c.y.usable(r.y) {
            yr = (yr.0.min(r.y), yr.1.max(r.y));
        }
    }
    let (xa, xb) = axis_range(&c.x, xr.0, xr.1, false);
    let (ya, yb) = axis_range(&c.y, yr.0, yr.1, true);
    let mut buf = vec![255u8; lay.width as usize * lay.height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (lay.width, lay.height)).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        match (c.x.log, c.y.log) {
            (false, false) => draw(&root, c, xa..xb, ya..yb)?,
            (true, false) => draw(&root, c, (xa..xb).log_scale(), ya..yb)?,
            (false, true) => draw(&root, c, xa..xb, (ya..yb).log_scale())?,
            (true, true) => draw(&root, c, (xa..xb).log_scale(), (ya..yb).log_scale())?,
        }
        root.present().map_err(err)?;
    }
    RgbImage::from_raw(lay.width, lay.height, buf).ok_or_else(|| "chart buffer size".to_string())
}

/// A solid or dashed path in `style` through the pixel points `pts` of `root`.
fn stroke(root: &DrawingArea<BitMapBackend, Shift>, pts: Vec<(i32, i32)>, style: LineStyle) -> Result<(), String> {
    let s = rgb(style.colour).stroke_width(style.width);
    match style.dash.pattern() {
        None => root.draw(&PathElement::new(pts, s)).map_err(err),
        Some((on, off)) => root
            .draw(&plotters::element::DashedPathElement::new(pts, on, off, s))
            .map_err(err),
    }
}

fn draw<X, Y>(root: &DrawingArea<BitMapBackend, Shift>, c: &Chart, xs: X, ys: Y) -> Result<(), String>
where
    X: AsRangedCoord<Value = f64>,
    Y: AsRangedCoord<Value = f64>,
    X::CoordDescType: ValueFormatter<f64>,
    Y::CoordDescType: ValueFormatter<f64>,
{
    let lay = c.layout();
    let (pl, pt, pr, pb) = lay.plot;
    let font = |px: f32| (FONT, f64::from(px)).into_font();
    let ink = rgb(INK);
    root.draw(&Text::new(c.title.clone(), (pl as i32, 12), font(18.0).color(&ink)))
        .map_err(err)?;
    root.draw(&Text::new(
        c.y.label.clone(),
        (8, pt as i32 - 24),
        font(14.0).color(&ink),
    ))
    .map_err(err)?;
    let mut chart = ChartBuilder::on(root)
        .margin_top(pt)
        .margin_right(lay.width - pr)
        .margin_bottom(lay.height - pb - 44)
        .x_label_area_size(44)
        .y_label_area_size(pl)
        .build_cartesian_2d(xs, ys)
        .map_err(err)?;
    let xf = |v: &f64| if c.x.log { fmt_log_tick(*v) } else { fmt_tick(*v) };
    let yf = |v: &f64| if c.y.log { fmt_log_tick(*v) } else { fmt_tick(*v) };
    chart
        .configure_mesh()
        .x_labels(label_hint(c.x.log, 9))
        .y_labels(label_hint(c.y.log, 8))
        .x_label_formatter(&xf)
        .y_label_formatter(&yf)
        .bold_line_style(rgb(GRID))
        .light_line_style(rgb(LIGHT_GRID))
        .axis_style(ink)
        .label_style(font(LABEL_PX).color(&ink))
        .x_desc(c.x.label.clone())
        .axis_desc_style(font(14.0).color(&ink))
        .draw()
        .map_err(err)?;
    let area = chart.plotting_area();
    for r in &c.refs {
        if !c.y.usable(r.y) {
            continue;
        }
        let py = area.map_coordinate(&(area.get_x_range().start, r.y)).1;
        let style = LineStyle {
            colour: r.colour.unwrap_or(REF_GREY),
            dash: Dash::Dashed,
            width: 2,
        };
        stroke(root, vec![(pl as i32, py), (pr as i32, py)], style)?;
    }
    let styles = c.styles();
    for (l, &st) in c.lines.iter().zip(&styles) {
        let pts: Vec<Option<(f64, f64)>> =
            l.x.iter()
                .zip(&l.y)
                .map(|(&x, &y)| (c.x.usable(x) && c.y.usable(y)).then_some((x, y)))
                .collect();
        let drawable = pts.iter().flatten().count();
        for run in pts.split(Option::is_none) {
            let run: Vec<(f64, f64)> = run.iter().flatten().copied().collect();
            if run.len() >= 2 {
                let px = run.iter().map(|p| area.map_coordinate(p)).collect();
                stroke(root, px, st)?;
            }
            if l.markers.unwrap_or(run.len() == 1 || drawable <= 12) {
                for &p in &run {
                    area.draw(&Circle::new(p, st.width + 2, rgb(st.colour).filled()))
                        .map_err(err)?;
                }
            }
        }
    }
    for n in &c.notes {
        if !(c.x.usable(n.x) && c.y.usable(n.y)) {
            continue;
        }
        let col = rgb(n.colour.unwrap_or(INK));
        area.draw(&Circle::new((n.x, n.y), 5, col.stroke_width(2)))
            .map_err(err)?;
        let (px, py) = area.map_coordinate(&(n.x, n.y));
        let w = super::text_width(&n.label, LABEL_PX) as i32;
        let tx = if px + 8 + w > pr as i32 { px - 8 - w } else { px + 8 };
        let ty = (py - 20).max(pt as i32 + 2);
        root.draw(&Text::new(n.label.clone(), (tx, ty), font(LABEL_PX).color(&ink)))
            .map_err(err)?;
    }
    if let Some(cap) = &c.caption {
        let y = lay.height as i32 - super::CAPTION_H as i32 + 2;
        root.draw(&Text::new(cap.clone(), (pl as i32, y), font(LABEL_PX).color(&ink)))
            .map_err(err)?;
    }
    legend(root, c, &styles)
}

/// The legend in columns right of the plotting area.
fn legend(root: &DrawingArea<BitMapBackend, Shift>, c: &Chart, styles: &[LineStyle]) -> Result<(), String> {
    let lay = c.layout();
    let names = c.legend_names();
    if names.is_empty() {
        return Ok(());
    }
    let per_col = names.len().div_ceil(lay.legend_cols.max(1) as usize);
    let entries = c
        .lines
        .iter()
        .zip(styles)
        .filter(|(l, _)| !l.name.is_empty())
        .map(|(_, s)| *s)
        .chain(c.refs.iter().map(|r| LineStyle {
            colour: r.colour.unwrap_or(REF_GREY),
            dash: Dash::Dashed,
            width: 2,
        }));
    let font = (FONT, f64::from(LABEL_PX)).into_font().color(&rgb(INK));
    for (k, (name, st)) in names.iter().zip(entries).enumerate() {
        let col = (k / per_col) as u32;
        let row = (k % per_col) as u32;
        let x = (lay.legend_x + col * lay.legend_col_w) as i32;
        let y = (lay.plot.1 + 6 + row * super::LEGEND_ROW) as i32;
        stroke(root, vec![(x, y + 8), (x + super::SWATCH as i32, y + 8)], st)?;
        root.draw(&Text::new(
            name.clone(),
            (x + super::SWATCH as i32 + 8, y),
            font.clone(),
        ))
        .map_err(err)?;
    }
    Ok(())
}
