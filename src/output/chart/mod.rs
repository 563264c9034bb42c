//! Line charts drawn with `plotters` into an RGB image: one general description ([`Chart`]) of
//! a title, two axes (linear or logarithmic), lines, dashed horizontal reference lines, marked
//! points and a caption, used by every line chart tinct writes.
//!
//! Lines without an explicit colour take the project's palette in order; past the palette the
//! dash pattern changes too, so up to `PALETTE.len() * Dash::ALL.len()` lines all look
//! different. The legend sits to the right of the plotting area and is sized from its text;
//! the image widens rather than cutting a long name. Non-finite values, values outside an
//! explicit axis bound and non-positive values on a logarithmic axis break a line.

mod render;
pub(crate) use render::ensure_font;
#[cfg(test)]
mod tests;

use std::path::Path;

use image::RgbImage;

use super::text::text_width;
use super::OutputError;

/// An RGB colour.
pub type Rgb = [u8; 3];

/// Dark ink of emphasised lines (the reference) and text.
pub const INK: Rgb = super::draw::INK;

/// Line colours in order of use (the project's own choice of distinct hues).
pub const PALETTE: [Rgb; 8] = [
    [204, 85, 0],
    [0, 114, 178],
    [0, 150, 110],
    [170, 60, 150],
    [200, 160, 0],
    [90, 90, 200],
    [160, 40, 40],
    [60, 160, 200],
];

/// How a line is stroked.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Dash {
    /// Continuous.
    Solid,
    /// Dashes of 10 px with 6 px gaps.
    Dashed,
    /// Dots: 3 px with 4 px gaps.
    Dotted,
    /// Long dashes of 20 px with 6 px gaps.
    Long,
}

impl Dash {
    /// Every pattern, in the order automatic styles use them.
    pub const ALL: [Dash; 4] = [Dash::Solid, Dash::Dashed, Dash::Dotted, Dash::Long];

    /// Dash and gap lengths in pixels, `None` for a solid line.
    pub fn pattern(self) -> Option<(u32, u32)> {
        match self {
            Dash::Solid => None,
            Dash::Dashed => Some((10, 6)),
            Dash::Dotted => Some((3, 4)),
            Dash::Long => Some((20, 6)),
        }
    }
}

/// The automatic style of the `k`-th line without an explicit colour: palette colours first,
/// then the next dash pattern with the palette again.
pub fn auto_style(k: usize) -> (Rgb, Dash) {
    let n = PALETTE.len();
    (PALETTE[k % n], Dash::ALL[(k / n) % Dash::ALL.len()])
}

/// One axis.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Axis {
    /// Axis label, with units.
    pub label: String,
    /// Logarithmic scale.
    pub log: bool,
    /// Lower bound (otherwise from the data); values below it break lines.
    pub min: Option<f64>,
    /// Upper bound (otherwise from the data); values above it break lines.
    pub max: Option<f64>,
}

impl Axis {
    /// A linear axis labelled `label`.
    pub fn linear(label: impl Into<String>) -> Self {
        Self {
            label: label.into(),
            ..Self::default()
        }
    }

    /// A logarithmic axis labelled `label`.
    pub fn log(label: impl Into<String>) -> Self {
        Self {
            label: label.into(),
            log: true,
            ..Self::default()
        }
    }

    /// Whether `v` can be drawn on this axis.
    pub fn usable(&self, v: f64) -> bool {
        v.is_finite() && (!self.log || v > 0.0) && self.min.is_none_or(|m| v >= m) && self.max.is_none_or(|m| v <= m)
    }
}

/// One line of a chart.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Line {
    /// Legend name (no legend entry when empty).
    pub name: String,
    /// Abscissae.
    pub x: Vec<f64>,
    /// Ordinates, as many as `x` (extra values of either are ignored).
    pub y: Vec<f64>,
    /// Colour; `None` takes the next automatic style.
    pub colour: Option<Rgb>,
    /// Stroke; `None` takes the automatic one (solid for the first palette round).
    pub dash: Option<Dash>,
    /// Stroke width in pixels (0 means 2).
    pub width: u32,
    /// Drawn in dark ink and one pixel wider (a reference line).
    pub emphasis: bool,
    /// Dots at the data points; `None` draws them when there are 12 drawable points or fewer.
    pub markers: Option<bool>,
}

impl Line {
    /// A line with automatic style.
    pub fn new(name: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Self {
            name: name.into(),
            x,
            y,
            ..Self::default()
        }
    }

    /// The same line in `colour`.
    pub fn colour(mut self, colour: Rgb) -> Self {
        self.colour = Some(colour);
        self
    }

    /// The same line stroked with `dash`.
    pub fn dash(mut self, dash: Dash) -> Self {
        self.dash = Some(dash);
        self
    }

    /// The same line with (`true`) or without point markers.
    pub fn markers(mut self, on: bool) -> Self {
        self.markers = Some(on);
        self
    }

    /// The same line emphasised.
    pub fn emphasised(mut self) -> Self {
        self.emphasis = true;
        self
    }
}

/// A dashed horizontal line across the chart at `y`, with a legend entry.
#[derive(Debug, Clone, PartialEq)]
pub struct RefLine {
    /// Legend name.
    pub name: String,
    /// Level.
    pub y: f64,
    /// Colour (dark grey when `None`).
    pub colour: Option<Rgb>,
}

/// A marked point with a short label next to it ("arrival", "peak").
#[derive(Debug, Clone, PartialEq)]
pub struct Annotation {
    /// Position.
    pub x: f64,
    /// Position.
    pub y: f64,
    /// Label text.
    pub label: String,
    /// Marker colour (ink when `None`).
    pub colour: Option<Rgb>,
}

/// A line chart.
#[derive(Debug, Clone, PartialEq)]
pub struct Chart {
    /// Title on top.
    pub title: String,
    /// The x axis.
    pub x: Axis,
    /// The y axis.
    pub y: Axis,
    /// The lines, drawn in order.
    pub lines: Vec<Line>,
    /// Horizontal reference lines.
    pub refs: Vec<RefLine>,
    /// Marked points.
    pub notes: Vec<Annotation>,
    /// One line of text under the chart.
    pub caption: Option<String>,
    /// Requested image size in pixels; the width grows when the legend needs it.
    pub size: (u32, u32),
}

/// Default chart size, pixels.
pub const DEFAULT_SIZE: (u32, u32) = (900, 560);
/// Legend and tick label size, pixels per em.
pub(crate) const LABEL_PX: f32 = 13.0;
/// Longest legend name kept whole; longer ones end in an ellipsis.
pub const MAX_NAME_CHARS: usize = 120;
const LEFT: u32 = 84;
const TOP: u32 = 62;
const BOTTOM: u32 = 58;
const CAPTION_H: u32 = 26;
const MIN_PLOT_W: u32 = 420;
const SWATCH: u32 = 30;
const LEGEND_PAD: u32 = 14;
const LEGEND_ROW: u32 = 20;

/// Resolved appearance of one line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct LineStyle {
    /// Colour.
    pub colour: Rgb,
    /// Stroke.
    pub dash: Dash,
    /// Width in pixels.
    pub width: u32,
}

/// Pixel geometry of a chart image.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ChartLayout {
    /// Image width.
    pub width: u32,
    /// Image height.
    pub height: u32,
    /// Plotting area: left, top, right, bottom edges (pixels).
    pub plot: (u32, u32, u32, u32),
    /// Left edge of the legend.
    pub legend_x: u32,
    /// Legend columns.
    pub legend_cols: u32,
    /// Width of one legend column (swatch, gap, longest name, padding).
    pub legend_col_w: u32,
}

impl Chart {
    /// An empty chart of the default size.
    pub fn new(title: impl Into<String>, x: Axis, y: Axis) -> Self {
        Self {
            title: title.into(),
            x,
            y,
            lines: Vec::new(),
            refs: Vec::new(),
            notes: Vec::new(),
            caption: None,
            size: DEFAULT_SIZE,
        }
    }

    /// The style each line is drawn with, in line order.
    pub fn styles(&self) -> Vec<LineStyle> {
        let mut auto = 0;
        self.lines
            .iter()
            .map(|l| {
                let base = if l.width == 0 { 2 } else { l.width };
                if l.emphasis {
                    return LineStyle {
                        colour: l.colour.unwrap_or(INK),
                        dash: l.dash.unwrap_or(Dash::Solid),
                        width: base + 1,
                    };
                }
                let (c, d) = match l.colour {
                    Some(c) => (c, l.dash.unwrap_or(Dash::Solid)),
                    None => {
                        let (c, d) = auto_style(auto);
                        auto += 1;
                        (c, l.dash.unwrap_or(d))
                    }
                };
                LineStyle {
                    colour: c,
                    dash: d,
                    width: base,
                }
            })
            .collect()
    }

    /// Legend names in order (lines with a name, then reference lines), shortened to
    /// [`MAX_NAME_CHARS`].
    pub fn legend_names(&self) -> Vec<String> {
        self.lines
            .iter()
            .map(|l| l.name.as_str())
            .filter(|n| !n.is_empty())
            .chain(self.refs.iter().map(|r| r.name.as_str()))
            .map(shorten)
            .collect()
    }

    /// The image geometry: the legend's columns are as wide as the longest name; the image is
    /// widened when the plotting area would otherwise fall below a usable width.
    pub fn layout(&self) -> ChartLayout {
        let (w0, h0) = (self.size.0.max(320), self.size.1.max(240));
        let bottom = BOTTOM + if self.caption.is_some() { CAPTION_H } else { 0 };
        let plot_h = h0.saturating_sub(TOP + bottom).max(LEGEND_ROW);
        let names = self.legend_names();
        let text_w = names
            .iter()
            .map(|n| text_width(n, LABEL_PX).ceil() as u32)
            .max()
            .unwrap_or(0);
        let (cols, col_w) = if names.is_empty() {
            (0, 0)
        } else {
            let per_col = (plot_h / LEGEND_ROW).max(1) as usize;
            let cols = names.len().div_ceil(per_col) as u32;
            (cols, SWATCH + 8 + text_w + LEGEND_PAD)
        };
        let legend_w = LEGEND_PAD + cols * col_w;
        let right_pad = if cols == 0 { 30 } else { legend_w };
        let width = w0.max(LEFT + MIN_PLOT_W + right_pad);
        let plot_r = width - right_pad;
        ChartLayout {
            width,
            height: h0,
            plot: (LEFT, TOP, plot_r, TOP + plot_h),
            legend_x: plot_r + LEGEND_PAD,
            legend_cols: cols,
            legend_col_w: col_w,
        }
    }

    /// Draws the chart.
    pub fn render(&self) -> Result<RgbImage, OutputError> {
        render::render(self).map_err(|m| OutputError::invalid("<in-memory chart>", m))
    }

    /// Draws the chart and writes it as a PNG file at `path`, atomically.
    pub fn write(&self, path: &Path) -> Result<(), OutputError> {
        let img = render::render(self).map_err(|m| OutputError::invalid(path, m))?;
        super::plot::write_png(path, &img)
    }
}

/// `name` cut to [`MAX_NAME_CHARS`] characters with an ellipsis.
fn shorten(name: &str) -> String {
    if name.chars().count() <= MAX_NAME_CHARS {
        name.to_string()
    } else {
        let mut s: String = name.chars().take(MAX_NAME_CHARS - 1).collect();
        s.push('\u{2026}');
        s
    }
}

/// Short number for tick labels: plain decimals between 1e-3 and 1e5, else `1.5e-7`.
pub fn fmt_tick(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v == 0.0 { "0".into() } else { String::new() };
    }
    if (1e-3..1e5).contains(&v.abs()) {
        let s = format!("{v:.4}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        let s = format!("{v:.2e}");
        let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.');
        format!("{m}e{e}")
    }
}

/// Tick label on a logarithmic axis: the value when its mantissa is 1, 2 or 5, else nothing
/// (the grid line stays, unlabelled).
pub fn fmt_log_tick(v: f64) -> String {
    if !(v.is_finite() && v > 0.0) {
        return String::new();
    }
    let m = v / 10f64.powf(v.log10().floor());
    if [1.0, 2.0, 5.0, 10.0].iter().any(|k| (m - k).abs() < 1e-6 * k) {
        fmt_tick(v)
    } else {
        String::new()
    }
}

/// Axis range for drawable values in `[lo, hi]` (infinite when there are none): a 4 % margin
/// on linear axes, whole decades on log axes, a unit-wide range around a constant, explicit
/// bounds kept.
pub fn axis_range(axis: &Axis, lo: f64, hi: f64, pad: bool) -> (f64, f64) {
    let (mut lo, mut hi) = (axis.min.unwrap_or(lo), axis.max.unwrap_or(hi));
    if !(lo.is_finite() && hi.is_finite()) {
        (lo, hi) = match (lo.is_finite(), hi.is_finite()) {
            (true, _) => (lo, lo),
            (_, true) => (hi, hi),
            _ => (1.0, 1.0),
        };
    }
    if hi < lo {
        std::mem::swap(&mut lo, &mut hi);
    }
    if axis.log {
        let lo = if lo > 0.0 { lo } else { hi.max(1.0) * 1e-6 };
        let hi = hi.max(lo);
        let a = if axis.min.is_some() {
            lo
        } else {
            10f64.powf(lo.log10().floor())
        };
        let mut b = if axis.max.is_some() {
            hi
        } else {
            10f64.powf(hi.log10().ceil())
        };
        if b <= a * 1.0001 {
            b = a * 10.0;
        }
        // A hair wider, so that plotters' decade search finds the end decades themselves.
        return (a * (1.0 - 1e-9), b * (1.0 + 1e-9));
    }
    if hi - lo <= 1e-9 * hi.abs().max(lo.abs()) {
        let d = if lo == 0.0 { 1.0 } else { 0.5 * lo.abs() };
        lo -= d;
        hi += d;
    } else if pad {
        let m = 0.04 * (hi - lo);
        lo -= m;
        hi += m;
    }
    let (a, b) = (axis.min.unwrap_or(lo), axis.max.unwrap_or(hi));
    if b > a {
        (a, b)
    } else {
        (a, a + a.abs().max(1.0))
    }
}

/// Chooses the time unit for a run `t_end` seconds long: hours beyond 3 h, minutes beyond
/// 3 min, seconds otherwise. Returns the divisor and the unit.
pub fn time_unit(t_end: f64) -> (f64, &'static str) {
    if t_end > 3.0 * 3600.0 {
        (3600.0, "h")
    } else if t_end > 180.0 {
        (60.0, "min")
    } else {
        (1.0, "s")
    }
}
