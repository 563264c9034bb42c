//! The scenario in words for the run report: grid, depth, flow, tracer, releases, sides,
//! initial field, scheme and run length, each from the validated [`Scenario`].

use super::{esc, facts, mass_unit, mass_words, num, time};
use crate::depth::Depth;
use crate::flow::FlowKind;
use crate::initial::Initial;
use crate::ops::boundary::{Side, SideKind};
use crate::ops::sources::Release;
use crate::scenario::Scenario;

/// A point as `(x, y) m`.
fn at((x, y): (f64, f64)) -> String {
    format!("({}, {}) m", num(x), num(y))
}

/// The file name of a path (the whole path when it has none).
fn file_name(p: &std::path::Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| p.to_string_lossy().into_owned())
}

/// The depth in words.
fn depth(scn: &Scenario) -> String {
    match &scn.model.depth {
        Depth::Uniform(h) => format!("uniform, {} m", num(*h)),
        Depth::Field(v) => {
            let (lo, hi) = v
                .iter()
                .filter(|h| h.is_finite() && **h > 0.0)
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &h| (a.min(h), b.max(h)));
            let from = scn
                .depth_file
                .as_ref()
                .map(|(p, _)| format!(" from {}", file_name(p)))
                .unwrap_or_default();
            if lo <= hi {
                format!("a field{from}, {} to {} m", num(lo), num(hi))
            } else {
                format!("a field{from}")
            }
        }
    }
}

/// The flow in words.
fn flow(scn: &Scenario) -> String {
    let f = &scn.model.flow;
    let mut s = match &f.kind {
        FlowKind::Uniform { u, v } => format!("uniform, u = {} m/s, v = {} m/s", num(*u), num(*v)),
        FlowKind::Rotation { centre, period } => format!(
            "solid-body rotation about {}, counter-clockwise, one turn in {}",
            at(*centre),
            time(*period)
        ),
        FlowKind::Swirl { period, speed } => format!(
            "time-reversing swirl, speed {} m/s, reversing at {} and home at {}",
            num(*speed),
            time(period / 2.0),
            time(*period)
        ),
        FlowKind::Vortex { speed } => format!("one steady vortex filling the grid, speed {} m/s", num(*speed)),
        FlowKind::Openings(list) => {
            let parts: Vec<String> = list
                .iter()
                .map(|o| {
                    format!(
                        "{} in the {} side from {} to {} m, {}",
                        o.name,
                        o.side.name(),
                        num(o.from),
                        num(o.to),
                        if o.discharge > 0.0 {
                            format!("{} m³/s in", num(o.discharge))
                        } else if o.discharge < 0.0 {
                            format!("{} m³/s out", num(-o.discharge))
                        } else {
                            "no through-flow".to_string()
                        }
                    )
                })
                .collect();
            format!("potential flow through openings: {}", parts.join("; "))
        }
        FlowKind::File(ff) => format!("read from {}", file_name(&ff.path)),
    };
    if let Some(t) = f.tide {
        s.push_str(&format!("; tide of period {}", time(t.period)));
        if t.amplitude > 0.0 {
            s.push_str(&format!(", level amplitude {} m", num(t.amplitude)));
        }
    }
    s
}

/// One release in words.
fn release(src: &crate::ops::sources::SourceSpec, units: &str, end: f64) -> String {
    let mu = mass_unit(units);
    let how = match src.release {
        Release::Instant { mass, at } => format!("{} at once at {}", mass_words(mass, units), time(at)),
        Release::Continuous { rate, start, stop } => {
            let until = if stop.is_finite() && stop < end {
                time(stop)
            } else {
                "the end of the run".into()
            };
            format!("{} {mu}/s from {} to {until}", num(rate), time(start))
        }
    };
    let spread = src
        .spread
        .map(|r| format!(", spread over a radius of {} m", num(r)))
        .unwrap_or_default();
    format!("{} at {}: {how}{spread}", src.name, at(src.at))
}

/// The initial field in words.
fn initial(i: &Initial) -> String {
    match *i {
        Initial::Zero => "none (clean water)".into(),
        Initial::Uniform { value } => format!("uniform, {}", num(value)),
        Initial::Gaussian { centre, sigma, peak } => {
            format!("Gaussian at {}, sigma {} m, peak {}", at(centre), num(sigma), num(peak))
        }
        Initial::Cone { centre, radius, peak } => {
            format!("cone at {}, radius {} m, peak {}", at(centre), num(radius), num(peak))
        }
        Initial::SlottedDisk {
            centre, radius, value, ..
        } => format!(
            "slotted disk at {}, radius {} m, value {}",
            at(centre),
            num(radius),
            num(value)
        ),
    }
}

/// The sides in words, e.g. `west open (inflow value 0), east wall, ...`.
fn sides(scn: &Scenario) -> String {
    Side::ALL
        .iter()
        .map(|&side| {
            let k = scn.model.boundaries.get(side);
            let what = match k {
                SideKind::Wall => "wall".to_string(),
                SideKind::Periodic => "periodic".to_string(),
                SideKind::Open { value } => format!("open (inflow value {})", num(value)),
                SideKind::Fixed { value } => format!("fixed value {}", num(value)),
            };
            format!("{} {what}", side.name())
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The scheme in words.
fn scheme(scn: &Scenario) -> String {
    let s = &scn.scheme;
    let mut t = format!("convection {}, time {}", s.limiter.name(), s.time.name());
    if !s.time.is_implicit() || s.time.name() == "imex" {
        t.push_str(&format!(
            " ({} stage{})",
            s.stages,
            if s.stages == 1 { "" } else { "s" }
        ));
    }
    match s.dt {
        Some(dt) => t.push_str(&format!(", fixed step {}", time(dt))),
        None => t.push_str(&format!(", automatic step at Courant number {}", num(s.courant))),
    }
    t
}

/// The scenario as a definition list (already escaped HTML).
pub(crate) fn in_words(scn: &Scenario) -> String {
    let m = &scn.model;
    let g = &m.grid;
    let mut grid = format!(
        "{} × {} cells of {} m × {} m, covering {} m × {} m from {}",
        g.nx,
        g.ny,
        num(g.dx),
        num(g.dy),
        num(g.dx * g.nx as f64),
        num(g.dy * g.ny as f64),
        at((g.x0, g.y0))
    );
    if let Some(land) = &scn.land {
        grid.push_str(&format!("; land from {}", file_name(land)));
    }
    let diffusivity = if m.kx == m.ky {
        format!("{} m²/s", num(m.kx))
    } else {
        format!("{} m²/s along x, {} m²/s along y", num(m.kx), num(m.ky))
    };
    let decay = if m.decay_rate > 0.0 {
        format!(
            "{} per second (T90 = {})",
            num(m.decay_rate),
            time(std::f64::consts::LN_10 / m.decay_rate)
        )
    } else {
        "none".into()
    };
    let releases = if m.sources.is_empty() {
        "none".to_string()
    } else {
        m.sources
            .iter()
            .map(|s| esc(&release(s, &scn.tracer.units, scn.run.end)))
            .collect::<Vec<_>>()
            .join("<br>")
    };
    let run = format!(
        "{} simulated, {} frames, a log row every {} step{}",
        time(scn.run.end),
        scn.run.frames + 1,
        scn.run.log_every,
        if scn.run.log_every == 1 { "" } else { "s" }
    );
    facts(&[
        ("Grid", esc(&grid)),
        ("Depth", esc(&depth(scn))),
        ("Flow", esc(&flow(scn))),
        (
            "Tracer",
            esc(&format!("{}, concentration in {}", scn.tracer.name, scn.tracer.units)),
        ),
        ("Diffusivity", esc(&diffusivity)),
        ("Decay", esc(&decay)),
        ("Releases", releases),
        ("Initial field", esc(&initial(&scn.initial))),
        ("Sides", esc(&sides(scn))),
        ("Scheme", esc(&scheme(scn))),
        ("Run", esc(&run)),
    ])
}
