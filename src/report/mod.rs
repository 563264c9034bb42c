//! `report.html`: one self-contained page per run, comparison and convergence study, for the
//! engineer who has to answer what reached the shore, when, how high and for how long.
//!
//! Pages are built with `write!` into a `String`; every piece of text that comes from the user
//! or from a file name goes through [`esc`] (the `html-escape` crate), so a scenario name or a
//! receptor name can never inject markup. Pictures are read from the output folder and embedded
//! as `data:image/png;base64,...` URIs; the only links are relative ones to files in the same
//! folder. There is no script, no web font and no external stylesheet: the file opens offline
//! in any browser and prints to A4.
//!
//! - [`run`]: [`write_run_report`] for `tinct run`.
//! - [`studies`]: [`write_compare_report`] and [`write_converge_report`].
//! - `scenario` (private): the scenario in words.

pub mod influence;
pub mod particles;
pub mod run;
mod scenario;
pub mod studies;
#[cfg(test)]
mod tests;

pub use run::write_run_report;
pub use studies::{write_compare_report, write_converge_report};

use base64::Engine as _;
use std::fmt::Write as _;
use std::path::Path;

/// File name of every report.
pub const REPORT_FILE: &str = "report.html";

/// The page's stylesheet: a readable column on screen, A4 on paper.
const CSS: &str = r#"
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif;
  font-size: 16px; line-height: 1.5; color: #1d232a; background: #fff; margin: 0; }
main { max-width: 62rem; margin: 0 auto; padding: 1.5rem 1.25rem 3rem; }
h1 { font-size: 1.9rem; margin: 0.2rem 0 0.4rem; line-height: 1.2; }
h2 { font-size: 1.3rem; margin: 2rem 0 0.6rem; padding-bottom: 0.2rem;
  border-bottom: 2px solid #d5dde5; break-after: avoid; }
h3 { font-size: 1.05rem; margin: 1.2rem 0 0.4rem; break-after: avoid; }
p, li { max-width: 52rem; }
.sub { color: #4a5561; margin: 0 0 1rem; }
.status { display: inline-block; padding: 0.15rem 0.6rem; border-radius: 0.3rem;
  font-weight: 600; background: #e3f1e6; color: #1c5e2b; }
.stopped { display: block; margin: 0.8rem 0; padding: 0.8rem 1rem; border-radius: 0.3rem;
  background: #fde4e1; color: #7d1a0f; border: 2px solid #c2381f; font-weight: 600; }
.caution { margin: 1rem 0 1.4rem; padding: 0.8rem 1rem; background: #fff5e0;
  border-left: 6px solid #c77800; border-radius: 0.2rem; }
.caution strong { display: block; margin-bottom: 0.2rem; }
.answers { padding-left: 1.2rem; }
.answers li { margin: 0.35rem 0; }
.muted { color: #5b6672; }
table { border-collapse: collapse; margin: 0.5rem 0 1rem; font-size: 0.92rem;
  break-inside: avoid; }
caption { text-align: left; font-weight: 600; padding: 0.2rem 0; }
th, td { padding: 0.28rem 0.6rem; border-bottom: 1px solid #dfe5ea; vertical-align: top; }
td:first-child { white-space: nowrap; }
th { text-align: left; background: #f1f4f7; font-weight: 600; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
td.n { white-space: nowrap; }
.wide { overflow-x: auto; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 0.2rem 1.2rem;
  margin: 0.5rem 0 1rem; }
dl.facts dt { font-weight: 600; color: #38434f; }
dl.facts dd { margin: 0; }
figure { margin: 1rem 0 1.4rem; break-inside: avoid; }
figure img { display: block; max-width: min(100%, 52rem); height: auto; border: 1px solid #dfe5ea; }
figcaption { font-size: 0.9rem; color: #4a5561; margin-top: 0.3rem; }
.strip { display: grid; grid-template-columns: repeat(3, 1fr); gap: 0.8rem; }
.strip figure { margin: 0; }
.sev { display: inline-block; margin-right: 0.5rem; font-weight: 600; font-size: 0.8rem;
  text-transform: uppercase; letter-spacing: 0.04em; }
.sev-note { color: #33597a; }
.sev-warning { color: #9a5a00; }
.sev-blocking { color: #a32012; }
ul.files { columns: 2; font-family: ui-monospace, "DejaVu Sans Mono", monospace;
  font-size: 0.88rem; }
footer { margin-top: 2.5rem; font-size: 0.85rem; color: #5b6672; }
@page { size: A4; margin: 15mm; }
@media print {
  body { font-size: 10.5pt; }
  main { max-width: none; padding: 0; }
  h2 { break-after: avoid; }
  table, figure, .caution, .stopped { break-inside: avoid; }
  figure img { max-width: 100%; }
  a { color: inherit; text-decoration: none; }
}
"#;

/// `s` escaped for HTML text and attribute values (quotes included).
pub fn esc(s: &str) -> String {
    html_escape::encode_quoted_attribute(s).into_owned()
}

/// `x` with three significant figures (fixed-point between 1e-3 and 1e6, else scientific);
/// `-` when not finite.
pub fn num(x: f64) -> String {
    if x.is_finite() {
        // sig keeps every integer digit from 1000 up: round those to three figures too.
        let e = if x == 0.0 { 0 } else { x.abs().log10().floor() as i32 };
        if (3..6).contains(&e) {
            let f = 10f64.powi(e - 2);
            return format!("{}", (x / f).round() * f);
        }
        crate::diagnostics::advice::sig(x, 3)
    } else {
        "-".into()
    }
}

/// A duration or time, as the command line prints it (`8 h 36 min`).
pub fn time(seconds: f64) -> String {
    crate::output::format_time(seconds)
}

/// An area in m2, with hectares beside it from one hectare up.
pub fn area(m2: f64) -> String {
    if m2 >= 1e4 {
        format!("{} m² ({} ha)", num(m2), num(m2 / 1e4))
    } else {
        format!("{} m²", num(m2))
    }
}

/// The unit of mass for a concentration unit: `kg/m3` gives `kg`, `mg/L` gives `g`
/// (1 L = 1e-3 m3), otherwise `units × m³`.
pub fn mass_unit(units: &str) -> String {
    let u = units.trim().replace('³', "3").replace(['µ', 'μ'], "u");
    match u.to_ascii_lowercase().as_str() {
        "kg/m3" | "g/l" => "kg".into(),
        "g/m3" | "mg/l" => "g".into(),
        "mg/m3" | "ug/l" => "mg".into(),
        "ug/m3" | "ng/l" => "µg".into(),
        _ => match u.strip_suffix("/m3").or_else(|| u.strip_suffix("/m^3")) {
            // A count or amount per cubic metre (`CFU/m3` gives `CFU`).
            Some(m) if !m.trim().is_empty() => m.trim().to_string(),
            _ => format!("{units} × m³"),
        },
    }
}

/// A released mass in words, in the largest of t, kg, g, mg and µg that keeps the number at
/// least 1 when the concentration unit names a mass per volume (`5e6` with `ug/L` gives
/// `5 kg`), else in `units × m³`.
pub fn mass_words(value: f64, units: &str) -> String {
    let unit = mass_unit(units);
    let to_kg = match unit.as_str() {
        "kg" => 1.0,
        "g" => 1e-3,
        "mg" => 1e-6,
        "µg" => 1e-9,
        _ => return format!("{} {unit}", num(value)),
    };
    let kg = value * to_kg;
    let scales = [(1e3, "t"), (1.0, "kg"), (1e-3, "g"), (1e-6, "mg"), (1e-9, "µg")];
    let (f, u) = scales
        .iter()
        .copied()
        .find(|(f, _)| kg.abs() >= *f)
        .unwrap_or((1e-9, "µg"));
    format!("{} {u}", num(kg / f))
}

/// The whole page: `title`, the stylesheet and `body` (already HTML).
pub(crate) fn page(title: &str, body: &str) -> String {
    let mut o = String::with_capacity(body.len() + CSS.len() + 512);
    o.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    o.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    let _ = writeln!(o, "<title>{}</title>", esc(title));
    let _ = writeln!(o, "<style>{CSS}</style>\n</head>\n<body>\n<main>");
    o.push_str(body);
    let _ = writeln!(
        o,
        "<footer>Written by tinct {}. Every picture is embedded; this file needs nothing else to open or print.</footer>",
        env!("CARGO_PKG_VERSION")
    );
    o.push_str("</main>\n</body>\n</html>\n");
    o
}

/// The caution box (`crate::run::CAUTION`).
pub(crate) fn caution() -> String {
    format!(
        "<div class=\"caution\" role=\"note\"><strong>Caution</strong>{}</div>\n",
        esc(crate::run::CAUTION)
    )
}

/// `data:image/png;base64,...` for the PNG at `path`, or `None` when it cannot be read or is
/// not a PNG.
pub(crate) fn data_uri(path: &Path) -> Option<String> {
    let bytes = std::fs::read(path).ok()?;
    if !bytes.starts_with(b"\x89PNG\r\n\x1a\n") {
        return None;
    }
    let mut s = String::from("data:image/png;base64,");
    base64::engine::general_purpose::STANDARD.encode_string(&bytes, &mut s);
    Some(s)
}

/// A figure embedding the PNG at `path` with its caption, or an empty string when the file
/// is absent or unreadable.
pub(crate) fn figure(path: &Path, alt: &str, caption: &str) -> String {
    match data_uri(path) {
        Some(uri) => format!(
            "<figure><img src=\"{uri}\" alt=\"{}\"><figcaption>{}</figcaption></figure>\n",
            esc(alt),
            esc(caption)
        ),
        None => String::new(),
    }
}

/// A table: `head` (column titles, `true` for numeric columns) and rows of already escaped
/// cells.
pub(crate) fn table(caption: Option<&str>, head: &[(&str, bool)], rows: &[Vec<String>]) -> String {
    let mut o = String::from("<div class=\"wide\"><table>");
    if let Some(c) = caption {
        let _ = write!(o, "<caption>{}</caption>", esc(c));
    }
    o.push_str("<thead><tr>");
    for (h, numeric) in head {
        let _ = write!(o, "<th{}>{}</th>", if *numeric { " class=\"n\"" } else { "" }, esc(h));
    }
    o.push_str("</tr></thead><tbody>");
    for r in rows {
        o.push_str("<tr>");
        for (k, cell) in r.iter().enumerate() {
            let numeric = head.get(k).is_some_and(|h| h.1);
            let _ = write!(o, "<td{}>{cell}</td>", if numeric { " class=\"n\"" } else { "" });
        }
        o.push_str("</tr>");
    }
    o.push_str("</tbody></table></div>\n");
    o
}

/// A definition list of (term, already escaped value) pairs.
pub(crate) fn facts(items: &[(&str, String)]) -> String {
    let mut o = String::from("<dl class=\"facts\">");
    for (k, v) in items {
        let _ = write!(o, "<dt>{}</dt><dd>{v}</dd>", esc(k));
    }
    o.push_str("</dl>\n");
    o
}

/// The list of files of a folder: names that are plain relative paths become relative links,
/// anything else is plain text. Frames `frames/NNNNN.png` (and `<sub>/frames/NNNNN.png`) are
/// folded into one line per folder.
pub(crate) fn file_list(files: &[String]) -> String {
    let folder_of = |f: &str| -> Option<String> {
        let (dir, _) = f.rsplit_once('/')?;
        (dir == "frames" || dir.ends_with("/frames")).then(|| dir.to_string())
    };
    let mut o = String::from("<ul class=\"files\">");
    let link = |f: &str| {
        let safe = !f.is_empty() && !f.contains(':') && !f.starts_with('/') && !f.starts_with('\\');
        if safe {
            format!("<li><a href=\"{0}\">{0}</a></li>", esc(f))
        } else {
            format!("<li>{}</li>", esc(f))
        }
    };
    let mut folded: Vec<String> = Vec::new();
    for f in files {
        let Some(dir) = folder_of(f) else {
            o.push_str(&link(f));
            continue;
        };
        if folded.contains(&dir) {
            continue;
        }
        let frames: Vec<&String> = files
            .iter()
            .filter(|g| folder_of(g).as_deref() == Some(dir.as_str()))
            .collect();
        match (frames.first(), frames.last()) {
            (Some(a), Some(b)) if frames.len() > 2 => {
                let _ = write!(
                    o,
                    "<li><a href=\"{0}\">{0}</a> … <a href=\"{1}\">{1}</a> ({2} frames)</li>",
                    esc(a),
                    esc(b),
                    frames.len()
                );
            }
            _ => frames.iter().for_each(|f| o.push_str(&link(f))),
        }
        folded.push(dir);
    }
    o.push_str("</ul>\n");
    o
}

/// Writes `html` as `dir/report.html` atomically and returns the path.
pub(crate) fn write(dir: &Path, html: &str) -> Result<std::path::PathBuf, crate::output::OutputError> {
    let path = dir.join(REPORT_FILE);
    crate::output::write_atomic(&path, html.as_bytes())?;
    Ok(path)
}
