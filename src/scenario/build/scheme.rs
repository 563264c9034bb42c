//! The numerical and run settings: the `[scheme]` section (limiter, time scheme and solver
//! settings), the `[run]` section (end time and cadence) and the `[output]` section.

use super::super::reader::{check, suggestion, Problems, Section};
use super::super::{OutputSettings, RunSettings};
use super::{optional_table, positive, required_table, MAX_FRAMES, MAX_PARTICLES, OUTPUT, RUN, SCHEME};
use crate::diagnostics::advice::sig;
use crate::ops::limiter::Limiter;
use crate::output::colour::ColourScale;
use crate::step::{Scheme, TimeScheme};
use std::path::PathBuf;
use toml::Table;

/// `[scheme]`.
pub(super) fn scheme_section(root: Section, p: &mut Problems) -> Option<Scheme> {
    let empty = Table::new();
    let s = optional_table(root, "scheme", &empty, p)?;
    s.check_keys(SCHEME, "in [scheme]", p);
    let mut scheme = Scheme::default();
    let mut ok = true;
    if let Some(name) = s.string("convection", p) {
        match name.parse::<Limiter>() {
            Ok(l) => scheme.limiter = l,
            Err(e) => {
                let names: Vec<&str> = Limiter::EVERY.iter().map(|l| l.name()).collect();
                p.add("scheme.convection", format!("{e}{}", suggestion(name, &names)));
                ok = false;
            }
        }
    }
    if let Some(t) = s.string("time", p) {
        match t.parse::<TimeScheme>() {
            Ok(ts) => {
                scheme.time = ts;
                scheme.courant = ts.default_courant();
            }
            Err(e) => {
                let names: Vec<&str> = TimeScheme::ALL.iter().map(|t| t.name()).collect();
                p.add("scheme.time", format!("{e}{}", suggestion(t, &names)));
                ok = false;
            }
        }
    }
    if s.has("theta") {
        match check(
            s.num("theta", p),
            "scheme.theta",
            |t| (0.5..=1.0).contains(&t),
            "a number from 0.5 (Crank-Nicolson) to 1 (backward Euler)",
            p,
        ) {
            Some(t) if matches!(scheme.time, TimeScheme::CrankNicolson | TimeScheme::Imex) => scheme.theta = Some(t),
            Some(_) => {
                p.add(
                    "scheme.theta",
                    "applies only with time = \"crank_nicolson\" or \"imex\"",
                );
                ok = false;
            }
            None => ok = false,
        }
    }
    if s.has("tolerance") {
        match check(
            s.num("tolerance", p),
            "scheme.tolerance",
            |t| t > 0.0 && t < 1.0,
            "a number in (0, 1)",
            p,
        ) {
            Some(t) => scheme.tolerance = t,
            None => ok = false,
        }
    }
    if s.has("max_iterations") {
        match s.int("max_iterations", 1, 100_000, p) {
            Some(n) => scheme.max_iterations = n as usize,
            None => ok = false,
        }
    }
    if s.has("stages") {
        match s.int("stages", 1, 3, p) {
            Some(n) => scheme.stages = n as u8,
            None => ok = false,
        }
    }
    if s.has("courant") {
        let explicit_convection = !scheme.time.implicit_convection();
        let (cap, rule) = if explicit_convection {
            (
                1.0,
                "a number > 0 and at most 1 (the stability bound of explicit convection)",
            )
        } else {
            (1e6, "a number > 0 (implicit convection may exceed 1)")
        };
        match check(s.num("courant", p), "scheme.courant", |c| c > 0.0 && c <= cap, rule, p) {
            Some(c) => scheme.courant = c,
            None => ok = false,
        }
    }
    if s.has("dt") && s.has("courant") {
        p.add(
            "scheme.courant",
            "scheme.dt is given too: a fixed dt replaces the automatic step from the Courant number, so one of them would be ignored; give scheme.dt or scheme.courant, not both",
        );
        ok = false;
    }
    if s.has("dt") {
        match positive(s.num("dt", p), "scheme.dt", p) {
            Some(dt) => scheme.dt = Some(dt),
            None => ok = false,
        }
    }
    ok.then_some(scheme)
}

/// `[run]`.
pub(super) fn run_section(root: Section, p: &mut Problems) -> Option<RunSettings> {
    let s = required_table(root, "run", p)?;
    s.check_keys(RUN, "in [run]", p);
    let end = positive(s.req_num("end", "the end time in seconds", p), "run.end", p);
    let frames = if s.has("frames") {
        s.int("frames", 1, MAX_FRAMES, p)
    } else {
        Some(10)
    };
    let log_every = if s.has("log_every") {
        s.int("log_every", 1, i64::MAX, p)
    } else {
        Some(10)
    };
    let checkpoint_every = if s.has("checkpoint_every") {
        Some(positive(s.num("checkpoint_every", p), "run.checkpoint_every", p))
    } else {
        None
    };
    let particles = if s.has("particles") {
        Some(s.int("particles", 1, MAX_PARTICLES, p))
    } else {
        None
    };
    Some(RunSettings {
        end: end?,
        frames: usize::try_from(frames?).ok()?,
        log_every: u64::try_from(log_every?).ok()?,
        checkpoint_every: match checkpoint_every {
            Some(v) => Some(v?),
            None => None,
        },
        particles: match particles {
            Some(n) => Some(usize::try_from(n?).ok()?),
            None => None,
        },
    })
}

/// `[output]`.
pub(super) fn output_section(root: Section, p: &mut Problems) -> Option<OutputSettings> {
    let empty = Table::new();
    let s = optional_table(root, "output", &empty, p)?;
    s.check_keys(OUTPUT, "in [output]", p);
    let before = p.len();
    let dir = s.string("dir", p).unwrap_or("out");
    if dir.trim().is_empty() {
        p.add("output.dir", "must not be empty (the default is \"out\")");
    }
    let colour = match s.table.get("colour") {
        None => ColourScale::Linear,
        Some(_) => match s.choice("colour", &["linear", "log"], p) {
            Some("log") => ColourScale::Log,
            _ => ColourScale::Linear,
        },
    };
    let range = s.pair("range", p);
    if let Some((lo, hi)) = range {
        let span = hi - lo;
        if lo >= hi {
            p.add(
                "output.range",
                format!(
                    "[{}, {}] is not allowed: must be [lo, hi] with lo < hi",
                    sig(lo, 4),
                    sig(hi, 4)
                ),
            );
        } else if !span.is_normal() {
            // Too narrow (subnormal: no colour bar can be divided) or too wide (overflow).
            p.add(
                "output.range",
                format!(
                    "[{}, {}] is not allowed: hi - lo must lie between {} and {} (a finite, \
                     drawable width); widen the range, or omit it to follow the data",
                    sig(lo, 4),
                    sig(hi, 4),
                    sig(f64::MIN_POSITIVE, 4),
                    sig(f64::MAX, 4)
                ),
            );
        } else if colour == ColourScale::Log && lo <= 0.0 {
            p.add(
                "output.range[0]",
                format!(
                    "{} is not allowed with colour = \"log\": the low end must be > 0",
                    sig(lo, 4)
                ),
            );
        }
    }
    let animation = match s.table.get("animation") {
        None => false,
        Some(toml::Value::Boolean(b)) => *b,
        Some(other) => {
            p.add(
                "output.animation",
                format!(
                    "expected true or false, found {}",
                    super::super::reader::type_name(other)
                ),
            );
            false
        }
    };
    (p.len() == before).then(|| OutputSettings {
        dir: PathBuf::from(dir),
        colour,
        range,
        animation,
    })
}
