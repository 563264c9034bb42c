//! `<sweep>/report.html`: the sweep in words, the answers per receptor first, the receptor
//! table, the strip plots, the probability maps, the failed members and the caution, in the
//! page shell of every tinct report (`crate::report`): self-contained, pictures embedded, no
//! external links.

use super::stats::{Quantity, ReceptorGather};
use super::{GatherSummary, MemberState};
use crate::report::{caution, esc, facts, figure, num, page, table, time};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The base scenario's file name as the first member's `scenario.toml` records it (its first
/// line reads `# The scenario <file> as run, ...`).
fn base_scenario(s: &GatherSummary) -> Option<String> {
    s.members.iter().find_map(|m| {
        let text = std::fs::read_to_string(m.dir.join("scenario.toml")).ok()?;
        let first = text.lines().next()?;
        let rest = first.strip_prefix("# The scenario ")?;
        Some(rest.split(" as run").next()?.to_string())
    })
}

fn pct(k: usize, n: usize) -> String {
    if n == 0 {
        "-".into()
    } else {
        format!("{}%", num(100.0 * k as f64 / n as f64))
    }
}

fn value(q: Quantity, v: f64) -> String {
    if q.is_time() {
        time(v)
    } else {
        num(v)
    }
}

/// The worst member of `q` at `r` in words.
fn worst_words(s: &GatherSummary, r: &ReceptorGather, q: Quantity) -> Option<String> {
    let w = r.get(q).worst.as_ref()?;
    let axes = s
        .keys
        .iter()
        .zip(&w.values)
        .map(|(k, v)| format!("{k} = {v}"))
        .collect::<Vec<_>>()
        .join(", ");
    let v = match q {
        Quantity::Peak => format!("{} {}", num(w.value), s.tracer.1),
        _ => value(q, w.value),
    };
    Some(format!("member {} ({axes}): {v}", w.member))
}

fn answer(s: &GatherSummary, r: &ReceptorGather) -> String {
    let units = &s.tracer.1;
    let n = r.members;
    let peak = r.get(Quantity::Peak);
    let mut o = format!("<li><strong>{}</strong>: ", esc(&r.name));
    if let Some(t) = r.threshold {
        let _ = write!(
            o,
            "the peak reaches or exceeds {} {} in {} of {n} members ({}); ",
            num(t),
            esc(units),
            r.reached,
            pct(r.reached, n)
        );
    }
    if let Some(d) = peak.dist {
        let _ = write!(
            o,
            "median peak {} {u}, 5–95 %: {} to {} {u}",
            num(d.p50),
            num(d.p5),
            num(d.p95),
            u = esc(units)
        );
    }
    if let Some(w) = worst_words(s, r, Quantity::Peak) {
        let _ = write!(o, "; highest peak: {}", esc(&w));
    }
    let arr = r.get(Quantity::Arrival);
    if r.threshold.is_some() {
        match arr.dist {
            Some(d) => {
                let _ = write!(
                    o,
                    ". Arrival (over the {} members that reach the threshold): median {}, 5–95 %: {} to {}",
                    d.n,
                    time(d.p50),
                    time(d.p5),
                    time(d.p95)
                );
                if let Some(w) = worst_words(s, r, Quantity::Arrival) {
                    let _ = write!(o, "; earliest: {}", esc(&w));
                }
            }
            None => o.push_str(". No member reaches the threshold"),
        }
        if arr.missing > 0 && arr.dist.is_some() {
            let _ = write!(o, "; never in {} members", arr.missing);
        }
        if let (Some(d), Some(w)) = (r.get(Quantity::TimeAbove).dist, worst_words(s, r, Quantity::TimeAbove)) {
            let _ = write!(o, ". Time above: median {}; longest: {}", time(d.p50), esc(&w));
        }
    }
    o.push_str(".</li>\n");
    o
}

fn receptor_table(s: &GatherSummary) -> String {
    let head = [
        ("receptor", false),
        ("quantity", false),
        ("members with a value", true),
        ("5 %", true),
        ("median", true),
        ("95 %", true),
        ("min", true),
        ("max", true),
        ("mean", true),
        ("worst member", true),
    ];
    let mut rows = Vec::new();
    for r in &s.receptors {
        for g in &r.quantities {
            let q = g.quantity;
            let f = |v: Option<f64>| v.map_or("-".to_string(), |v| esc(&value(q, v)));
            let d = g.dist;
            let with = match (q, d) {
                (Quantity::Arrival, Some(d)) if g.missing > 0 => format!("{} (never: {})", d.n, g.missing),
                (_, d) => d.map_or(0, |d| d.n).to_string(),
            };
            rows.push(vec![
                esc(&r.name),
                esc(q.words()),
                with,
                f(d.map(|d| d.p5)),
                f(d.map(|d| d.p50)),
                f(d.map(|d| d.p95)),
                f(d.map(|d| d.min)),
                f(d.map(|d| d.max)),
                f(d.map(|d| d.mean)),
                g.worst.as_ref().map_or("-".into(), |w| w.member.to_string()),
            ]);
        }
    }
    table(
        Some("Receptor quantities over the finished members (quantiles: Hyndman & Fan 1996 type 7)"),
        &head,
        &rows,
    )
}

fn failed_table(s: &GatherSummary) -> String {
    let mut rows = Vec::new();
    for m in &s.members {
        let (state, code, reason, tail) = match &m.state {
            MemberState::Finished => continue,
            MemberState::Failed {
                exit_code,
                reason,
                stderr_tail,
            } => (
                "failed",
                exit_code.map_or("-".into(), |c| c.to_string()),
                reason.as_str(),
                stderr_tail.join("\n"),
            ),
            MemberState::NotRun => ("not run", "-".into(), "no member folder", String::new()),
        };
        rows.push(vec![
            m.index.to_string(),
            esc(&m.describe(&s.keys)),
            state.into(),
            code,
            esc(reason),
            format!("<pre>{}</pre>", esc(&tail)),
        ]);
    }
    table(
        Some("Members that did not finish (left out of every statistic)"),
        &[
            ("member", true),
            ("axis values", false),
            ("state", false),
            ("exit code", true),
            ("why", false),
            ("end of stderr.log", false),
        ],
        &rows,
    )
}

/// Writes the report into `root` and returns its path.
pub fn write_report(root: &Path, s: &GatherSummary) -> Result<PathBuf, crate::output::OutputError> {
    let gather = root.join(super::GATHER_DIR);
    let mut b = String::new();
    let _ = writeln!(b, "<h1>Sweep {}</h1>", esc(&s.name));
    let _ = writeln!(
        b,
        "<p class=\"sub\"><span class=\"status\">{}</span></p>",
        esc(&s.finished_line())
    );
    let mut axes = Vec::new();
    for (k, key) in s.keys.iter().enumerate() {
        let mut vals: Vec<&str> = Vec::new();
        for m in &s.members {
            if let Some(v) = m.values.get(k) {
                if !vals.contains(&v.as_str()) {
                    vals.push(v);
                }
            }
        }
        let shown = if vals.len() > 12 {
            format!("{} values from {} to {}", vals.len(), vals[0], vals[vals.len() - 1])
        } else {
            vals.join(", ")
        };
        axes.push((key.as_str(), esc(&shown)));
    }
    let base = base_scenario(s).unwrap_or_else(|| "(no member's scenario.toml could be read)".into());
    let mut items = vec![
        ("base scenario", esc(&base)),
        ("members", s.members.len().to_string()),
        (
            "finished",
            format!("{} ({})", s.finished, pct(s.finished, s.members.len())),
        ),
        ("failed", s.failed.to_string()),
        ("not run", s.not_run.to_string()),
    ];
    if !s.tracer.0.is_empty() {
        items.push(("tracer", esc(&format!("{} [{}]", s.tracer.0, s.tracer.1))));
    }
    let _ = writeln!(
        b,
        "<p>Every member runs the base scenario with the axis values of its row in members.csv; the statistics below are over the {} finished members only.</p>",
        s.finished
    );
    b.push_str(&facts(&items));
    if !axes.is_empty() {
        b.push_str(&facts(&axes));
    }

    b.push_str("<h2>Answers</h2>\n");
    if s.receptors.is_empty() {
        b.push_str("<p class=\"muted\">No finished member has receptors.</p>\n");
    } else {
        b.push_str("<ul class=\"answers\">\n");
        for r in &s.receptors {
            b.push_str(&answer(s, r));
        }
        b.push_str("</ul>\n");
        b.push_str("<p class=\"muted\">A member reaches a threshold when the receptor's concentration is at or above it at the end of some step (the run's rule). Arrival quantiles are over the members that reach the threshold only.</p>\n");
        b.push_str("<h2>Receptors</h2>\n");
        b.push_str(&receptor_table(s));
        for q in Quantity::ALL {
            b.push_str(&figure(
                &gather.join(format!("receptor_{}.png", q.key())),
                &format!("{} per receptor", q.words()),
                &format!("{} over the finished members", q.words()),
            ));
        }
    }

    b.push_str("<h2>Probability maps</h2>\n");
    if s.maps.is_empty() {
        b.push_str("<p class=\"muted\">No probability map: no receptor threshold, or no readable fields.nc.</p>\n");
    } else {
        let _ = writeln!(
            b,
            "<p>Each map shows, per cell, the fraction of the {} mapped members whose largest concentration at the cell (c_max) is at or above the threshold. Land is shaded; receptors are marked.</p>",
            s.map_members
        );
    }
    for m in &s.maps {
        b.push_str(&figure(
            &root.join(&m.png),
            &format!("probability of reaching {}", m.threshold),
            &format!(
                "probability of reaching {} {} (threshold of {}); {} cells above 0, {} at 1",
                num(m.threshold),
                s.tracer.1,
                m.receptors.join(", "),
                m.cells_any,
                m.cells_all
            ),
        ));
    }
    if s.map_members > 0 {
        b.push_str(&figure(
            &gather.join("c_max_ensemble.png"),
            "ensemble maximum",
            &format!(
                "largest concentration in any member at any step (highest: {} {})",
                s.c_max_peak.map_or("-".into(), num),
                s.tracer.1
            ),
        ));
    }
    for n in &s.map_notes {
        let _ = writeln!(b, "<p class=\"muted\">{}</p>", esc(n));
    }

    b.push_str("<h2>Members that did not finish</h2>\n");
    if s.failed + s.not_run == 0 {
        b.push_str("<p>Every member finished.</p>\n");
    } else {
        b.push_str(&failed_table(s));
    }
    b.push_str("<h2>Files</h2>\n");
    b.push_str(&crate::report::file_list(&s.files));
    b.push_str(&caution());
    let html = page(&format!("Sweep {}", s.name), &b);
    crate::report::write(root, &html)
}
