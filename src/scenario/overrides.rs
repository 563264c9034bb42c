//! `--set key.path=value` overrides, applied to the parsed document before it is read, so an
//! overridden value is validated exactly like one written in the file.
//!
//! The value is read as a TOML value (`200`, `2.5`, `[1, 2]`, `"text"`, `true`) and taken as a
//! string when it is not one (`superbee`). Key paths are dotted names with array indices:
//! `grid.nx`, `source[0].rate`, `tracer.diffusivity[1]`. Missing tables on the way are created;
//! missing array entries are not.

use super::reader::{list, suggestion, Problems};
use super::schema::schema;
use super::Problem;
use toml::{Table, Value};

/// Applies `sets` in order; malformed ones become problems keyed `--set <text>`. Returns the
/// key paths that were set, with their override text.
pub(super) fn apply(doc: &mut Table, sets: &[String], p: &mut Problems) -> Vec<(String, String)> {
    let mut applied = Vec::new();
    for set in sets {
        let key = format!("--set {set}");
        let Some((path, raw)) = set.split_once('=') else {
            p.add(key, "expected key.path=value, e.g. --set run.end=3600");
            continue;
        };
        let path = path.trim();
        let segments = match split_path(path) {
            Ok(s) => s,
            Err(msg) => {
                p.add(key, msg);
                continue;
            }
        };
        match set_value(doc, &segments, parse_value(raw.trim())) {
            Ok(()) => applied.push((path.to_string(), set.clone())),
            Err(msg) => p.add(key, msg),
        }
    }
    applied
}

/// Notes on each problem whose key was set by an override where its value came from.
pub(super) fn annotate(problems: &mut [Problem], applied: &[(String, String)]) {
    for q in problems.iter_mut() {
        // The last override of a key is the one in effect.
        if let Some((_, set)) = applied.iter().rev().find(|(k, _)| {
            q.key == *k
                || q.key
                    .strip_prefix(k.as_str())
                    .is_some_and(|rest| rest.starts_with('.') || rest.starts_with('['))
        }) {
            q.message.push_str(&format!(" (value from --set {set})"));
        }
    }
}

/// A TOML value, or the text itself as a string.
fn parse_value(raw: &str) -> Value {
    match toml::from_str::<Table>(&format!("v = {raw}")) {
        Ok(t) if t.len() == 1 => t.get("v").cloned().unwrap_or_else(|| Value::String(raw.to_string())),
        _ => Value::String(raw.to_string()),
    }
}

/// One path segment: a key name and the array indices after it.
type Segment = (String, Vec<usize>);

/// Splits `a.b[2].c` into segments.
fn split_path(path: &str) -> Result<Vec<Segment>, String> {
    if path.is_empty() {
        return Err("the key path is empty; expected key.path=value".into());
    }
    let mut out = Vec::new();
    for part in path.split('.') {
        let (name, mut rest) = part.split_at(part.find('[').unwrap_or(part.len()));
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
            return Err(format!("\"{part}\" is not a key name in the path \"{path}\""));
        }
        let mut idx = Vec::new();
        while !rest.is_empty() {
            let close = rest.find(']').ok_or_else(|| format!("unclosed '[' in \"{path}\""))?;
            let n = rest
                .get(1..close)
                .filter(|_| rest.starts_with('['))
                .and_then(|s| s.parse::<usize>().ok())
                .ok_or_else(|| format!("bad index in \"{part}\": expected name[0], name[1], ..."))?;
            idx.push(n);
            rest = &rest[close + 1..];
        }
        out.push((name.to_string(), idx));
    }
    Ok(out)
}

/// Sets `value` at `segments` in `doc`.
fn set_value(doc: &mut Table, segments: &[Segment], value: Value) -> Result<(), String> {
    let mut table = doc;
    let mut parents: Vec<&str> = Vec::new();
    let mut shown = String::new();
    for (k, (name, idx)) in segments.iter().enumerate() {
        let last = k + 1 == segments.len();
        if let Some(allowed) = schema(&parents) {
            if !allowed.contains(&name.as_str()) {
                let place = if shown.is_empty() {
                    "at the top level".to_string()
                } else {
                    format!("in {shown}")
                };
                return Err(format!(
                    "unknown key `{name}`{}; allowed keys {place}: {}",
                    suggestion(name, allowed),
                    list(allowed)
                ));
            }
        }
        if !shown.is_empty() {
            shown.push('.');
        }
        shown.push_str(name);
        if last && idx.is_empty() {
            table.insert(name.clone(), value);
            return Ok(());
        }
        if !idx.is_empty() && !table.contains_key(name) {
            return Err(format!("{shown} does not exist in the scenario"));
        }
        let mut node = table.entry(name.clone()).or_insert_with(|| Value::Table(Table::new()));
        for (m, &i) in idx.iter().enumerate() {
            let Value::Array(items) = node else {
                return Err(format!("{shown} is not an array"));
            };
            let n = items.len();
            let Some(item) = items.get_mut(i) else {
                return Err(format!("{shown}[{i}] does not exist: {shown} has {n} entries"));
            };
            shown.push_str(&format!("[{i}]"));
            if last && m + 1 == idx.len() {
                *item = value;
                return Ok(());
            }
            node = item;
        }
        let Value::Table(t) = node else {
            return Err(format!(
                "{shown} is not a table, so it has no key `{}`",
                segments[k + 1].0
            ));
        };
        table = t;
        parents.push(name);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_and_values() {
        assert_eq!(
            split_path("source[2].rate").unwrap(),
            vec![("source".to_string(), vec![2]), ("rate".to_string(), vec![])]
        );
        assert!(split_path("a..b").is_err());
        assert!(split_path("a[x]").is_err());
        assert!(split_path("a[1").is_err());
        assert_eq!(parse_value("200"), Value::Integer(200));
        assert_eq!(parse_value("superbee"), Value::String("superbee".into()));
        let mut doc: Table = toml::from_str("[grid]\nnx = 3\n[[source]]\nat = [1, 2]\nmass = 1").unwrap();
        let mut p = Problems::default();
        let sets = [
            "grid.nx=7",
            "scheme.convection=superbee",
            "source[0].at[1]=5",
            "source[1].mass=2",
            "grid.nxx=1",
            "nokey",
        ]
        .map(String::from);
        let applied = apply(&mut doc, &sets, &mut p);
        assert_eq!(applied.len(), 3);
        assert_eq!(doc["grid"]["nx"], Value::Integer(7));
        assert_eq!(doc["scheme"]["convection"], Value::String("superbee".into()));
        assert_eq!(doc["source"][0]["at"][1], Value::Integer(5));
        let keys: Vec<_> = p.0.iter().map(|q| q.key.as_str()).collect();
        assert_eq!(keys, ["--set source[1].mass=2", "--set grid.nxx=1", "--set nokey"]);
        assert!(p.0[1].message.contains("did you mean `nx`"));
    }
}
