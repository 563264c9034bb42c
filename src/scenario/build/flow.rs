//! The `[flow]` section (the velocity field and its tide) and the `[boundary]` section (the
//! kind of each side, with the periodic pairing check).

use super::super::reader::{list, suggestion, type_name, Problems, Section};
use super::{optional_table, positive, FLOW_KINDS, SIDE, SIDES};
use crate::flow::{FlowKind, FlowSpec, Tide};
use crate::ops::boundary::{Boundaries, Side, SideKind};
use toml::{Table, Value};

/// `[flow]` (still water when absent).
pub(super) fn flow_section(root: Section, p: &mut Problems) -> Option<FlowSpec> {
    let empty = Table::new();
    let s = optional_table(root, "flow", &empty, p)?;
    let kind = match s.string("kind", p) {
        None if s.has("kind") => return None,
        None => "uniform",
        Some(k @ ("openings" | "file")) => {
            p.add(
                "flow.kind",
                format!(
                    "flow kind \"{k}\" is not available in this version; available kinds: {}",
                    list(FLOW_KINDS)
                ),
            );
            return None;
        }
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
    let base = match kind {
        "uniform" => {
            s.check_keys(&["kind", "velocity", "tide"], &ctx, p);
            let (u, v) = if s.has("velocity") {
                s.pair("velocity", p)?
            } else {
                (0.0, 0.0)
            };
            FlowKind::Uniform { u, v }
        }
        "rotation" => {
            s.check_keys(&["kind", "centre", "period", "tide"], &ctx, p);
            let centre = s.req_pair("centre", "the centre of rotation [x, y]", p);
            let period = positive(
                s.req_num("period", "the period of one turn in seconds", p),
                "flow.period",
                p,
            );
            FlowKind::Rotation {
                centre: centre?,
                period: period?,
            }
        }
        "swirl" => {
            s.check_keys(&["kind", "period", "speed", "tide"], &ctx, p);
            let period = positive(
                s.req_num("period", "the reversal period in seconds", p),
                "flow.period",
                p,
            );
            let speed = if s.has("speed") { s.num("speed", p) } else { Some(1.0) };
            FlowKind::Swirl {
                period: period?,
                speed: speed?,
            }
        }
        _ => {
            s.check_keys(&["kind", "speed", "tide"], &ctx, p);
            let speed = if s.has("speed") { s.num("speed", p) } else { Some(1.0) };
            FlowKind::Vortex { speed: speed? }
        }
    };
    let tide = match s.table("tide", p) {
        None if s.has("tide") => return None,
        None => None,
        Some(t) => {
            let ts = Section::new("flow.tide", t);
            ts.check_keys(&["period", "phase"], "in flow.tide", p);
            if ts.has("amplitude") {
                // check_keys reported it as unknown; replace that with the precise reason.
                if let Some(last) = p.0.iter_mut().rev().find(|q| q.key == "flow.tide.amplitude") {
                    last.message =
                        "a tidal rise and fall of the level is not available in this version; allowed keys in flow.tide: `period`, `phase`"
                            .into();
                }
            }
            let period = positive(
                ts.req_num("period", "the tidal period in seconds", p),
                "flow.tide.period",
                p,
            );
            let phase = if ts.has("phase") { ts.num("phase", p) } else { Some(0.0) };
            Some(Tide {
                period: period?,
                phase: phase?,
            })
        }
    };
    Some(FlowSpec { kind: base, tide })
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
