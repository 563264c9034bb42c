//! The `[flow]` section (the velocity field, its openings or file, its tide and projection) and the `[boundary]` section (the
//! kind of each side, with the periodic pairing check).

use super::super::reader::{check, list, suggestion, type_name, Problems, Section};
use super::limits::{within, DEPTH, MAX_DISCHARGE, MAX_ORIGIN, MAX_SPEED, MIN_PERIOD};
use super::{optional_table, GridOut, FLOW_KINDS, OPENING, SIDE, SIDES, TIDE};
use crate::diagnostics::advice::sig;
use crate::flow::file::FlowFile;
use crate::flow::{FileFlow, FlowKind, FlowSpec, Opening, Tide};
use crate::grid::Mask;
use crate::ops::boundary::{Boundaries, Side, SideKind};
use std::path::Path;
use std::sync::Arc;
use toml::{Table, Value};

/// `[flow]` (still water when absent). A flow file is read here, for the grid (when the grid
/// section is valid) and checked to cover the run (`end`).
pub(super) fn flow_section(
    root: Section,
    path: &Path,
    grid: Option<&GridOut>,
    end: Option<f64>,
    p: &mut Problems,
) -> Option<FlowSpec> {
    let empty = Table::new();
    let s = optional_table(root, "flow", &empty, p)?;
    let kind = match s.string("kind", p) {
        None if s.has("kind") => return None,
        None => "uniform",
        Some(k) if FLOW_KINDS.contains(&k) => k,
        Some(k) => {
            p.add(
                "flow.kind",
                format!(
                    "unknown flow kind \"{k}\"{}; allowed: {}",
                    suggestion(k, FLOW_KINDS),
                    list(FLOW_KINDS)
                ),
            );
            return None;
        }
    };
    let ctx = format!("for flow kind \"{kind}\"");
    let keys = |own: &[&'static str]| -> Vec<&'static str> {
        ["kind", "tide", "project"].iter().chain(own).copied().collect()
    };
    let base = match kind {
        "uniform" => {
            s.check_keys(&keys(&["velocity"]), &ctx, p);
            let (u, v) = if s.has("velocity") {
                let (u, v) = s.pair("velocity", p)?;
                (speed(u, "flow.velocity[0]", p), speed(v, "flow.velocity[1]", p))
            } else {
                (Some(0.0), Some(0.0))
            };
            let (u, v) = (u?, v?);
            FlowKind::Uniform { u, v }
        }
        "rotation" => {
            s.check_keys(&keys(&["centre", "period"]), &ctx, p);
            let centre = s
                .req_pair("centre", "the centre of rotation [x, y]", p)
                .and_then(|(x, y)| {
                    let far = (-MAX_ORIGIN, MAX_ORIGIN);
                    let why = "the coordinates of the centre of rotation";
                    let x = within(Some(x), "flow.centre[0]", far, "m", why, p);
                    let y = within(Some(y), "flow.centre[1]", far, "m", why, p);
                    Some((x?, y?))
                });
            let period = within(
                s.req_num("period", "the period of one turn in seconds", p),
                "flow.period",
                (MIN_PERIOD, f64::INFINITY),
                "s",
                "the period",
                p,
            );
            FlowKind::Rotation {
                centre: centre?,
                period: period?,
            }
        }
        "swirl" => {
            s.check_keys(&keys(&["period", "speed"]), &ctx, p);
            let period = within(
                s.req_num("period", "the reversal period in seconds", p),
                "flow.period",
                (MIN_PERIOD, f64::INFINITY),
                "s",
                "the period",
                p,
            );
            let speed = if s.has("speed") {
                s.num("speed", p).and_then(|u| speed(u, "flow.speed", p))
            } else {
                Some(1.0)
            };
            FlowKind::Swirl {
                period: period?,
                speed: speed?,
            }
        }
        "openings" => {
            s.check_keys(&keys(&["opening"]), &ctx, p);
            FlowKind::Openings(openings(&s, p)?)
        }
        "file" => {
            s.check_keys(&keys(&["path"]), &ctx, p);
            if !s.require("path", "the flow file (CSV or NetCDF)", p) {
                return None;
            }
            let rel = s.string("path", p)?;
            let joined = path.parent().unwrap_or(Path::new("")).join(rel);
            let file = std::path::absolute(&joined).unwrap_or(joined);
            let g = grid?;
            let mask = g.mask.clone().unwrap_or_else(|| Mask::all_water(&g.grid));
            let data = match FlowFile::read(&file, &g.grid, &mask) {
                Ok(d) => d,
                Err(msg) => {
                    p.add("flow.path", msg);
                    return None;
                }
            };
            if let Some(end) = end {
                if !data.covers(0.0, end) {
                    p.add(
                        "flow.path",
                        format!(
                            "{}: its time axis runs from {} s to {} s but the run needs 0 s to run.end = {} s",
                            file.display(),
                            sig(data.times[0], 4),
                            sig(*data.times.last().unwrap_or(&0.0), 4),
                            sig(end, 4)
                        ),
                    );
                    return None;
                }
            }
            FlowKind::File(FileFlow {
                path: file,
                data: Arc::new(data),
            })
        }
        _ => {
            s.check_keys(&keys(&["speed"]), &ctx, p);
            let speed = if s.has("speed") {
                s.num("speed", p).and_then(|u| speed(u, "flow.speed", p))
            } else {
                Some(1.0)
            };
            FlowKind::Vortex { speed: speed? }
        }
    };
    let project = match s.table.get("project") {
        None => Some(true),
        Some(Value::Boolean(b)) => Some(*b),
        Some(other) => {
            p.add(
                "flow.project",
                format!("expected true or false, found {}", type_name(other)),
            );
            None
        }
    };
    let tide = match s.table("tide", p) {
        None if s.has("tide") => return None,
        None => None,
        Some(t) => {
            let ts = Section::new("flow.tide", t);
            ts.check_keys(TIDE, "in flow.tide", p);
            let period = within(
                ts.req_num("period", "the tidal period in seconds", p),
                "flow.tide.period",
                (MIN_PERIOD, f64::INFINITY),
                "s",
                "the tidal period; 12.42 h = 44712 s",
                p,
            );
            let phase = if ts.has("phase") { ts.num("phase", p) } else { Some(0.0) };
            let amplitude = if ts.has("amplitude") {
                within(
                    ts.num("amplitude", p),
                    "flow.tide.amplitude",
                    (0.0, DEPTH.1),
                    "m",
                    "the rise and fall of the level, at most the deepest water depth",
                    p,
                )
            } else {
                Some(0.0)
            };
            if amplitude.is_some_and(|a| a > 0.0) && kind != "openings" {
                p.add(
                    "flow.tide.amplitude",
                    "a rising and falling level needs flow.kind = \"openings\" (the basin fills and drains through them); use amplitude = 0 or describe the openings",
                );
                return None;
            }
            let return_flow = if ts.has("return_flow") {
                check(
                    ts.num("return_flow", p),
                    "flow.tide.return_flow",
                    |b| (0.0..1.0).contains(&b),
                    "a fraction from 0 up to (not including) 1",
                    p,
                )
            } else {
                Some(0.0)
            };
            Some(Tide {
                period: period?,
                phase: phase?,
                amplitude: amplitude?,
                return_flow: return_flow?,
            })
        }
    };
    Some(FlowSpec {
        kind: base,
        tide,
        project: project?,
    })
}

/// A velocity or speed within [`MAX_SPEED`] either way (a step for such speeds would be
/// vanishingly small and the run would never end).
fn speed(u: f64, key: &str, p: &mut Problems) -> Option<f64> {
    within(
        Some(u),
        key,
        (-MAX_SPEED, MAX_SPEED),
        "m/s",
        "a water speed; the fastest tidal races run at about 10 m/s",
        p,
    )
}

/// `[[flow.opening]]`: side, from, to, discharge (default 0), share and name.
fn openings(s: &Section, p: &mut Problems) -> Option<Vec<Opening>> {
    let items = match s.table.get("opening") {
        None => {
            p.add(
                "flow.opening",
                "missing: flow kind \"openings\" needs at least one [[flow.opening]] with side, from, to and discharge",
            );
            return None;
        }
        Some(Value::Array(items)) => items,
        Some(other) => {
            p.add(
                "flow.opening",
                format!(
                    "expected an array of tables (write [[flow.opening]] for each), found {}",
                    type_name(other)
                ),
            );
            return None;
        }
    };
    let mut out = Vec::new();
    let mut ok = true;
    for (k, item) in items.iter().enumerate() {
        let key = format!("flow.opening[{k}]");
        let Value::Table(t) = item else {
            p.add(
                &key,
                format!("expected a table ([[flow.opening]]), found {}", type_name(item)),
            );
            ok = false;
            continue;
        };
        let o = Section::new(&key, t);
        o.check_keys(OPENING, &format!("in {key}"), p);
        let side = if o.require("side", "the side the opening is in (west, east, south or north)", p) {
            o.choice("side", SIDES, p)
        } else {
            None
        };
        let far = (-MAX_ORIGIN, MAX_ORIGIN);
        let along = "a coordinate along the side, within any map's extent";
        let from = o.req_num("from", "where the opening starts along its side, m", p);
        let from = within(from, &o.key("from"), far, "m", along, p);
        let to = o.req_num("to", "where the opening ends along its side, m", p);
        let to = within(to, &o.key("to"), far, "m", along, p);
        let discharge = if o.has("discharge") {
            within(
                o.num("discharge", p),
                &o.key("discharge"),
                (-MAX_DISCHARGE, MAX_DISCHARGE),
                "m3/s",
                "the discharge, + into the domain; the largest ocean current carries about 1.5e8 m3/s",
                p,
            )
        } else {
            Some(0.0)
        };
        let share = if o.has("share") {
            check(
                o.num("share", p),
                &format!("{key}.share"),
                |v| (0.0..=1.0).contains(&v),
                "a fraction from 0 to 1",
                p,
            )
            .map(Some)
        } else {
            Some(None)
        };
        let name = if o.has("name") {
            let name = o.string("name", p).map(str::to_string);
            if let Some(n) = &name {
                super::sources::blank_name(&o, n, "the opening's label in summary.json and the report", p);
            }
            name.filter(|n| !n.trim().is_empty())
        } else {
            Some(format!("opening[{k}]"))
        };
        match (side, from, to, discharge, share, name) {
            (Some(side), Some(from), Some(to), Some(discharge), Some(share), Some(name)) => {
                let side = Side::ALL.into_iter().find(|x| x.name() == side).unwrap_or(Side::West);
                out.push(Opening {
                    name,
                    side,
                    from,
                    to,
                    discharge,
                    share,
                });
            }
            _ => ok = false,
        }
    }
    ok.then_some(out)
}

/// `[boundary]` (walls when absent), with the periodic pairing check.
pub(super) fn boundary_section(root: Section, p: &mut Problems) -> Option<Boundaries> {
    let empty = Table::new();
    let s = optional_table(root, "boundary", &empty, p)?;
    s.check_keys(SIDES, "in [boundary]", p);
    let mut b = Boundaries::walls();
    let mut ok = true;
    for side in Side::ALL {
        let key = format!("boundary.{}", side.name());
        let kind = match s.table.get(side.name()) {
            None => Some(SideKind::Wall),
            Some(v) => side_kind(v, &key, p),
        };
        match kind {
            Some(k) => match side {
                Side::West => b.west = k,
                Side::East => b.east = k,
                Side::South => b.south = k,
                Side::North => b.north = k,
            },
            None => ok = false,
        }
    }
    if !ok {
        return None;
    }
    let mut paired = true;
    for side in Side::ALL {
        let other = b.get(side.opposite());
        if b.get(side) == SideKind::Periodic && other != SideKind::Periodic {
            p.add(
                format!("boundary.{}", side.name()),
                format!(
                    "is periodic but boundary.{} is {}: periodic sides come in pairs (west with east, south with north)",
                    side.opposite().name(),
                    other.name()
                ),
            );
            paired = false;
        }
    }
    paired.then_some(b)
}

/// One side: `"wall" | "open" | "periodic" | { kind = "open" | "fixed", value }`.
fn side_kind(v: &Value, key: &str, p: &mut Problems) -> Option<SideKind> {
    const NAMES: &[&str] = &["wall", "open", "periodic"];
    match v {
        Value::String(s) => match s.as_str() {
            "wall" => Some(SideKind::Wall),
            "open" => Some(SideKind::Open { value: 0.0 }),
            "periodic" => Some(SideKind::Periodic),
            "fixed" => {
                p.add(
                    key,
                    "a fixed side needs its value: write { kind = \"fixed\", value = 1.0 }",
                );
                None
            }
            other => {
                p.add(
                    key,
                    format!(
                        "unknown side kind \"{other}\"{}; allowed: {}, or {{ kind = \"open\" | \"fixed\", value = number }}",
                        suggestion(other, NAMES),
                        list(NAMES)
                    ),
                );
                None
            }
        },
        Value::Table(t) => {
            let s = Section::new(key, t);
            s.check_keys(SIDE, &format!("in {key}"), p);
            let kind = if s.require("kind", "the side kind (\"open\" or \"fixed\")", p) {
                s.choice("kind", &["open", "fixed"], p)
            } else {
                None
            };
            let value = match kind {
                Some("fixed") if !s.has("value") => {
                    p.add(format!("{key}.value"), "missing: a fixed side needs its value");
                    None
                }
                _ if s.has("value") => s.num("value", p),
                _ => Some(0.0),
            };
            match (kind?, value?) {
                ("fixed", value) => Some(SideKind::Fixed { value }),
                (_, value) => Some(SideKind::Open { value }),
            }
        }
        other => {
            p.add(
                key,
                format!(
                    "expected \"wall\", \"open\", \"periodic\" or {{ kind = \"open\" | \"fixed\", value = number }}, found {}",
                    type_name(other)
                ),
            );
            None
        }
    }
}
