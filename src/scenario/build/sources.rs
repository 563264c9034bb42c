//! The `[initial]` section (the initial field), the `[[source]]` releases and the
//! `[[receptor]]` points, the last two checked to lie on water within the grid.

use super::super::reader::{Problems, Section};
use super::super::{Candidate, Receptor};
use super::{
    check_point, non_negative, optional_table, positive, table_array, GridOut, CANDIDATE, INITIAL_KINDS, RECEPTOR,
    SOURCE,
};
use crate::initial::Initial;
use crate::ops::sources::{Release, SourceSpec};
use toml::Table;

/// `[initial]` (zero when absent).
pub(super) fn initial_section(root: Section, p: &mut Problems) -> Option<Initial> {
    let empty = Table::new();
    let s = optional_table(root, "initial", &empty, p)?;
    let kind = match s.table.get("kind") {
        None => "zero",
        Some(_) => s.choice("kind", INITIAL_KINDS, p)?,
    };
    let ctx = format!("for initial kind \"{kind}\"");
    let or_one = |key: &str, p: &mut Problems| if s.has(key) { s.num(key, p) } else { Some(1.0) };
    let pos = |key: &str, what: &str, p: &mut Problems| positive(s.req_num(key, what, p), &s.key(key), p);
    Some(match kind {
        "zero" => {
            s.check_keys(&["kind"], &ctx, p);
            Initial::Zero
        }
        "uniform" => {
            s.check_keys(&["kind", "value"], &ctx, p);
            Initial::Uniform {
                value: s.req_num("value", "the uniform value", p)?,
            }
        }
        "gaussian" => {
            s.check_keys(&["kind", "centre", "sigma", "peak"], &ctx, p);
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let sigma = pos("sigma", "the standard deviation sigma in m", p);
            let peak = or_one("peak", p);
            Initial::Gaussian {
                centre: centre?,
                sigma: sigma?,
                peak: peak?,
            }
        }
        "cone" => {
            s.check_keys(&["kind", "centre", "radius", "peak"], &ctx, p);
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let radius = pos("radius", "the base radius in m", p);
            let peak = or_one("peak", p);
            Initial::Cone {
                centre: centre?,
                radius: radius?,
                peak: peak?,
            }
        }
        _ => {
            s.check_keys(
                &["kind", "centre", "radius", "slot_width", "slot_length", "value"],
                &ctx,
                p,
            );
            let centre = s.req_pair("centre", "the centre [x, y]", p);
            let radius = pos("radius", "the disk radius in m", p);
            let slot_width = pos("slot_width", "the slot width in m", p);
            let slot_length = pos("slot_length", "the slot length in m", p);
            let value = or_one("value", p);
            Initial::SlottedDisk {
                centre: centre?,
                radius: radius?,
                slot_width: slot_width?,
                slot_length: slot_length?,
                value: value?,
            }
        }
    })
}

/// Reports a name that is empty or only blanks; `what` says where the name shows.
pub(super) fn blank_name(s: &Section, name: &str, what: &str, p: &mut Problems) {
    if name.trim().is_empty() {
        p.add(
            s.key("name"),
            format!("must not be empty: it is {what}; write a name, or leave the key out for a numbered one"),
        );
    }
}

/// `[[source]]`.
pub(super) fn source_section(
    root: Section,
    end: Option<f64>,
    grid: Option<&GridOut>,
    p: &mut Problems,
) -> Option<Vec<SourceSpec>> {
    let items = table_array(root, "source", p)?;
    let mut out = Vec::new();
    let mut names: Vec<String> = Vec::new();
    let before = p.len();
    for (label, t) in &items {
        let s = Section::new(label, t);
        s.check_keys(SOURCE, "in [[source]]", p);
        let name = s.string("name", p).map_or_else(|| label.clone(), str::to_string);
        blank_name(&s, &name, "the source's label on maps and in summary.json", p);
        if let Some(k) = names.iter().position(|n| *n == name) {
            p.add(s.key("name"), format!("\"{name}\" is already the name of source[{k}]"));
        }
        names.push(name.clone());
        let at = s.req_pair("at", "the release point [x, y]", p);
        if let (Some(at), Some(g)) = (at, grid) {
            check_point(&s.key("at"), at, g, p);
        }
        let start = if s.has("start") {
            non_negative(s.num("start", p), &s.key("start"), p)
        } else {
            Some(0.0)
        };
        if let (Some(t0), Some(end)) = (start, end) {
            if t0 > end {
                p.add(
                    s.key("start"),
                    format!("{t0} s is after the end of the run (run.end = {end} s): nothing would be released"),
                );
            }
        }
        let spread = s.num("spread", p).and_then(|r| positive(Some(r), &s.key("spread"), p));
        let release = match (s.has("mass"), s.has("rate")) {
            (true, true) => {
                p.add(
                    s.key("rate"),
                    "mass is given too: give mass (released at once at start) or rate (per second from start to stop), not both",
                );
                None
            }
            (false, false) => {
                p.add(
                    s.key("mass"),
                    "missing: give mass (released at once at start) or rate (per second from start to stop)",
                );
                None
            }
            (true, false) => {
                if s.has("stop") {
                    p.add(
                        s.key("stop"),
                        "applies to a continuous rate only; an instantaneous mass is released at start",
                    );
                }
                let mass = non_negative(s.num("mass", p), &s.key("mass"), p);
                Some(Release::Instant {
                    mass: mass?,
                    at: start?,
                })
            }
            (false, true) => {
                let rate = non_negative(s.num("rate", p), &s.key("rate"), p);
                let stop = if s.has("stop") {
                    s.num("stop", p)
                } else {
                    Some(f64::INFINITY)
                };
                if let (Some(t0), Some(t1)) = (start, stop) {
                    if t1 <= t0 {
                        p.add(s.key("stop"), format!("{t1} s is not after start = {t0} s"));
                    }
                }
                Some(Release::Continuous {
                    rate: rate?,
                    start: start?,
                    stop: stop?,
                })
            }
        };
        if let (Some(at), Some(release)) = (at, release) {
            out.push(SourceSpec {
                name,
                at,
                release,
                spread,
            });
        }
    }
    (p.len() == before).then_some(out)
}

/// `[[receptor]]` (positions are checked when the grid is valid).
pub(super) fn receptor_section(root: Section, grid: Option<&GridOut>, p: &mut Problems) -> Vec<Receptor> {
    let Some(items) = table_array(root, "receptor", p) else {
        return vec![];
    };
    let mut out: Vec<Receptor> = Vec::new();
    for (label, t) in &items {
        let s = Section::new(label, t);
        s.check_keys(RECEPTOR, "in [[receptor]]", p);
        let name = s.string("name", p).map_or_else(|| label.clone(), str::to_string);
        blank_name(&s, &name, "the receptor's column in receptors.csv", p);
        if let Some(k) = out.iter().position(|r| r.name == name) {
            p.add(
                s.key("name"),
                format!("\"{name}\" is already the name of receptor[{k}]"),
            );
        }
        let at = s.req_pair("at", "the receptor position [x, y]", p);
        if let (Some(at), Some(g)) = (at, grid) {
            check_point(&s.key("at"), at, g, p);
        }
        let threshold = non_negative(s.num("threshold", p), &s.key("threshold"), p);
        if let Some(at) = at {
            out.push(Receptor { name, at, threshold });
        }
    }
    out
}

/// `[[candidate]]`: candidate release points for the influence ranking (positions are checked,
/// on water within the grid, when the grid is valid).
pub(super) fn candidate_section(root: Section, grid: Option<&GridOut>, p: &mut Problems) -> Vec<Candidate> {
    let Some(items) = table_array(root, "candidate", p) else {
        return vec![];
    };
    let mut out: Vec<Candidate> = Vec::new();
    for (label, t) in &items {
        let s = Section::new(label, t);
        s.check_keys(CANDIDATE, "in [[candidate]]", p);
        let name = s.string("name", p).map_or_else(|| label.clone(), str::to_string);
        blank_name(&s, &name, "the candidate's row in candidates.csv", p);
        if let Some(k) = out.iter().position(|r| r.name == name) {
            p.add(
                s.key("name"),
                format!("\"{name}\" is already the name of candidate[{k}]"),
            );
        }
        let at = s.req_pair("at", "the candidate release point [x, y]", p);
        if let (Some(at), Some(g)) = (at, grid) {
            check_point(&s.key("at"), at, g, p);
        }
        if let Some(at) = at {
            out.push(Candidate { name, at });
        }
    }
    out
}
