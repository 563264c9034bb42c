//! The run report: answers first (one sentence per receptor, flushing, exceedance), then the
//! scenario in words, advice and warnings, the receptor table, the pictures, the budget, the
//! numerical facts and the file list.

use super::{area, caution, esc, facts, figure, file_list, num, page, table, time};
use crate::output::OutputError;
use crate::run::receptors::ReceptorStats;
use crate::run::RunSummary;
use crate::scenario::Scenario;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The plots of `<run>/plots/` in the order the report shows them, with their captions.
const PLOTS: [(&str, &str); 4] = [
    (
        "receptors",
        "Concentration at each receptor against time; dashed lines are the thresholds.",
    ),
    (
        "budget",
        "Mass budget against time: mass in the water, added, carried in and out, decayed.",
    ),
    (
        "flushing",
        "Mass remaining in the basin against time, with the exponential fit.",
    ),
    ("exceedance", "Water area at or above each threshold against time."),
];

/// Most frames shown in the strip.
const STRIP: usize = 6;

/// Writes `dir/report.html` for the run in `dir` (its pictures are read from `dir`), and
/// returns its path.
pub fn write_run_report(dir: &Path, scn: &Scenario, summary: &RunSummary) -> Result<PathBuf, OutputError> {
    super::write(dir, &run_html(dir, scn, summary))
}

/// The receptor's sentence, e.g. "swimming-beach: reached 1 ug/L at 8 h 36 min; peak 3.07 ug/L
/// at 12 h 25 min; 3 h 49 min above 1 ug/L."
pub fn receptor_sentence(r: &ReceptorStats, units: &str) -> String {
    let peak = if r.peak.is_finite() && r.peak > 0.0 {
        format!("peak {} {units} at {}", num(r.peak), time(r.peak_time))
    } else {
        "the tracer never reached it".to_string()
    };
    match (r.threshold, r.arrival_time) {
        (Some(th), Some(arr)) => format!(
            "{}: reached {} {units} at {}; {peak}; {} above {} {units}.",
            r.name,
            num(th),
            time(arr),
            time(r.time_above_threshold.unwrap_or(0.0)),
            num(th)
        ),
        (Some(th), None) => format!(
            "{}: never reached its threshold of {} {units}; {peak}.",
            r.name,
            num(th)
        ),
        (None, _) => format!("{}: {peak} (no threshold given).", r.name),
    }
}

/// The flushing sentence, or why there is none.
fn flushing_sentence(s: &RunSummary) -> String {
    let Some(f) = &s.flushing else {
        return format!(
            "Flushing is not measured for this run: {}.",
            s.flushing_reason.as_deref().unwrap_or("no reason recorded")
        );
    };
    let mut t = match f.e_folding_time {
        Some(e) => format!(
            "Flushing: the mass in the basin fell to 1/e (37%) of its start after {} (e-folding time)",
            time(e)
        ),
        None => format!(
            "Flushing: the mass in the basin did not fall to 1/e (37%) of its start within the {} simulated",
            time(s.simulated_time)
        ),
    };
    if f.fitted_rate > 0.0 {
        let _ = write!(
            t,
            "; an exponential fit gives an e-folding time of {} (fit R² {})",
            time(1.0 / f.fitted_rate),
            num(f.fit_r2)
        );
    }
    if let Some(p) = f.prism_estimate {
        let _ = write!(
            t,
            "; the tidal-prism estimate beside it is {}{}",
            time(p),
            f.return_flow
                .map(|b| format!(" (return-flow factor b = {})", num(b)))
                .unwrap_or_default()
        );
    }
    t.push('.');
    // The note explains why the two estimates differ; without a tide it repeats the above.
    if f.prism_estimate.is_some() && !f.note.is_empty() {
        let mut c = f.note.chars();
        if let Some(first) = c.next() {
            let _ = write!(t, " {}{}", first.to_uppercase(), c.as_str());
        }
    }
    t
}

/// The exceedance sentence of one threshold.
fn exceedance_sentence(e: &crate::run::exceedance::ExceedanceFigure, units: &str) -> String {
    let who = if e.receptors.is_empty() {
        String::new()
    } else {
        format!(" (threshold of {})", e.receptors.join(", "))
    };
    if !(e.largest_area > 0.0) {
        return format!("No water reached {} {units}{who} at any step.", num(e.threshold));
    }
    let mut t = format!(
        "Above {} {units}{who}: at most {} at {}; {} was above at some time",
        num(e.threshold),
        area(e.largest_area),
        time(e.largest_area_time),
        area(e.area_ever_above)
    );
    if let Some(p) = e.longest_at {
        let _ = write!(
            t,
            "; the longest a single place stayed above was {} at ({}, {}) m",
            time(e.longest_time_above),
            num(p.0),
            num(p.1)
        );
    }
    t.push('.');
    t
}

/// Status line: completed, or stopped and why (prominent).
fn status(s: &RunSummary) -> String {
    if s.status == "completed" {
        format!(
            "<p><span class=\"status\">Completed</span> {} simulated in {} steps.</p>\n",
            esc(&time(s.simulated_time)),
            s.steps
        )
    } else {
        format!(
            "<div class=\"stopped\" role=\"alert\">The run did not complete: it {} at {} (step {}). {} \
             The figures below cover the run up to that time only.</div>\n",
            esc(&s.status.replace('_', " ")),
            esc(&time(s.simulated_time)),
            s.steps,
            esc(s.error.as_deref().unwrap_or(""))
        )
    }
}

/// The receptor table.
fn receptor_table(s: &RunSummary, units: &str) -> String {
    let rows: Vec<Vec<String>> = s
        .receptors
        .iter()
        .map(|r| {
            let opt_t = |v: Option<f64>| v.map_or_else(|| "-".to_string(), time);
            vec![
                esc(&r.name),
                esc(&format!("({}, {})", num(r.at.0), num(r.at.1))),
                r.threshold.map_or_else(|| "-".into(), num),
                num(r.peak),
                esc(&time(r.peak_time)),
                esc(&opt_t(r.arrival_time)),
                esc(&opt_t(r.time_above_threshold)),
            ]
        })
        .collect();
    let thr = format!("threshold [{units}]");
    let peak = format!("peak [{units}]");
    table(
        None,
        &[
            ("receptor", false),
            ("position (x, y) [m]", true),
            (&thr, true),
            (&peak, true),
            ("time of peak", true),
            ("arrival", true),
            ("time above threshold", true),
        ],
        &rows,
    )
}

/// The time of frame `k` of `written` frames when the scenario asks for `frames + 1`.
fn frame_time(scn: &Scenario, k: usize) -> f64 {
    let n = scn.run.frames.max(1);
    if k >= n {
        scn.run.end
    } else {
        scn.run.end * k as f64 / n as f64
    }
}

/// Up to [`STRIP`] evenly spaced frames, each with its time.
fn frame_strip(dir: &Path, scn: &Scenario, written: usize) -> String {
    if written == 0 {
        return String::new();
    }
    let picks: Vec<usize> = if written <= STRIP {
        (0..written).collect()
    } else {
        let mut v: Vec<usize> = (0..STRIP)
            .map(|m| ((m * (written - 1)) as f64 / (STRIP - 1) as f64).round() as usize)
            .collect();
        v.dedup();
        v
    };
    let mut o = String::new();
    for k in picks {
        let t = time(frame_time(scn, k));
        o.push_str(&figure(
            &dir.join(format!("frames/{k:05}.png")),
            &format!("concentration at {t}"),
            &format!("frame {k}, t = {t}"),
        ));
    }
    if o.is_empty() {
        return o;
    }
    format!("<div class=\"strip\">{o}</div>\n")
}

/// The budget table and the per-side table.
fn budget(s: &RunSummary, mass_unit: &str) -> String {
    let rows = vec![
        vec!["mass at the start".into(), num(s.initial_mass)],
        vec!["added by releases".into(), num(s.added)],
        vec!["carried in through the sides".into(), num(s.inflow)],
        vec!["carried out through the sides".into(), num(s.outflow)],
        vec!["removed by decay".into(), num(s.decayed)],
        vec!["mass at the end".into(), num(s.final_mass)],
        vec!["largest relative residual".into(), num(s.max_abs_residual)],
    ];
    let mass_head = format!("mass [{mass_unit}]");
    let mut o = table(Some("Mass budget"), &[("", false), (&mass_head, true)], &rows);
    if !s.sides.is_empty() {
        let rows: Vec<Vec<String>> = s
            .sides
            .iter()
            .map(|b| vec![esc(&b.side), esc(&b.kind), num(b.inflow), num(b.outflow)])
            .collect();
        let i = format!("in [{mass_unit}]");
        let out = format!("out [{mass_unit}]");
        o.push_str(&table(
            Some("Through each side"),
            &[("side", false), ("condition", false), (&i, true), (&out, true)],
            &rows,
        ));
    }
    o
}

/// Numerical facts of the run.
fn numerics(s: &RunSummary) -> String {
    let mut items = vec![
        ("Cells", format!("{} ({} water)", s.cells, s.wet_cells)),
        ("Steps", s.steps.to_string()),
        ("Time step", esc(&format!("{} to {}", time(s.dt_min), time(s.dt_max)))),
        (
            "Scheme",
            esc(&format!(
                "{}, {}{}",
                s.scheme.convection,
                s.scheme.time,
                s.scheme
                    .linear_solver
                    .as_ref()
                    .map(|l| format!(", linear solver {l}"))
                    .unwrap_or_default()
            )),
        ),
        (
            "Wall time",
            esc(&format!(
                "{} (of which writing outputs {})",
                time(s.wall_seconds),
                time(s.output_seconds)
            )),
        ),
        (
            "Speed",
            esc(&format!("{} cell updates per second", num(s.cell_updates_per_second))),
        ),
        (
            "Concentration range",
            esc(&format!(
                "{} to {} over the logged rows",
                num(s.min_ever),
                num(s.max_ever)
            )),
        ),
        (
            "Largest flow divergence",
            esc(&format!("{} 1/s", num(s.max_flow_divergence))),
        ),
    ];
    if s.solver_iterations > 0 {
        items.push((
            "Solver iterations",
            format!("{} ({} corrections)", s.solver_iterations, s.corrections),
        ));
    }
    if let Some(r) = s.flow.residence {
        items.push((
            "Residence time V/Q",
            esc(&format!("{} (through-flow {} m³/s)", time(r), num(s.flow.discharge))),
        ));
    }
    if let Some(p) = s.flow.prism {
        items.push(("Tidal prism", esc(&format!("{} m³", num(p)))));
    }
    facts(&items)
}

/// The effective diffusivity, or why there is none.
fn effective(s: &RunSummary) -> String {
    match &s.effective_diffusivity {
        Some(e) => format!(
            "<p>The plume spread as if the diffusivity were {} m²/s along x and {} m²/s along y, against the \
             physical {} and {} m²/s (measured from {} to {}); the difference is the scheme's numerical \
             diffusion. <span class=\"muted\">{}</span></p>\n",
            num(e.kx),
            num(e.ky),
            num(e.physical_kx),
            num(e.physical_ky),
            esc(&time(e.from_time)),
            esc(&time(e.to_time)),
            esc(&e.note)
        ),
        None => format!(
            "<p class=\"muted\">No effective diffusivity: {}.</p>\n",
            esc(s.effective_diffusivity_reason.as_deref().unwrap_or("not measured"))
        ),
    }
}

/// The exceedance table.
fn exceedance_table(s: &RunSummary, units: &str) -> String {
    if s.exceedance.is_empty() {
        return String::new();
    }
    let rows: Vec<Vec<String>> = s
        .exceedance
        .iter()
        .map(|e| {
            vec![
                num(e.threshold),
                esc(&e.receptors.join(", ")),
                num(e.largest_area),
                esc(&time(e.largest_area_time)),
                num(e.area_ever_above),
                esc(&time(e.longest_time_above)),
                e.longest_at
                    .map_or_else(|| "-".into(), |p| esc(&format!("({}, {})", num(p.0), num(p.1)))),
            ]
        })
        .collect();
    let th = format!("threshold [{units}]");
    table(
        Some("Exceedance of the receptor thresholds over the whole water body"),
        &[
            (&th, true),
            ("receptors", false),
            ("largest area [m²]", true),
            ("when", true),
            ("area ever above [m²]", true),
            ("longest time above", true),
            ("where [m]", true),
        ],
        &rows,
    )
}

/// The whole page.
fn run_html(dir: &Path, scn: &Scenario, s: &RunSummary) -> String {
    let units = scn.tracer.units.as_str();
    let mu = super::mass_unit(units);
    let mut b = String::new();
    let _ = writeln!(b, "<h1>{}</h1>", esc(&scn.name));
    let _ = writeln!(
        b,
        "<p class=\"sub\">Run report: {} in {}, {}.</p>",
        esc(&scn.tracer.name),
        esc(units),
        esc(&s.program)
    );
    b.push_str(&status(s));
    b.push_str(&caution());

    b.push_str("<h2>Answers</h2>\n<ul class=\"answers\">\n");
    if s.receptors.is_empty() {
        b.push_str("<li>The scenario names no receptor.</li>\n");
    }
    for r in &s.receptors {
        let _ = writeln!(b, "<li>{}</li>", esc(&receptor_sentence(r, units)));
    }
    let _ = writeln!(b, "<li>{}</li>", esc(&flushing_sentence(s)));
    for e in &s.exceedance {
        let _ = writeln!(b, "<li>{}</li>", esc(&exceedance_sentence(e, units)));
    }
    b.push_str("</ul>\n");

    b.push_str("<h2>The scenario</h2>\n");
    b.push_str(&super::scenario::in_words(scn));

    if !s.advice.is_empty() || !s.warnings.is_empty() {
        b.push_str("<h2>Advice and warnings</h2>\n<ul>\n");
        for a in &s.advice {
            let class = match a.severity {
                crate::diagnostics::advice::Severity::Note => "sev-note",
                crate::diagnostics::advice::Severity::Warning => "sev-warning",
                crate::diagnostics::advice::Severity::Blocking => "sev-blocking",
            };
            let _ = writeln!(
                b,
                "<li><span class=\"sev {class}\">{}</span> {}</li>",
                esc(a.severity.word()),
                esc(&a.text)
            );
        }
        for w in &s.warnings {
            let _ = writeln!(b, "<li><span class=\"sev sev-warning\">warning</span> {}</li>", esc(w));
        }
        b.push_str("</ul>\n");
    }

    if !s.receptors.is_empty() {
        b.push_str("<h2>Receptors</h2>\n");
        b.push_str(&receptor_table(s, units));
    }
    if let Some(p) = &s.particles {
        b.push_str(&super::particles::section(dir, p, units));
    }
    b.push_str(&super::influence::section(dir));

    b.push_str("<h2>Pictures</h2>\n");
    let plots = dir.join("plots");
    let mut shown: Vec<String> = Vec::new();
    for (name, caption) in PLOTS {
        let file = format!("{name}.png");
        b.push_str(&figure(&plots.join(&file), caption, caption));
        shown.push(file);
    }
    // Any other plot in the folder, in name order.
    let mut others: Vec<String> = std::fs::read_dir(&plots)
        .map(|rd| {
            rd.flatten()
                .filter_map(|e| e.file_name().to_str().map(String::from))
                .filter(|n| n.ends_with(".png") && !shown.contains(n))
                .collect()
        })
        .unwrap_or_default();
    others.sort();
    for n in others {
        b.push_str(&figure(&plots.join(&n), &n, &format!("plots/{n}")));
    }
    b.push_str(&figure(
        &dir.join("envelope.png"),
        "envelope map",
        "Envelope: the largest concentration each cell reached at any step of the run.",
    ));
    let strip = frame_strip(dir, scn, s.frames);
    if !strip.is_empty() {
        b.push_str("<h3>Frames</h3>\n");
        b.push_str(&strip);
    }

    b.push_str("<h2>Budget, flushing and exceedance</h2>\n");
    b.push_str(&budget(s, &mu));
    if s.flushing.is_some() {
        let _ = writeln!(b, "<p>{}</p>", esc(&flushing_sentence(s)));
    }
    b.push_str(&exceedance_table(s, units));
    b.push_str(&effective(s));

    b.push_str("<h2>Numerical facts</h2>\n");
    b.push_str(&numerics(s));

    b.push_str("<h2>Files</h2>\n");
    let mut files = s.files.clone();
    if !files.iter().any(|f| f == super::REPORT_FILE) {
        files.push(super::REPORT_FILE.into());
    }
    b.push_str(&file_list(&files));
    page(&format!("{}: run report", scn.name), &b)
}
