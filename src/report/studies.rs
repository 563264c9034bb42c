//! Reports of the scheme studies: `tinct compare` (metrics against the reference, the panel
//! and the profiles) and `tinct converge` (levels, observed order, grid-convergence index).

use super::{caution, esc, facts, figure, file_list, num, page, table};
use crate::diagnostics::gci::Convergence;
use crate::output::OutputError;
use crate::scenario::Scenario;
use crate::studies::compare::CompareReport;
use crate::studies::converge::ConvergeReport;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The files of `dir` that a study wrote, in name order, with `report.html`.
fn folder_files(dir: &Path, names: &[&str]) -> Vec<String> {
    let mut v: Vec<String> = names
        .iter()
        .filter(|n| dir.join(n).is_file())
        .map(|n| n.to_string())
        .collect();
    v.push(super::REPORT_FILE.into());
    v
}

/// The grid of `scn` in words.
fn grid_words(scn: &Scenario) -> String {
    let g = &scn.model.grid;
    format!("{} × {} cells of {} m × {} m", g.nx, g.ny, num(g.dx), num(g.dy))
}

/// Writes `dir/report.html` for a comparison of schemes on `scn` (the panel and profiles are
/// read from `dir`), and returns its path.
pub fn write_compare_report(dir: &Path, report: &CompareReport, scn: &Scenario) -> Result<PathBuf, OutputError> {
    let mut b = String::new();
    let _ = writeln!(b, "<h1>{}: schemes compared</h1>", esc(&report.scenario));
    let _ = writeln!(
        b,
        "<p class=\"sub\">Comparison report: the same scenario run once per scheme and measured against a reference.</p>"
    );
    b.push_str(&caution());

    b.push_str("<h2>Answers</h2>\n<ul class=\"answers\">\n");
    let sorted = report.sorted_by_l1();
    if let (Some(best), Some(worst)) = (sorted.first(), sorted.last()) {
        let _ = writeln!(
            b,
            "<li>Closest to the reference: {} (relative L1 error {}, peak kept at {} of the reference's); \
             furthest: {} (L1 {}, peak ratio {}).</li>",
            esc(&best.label),
            num(best.norms.l1),
            num(best.norms.peak_ratio),
            esc(&worst.label),
            num(worst.norms.l1),
            num(worst.norms.peak_ratio)
        );
    }
    let undershoots: Vec<&str> = report
        .rows
        .iter()
        .filter(|r| r.norms.min < 0.0)
        .map(|r| r.label.as_str())
        .collect();
    if !undershoots.is_empty() {
        let _ = writeln!(
            b,
            "<li>Negative concentrations (undershoots, not physical) appeared with: {}.</li>",
            esc(&undershoots.join(", "))
        );
    }
    b.push_str("</ul>\n");

    b.push_str("<h2>What was compared</h2>\n");
    let schemes: Vec<&str> = report.rows.iter().map(|r| r.label.as_str()).collect();
    let mut reference = report.reference.description.clone();
    if let Some(src) = report.reference.source {
        reference.push_str(&format!(" (exact solution: {src})"));
    }
    b.push_str(&facts(&[
        ("Scenario", esc(&report.scenario)),
        ("Schemes", esc(&schemes.join(", "))),
        ("Reference", esc(&reference)),
        ("Grid", esc(&grid_words(scn))),
        ("Tracer", esc(&format!("{} in {}", scn.tracer.name, scn.tracer.units))),
        ("Runs at a time", report.concurrent.to_string()),
    ]));

    b.push_str("<h2>Metrics</h2>\n");
    let rows: Vec<Vec<String>> = sorted
        .iter()
        .map(|r| {
            let n = &r.norms;
            vec![
                esc(&r.label),
                num(n.l1),
                num(n.l2),
                num(n.linf),
                num(n.peak_ratio),
                num(n.min),
                num(n.max),
                num(r.mass_error),
                r.k_mean().map_or_else(|| "-".into(), num),
                num(r.seconds),
            ]
        })
        .collect();
    b.push_str(&table(
        Some("Sorted by L1 error, smallest first (as in metrics.csv)"),
        &[
            ("scheme", false),
            ("L1", true),
            ("L2", true),
            ("Linf", true),
            ("peak ratio", true),
            ("min", true),
            ("max", true),
            ("mass error", true),
            ("numerical K [m²/s]", true),
            ("wall [s]", true),
        ],
        &rows,
    ));
    b.push_str(
        "<p class=\"muted\">L1, L2 and Linf are relative to the reference's norms; the numerical K is the \
         plume's moment-growth diffusivity minus the physical one, averaged over x and y.</p>\n",
    );
    let mut reasons: Vec<(String, Vec<&str>)> = Vec::new();
    for r in &report.rows {
        if let Some(why) = &r.k_numerical_reason {
            match reasons.iter_mut().find(|(w, _)| w == why) {
                Some((_, labels)) => labels.push(&r.label),
                None => reasons.push((why.clone(), vec![&r.label])),
            }
        }
    }
    for (why, labels) in &reasons {
        let _ = writeln!(
            b,
            "<p>No numerical K for {}: {}.</p>",
            esc(&labels.join(", ")),
            esc(why)
        );
    }
    let warnings: Vec<String> = report
        .rows
        .iter()
        .flat_map(|r| r.warnings.iter().map(move |w| format!("{}: {w}", r.label)))
        .collect();
    if !warnings.is_empty() {
        b.push_str("<h3>Warnings</h3>\n<ul>\n");
        for w in warnings {
            let _ = writeln!(b, "<li><span class=\"sev sev-warning\">warning</span> {}</li>", esc(&w));
        }
        b.push_str("</ul>\n");
    }

    b.push_str("<h2>Pictures</h2>\n");
    b.push_str(&figure(
        &dir.join("panel.png"),
        "one tile per scheme",
        "The reference and one tile per scheme, in one colour scale.",
    ));
    b.push_str(&figure(
        &dir.join("profiles.png"),
        "profiles along a section",
        "Profiles along a straight section through the domain; the reference is emphasised.",
    ));

    b.push_str("<h2>Files</h2>\n");
    b.push_str(&file_list(&folder_files(
        dir,
        &["panel.png", "profiles.png", "metrics.csv"],
    )));
    super::write(dir, &page(&format!("{}: schemes compared", report.scenario), &b))
}

/// Advice on one quantity's finest triple, in words.
pub(crate) fn gci_advice(name: &str, g: &crate::diagnostics::gci::Gci) -> String {
    if name == "l1" {
        // The error against the exact solution: its order is the answer, not its GCI.
        return format!(
            "l1 (error against the exact solution): {} on the finest grid, falling with observed order {} ({}).",
            num(g.f[0]),
            g.p.map_or_else(|| "-".into(), num),
            g.convergence.word()
        );
    }
    match (&g.convergence, g.gci_fine21) {
        (Convergence::Monotonic, Some(gci)) if gci > 0.1 => format!(
            "{name}: converges monotonically (observed order {}), but the GCI of the finest grid is {}%: \
             the grids are too coarse to quote this value; refine further.",
            g.p.map_or_else(|| "-".into(), num),
            num(100.0 * gci)
        ),
        (Convergence::Monotonic, Some(gci)) => format!(
            "{name}: converges monotonically (observed order {}); the finest grid's value {} is within about {}% \
             of the grid-independent value (GCI).",
            g.p.map_or_else(|| "-".into(), num),
            num(g.f[0]),
            num(100.0 * gci)
        ),
        _ => format!("{name}: {}", g.convergence.explain()),
    }
}

/// Writes `dir/report.html` for a convergence study of `scn` (`converge.png` is read from
/// `dir`), and returns its path.
pub fn write_converge_report(dir: &Path, report: &ConvergeReport, scn: &Scenario) -> Result<PathBuf, OutputError> {
    let mut b = String::new();
    let _ = writeln!(b, "<h1>{}: grid convergence</h1>", esc(&report.scenario));
    let _ = writeln!(
        b,
        "<p class=\"sub\">Convergence report: the same scenario on refined grids, with the three-grid \
         procedure of Celik et al. (2008), J. Fluids Eng. 130, 078001.</p>"
    );
    b.push_str(&caution());

    b.push_str("<h2>Answers</h2>\n<ul class=\"answers\">\n");
    for q in &report.quantities {
        let line = match q.finest() {
            Some(g) => gci_advice(&q.name, g),
            None => format!("{}: undefined on at least one grid of the finest triple.", q.name),
        };
        let _ = writeln!(b, "<li>{}</li>", esc(&line));
    }
    b.push_str("</ul>\n");
    for n in &report.notes {
        let _ = writeln!(b, "<p>{}</p>", esc(n));
    }

    b.push_str("<h2>What was refined</h2>\n");
    b.push_str(&facts(&[
        ("Scenario", esc(&report.scenario)),
        ("Base grid", esc(&grid_words(scn))),
        (
            "Scheme",
            esc(&format!("{}, {}", scn.scheme.limiter.name(), scn.scheme.time.name())),
        ),
    ]));
    let rows: Vec<Vec<String>> = report
        .levels
        .iter()
        .enumerate()
        .map(|(k, l)| {
            vec![
                k.to_string(),
                format!("{} × {}", l.nx, l.ny),
                num(l.h),
                l.steps.to_string(),
                num(l.seconds),
            ]
        })
        .collect();
    b.push_str(&table(
        Some("Grids, coarsest first"),
        &[
            ("level", true),
            ("cells", true),
            ("h [m]", true),
            ("steps", true),
            ("wall [s]", true),
        ],
        &rows,
    ));

    b.push_str("<h2>Observed order and GCI</h2>\n");
    let pct = |x: Option<f64>| x.map_or_else(|| "-".into(), |v| format!("{}%", num(100.0 * v)));
    let opt = |x: Option<f64>| x.map_or_else(|| "-".into(), num);
    let rows: Vec<Vec<String>> = report
        .quantities
        .iter()
        .map(|q| match q.finest() {
            Some(g) => vec![
                esc(&q.name),
                num(g.f[0]),
                opt(g.p),
                opt(g.extrapolated),
                pct(g.e_a21),
                pct(g.e_ext21),
                pct(g.gci_fine21),
                esc(g.convergence.word()),
            ],
            None => {
                let mut r = vec![esc(&q.name)];
                r.extend(std::iter::repeat_n("-".to_string(), 6));
                r.push("undefined".into());
                r
            }
        })
        .collect();
    b.push_str(&table(
        Some("Finest triple of grids"),
        &[
            ("quantity", false),
            ("finest value", true),
            ("order p", true),
            ("extrapolated", true),
            ("e_a21", true),
            ("e_ext21", true),
            ("GCI fine", true),
            ("convergence", false),
        ],
        &rows,
    ));

    b.push_str("<h2>Pictures</h2>\n");
    b.push_str(&figure(
        &dir.join("converge.png"),
        "error against grid spacing",
        "Error against grid spacing (log-log), with guide slopes of order 1 and 2.",
    ));

    b.push_str("<h2>Files</h2>\n");
    b.push_str(&file_list(&folder_files(dir, &["converge.csv", "converge.png"])));
    super::write(dir, &page(&format!("{}: grid convergence", report.scenario), &b))
}
