//! One generated case, its expectation, the fixed-seed random numbers and the key paths of a
//! parsed document (`grid.dx`, `source[1].at[0]`: the reader's own key-path format).

use toml::{Table, Value};

/// What a case must give.
#[derive(Debug, Clone)]
pub enum Expect {
    /// Refused (exit 2) with a problem keyed at one of these paths, inside it or around it.
    Key(Vec<String>),
    /// Refused with a TOML syntax error keyed `line L, column C`, L within `lo..=hi`.
    Line(usize, usize),
    /// Refused naming only the file: not UTF-8, the first bad byte at this offset.
    NotUtf8(usize),
    /// Exit 0 or 2, never a panic; when refused, every problem names a key or a line.
    NoPanic,
}

impl Expect {
    /// Refused at `key` (or inside or around it).
    pub fn key(key: &str) -> Self {
        Expect::Key(vec![key.to_string()])
    }
}

/// A malformed scenario derived from a shipped one.
#[derive(Debug, Clone)]
pub struct Case {
    /// The kind of defect, for the counts.
    pub category: &'static str,
    /// The shipped scenario it comes from.
    pub scenario: &'static str,
    /// What was changed, for failure messages.
    pub what: String,
    /// The scenario file's bytes.
    pub bytes: Vec<u8>,
    /// Data files it needs next to it (name relative to the corpus folder, bytes).
    pub extra: Vec<(String, Vec<u8>)>,
    /// The expected outcome.
    pub expect: Expect,
}

/// SplitMix64 (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number generators"):
/// a fixed seed gives the same corpus on every machine.
pub struct Rng(pub u64);

impl Rng {
    /// The next 64 random bits.
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// A number in `0..n` (`n > 0`).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
}

/// One step of a key path.
#[derive(Debug, Clone, PartialEq)]
pub enum Seg {
    Key(String),
    Idx(usize),
}

/// A key path in the reader's format: `grid.dx`, `source[1].at[0]`, `flow.opening[0].side`.
pub fn show(path: &[Seg]) -> String {
    let mut s = String::new();
    for seg in path {
        match seg {
            Seg::Key(k) => {
                if !s.is_empty() {
                    s.push('.');
                }
                s.push_str(k);
            }
            Seg::Idx(i) => s.push_str(&format!("[{i}]")),
        }
    }
    s
}

/// The path without indices (`source.at`), for looking up the rules of a key.
pub fn norm(path: &[Seg]) -> String {
    path.iter()
        .filter_map(|s| match s {
            Seg::Key(k) => Some(k.as_str()),
            Seg::Idx(_) => None,
        })
        .collect::<Vec<_>>()
        .join(".")
}

/// A node of the document: its path and value.
pub struct Node {
    pub path: Vec<Seg>,
    pub value: Value,
}

/// Every node below the root, depth first: tables (including array-of-tables entries and inline
/// tables), arrays and their elements, and scalars.
pub fn walk(doc: &Table) -> Vec<Node> {
    fn rec(path: &mut Vec<Seg>, v: &Value, out: &mut Vec<Node>) {
        out.push(Node {
            path: path.clone(),
            value: v.clone(),
        });
        match v {
            Value::Table(t) => {
                for (k, x) in t {
                    path.push(Seg::Key(k.clone()));
                    rec(path, x, out);
                    path.pop();
                }
            }
            Value::Array(a) => {
                for (i, x) in a.iter().enumerate() {
                    path.push(Seg::Idx(i));
                    rec(path, x, out);
                    path.pop();
                }
            }
            _ => {}
        }
    }
    let mut out = Vec::new();
    for (k, v) in doc {
        rec(&mut vec![Seg::Key(k.clone())], v, &mut out);
    }
    out
}

/// The document with the node at `path` replaced by `value` (removed when `None`).
pub fn with(doc: &Table, path: &[Seg], value: Option<Value>) -> Table {
    fn rec(node: &mut Value, path: &[Seg], value: Option<Value>) {
        let (head, rest) = (&path[0], &path[1..]);
        match (node, head) {
            (Value::Table(t), Seg::Key(k)) => {
                if rest.is_empty() {
                    match value {
                        Some(v) => {
                            t.insert(k.clone(), v);
                        }
                        None => {
                            t.remove(k);
                        }
                    }
                } else if let Some(child) = t.get_mut(k) {
                    rec(child, rest, value);
                }
            }
            (Value::Array(a), Seg::Idx(i)) => {
                if rest.is_empty() {
                    match value {
                        Some(v) => a[*i] = v,
                        None => {
                            a.remove(*i);
                        }
                    }
                } else if let Some(child) = a.get_mut(*i) {
                    rec(child, rest, value);
                }
            }
            _ => {}
        }
    }
    let mut root = Value::Table(doc.clone());
    rec(&mut root, path, value);
    match root {
        Value::Table(t) => t,
        _ => unreachable!("the root stays a table"),
    }
}

/// The value at `path`, if any.
pub fn get<'a>(doc: &'a Table, path: &[Seg]) -> Option<&'a Value> {
    let mut node: Option<&Value> = None;
    for (k, seg) in path.iter().enumerate() {
        node = match (k, node, seg) {
            (0, _, Seg::Key(key)) => doc.get(key),
            (_, Some(Value::Table(t)), Seg::Key(key)) => t.get(key),
            (_, Some(Value::Array(a)), Seg::Idx(i)) => a.get(*i),
            _ => None,
        };
    }
    node
}

/// A path from its text form (`source[1].at`).
pub fn parse_path(s: &str) -> Vec<Seg> {
    let mut out = Vec::new();
    for part in s.split('.') {
        let mut it = part.split('[');
        out.push(Seg::Key(it.next().unwrap_or("").to_string()));
        for idx in it {
            out.push(Seg::Idx(idx.trim_end_matches(']').parse().unwrap_or(0)));
        }
    }
    out
}
