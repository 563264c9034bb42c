//! The `[tracer]` section: the tracer's name and units, its diffusivities and its decay rate.

use super::super::reader::{type_name, Problems, Section};
use super::super::TracerInfo;
use super::limits::{within, DIFFUSIVITY, MAX_DECAY_RATE, MIN_T90};
use super::{optional_table, TRACER};
use toml::{Table, Value};

/// `[tracer]`: info, diffusivities and decay rate (defaults when bad; problems are recorded).
pub(super) fn tracer_section(root: Section, p: &mut Problems) -> (TracerInfo, f64, f64, f64) {
    let empty = Table::new();
    let mut info = TracerInfo {
        name: "tracer".into(),
        units: "kg/m3".into(),
    };
    let Some(s) = optional_table(root, "tracer", &empty, p) else {
        return (info, 0.0, 0.0, 0.0);
    };
    s.check_keys(TRACER, "in [tracer]", p);
    if let Some(n) = s.string("name", p) {
        if n.trim().is_empty() {
            p.add("tracer.name", "must not be empty");
        }
        info.name = n.to_string();
    }
    if let Some(u) = s.string("units", p) {
        info.units = u.to_string();
    }
    let (mut kx, mut ky) = (0.0, 0.0);
    match s.table.get("diffusivity") {
        None => {}
        Some(Value::Array(_)) => {
            if let Some((a, b)) = s.pair("diffusivity", p) {
                kx = within(
                    Some(a),
                    "tracer.diffusivity[0]",
                    DIFFUSIVITY,
                    "m2/s",
                    "the diffusivity",
                    p,
                )
                .unwrap_or(0.0);
                ky = within(
                    Some(b),
                    "tracer.diffusivity[1]",
                    DIFFUSIVITY,
                    "m2/s",
                    "the diffusivity",
                    p,
                )
                .unwrap_or(0.0);
            }
        }
        Some(v @ (Value::Integer(_) | Value::Float(_))) => {
            let k = super::super::reader::number(v, "tracer.diffusivity", p);
            let k = within(k, "tracer.diffusivity", DIFFUSIVITY, "m2/s", "the diffusivity", p).unwrap_or(0.0);
            (kx, ky) = (k, k);
        }
        Some(other) => p.add(
            "tracer.diffusivity",
            format!("expected a number or [kx, ky] in m2/s, found {}", type_name(other)),
        ),
    }
    let rate = within(
        s.num("decay_rate", p),
        "tracer.decay_rate",
        (0.0, MAX_DECAY_RATE),
        "1/s",
        "the first-order decay rate; at most ln 10 per second, a T90 of 1 s",
        p,
    );
    let t90 = within(
        s.num("t90", p),
        "tracer.t90",
        (MIN_T90, f64::INFINITY),
        "s",
        "the time for 90% to decay",
        p,
    );
    let decay = if s.has("decay_rate") && s.has("t90") {
        p.add(
            "tracer.t90",
            "tracer.decay_rate is given too: give the decay as decay_rate (1/s) or as t90 (s), not both",
        );
        0.0
    } else {
        crate::ops::sources::decay_rate(rate, t90).unwrap_or(0.0)
    };
    (info, kx, ky, decay)
}
