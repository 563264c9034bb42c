//! The scenario as run, written back as TOML with every default filled in (the output folder's
//! `scenario.toml`). Numbers are written in Rust's shortest round-trip form, so reading the text
//! back gives bit-identical values; the land image is written as an absolute path.

use super::Scenario;
use crate::flow::FlowKind;
use crate::initial::Initial;
use crate::ops::boundary::{Side, SideKind};
use crate::ops::sources::Release;
use crate::output::colour::ColourScale;
use toml::Value;

/// A number as TOML (always with a decimal point or an exponent).
fn num(x: f64) -> String {
    format!("{x:?}")
}

/// A pair as a TOML array.
fn pair((a, b): (f64, f64)) -> String {
    format!("[{}, {}]", num(a), num(b))
}

/// A string as a TOML basic string.
fn text(s: &str) -> String {
    Value::String(s.to_string()).to_string()
}

/// Writes the resolved scenario.
pub(super) fn write(s: &Scenario) -> String {
    let mut o = String::new();
    // Writing to a String cannot fail; the results are ignored through this helper.
    let mut line = |l: String| {
        o.push_str(&l);
        o.push('\n');
    };
    line(format!(
        "# The scenario {} as run, every default filled in.",
        s.path.display()
    ));
    line(format!("name = {}", text(&s.name)));
    let m = &s.model;
    let g = &m.grid;
    line(String::new());
    line("[grid]".into());
    line(format!("nx = {}", g.nx));
    line(format!("ny = {}", g.ny));
    line(format!("dx = {}", num(g.dx)));
    line(format!("dy = {}", num(g.dy)));
    line(format!("origin = {}", pair((g.x0, g.y0))));
    match (&s.depth_file, m.depth.uniform()) {
        (Some((file, range)), _) => {
            line(format!("depth = {}", text(&file.to_string_lossy())));
            if let Some(r) = range {
                line(format!("depth_range = {}", pair(*r)));
            }
        }
        (None, Some(h)) => line(format!("depth = {}", num(h))),
        (None, None) => line("# depth: a field given in code, not written here".into()),
    }
    if let Some(land) = &s.land {
        line(format!("land = {}", text(&land.to_string_lossy())));
    }
    line(String::new());
    line("[tracer]".into());
    line(format!("name = {}", text(&s.tracer.name)));
    line(format!("units = {}", text(&s.tracer.units)));
    line(format!("diffusivity = {}", pair((m.kx, m.ky))));
    line(format!("decay_rate = {}", num(m.decay_rate)));
    if m.decay_rate > 0.0 {
        line(format!(
            "# T90 = ln 10 / decay_rate = {} s",
            std::f64::consts::LN_10 / m.decay_rate
        ));
    }
    line(String::new());
    line("[flow]".into());
    let mut openings = None;
    match m.flow.kind {
        FlowKind::Uniform { u, v } => {
            line("kind = \"uniform\"".into());
            line(format!("velocity = {}", pair((u, v))));
        }
        FlowKind::Rotation { centre, period } => {
            line("kind = \"rotation\"".into());
            line(format!("centre = {}", pair(centre)));
            line(format!("period = {}", num(period)));
        }
        FlowKind::Swirl { period, speed } => {
            line("kind = \"swirl\"".into());
            line(format!("period = {}", num(period)));
            line(format!("speed = {}", num(speed)));
        }
        FlowKind::Vortex { speed } => {
            line("kind = \"vortex\"".into());
            line(format!("speed = {}", num(speed)));
        }
        FlowKind::Openings(ref list) => {
            line("kind = \"openings\"".into());
            openings = Some(list);
        }
        FlowKind::File(ref f) => {
            line("kind = \"file\"".into());
            line(format!("path = {}", text(&f.path.to_string_lossy())));
        }
    }
    line(format!("project = {}", m.flow.project));
    if let Some(t) = m.flow.tide {
        line(format!(
            "tide = {{ period = {}, phase = {}, amplitude = {}, return_flow = {} }}",
            num(t.period),
            num(t.phase),
            num(t.amplitude),
            num(t.return_flow)
        ));
    }
    for o in openings.into_iter().flatten() {
        line(String::new());
        line("[[flow.opening]]".into());
        line(format!("name = {}", text(&o.name)));
        line(format!("side = \"{}\"", o.side.name()));
        line(format!("from = {}", num(o.from)));
        line(format!("to = {}", num(o.to)));
        line(format!("discharge = {}", num(o.discharge)));
        if let Some(s) = o.share {
            line(format!("share = {}", num(s)));
        }
    }
    line(String::new());
    line("[boundary]".into());
    for side in Side::ALL {
        let v = match m.boundaries.get(side) {
            SideKind::Wall => "\"wall\"".to_string(),
            SideKind::Periodic => "\"periodic\"".to_string(),
            SideKind::Open { value } => format!("{{ kind = \"open\", value = {} }}", num(value)),
            SideKind::Fixed { value } => format!("{{ kind = \"fixed\", value = {} }}", num(value)),
        };
        line(format!("{} = {v}", side.name()));
    }
    line(String::new());
    line("[initial]".into());
    match s.initial {
        Initial::Zero => line("kind = \"zero\"".into()),
        Initial::Uniform { value } => {
            line("kind = \"uniform\"".into());
            line(format!("value = {}", num(value)));
        }
        Initial::Gaussian { centre, sigma, peak } => {
            line("kind = \"gaussian\"".into());
            line(format!("centre = {}", pair(centre)));
            line(format!("sigma = {}", num(sigma)));
            line(format!("peak = {}", num(peak)));
        }
        Initial::Cone { centre, radius, peak } => {
            line("kind = \"cone\"".into());
            line(format!("centre = {}", pair(centre)));
            line(format!("radius = {}", num(radius)));
            line(format!("peak = {}", num(peak)));
        }
        Initial::SlottedDisk {
            centre,
            radius,
            slot_width,
            slot_length,
            value,
        } => {
            line("kind = \"slotted_disk\"".into());
            line(format!("centre = {}", pair(centre)));
            line(format!("radius = {}", num(radius)));
            line(format!("slot_width = {}", num(slot_width)));
            line(format!("slot_length = {}", num(slot_length)));
            line(format!("value = {}", num(value)));
        }
    }
    line(String::new());
    line("[scheme]".into());
    line(format!("convection = {}", text(s.scheme.limiter.name())));
    line(format!("time = {}", text(s.scheme.time.name())));
    line(format!("stages = {}", s.scheme.stages));
    // With a fixed step the Courant target is not used (both keys together are refused).
    if s.scheme.dt.is_none() {
        line(format!("courant = {}", num(s.scheme.courant)));
    }
    if s.scheme.time.is_implicit() {
        match s.scheme.theta {
            Some(th) => line(format!("theta = {}", num(th))),
            None => line(format!("# theta: default, {} here", num(s.scheme.effective_theta()))),
        }
        line(format!("tolerance = {}", num(s.scheme.tolerance)));
        line(format!("max_iterations = {}", s.scheme.max_iterations));
    }
    match s.scheme.dt {
        Some(dt) => line(format!("dt = {}", num(dt))),
        None => line("# dt: automatic, from the Courant number and the diffusion limit".into()),
    }
    line(String::new());
    line("[run]".into());
    line(format!("end = {}", num(s.run.end)));
    line(format!("frames = {}", s.run.frames));
    line(format!("log_every = {}", s.run.log_every));
    match s.run.checkpoint_every {
        Some(c) => line(format!("checkpoint_every = {}", num(c))),
        None => line("# checkpoint_every: about every 60 s of wall time".into()),
    }
    match s.run.particles {
        Some(n) => line(format!("particles = {n}")),
        None => line("# particles: no particle run beside (tinct particles runs one alone)".into()),
    }
    line(String::new());
    line("[output]".into());
    line(format!("dir = {}", text(&s.output.dir.to_string_lossy())));
    let colour = match s.output.colour {
        ColourScale::Linear => "linear",
        ColourScale::Log => "log",
    };
    line(format!("colour = \"{colour}\""));
    match s.output.range {
        Some(r) => line(format!("range = {}", pair(r))),
        None => line("# range: follows the data".into()),
    }
    line(format!("animation = {}", s.output.animation));
    for src in &m.sources {
        line(String::new());
        line("[[source]]".into());
        line(format!("name = {}", text(&src.name)));
        line(format!("at = {}", pair(src.at)));
        match src.release {
            Release::Instant { mass, at } => {
                line(format!("mass = {}", num(mass)));
                line(format!("start = {}", num(at)));
            }
            Release::Continuous { rate, start, stop } => {
                line(format!("rate = {}", num(rate)));
                line(format!("start = {}", num(start)));
                if stop.is_finite() {
                    line(format!("stop = {}", num(stop)));
                } else {
                    line("# stop: none, the release lasts to the end of the run".into());
                }
            }
        }
        match src.spread {
            Some(r) => line(format!("spread = {}", num(r))),
            None => line("# spread: none, released into the containing cell".into()),
        }
    }
    for r in &s.receptors {
        line(String::new());
        line("[[receptor]]".into());
        line(format!("name = {}", text(&r.name)));
        line(format!("at = {}", pair(r.at)));
        if let Some(t) = r.threshold {
            line(format!("threshold = {}", num(t)));
        }
    }
    for c in &s.candidates {
        line(String::new());
        line("[[candidate]]".into());
        line(format!("name = {}", text(&c.name)));
        line(format!("at = {}", pair(c.at)));
    }
    o
}
