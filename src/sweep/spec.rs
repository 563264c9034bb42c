//! The sweep file (TOML): `base`, `name`, `[axes]`, `samples`, `seed`.
//!
//! ```toml
//! base = "marina.toml"                 # the base scenario, relative to this file
//! name = "marina-sweep"                # folder name (default: this file's stem)
//! samples = 20                         # optional: a Latin hypercube of 20 members ...
//! seed = 7                             # ... drawn with this seed (default 0)
//! [axes]
//! "source[0].start" = [0.0, 3600.0]    # a list of values (any TOML value but a table)
//! "tracer.diffusivity" = { from = 0.05, to = 0.5, count = 4, log = true }
//! ```
//!
//! Every problem is an error naming the sweep file, the key and what is allowed; every member
//! is then loaded as the base scenario with its overrides, so a bad axis key or value is refused
//! before anything runs.

use super::members::{members, MAX_MEMBERS};
use super::{Axis, AxisValues, Sweep, SweepError};
use crate::scenario::{self, LoadOptions};
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use toml::{Table, Value};

/// Keys allowed at the top of a sweep file.
const TOP: &[&str] = &["base", "name", "axes", "samples", "seed"];
/// Keys allowed in a range axis.
const RANGE: &[&str] = &["from", "to", "count", "log"];

/// Reads and validates the sweep at `path`; `only` validates that one member instead of all.
pub(super) fn load(path: &Path, out: Option<&Path>, only: Option<usize>) -> Result<Sweep, SweepError> {
    let file = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let err = |key: &str, message: String| SweepError {
        file: file.clone(),
        key: key.to_string(),
        message,
    };
    let text = std::fs::read_to_string(path).map_err(|e| err("", format!("cannot read the sweep file: {e}")))?;
    let doc: Table = toml::from_str(&text).map_err(|e| err("", format!("not a valid TOML file: {}", e.message())))?;
    for k in doc.keys() {
        if !TOP.contains(&k.as_str()) {
            return Err(err(k, format!("unknown key; allowed: {}", TOP.join(", "))));
        }
    }
    let base_rel = match doc.get("base") {
        Some(Value::String(s)) if !s.trim().is_empty() => PathBuf::from(s),
        Some(_) => {
            return Err(err(
                "base",
                "expected the base scenario's path as a string, relative to the sweep file".into(),
            ))
        }
        None => {
            return Err(err(
                "base",
                "missing; name the base scenario, e.g. base = \"marina.toml\"".into(),
            ))
        }
    };
    let dir = file.parent().map(Path::to_path_buf).unwrap_or_default();
    let base = dir.join(base_rel);
    let name = match doc.get("name") {
        Some(Value::String(s)) => s.clone(),
        Some(_) => return Err(err("name", "expected a string (the sweep folder's name)".into())),
        None => file
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default(),
    };
    if name.trim().is_empty()
        || name == "."
        || name == ".."
        || name.chars().any(|c| c == '/' || c == '\\' || c.is_control())
    {
        return Err(err("name", format!("\"{name}\" cannot be a folder name; allowed: a non-empty name without / \\ or control characters, not . or ..")));
    }
    let samples = match doc.get("samples") {
        None => None,
        Some(Value::Integer(n)) if (1..=MAX_MEMBERS as i64).contains(n) => Some(*n as usize),
        Some(v) => {
            return Err(err(
                "samples",
                format!("{v} is not allowed; expected a whole number of members from 1 to {MAX_MEMBERS}"),
            ))
        }
    };
    let seed = match doc.get("seed") {
        None => 0,
        Some(_) if samples.is_none() => {
            return Err(err(
                "seed",
                "only used with `samples` (a Latin hypercube); remove it or add samples = N".into(),
            ))
        }
        Some(Value::Integer(n)) if *n >= 0 => *n as u64,
        Some(v) => return Err(err("seed", format!("{v} is not allowed; expected a whole number >= 0"))),
    };
    let axes = read_axes(&doc, &text, samples.is_some(), &err)?;
    let members =
        members(&axes, samples, seed).map_err(|m| err(if samples.is_some() { "samples" } else { "axes" }, m))?;

    // The base alone gives the output folder; a base that does not load is named as such.
    let base_scn =
        scenario::load(&base, &[]).map_err(|e| err("base", format!("the base scenario does not load:\n{e}")))?;
    let out = out.map(Path::to_path_buf).unwrap_or(base_scn.output.dir.clone());
    let out = std::path::absolute(&out).unwrap_or(out);
    let sweep = Sweep {
        root: out.join(&name),
        name,
        file: file.clone(),
        base,
        axes,
        members,
    };
    let check = |i: usize| -> Result<(), SweepError> {
        scenario::load_with(&sweep.base, &sweep.overrides(i), LoadOptions::default())
            .map(|_| ())
            .map_err(|e| member_error(&sweep, i, &e))
    };
    match only {
        Some(i) if i >= sweep.members.len() => {
            return Err(err(
                "",
                format!(
                    "--member {i}: the sweep has {} members, indices 0 to {}",
                    sweep.members.len(),
                    sweep.members.len() - 1
                ),
            ));
        }
        Some(i) => check(i)?,
        // In parallel; the first failing member by index is the one reported.
        None => {
            let results: Vec<Result<(), SweepError>> = (0..sweep.members.len()).into_par_iter().map(check).collect();
            results.into_iter().collect::<Result<Vec<()>, _>>()?;
        }
    }
    Ok(sweep)
}

/// The error for member `i` that does not load: keyed by the axis the scenario's problem names.
fn member_error(sweep: &Sweep, i: usize, e: &scenario::ScenarioError) -> SweepError {
    let values: Vec<String> = sweep
        .axes
        .iter()
        .zip(&sweep.members[i].values)
        .map(|(a, v)| format!("{}={v}", a.key))
        .collect();
    let named = |a: &&Axis| {
        e.problems
            .iter()
            .any(|p| p.key.contains(&a.key) || p.message.contains(&format!("--set {}=", a.key)))
    };
    let key = sweep
        .axes
        .iter()
        .find(named)
        .map_or_else(|| "axes".to_string(), |a| format!("axes.\"{}\"", a.key));
    SweepError {
        file: sweep.file.clone(),
        key,
        message: format!(
            "member {i} ({}) is not a valid scenario; axis keys are scenario keys in the --set syntax (e.g. \"tracer.diffusivity\", \"source[0].start\") and their values must be allowed there:\n{e}",
            values.join(", ")
        ),
    }
}

/// Reads `[axes]` in file order.
fn read_axes(
    doc: &Table,
    text: &str,
    lhs: bool,
    err: &dyn Fn(&str, String) -> SweepError,
) -> Result<Vec<Axis>, SweepError> {
    let table = match doc.get("axes") {
        Some(Value::Table(t)) if !t.is_empty() => t,
        Some(Value::Table(_)) | None => {
            return Err(err(
                "axes",
                "no axes; add at least one, e.g. [axes] \"tracer.diffusivity\" = [0.1, 0.2]".into(),
            ))
        }
        Some(_) => {
            return Err(err(
                "axes",
                "expected a table of scenario keys, e.g. [axes] \"tracer.diffusivity\" = [0.1, 0.2]".into(),
            ))
        }
    };
    let mut axes = Vec::new();
    for key in file_order(text, table) {
        let k = format!("axes.\"{key}\"");
        let values = match &table[&key] {
            Value::Array(items) if items.is_empty() => {
                return Err(err(&k, "an empty list; give at least one value".into()));
            }
            Value::Array(items) => AxisValues::List(
                items
                    .iter()
                    .enumerate()
                    .map(|(j, v)| value_text(v).map_err(|m| err(&format!("{k}[{j}]"), m)))
                    .collect::<Result<_, _>>()?,
            ),
            Value::Table(t) => range(t, lhs, &k, err)?,
            v => {
                return Err(err(
                    &k,
                    format!("{v} is not allowed; expected a list of values, e.g. [0.1, 0.2], or a range {{ from = 0.1, to = 0.4, count = 4, log = false }}"),
                ))
            }
        };
        axes.push(Axis { key, values });
    }
    Ok(axes)
}

/// The keys of `[axes]` in the order the file gives them (the parsed table is sorted by name).
fn file_order(text: &str, table: &Table) -> Vec<String> {
    let mut keys: Vec<(usize, String)> = Vec::new();
    if let Ok(doc) = toml::de::DeTable::parse(text) {
        if let Some(axes) = doc.get_ref().get("axes") {
            if let toml::de::DeValue::Table(t) = axes.get_ref() {
                keys = t
                    .iter()
                    .map(|(k, _)| (k.span().start, k.get_ref().to_string()))
                    .collect();
            }
        }
    }
    keys.sort();
    let mut out: Vec<String> = keys
        .into_iter()
        .map(|(_, k)| k)
        .filter(|k| table.contains_key(k))
        .collect();
    // Anything the ordered reading missed keeps the sorted order at the end.
    for k in table.keys() {
        if !out.contains(k) {
            out.push(k.clone());
        }
    }
    out
}

/// A range axis `{ from, to, count, log }`.
fn range(t: &Table, lhs: bool, k: &str, err: &dyn Fn(&str, String) -> SweepError) -> Result<AxisValues, SweepError> {
    for key in t.keys() {
        if !RANGE.contains(&key.as_str()) {
            return Err(err(
                &format!("{k}.{key}"),
                format!("unknown key; allowed in a range: {}", RANGE.join(", ")),
            ));
        }
    }
    let num = |name: &str| -> Result<f64, SweepError> {
        match t.get(name) {
            Some(Value::Float(x)) if x.is_finite() => Ok(*x),
            Some(Value::Integer(n)) => Ok(*n as f64),
            Some(v) => Err(err(
                &format!("{k}.{name}"),
                format!("{v} is not allowed; expected a finite number"),
            )),
            None => Err(err(&format!("{k}.{name}"), "missing; a range needs from and to".into())),
        }
    };
    let (from, to) = (num("from")?, num("to")?);
    let log = match t.get("log") {
        None => false,
        Some(Value::Boolean(b)) => *b,
        Some(v) => {
            return Err(err(
                &format!("{k}.log"),
                format!("{v} is not allowed; expected true or false"),
            ))
        }
    };
    if log && !(from > 0.0 && to > 0.0) {
        return Err(err(
            k,
            format!("log = true needs from > 0 and to > 0 (got from = {from}, to = {to})"),
        ));
    }
    let count = match (t.get("count"), lhs) {
        (Some(_), true) => {
            return Err(err(
                &format!("{k}.count"),
                "not used with samples (the Latin hypercube draws `samples` values over from..to); remove it".into(),
            ))
        }
        (None, true) => None,
        (None, false) => {
            return Err(err(
                &format!("{k}.count"),
                "missing; a range needs count = the number of values (1 or more)".into(),
            ))
        }
        (Some(Value::Integer(n)), false) if (1..=MAX_MEMBERS as i64).contains(n) => Some(*n as usize),
        (Some(v), false) => {
            return Err(err(
                &format!("{k}.count"),
                format!("{v} is not allowed; expected a whole number from 1 to {MAX_MEMBERS}"),
            ))
        }
    };
    Ok(AxisValues::Range { from, to, count, log })
}

/// The `--set` value text of a list entry: numbers in Rust's shortest round-trip form, strings
/// as they are (quoted when they would read as another TOML value), arrays as inline TOML.
pub fn value_text(v: &Value) -> Result<String, String> {
    match v {
        Value::Integer(n) => Ok(n.to_string()),
        Value::Float(x) if x.is_finite() => Ok(number_text(*x)),
        Value::Float(x) => Err(format!("{x} is not allowed; expected a finite number")),
        Value::Boolean(b) => Ok(b.to_string()),
        Value::String(s) => {
            let reads_as_other = s.trim() != s
                || s.is_empty()
                || toml::from_str::<Table>(&format!("v = {s}")).is_ok_and(|t| t.len() == 1);
            Ok(if reads_as_other {
                Value::String(s.clone()).to_string()
            } else {
                s.clone()
            })
        }
        Value::Array(items) => {
            for i in items {
                value_text(i)?;
            }
            Ok(v.to_string())
        }
        _ => Err(format!(
            "{v} is not allowed; expected a number, a string, true/false or an array"
        )),
    }
}

/// A number as `--set` text: Rust's shortest round-trip form (`3600`, `0.15`), in exponent
/// form outside 1e-4 ..= 1e15 in magnitude (`1e30`, `2.5e-7`), where the plain form would be a
/// long run of digits (and a whole number too large for a TOML integer).
pub fn number_text(x: f64) -> String {
    if x == 0.0 || (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

#[cfg(test)]
mod number_tests {
    use super::number_text;

    #[test]
    fn numbers_read_back_as_the_same_toml_float() {
        for x in [
            0.0,
            3600.0,
            0.15,
            -2.5,
            1e30,
            2.5e-7,
            1e15,
            9.99e14,
            1e-4,
            -3e-300,
            f64::MAX,
        ] {
            let t = number_text(x);
            let v: toml::Table = toml::from_str(&format!("v = {t}")).unwrap();
            let back = v["v"]
                .as_float()
                .or_else(|| v["v"].as_integer().map(|n| n as f64))
                .unwrap();
            assert_eq!(back.to_bits(), x.to_bits(), "{x} -> {t}");
        }
    }
}
