//! Advice in plain words about a run's numerical choices, from its [`RegimeReport`] and
//! [`Scheme`]: unbounded convection where the cell Peclet number exceeds 2, an explicit step
//! near or above a stability limit, upwind's numerical diffusion against the physical one and
//! the spacing that would tame it, and the time-scheme warnings of
//! [`crate::step::scheme_warnings`] (Crank–Nicolson, deferred correction), which are reused,
//! not repeated here. Shared by `tinct check`, the start of `tinct run` and `summary.json`.

use super::regime::{RegimeReport, PECLET_SWITCH};
use crate::model::Model;
use crate::step::{scheme_warnings, Scheme, TimeScheme};

/// How much an item matters.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    /// Worth knowing; the run is fine as written.
    Note,
    /// The results will show a numerical artefact, or the step is close to a limit.
    Warning,
    /// The scenario cannot run as written (a fixed step above an explicit stability limit).
    Blocking,
}

impl Severity {
    /// The word printed before the text.
    pub fn word(self) -> &'static str {
        match self {
            Severity::Note => "note",
            Severity::Warning => "warning",
            Severity::Blocking => "cannot run",
        }
    }
}

/// One piece of advice.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Advice {
    /// How much it matters.
    pub severity: Severity,
    /// What to know or do, in words.
    pub text: String,
}

/// Share as a whole percentage, never rounding a non-zero share to 0 or a partial one to 100.
pub fn percent(share: f64) -> String {
    let p = 100.0 * share;
    if p > 0.0 && p < 1.0 {
        "<1%".into()
    } else if p > 99.0 && p < 100.0 {
        ">99%".into()
    } else {
        format!("{p:.0}%")
    }
}

/// `x` with `digits` significant digits, fixed-point between 1e-3 and 1e6, else scientific;
/// infinities as `infinite`.
pub fn sig(x: f64, digits: usize) -> String {
    if x.is_infinite() {
        return "infinite".into();
    }
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let e = x.abs().log10().floor() as i32;
    if (-3..6).contains(&e) {
        let d = (digits as i32 - 1 - e).max(0) as usize;
        let t = format!("{x:.d$}");
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    } else {
        format!("{x:.*e}", digits.saturating_sub(1))
    }
}

/// A ratio in words-friendly precision.
fn times(x: f64) -> String {
    if x >= 10.0 {
        format!("{x:.0}")
    } else {
        format!("{x:.2}")
    }
}

/// The numerical-diffusion sentence, e.g. "first-order upwind would add a numerical
/// diffusivity of about 4.0 times the physical one (median over the water), more than the
/// physical one over 60% of the basin, 6.1 times at the 95th percentile".
pub fn diffusion_sentence(r: &RegimeReport) -> String {
    let d = &r.diffusion_ratio;
    if r.max_speed == 0.0 {
        return "the water does not move: convection, and upwind's numerical diffusion, are absent".into();
    }
    if r.kx == 0.0 && r.ky == 0.0 {
        return format!(
            "no physical diffusivity: every spreading in the results is numerical (first-order upwind would add up to {} m2/s along x and {} m2/s along y)",
            sig(r.numerical_kx.max, 3),
            sig(r.numerical_ky.max, 3)
        );
    }
    format!(
        "first-order upwind numerical diffusion is about {} times the physical diffusivity (median over the water), above it over {} of the basin and {} times at the 95th percentile",
        times(d.median),
        percent(r.share_ratio_above_1),
        times(d.p95)
    )
}

/// The spacing suggestion, if the numerical diffusivity exceeds the physical one in places.
fn spacing_sentence(r: &RegimeReport) -> Option<String> {
    let mut parts = Vec::new();
    if let Some(h) = r.suggested_dx {
        parts.push(format!("dx <= {} m (now {})", sig(h, 3), sig(r.dx, 3)));
    }
    if let Some(h) = r.suggested_dy {
        parts.push(format!("dy <= {} m (now {})", sig(h, 3), sig(r.dy, 3)));
    }
    (!parts.is_empty()).then(|| {
        format!(
            "{} at the same Courant number would bring upwind's numerical diffusivity below the physical one over 95% of the basin",
            parts.join(" and ")
        )
    })
}

/// Advice for running `model` with `scheme` at the report's step, most severe first.
pub fn advise(model: &Model, scheme: &Scheme, r: &RegimeReport) -> Vec<Advice> {
    let mut out = Vec::new();
    let mut add = |severity, text: String| out.push(Advice { severity, text });
    let lname = scheme.limiter.name();
    let explicit_convection = !scheme.time.implicit_convection();

    // Step size against the explicit limits.
    if r.limits.binding.is_finite() && r.dt.is_finite() {
        let which = if scheme.time == TimeScheme::Imex || r.limits.convection <= r.limits.diffusion {
            "convection (sum of Courant numbers <= 1)"
        } else {
            "diffusion (Kx dt/dx^2 + Ky dt/dy^2 <= 1/2)"
        };
        if r.dt_over_bound > 1.0 + 1e-12 {
            let sev = if r.dt_fixed {
                Severity::Blocking
            } else {
                Severity::Warning
            };
            add(
                sev,
                format!(
                    "the step dt = {} s is {:.2} times the explicit stability limit for {which}, {} s: the run will blow up; use dt <= {} s, or drop scheme.dt for the automatic step (--force runs it anyway, to demonstrate the instability)",
                    sig(r.dt, 4),
                    r.dt_over_bound,
                    sig(r.limits.binding, 4),
                    sig(r.limits.binding, 4)
                ),
            );
        } else if r.dt_over_bound >= 0.9 {
            add(
                Severity::Warning,
                format!(
                    "the step dt = {} s is {:.0}% of the explicit stability limit for {which}, {} s: a small change of flow or grid will make it unstable",
                    sig(r.dt, 4),
                    100.0 * r.dt_over_bound,
                    sig(r.limits.binding, 4)
                ),
            );
        }
        if scheme.time == TimeScheme::Explicit
            && r.dt <= r.limits.binding * (1.0 + 1e-12)
            && r.dt > r.limits.positivity * (1.0 + 1e-12)
        {
            add(
                Severity::Warning,
                format!(
                    "dt = {} s exceeds the positivity bound of upwind with diffusion, {} s: small negative concentrations may appear next to sharp fronts",
                    sig(r.dt, 4),
                    sig(r.limits.positivity, 4)
                ),
            );
        }
    }

    // Unbounded convection where convection dominates.
    if !scheme.limiter.is_bounded() {
        if r.share_peclet_above_2 > 0.0 {
            add(
                Severity::Warning,
                format!(
                    "'{lname}' convection where the cell Peclet number exceeds {PECLET_SWITCH} ({} of the wet cells, up to {}): expect oscillations, over- and undershoots and negative concentrations there (Patankar 1980); a bounded limiter such as van_leer or minmod avoids them",
                    percent(r.share_peclet_above_2),
                    sig(r.peclet_x.max.max(r.peclet_y.max), 3)
                ),
            );
        } else if explicit_convection && scheme.stages == 1 && r.max_speed > 0.0 {
            add(
                Severity::Warning,
                format!("'{lname}' convection with one forward-Euler stage is unstable for pure convection; use 2 or 3 stages or a bounded limiter"),
            );
        }
    }

    // Numerical against physical diffusion.
    if r.max_speed > 0.0 {
        let upwind = scheme.limiter == crate::ops::limiter::Limiter::Upwind;
        let big = r.kx == 0.0 && r.ky == 0.0 || r.diffusion_ratio.median > 1.0;
        let mut text = diffusion_sentence(r);
        if upwind && big {
            text.push_str(": with upwind convection the spread of a plume is mostly numerical; a bounded limiter such as van_leer keeps fronts much sharper");
        } else if scheme.limiter.is_peclet_switched() {
            text.push_str(&format!(
                " (for '{lname}', which is upwind wherever the cell Peclet number exceeds 2, this is what it adds there)"
            ));
        } else if scheme.limiter.is_bounded() {
            text.push_str(&format!(
                " (an upper bound for '{lname}', which falls back to upwind only near extrema and steep fronts)"
            ));
        } else {
            text.push_str(&format!(
                " (not what '{lname}' adds: it never falls back to upwind; it has no numerical diffusion of this kind but oscillates instead where the cell Peclet number exceeds 2)"
            ));
        }
        if let Some(s) = spacing_sentence(r) {
            text.push_str("; ");
            text.push_str(&s);
        }
        let sev = if upwind && big {
            Severity::Warning
        } else {
            Severity::Note
        };
        add(sev, text);
    }

    // The time scheme's own warnings (Crank–Nicolson, deferred correction).
    for w in scheme_warnings(model, scheme, r.dt) {
        add(Severity::Warning, w);
    }

    // A flow that is not divergence-free (projection switched off).
    if r.flow.divergence > crate::flow::DIVERGENCE_TOLERANCE && !r.flow.projected {
        add(
            Severity::Warning,
            format!(
                "the flow is not divergence-free: a cell's net discharge reaches {} of the largest face discharge ({} 1/s; walls or land cut the through-flow). There the flow creates or removes water and even bounded schemes pile tracer up or make new extremes; set flow.project = true to remove the divergence around the land",
                sig(r.flow.divergence, 2),
                sig(r.max_divergence, 2)
            ),
        );
    }
    out.sort_by_key(|a| std::cmp::Reverse(a.severity));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percentages_never_round_to_the_ends() {
        assert_eq!(percent(0.0), "0%");
        assert_eq!(percent(0.001), "<1%");
        assert_eq!(percent(0.6), "60%");
        assert_eq!(percent(0.9999), ">99%");
        assert_eq!(percent(1.0), "100%");
    }
}
