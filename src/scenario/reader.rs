//! Typed reading of one TOML table with key paths: every bad value becomes a [`Problem`] that
//! names the key as a user would write it (`grid.dx`, `source[2].rate`, `tracer.diffusivity[1]`)
//! and reading carries on, so that several problems are reported together.

use super::Problem;
use toml::{Table, Value};

/// Collected problems.
#[derive(Debug, Default)]
pub(crate) struct Problems(pub Vec<Problem>);

impl Problems {
    /// Records one problem.
    pub fn add(&mut self, key: impl Into<String>, message: impl Into<String>) {
        let message: String = message.into();
        self.0.push(Problem {
            key: key.into(),
            message: message.replace(['\n', '\r'], " "),
        });
    }

    /// Number of problems so far.
    pub fn len(&self) -> usize {
        self.0.len()
    }
}

/// The TOML type name of a value, for "expected ..., found ..." messages.
pub(crate) fn type_name(v: &Value) -> String {
    match v {
        Value::String(s) => format!("the string {}", Value::String(s.clone())),
        Value::Integer(i) => format!("the integer {i}"),
        Value::Float(f) => format!("the number {f}"),
        Value::Boolean(b) => format!("the boolean {b}"),
        Value::Datetime(d) => format!("the date-time {d}"),
        Value::Array(_) => "an array".into(),
        Value::Table(_) => "a table".into(),
    }
}

/// Levenshtein distance, for "did you mean" hints on short key names.
fn distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, &cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb)).min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

/// A "did you mean" suffix when one allowed name is close to `got`.
pub(crate) fn suggestion(got: &str, allowed: &[&str]) -> String {
    allowed
        .iter()
        .map(|a| (distance(got, a), a))
        .filter(|(d, a)| *d <= 2 && *d < a.len())
        .min()
        .map(|(_, a)| format!(" (did you mean `{a}`?)"))
        .unwrap_or_default()
}

/// Joins names as `` `a`, `b`, `c` ``.
pub(crate) fn list(names: &[&str]) -> String {
    names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ")
}

/// One table of the document with its key path (`""` for the top level).
#[derive(Clone, Copy)]
pub(crate) struct Section<'a> {
    /// Key path of the table, e.g. `grid` or `source[1]`.
    pub path: &'a str,
    /// The table.
    pub table: &'a Table,
}

impl<'a> Section<'a> {
    /// A section of `table` at `path`.
    pub fn new(path: &'a str, table: &'a Table) -> Self {
        Self { path, table }
    }

    /// The key path of `key` in this section.
    pub fn key(&self, key: &str) -> String {
        if self.path.is_empty() {
            key.to_string()
        } else {
            format!("{}.{key}", self.path)
        }
    }

    /// Whether `key` is present.
    pub fn has(&self, key: &str) -> bool {
        self.table.contains_key(key)
    }

    /// Reports every key not in `allowed`; `context` says what the allowed set depends on.
    pub fn check_keys(&self, allowed: &[&str], context: &str, p: &mut Problems) {
        for k in self.table.keys() {
            if !allowed.contains(&k.as_str()) {
                let hint = suggestion(k, allowed);
                p.add(
                    self.key(k),
                    format!("unknown key{hint}; allowed keys {context}: {}", list(allowed)),
                );
            }
        }
    }

    /// Reports a missing required key.
    pub fn require(&self, key: &str, what: &str, p: &mut Problems) -> bool {
        if self.has(key) {
            true
        } else {
            p.add(self.key(key), format!("missing: {what} is required"));
            false
        }
    }

    /// A finite number (integers are accepted), or `None` when absent or bad.
    pub fn num(&self, key: &str, p: &mut Problems) -> Option<f64> {
        let v = self.table.get(key)?;
        number(v, &self.key(key), p)
    }

    /// A required finite number.
    pub fn req_num(&self, key: &str, what: &str, p: &mut Problems) -> Option<f64> {
        if self.require(key, what, p) {
            self.num(key, p)
        } else {
            None
        }
    }

    /// An integer within `lo..=hi`, or `None` when absent or bad.
    pub fn int(&self, key: &str, lo: i64, hi: i64, p: &mut Problems) -> Option<i64> {
        let v = self.table.get(key)?;
        let k = self.key(key);
        match v {
            Value::Integer(i) if (lo..=hi).contains(i) => Some(*i),
            Value::Integer(i) => {
                p.add(k, format!("{i} is out of range: must be an integer from {lo} to {hi}"));
                None
            }
            other => {
                p.add(k, format!("expected an integer, found {}", type_name(other)));
                None
            }
        }
    }

    /// A string, or `None` when absent or bad.
    pub fn string(&self, key: &str, p: &mut Problems) -> Option<&'a str> {
        match self.table.get(key)? {
            Value::String(s) => Some(s.as_str()),
            other => {
                p.add(self.key(key), format!("expected a string, found {}", type_name(other)));
                None
            }
        }
    }

    /// A string naming one of `allowed`, or `None` when absent or bad.
    pub fn choice(&self, key: &str, allowed: &[&str], p: &mut Problems) -> Option<&'a str> {
        let s = self.string(key, p)?;
        if allowed.contains(&s) {
            Some(s)
        } else {
            let hint = suggestion(s, allowed);
            p.add(
                self.key(key),
                format!("unknown value \"{s}\"{hint}; allowed: {}", list(allowed)),
            );
            None
        }
    }

    /// A pair `[a, b]` of finite numbers, or `None` when absent or bad.
    pub fn pair(&self, key: &str, p: &mut Problems) -> Option<(f64, f64)> {
        let v = self.table.get(key)?;
        pair(v, &self.key(key), p)
    }

    /// A required pair.
    pub fn req_pair(&self, key: &str, what: &str, p: &mut Problems) -> Option<(f64, f64)> {
        if self.require(key, what, p) {
            self.pair(key, p)
        } else {
            None
        }
    }

    /// A sub-table, or `None` when absent or not a table.
    pub fn table(&self, key: &str, p: &mut Problems) -> Option<&'a Table> {
        match self.table.get(key)? {
            Value::Table(t) => Some(t),
            other => {
                p.add(
                    self.key(key),
                    format!("expected a table ([{}]), found {}", self.key(key), type_name(other)),
                );
                None
            }
        }
    }
}

/// A finite number from a value.
pub(crate) fn number(v: &Value, key: &str, p: &mut Problems) -> Option<f64> {
    match v {
        Value::Integer(i) => Some(*i as f64),
        Value::Float(f) if f.is_finite() => Some(*f),
        Value::Float(f) => {
            p.add(key, format!("{f} is not allowed: must be a finite number"));
            None
        }
        other => {
            p.add(key, format!("expected a number, found {}", type_name(other)));
            None
        }
    }
}

/// A pair of finite numbers from a value.
pub(crate) fn pair(v: &Value, key: &str, p: &mut Problems) -> Option<(f64, f64)> {
    match v {
        Value::Array(a) if a.len() == 2 => {
            let x = number(&a[0], &format!("{key}[0]"), p);
            let y = number(&a[1], &format!("{key}[1]"), p);
            Some((x?, y?))
        }
        Value::Array(a) => {
            p.add(
                key,
                format!("expected two numbers [a, b], found an array of {}", a.len()),
            );
            None
        }
        other => {
            p.add(key, format!("expected two numbers [a, b], found {}", type_name(other)));
            None
        }
    }
}

/// Reports `v` at `key` unless `ok(v)`; `rule` says what is allowed.
pub(crate) fn check(v: Option<f64>, key: &str, ok: impl Fn(f64) -> bool, rule: &str, p: &mut Problems) -> Option<f64> {
    let x = v?;
    if ok(x) {
        Some(x)
    } else {
        p.add(key, format!("{x} is not allowed: must be {rule}"));
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hints_and_numbers() {
        assert_eq!(suggestion("nxx", &["nx", "ny", "depth"]), " (did you mean `nx`?)");
        assert_eq!(suggestion("zzzzzz", &["nx", "ny"]), "");
        let t: Table = toml::from_str("a = nan\nb = 3\nc = [1, \"x\"]\nd = 2.5").unwrap();
        let s = Section::new("g", &t);
        let mut p = Problems::default();
        assert_eq!(s.num("a", &mut p), None);
        assert_eq!(s.num("b", &mut p), Some(3.0));
        assert_eq!(s.pair("c", &mut p), None);
        assert_eq!(s.int("d", 0, 9, &mut p), None);
        let keys: Vec<_> = p.0.iter().map(|q| q.key.as_str()).collect();
        assert_eq!(keys, ["g.a", "g.c[1]", "g.d"]);
    }
}
