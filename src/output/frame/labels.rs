//! The text of a frame: the simulated time as a readable label and the colour bar's tick
//! values and labels (linear or by decade).

use super::super::colour::ColourScale;

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
pub(super) fn ticks(lo: f64, hi: f64, scale: ColourScale) -> Vec<(f64, String)> {
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

/// Most ticks a linear bar ever gets (the step search aims at 3 to 5).
const MAX_LINEAR_TICKS: f64 = 8.0;

/// "Nice" ticks (1, 2 or 5 times a power of ten, 2.5 as a fallback),
/// preferring 3 to 5 ticks.
///
/// A span too narrow for a normal step (zero, subnormal: `[0, 5e-324]`) or one the step
/// search cannot divide gets ticks at its two ends instead, so no range can ask for an
/// unbounded number of ticks.
pub(super) fn linear_ticks(lo: f64, hi: f64) -> Vec<(f64, String)> {
    let span = hi - lo;
    if !(span.is_finite() && span > 0.0) {
        return single_tick(lo);
    }
    let mag = 10f64.powf((span / 4.0).log10().floor());
    if !mag.is_normal() {
        return end_ticks(lo, hi);
    }
    let count = |step: f64| ((hi / step).floor() - (lo / step).ceil() + 1.0).max(0.0);
    let candidates = [1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 2.5, 25.0].map(|m| m * mag);
    let step = candidates
        .iter()
        .copied()
        .find(|&s| (3.0..=5.0).contains(&count(s)))
        .or_else(|| candidates.iter().copied().find(|&s| count(s) <= 5.0))
        .unwrap_or(span);
    let (first, last) = ((lo / step).ceil(), (hi / step).floor());
    if !(step.is_normal() && first.is_finite() && last.is_finite() && last - first < MAX_LINEAR_TICKS) {
        return end_ticks(lo, hi);
    }
    let vals: Vec<f64> = (first as i64..=last as i64).map(|k| k as f64 * step).collect();
    let labels = format_ticks(&vals, |_| step);
    vals.into_iter().zip(labels).collect()
}

/// Ticks at the two ends of a range `lo < hi`, labelled to the resolution of the span.
fn end_ticks(lo: f64, hi: f64) -> Vec<(f64, String)> {
    let vals = [lo, hi];
    let span = hi - lo;
    let labels = format_ticks(&vals, |_| span);
    vals.into_iter().zip(labels).collect()
}
