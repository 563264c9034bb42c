//! Value mutations of every key of a shipped scenario's parsed document: wrong type, missing,
//! empty, negative, zero, NaN, infinity, huge and out of range values, unknown keys at each
//! table, and whole tables emptied, removed or replaced by a number.
//!
//! Which mutation must be refused is decided per key by the rules below, taken from the readers
//! in `src/scenario/build/` (which keys are required, which ranges are allowed) and from the
//! physical ranges in the README's scenario section; where a mutated value is legitimately
//! allowed (a negative origin, a zero diffusivity) the case only asserts that nothing panics.

use crate::case::{get, norm, show, with, Case, Expect, Node, Seg};
use toml::{Table, Value};

/// Keys for which a negative value is allowed (coordinates, signed velocities and discharges,
/// a phase, values whose sign is the user's choice).
const NEGATIVE_OK: &[&str] = &[
    "grid.origin",
    "flow.velocity",
    "flow.centre",
    "flow.speed",
    "flow.tide.phase",
    "flow.opening.discharge",
    // An opening need only overlap its side (`src/flow/openings.rs`).
    "flow.opening.from",
    "initial.centre",
    "initial.peak",
    "initial.value",
    "output.range",
];

/// Keys for which zero is allowed.
const ZERO_OK: &[&str] = &[
    "grid.origin",
    "tracer.diffusivity",
    "flow.velocity",
    "flow.centre",
    "flow.speed",
    "flow.tide.phase",
    "flow.tide.amplitude",
    "flow.opening.from",
    "flow.opening.discharge",
    "initial.centre",
    "initial.peak",
    "initial.value",
    "source.mass",
    "source.rate",
    "source.start",
    "source.at",
    "receptor.at",
    "receptor.threshold",
    "candidate.at",
    "output.range",
];

/// Keys for which 1e308 is allowed (periods and times with no upper bound, thresholds, a colour
/// range's top).
const HUGE_OK: &[&str] = &[
    "flow.period",
    "flow.tide.period",
    "flow.tide.phase",
    "tracer.t90",
    "source.stop",
    "receptor.threshold",
    "output.range",
    // A shape or spread wider than any grid covers it evenly.
    "initial.radius",
    "initial.sigma",
    "initial.slot_width",
    "initial.slot_length",
    "source.spread",
];

/// Strings that may be empty (units, which may be left blank for a dimensionless tracer).
const EMPTY_OK: &[&str] = &["tracer.units"];

/// Out-of-range values per key, beyond negative, zero and huge.
fn out_of_range(key: &str) -> Vec<Value> {
    let s = |x: &str| Value::String(x.into());
    match key {
        "name" => vec![s("a/b"), s(".hidden"), s("x".repeat(201).as_str())],
        "grid.nx" | "grid.ny" => vec![Value::Integer(1 << 21), Value::Float(1.5)],
        "scheme.stages" => vec![Value::Integer(4)],
        "scheme.courant" => vec![Value::Float(1.5)],
        "run.frames" => vec![Value::Integer(10_001)],
        "tracer.t90" => vec![Value::Float(0.5)],
        "tracer.diffusivity" => vec![Value::Float(2e6)],
        "grid.depth" | "grid.dx" => vec![Value::Float(5e-324)],
        "flow.kind" | "initial.kind" | "scheme.convection" | "output.colour" | "flow.opening.side" => {
            vec![s("nonsense")]
        }
        k if k.starts_with("boundary.") => vec![s("nonsense"), s("fixed")],
        _ => vec![],
    }
}

/// The keys that must be present (missing one is refused naming it), with the key(s) the
/// problem may be filed under; `None` when the key is optional.
fn required(doc: &Table, path: &[Seg]) -> Option<Vec<String>> {
    let key = show(path);
    let flow_kind = get(doc, &[Seg::Key("flow".into()), Seg::Key("kind".into())]).and_then(Value::as_str);
    let sibling = |name: &str| {
        let mut p = path[..path.len() - 1].to_vec();
        p.push(Seg::Key(name.into()));
        p
    };
    let n = norm(path);
    let yes = |keys: Vec<String>| Some(keys);
    match n.as_str() {
        "grid.nx" | "grid.ny" | "run.end" | "source.at" | "receptor.at" | "candidate.at" | "flow.tide.period" => {
            yes(vec![key])
        }
        "flow.opening.side" | "flow.opening.from" | "flow.opening.to" => yes(vec![key]),
        "grid.dx" if get(doc, &sibling("size")).is_none() => yes(vec![key]),
        "grid.size" if get(doc, &sibling("dx")).is_none() => yes(vec![key, "grid.dx".into()]),
        "flow.centre" | "flow.period" if matches!(flow_kind, Some("rotation" | "swirl")) => yes(vec![key]),
        "flow.opening" if flow_kind == Some("openings") => yes(vec![key]),
        "initial.centre" | "initial.radius" | "initial.sigma" | "initial.slot_width" | "initial.slot_length" => {
            yes(vec![key])
        }
        "source.mass" if get(doc, &sibling("rate")).is_none() => yes(vec![key]),
        "source.rate" if get(doc, &sibling("mass")).is_none() => yes(vec![key, show(&sibling("mass"))]),
        "grid" | "run" => yes(vec![key]),
        _ => None,
    }
}

/// Tables that may not be empty (their required keys), with the key the problem is filed under.
fn must_not_be_empty(n: &str) -> bool {
    matches!(
        n,
        "grid" | "run" | "source" | "receptor" | "candidate" | "flow.opening" | "flow.tide"
    )
}

fn text(doc: &Table) -> Vec<u8> {
    toml::to_string(doc).expect("a document serialises").into_bytes()
}

fn is_number(v: &Value) -> bool {
    matches!(v, Value::Integer(_) | Value::Float(_))
}

/// Every value mutation of `doc` (the parsed shipped scenario `scenario`).
pub fn mutations(scenario: &'static str, doc: &Table, out: &mut Vec<Case>) {
    let mut push = |category: &'static str, what: String, d: Table, expect: Expect| {
        out.push(Case {
            category,
            scenario,
            what,
            bytes: text(&d),
            extra: vec![],
            expect,
        });
    };
    // Unknown keys at the top level.
    let mut d = doc.clone();
    d.insert("bogus_key".into(), Value::Integer(1));
    push(
        "unknown key",
        "bogus_key at the top".into(),
        d,
        Expect::key("bogus_key"),
    );
    for Node { path, value } in crate::case::walk(doc) {
        let key = show(&path);
        let n = norm(&path);
        let in_array = matches!(path.last(), Some(Seg::Idx(_)));
        let mutate = |v: Option<Value>| with(doc, &path, v);
        // An opening's span is checked as a whole: a bad `from` may be reported at `to`.
        let blame = if matches!(n.as_str(), "flow.opening.from" | "flow.opening.to") {
            show(&path[..path.len() - 1])
        } else {
            key.clone()
        };
        let must = |ok: &[&str]| {
            if ok.contains(&n.as_str()) {
                Expect::NoPanic
            } else {
                Expect::key(&blame)
            }
        };
        match &value {
            Value::Table(t) => {
                let mut t2 = t.clone();
                t2.insert("bogus_key".into(), Value::Integer(1));
                push(
                    "unknown key",
                    format!("bogus_key in {key}"),
                    mutate(Some(Value::Table(t2))),
                    Expect::key(&format!("{key}.bogus_key")),
                );
                let empty_expect = if must_not_be_empty(&n) {
                    Expect::key(&key)
                } else {
                    Expect::NoPanic
                };
                push(
                    "empty",
                    format!("{key} = {{}}"),
                    mutate(Some(Value::Table(Table::new()))),
                    empty_expect,
                );
                push(
                    "wrong type",
                    format!("{key} = 1 (a table)"),
                    mutate(Some(Value::Integer(1))),
                    Expect::key(&key),
                );
                if !in_array {
                    let e = required(doc, &path).map_or(Expect::NoPanic, Expect::Key);
                    push("missing", format!("{key} removed"), mutate(None), e);
                }
            }
            Value::Array(a) if a.iter().all(Value::is_table) => {
                // An array of tables ([[source]], [[flow.opening]]).
                let e = required(doc, &path).map_or(Expect::NoPanic, Expect::Key);
                push("missing", format!("{key} removed"), mutate(None), e);
                push(
                    "wrong type",
                    format!("{key} = 1"),
                    mutate(Some(Value::Integer(1))),
                    Expect::key(&key),
                );
                let mut a2 = a.clone();
                a2.push(Value::Integer(3));
                let bad = format!("{key}[{}]", a.len());
                push(
                    "wrong type",
                    format!("{bad} = 3"),
                    mutate(Some(Value::Array(a2))),
                    Expect::key(&bad),
                );
            }
            Value::Array(a) => {
                push(
                    "empty",
                    format!("{key} = []"),
                    mutate(Some(Value::Array(vec![]))),
                    Expect::key(&key),
                );
                push(
                    "wrong type",
                    format!("{key} = true"),
                    mutate(Some(Value::Boolean(true))),
                    Expect::key(&key),
                );
                let mut short = a.clone();
                short.pop();
                push(
                    "out of range",
                    format!("{key} with one entry fewer"),
                    mutate(Some(Value::Array(short))),
                    Expect::key(&key),
                );
                let mut long = a.clone();
                long.push(Value::Float(1.0));
                push(
                    "out of range",
                    format!("{key} with one entry more"),
                    mutate(Some(Value::Array(long))),
                    Expect::key(&key),
                );
                if n == "output.range" {
                    let rev: Vec<Value> = a.iter().rev().cloned().collect();
                    push(
                        "out of range",
                        format!("{key} reversed"),
                        mutate(Some(Value::Array(rev))),
                        Expect::key(&key),
                    );
                }
                if !in_array {
                    let e = required(doc, &path).map_or(Expect::NoPanic, Expect::Key);
                    push("missing", format!("{key} removed"), mutate(None), e);
                }
            }
            scalar => {
                let wrong = if scalar.is_bool() {
                    Value::String("yes".into())
                } else {
                    Value::Boolean(true)
                };
                push(
                    "wrong type",
                    format!("{key} = {wrong}"),
                    mutate(Some(wrong)),
                    Expect::key(&key),
                );
                let mut inner = Table::new();
                inner.insert("x".into(), Value::Integer(1));
                push(
                    "wrong type",
                    format!("{key} = {{ x = 1 }}"),
                    mutate(Some(Value::Table(inner))),
                    Expect::key(&key),
                );
                if !in_array {
                    let e = required(doc, &path).map_or(Expect::NoPanic, Expect::Key);
                    push("missing", format!("{key} removed"), mutate(None), e);
                }
                if scalar.is_str() {
                    push(
                        "empty",
                        format!("{key} = \"\""),
                        mutate(Some(Value::String(String::new()))),
                        must(EMPTY_OK),
                    );
                }
                if is_number(scalar) {
                    let x = scalar
                        .as_float()
                        .or(scalar.as_integer().map(|i| i as f64))
                        .unwrap_or(1.0);
                    let neg = match scalar {
                        Value::Integer(i) => Value::Integer(-(i.abs().max(1))),
                        _ => Value::Float(-(x.abs().max(1.0))),
                    };
                    let zero = match scalar {
                        Value::Integer(_) => Value::Integer(0),
                        _ => Value::Float(0.0),
                    };
                    let all = [
                        ("negative", neg, must(NEGATIVE_OK)),
                        ("zero", zero, must(ZERO_OK)),
                        ("nan", Value::Float(f64::NAN), Expect::key(&key)),
                        ("inf", Value::Float(f64::INFINITY), Expect::key(&key)),
                        ("inf", Value::Float(f64::NEG_INFINITY), Expect::key(&key)),
                        ("huge", Value::Float(1e308), must(HUGE_OK)),
                    ];
                    for (category, v, e) in all {
                        push(category, format!("{key} = {v:?}"), mutate(Some(v)), e);
                    }
                }
                for v in out_of_range(&n) {
                    push(
                        "out of range",
                        format!("{key} = {v}"),
                        mutate(Some(v)),
                        Expect::key(&key),
                    );
                }
            }
        }
    }
}
