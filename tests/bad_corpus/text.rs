//! Defects in the file's text rather than its values: TOML syntax (unclosed table headers and
//! arrays, bad escapes, malformed numbers, a key without a value, duplicate keys and tables), a
//! file truncated at random byte offsets, and bytes that are not UTF-8.

use crate::case::{Case, Expect, Rng};

/// Whether a line is `key = value` (not a header, comment or blank line).
fn assignment(line: &str) -> Option<(&str, &str)> {
    let t = line.trim_start();
    if t.starts_with('#') || t.starts_with('[') {
        return None;
    }
    let (k, v) = t.split_once('=')?;
    Some((k.trim(), v.trim()))
}

/// `lines` joined back with the file's line ends.
fn join(lines: &[String]) -> Vec<u8> {
    let mut s = lines.join("\n");
    s.push('\n');
    s.into_bytes()
}

/// Syntax-error cases of `text`, each expected on the line (1-based) where it was made.
pub fn syntax(scenario: &'static str, text: &str, out: &mut Vec<Case>) {
    let lines: Vec<String> = text.lines().map(str::to_string).collect();
    let mut push = |what: String, edited: Vec<String>, line: (usize, usize)| {
        out.push(Case {
            category: "syntax",
            scenario,
            what,
            bytes: join(&edited),
            extra: vec![],
            expect: Expect::Line(line.0, line.1),
        });
    };
    for (k, line) in lines.iter().enumerate() {
        let n = k + 1;
        let t = line.trim_start();
        let edit = |new: String| {
            let mut e = lines.clone();
            e[k] = new;
            e
        };
        if t.starts_with('[') {
            // `[grid` / `[[source]`: the header is not closed.
            let cut = line.rfind(']').map_or(line.clone(), |i| line[..i].to_string());
            push(format!("line {n}: unclosed header"), edit(cut), (n, n));
            // The same table twice.
            if !t.starts_with("[[") {
                let mut e = lines.clone();
                e.push(String::new());
                e.push(line.clone());
                let last = e.len();
                push(format!("line {n}: table repeated at the end"), e, (last, last));
            }
            continue;
        }
        let Some((key, value)) = assignment(line) else {
            continue;
        };
        // The same key twice in a row.
        let mut dup = lines.clone();
        dup.insert(k + 1, line.clone());
        push(format!("line {n}: {key} repeated"), dup, (n + 1, n + 1));
        // A key without a value.
        push(format!("line {n}: {key} ="), edit(format!("{key} =")), (n, n + 1));
        if value.starts_with('"') {
            // An escape TOML does not know.
            let bad = line.replacen("= \"", "= \"\\q", 1);
            push(format!("line {n}: bad escape in {key}"), edit(bad), (n, n));
            // An unterminated string.
            let open = format!("{key} = \"{}", value.trim_matches('"').split('"').next().unwrap_or(""));
            push(format!("line {n}: unterminated string"), edit(open), (n, n));
        } else if value.starts_with('[') {
            let code = value.split('#').next().unwrap_or("").trim_end();
            let open = format!("{key} = {}", code.trim_end_matches(']'));
            // The error shows where the array was expected to go on: this or a later line.
            push(format!("line {n}: unclosed array"), edit(open), (n, lines.len() + 1));
        } else if value.starts_with(|c: char| c.is_ascii_digit() || c == '-') {
            push(
                format!("line {n}: malformed number in {key}"),
                edit(format!("{key} = 1.2.3")),
                (n, n),
            );
            push(
                format!("line {n}: bare word in {key}"),
                edit(format!("{key} = ten")),
                (n, n),
            );
        } else if value.starts_with('{') {
            let code = value.split('#').next().unwrap_or("").trim_end();
            let open = format!("{key} = {}", code.trim_end_matches('}'));
            // The parser notices at the next key, which may be lines further on.
            let next = (k + 1..lines.len())
                .find(|&m| {
                    let t = lines[m].trim();
                    !t.is_empty() && !t.starts_with('#')
                })
                .map_or(lines.len() + 1, |m| m + 1);
            push(format!("line {n}: unclosed inline table"), edit(open), (n, next));
        }
    }
}

/// The file cut at `count` random byte offsets: refused or accepted, never a panic.
pub fn truncated(scenario: &'static str, text: &str, rng: &mut Rng, count: usize, out: &mut Vec<Case>) {
    for _ in 0..count {
        let at = rng.below(text.len());
        out.push(Case {
            category: "truncated",
            scenario,
            what: format!("truncated after {at} bytes"),
            bytes: text.as_bytes()[..at].to_vec(),
            extra: vec![],
            expect: Expect::NoPanic,
        });
    }
}

/// Bytes that are not UTF-8 inserted at `count` random character boundaries: refused naming the
/// file and the offset of the first bad byte.
pub fn not_utf8(scenario: &'static str, text: &str, rng: &mut Rng, count: usize, out: &mut Vec<Case>) {
    // A stray continuation byte, a lead byte without its continuation, bytes never in UTF-8,
    // an overlong encoding of '/', a UTF-16 surrogate encoded as UTF-8 (RFC 3629, section 3).
    const BAD: &[&[u8]] = &[
        &[0x80],
        &[0xC3, 0x28],
        &[0xFF],
        &[0xFE, 0xFF],
        &[0xC0, 0xAF],
        &[0xED, 0xA0, 0x80],
    ];
    for k in 0..count {
        let mut at = rng.below(text.len());
        while !text.is_char_boundary(at) {
            at -= 1;
        }
        let bad = BAD[k % BAD.len()];
        let mut bytes = text.as_bytes()[..at].to_vec();
        bytes.extend_from_slice(bad);
        bytes.extend_from_slice(&text.as_bytes()[at..]);
        out.push(Case {
            category: "not UTF-8",
            scenario,
            what: format!("{bad:02X?} inserted at byte {at}"),
            bytes,
            extra: vec![],
            expect: Expect::NotUtf8(at),
        });
    }
}
