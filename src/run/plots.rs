//! The run's line charts, data in and files out: receptor concentrations (`receptors.png`),
//! the mass budget (`budget.png`), flushing (`flushing.png`) and the area above each threshold
//! (`exceedance.png`), all drawn with [`crate::output::chart`] into the folder the caller
//! gives (`<run>/plots`). Time axes are in s, min or h from the run's length.

use std::path::{Path, PathBuf};

use crate::budget::BudgetRow;
use crate::output::chart::{auto_style, fmt_tick, time_unit, Annotation, Axis, Chart, Dash, Line, RefLine, INK};
use crate::output::{ColourScale, OutputError};

/// One receptor's series and statistics.
#[derive(Debug, Clone, Copy)]
pub struct ReceptorCurve<'a> {
    /// Name.
    pub name: &'a str,
    /// Threshold concentration, if any.
    pub threshold: Option<f64>,
    /// Sample times, s.
    pub times: &'a [f64],
    /// Concentration at each sample time.
    pub values: &'a [f64],
    /// First time the threshold was reached, s.
    pub arrival: Option<f64>,
    /// Largest concentration.
    pub peak: f64,
    /// Time of the peak, s.
    pub peak_time: f64,
}

/// The mass remaining in a flushed basin and its exponential fit.
#[derive(Debug, Clone, Copy)]
pub struct FlushingCurve<'a> {
    /// Sample times, s.
    pub times: &'a [f64],
    /// Mass remaining as a fraction of the start, M(t)/M(0).
    pub fraction: &'a [f64],
    /// Fitted rate k of M/M(0) = exp(-k t), 1/s.
    pub rate: f64,
    /// Time to fall to 1/e, s.
    pub e_folding: Option<f64>,
}

/// Area above each threshold: sample times (s) and per threshold a label (e.g.
/// "above 0.1 kg/m3 (beach)") with the area in m2 at each time.
pub type Exceedance<'a> = (&'a [f64], Vec<(String, Vec<f64>)>);

/// Everything the run's charts show.
#[derive(Debug, Clone)]
pub struct RunPlots<'a> {
    /// Scenario name, in the titles.
    pub scenario: &'a str,
    /// Tracer name.
    pub tracer: &'a str,
    /// Concentration units (e.g. "kg/m3").
    pub units: &'a str,
    /// Logarithmic scale puts the receptor concentrations on a log axis.
    pub scale: ColourScale,
    /// The budget log.
    pub rows: &'a [BudgetRow],
    /// Receptors (no `receptors.png` when empty).
    pub receptors: Vec<ReceptorCurve<'a>>,
    /// Flushing (no `flushing.png` when `None`).
    pub flushing: Option<FlushingCurve<'a>>,
    /// Exceedance areas (no `exceedance.png` when `None` or empty).
    pub exceedance: Option<Exceedance<'a>>,
}

/// Writes the run's charts into `dir` (created if needed): `receptors.png` when there are
/// receptors, `budget.png` always, `flushing.png` and `exceedance.png` when given. Returns the
/// files written.
pub fn write_run_plots(dir: &Path, p: &RunPlots) -> Result<Vec<PathBuf>, OutputError> {
    std::fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
    let mut charts = Vec::new();
    if !p.receptors.is_empty() {
        charts.push(("receptors.png", receptor_chart(p)));
    }
    charts.push(("budget.png", budget_chart(p)));
    if let Some(f) = &p.flushing {
        charts.push(("flushing.png", flushing_chart(p, f)));
    }
    if let Some((t, areas)) = &p.exceedance {
        if !areas.is_empty() {
            charts.push(("exceedance.png", exceedance_chart(p, t, areas)));
        }
    }
    let mut written = Vec::new();
    for (name, chart) in charts {
        let path = dir.join(name);
        chart.write(&path)?;
        written.push(path);
    }
    Ok(written)
}

/// Largest finite value of `v`, or 0.
fn largest(v: impl IntoIterator<Item = f64>) -> f64 {
    v.into_iter().filter(|x| x.is_finite()).fold(0.0, f64::max)
}

/// The time unit for series running to `times`' largest value.
fn unit_of<'t>(times: impl IntoIterator<Item = &'t f64>) -> (f64, &'static str) {
    time_unit(largest(times.into_iter().copied()))
}

fn scaled(v: &[f64], d: f64) -> Vec<f64> {
    v.iter().map(|x| x / d).collect()
}

/// Concentration against time per receptor, thresholds dashed in the receptor's colour,
/// arrival and peak marked.
fn receptor_chart(p: &RunPlots) -> Chart {
    let (d, unit) = unit_of(p.receptors.iter().flat_map(|r| r.times));
    let log = p.scale == ColourScale::Log;
    let label = format!("{} [{}]", p.tracer, p.units);
    let mut y = if log { Axis::log(label) } else { Axis::linear(label) };
    let top = largest(p.receptors.iter().map(|r| r.peak));
    if log && top > 0.0 {
        y.min = Some(top * 1e-6);
    }
    let mut c = Chart::new(
        format!("{}: concentration at the receptors", p.scenario),
        Axis::linear(format!("time [{unit}]")),
        y,
    );
    for (k, r) in p.receptors.iter().enumerate() {
        let (colour, dash) = auto_style(k);
        c.lines.push(
            Line::new(r.name, scaled(r.times, d), r.values.to_vec())
                .colour(colour)
                .dash(dash),
        );
        if let Some(th) = r.threshold {
            c.refs.push(RefLine {
                name: format!("{} threshold {}", r.name, fmt_tick(th)),
                y: th,
                colour: Some(colour),
            });
            if let Some(a) = r.arrival {
                c.notes.push(Annotation {
                    x: a / d,
                    y: th,
                    label: "arrival".into(),
                    colour: Some(colour),
                });
            }
        }
        if r.peak.is_finite() {
            c.notes.push(Annotation {
                x: r.peak_time / d,
                y: r.peak,
                label: "peak".into(),
                colour: Some(colour),
            });
        }
    }
    c
}

/// Reads one budget term from a row.
type Term = fn(&BudgetRow) -> f64;

/// Budget terms against time, with the largest residual in the caption.
fn budget_chart(p: &RunPlots) -> Chart {
    let rows = p.rows;
    let (d, unit) = unit_of(rows.iter().map(|r| &r.time));
    let mu = crate::report::mass_unit(p.units);
    let mut c = Chart::new(
        format!("{}: mass budget", p.scenario),
        Axis::linear(format!("time [{unit}]")),
        Axis::linear(format!("mass [{mu}]")),
    );
    let t: Vec<f64> = rows.iter().map(|r| r.time / d).collect();
    let terms: [(&str, Term); 5] = [
        ("mass in the water", |r| r.mass),
        ("added by sources (cumulative)", |r| r.added),
        ("inflow (cumulative)", |r| r.inflow),
        ("outflow (cumulative)", |r| r.outflow),
        ("decayed (cumulative)", |r| r.decayed),
    ];
    for (k, (name, f)) in terms.iter().enumerate() {
        let v: Vec<f64> = rows.iter().map(f).collect();
        // Terms that stay zero are left out, except the mass itself.
        if k == 0 || v.iter().any(|x| *x != 0.0) {
            let line = Line::new(*name, t.clone(), v);
            c.lines.push(if k == 0 { line.emphasised() } else { line });
        }
    }
    if let Some(first) = rows.first() {
        // mass0 from the first row, where the residual is at round-off.
        let m0 = first.mass - first.added - first.inflow + first.outflow + first.decayed;
        let abs = rows
            .iter()
            .map(|r| (r.mass - (m0 + r.added + r.inflow - r.outflow - r.decayed)).abs())
            .fold(0.0, |a: f64, b| if b.is_nan() { f64::NAN } else { a.max(b) });
        let scale = largest(
            rows.iter()
                .flat_map(|r| [r.mass.abs(), r.added, r.inflow, r.outflow, r.decayed])
                .chain([m0.abs()]),
        );
        let rel = if scale > 0.0 { abs / scale } else { 0.0 };
        c.caption = Some(format!(
            "largest |residual| {} {mu}, {rel:.1e} of the largest budget term",
            fmt_tick(abs)
        ));
    } else {
        c.caption = Some("no budget rows were logged".into());
    }
    c
}

/// Remaining mass fraction on a log axis with the fitted exponential, 1/e and the e-folding
/// time.
fn flushing_chart(p: &RunPlots, f: &FlushingCurve) -> Chart {
    let (d, unit) = unit_of(f.times);
    let smallest = f
        .fraction
        .iter()
        .copied()
        .filter(|v| v.is_finite() && *v > 0.0)
        .fold(1.0 / std::f64::consts::E, f64::min);
    let mut y = Axis::log("remaining mass M(t)/M(0)");
    y.min = Some(10f64.powf((0.5 * smallest).log10().floor()).max(1e-12));
    let mut c = Chart::new(
        format!("{}: flushing", p.scenario),
        Axis::linear(format!("time [{unit}]")),
        y,
    );
    let t = scaled(f.times, d);
    c.lines
        .push(Line::new("remaining mass", t.clone(), f.fraction.to_vec()).emphasised());
    let per_unit = f.rate * d;
    let fit: Vec<f64> = f.times.iter().map(|s| (-f.rate * s).exp()).collect();
    c.lines.push(
        Line::new(format!("fit exp(-k t), k = {} 1/{unit}", fmt_tick(per_unit)), t, fit)
            .colour(crate::output::chart::PALETTE[1])
            .dash(Dash::Dashed),
    );
    let inv_e = 1.0 / std::f64::consts::E;
    c.refs.push(RefLine {
        name: "1/e".into(),
        y: inv_e,
        colour: None,
    });
    if let Some(te) = f.e_folding {
        c.notes.push(Annotation {
            x: te / d,
            y: inv_e,
            label: format!("e-folding {} {unit}", fmt_tick(te / d)),
            colour: Some(INK),
        });
    }
    c
}

/// Area above each threshold against time, in m2 or km2.
fn exceedance_chart(p: &RunPlots, times: &[f64], areas: &[(String, Vec<f64>)]) -> Chart {
    let (d, unit) = unit_of(times);
    let big = largest(areas.iter().flat_map(|(_, a)| a.iter().copied())) >= 1e6;
    let (a_div, a_unit) = if big { (1e6, "km2") } else { (1.0, "m2") };
    let mut c = Chart::new(
        format!("{}: area above the thresholds", p.scenario),
        Axis::linear(format!("time [{unit}]")),
        Axis::linear(format!("area [{a_unit}]")),
    );
    let t = scaled(times, d);
    for (name, a) in areas {
        c.lines.push(Line::new(name.clone(), t.clone(), scaled(a, a_div)));
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    const SCENARIO: &str = r#"name = "puff"
[grid]
nx = 60
ny = 30
dx = 20.0
depth = 3.0
[tracer]
name = "E. coli"
units = "CFU/m3"
diffusivity = [1.0, 0.3]
t90 = 10800.0
[flow]
kind = "uniform"
velocity = [0.15, 0.0]
[boundary]
west = "open"
east = "open"
south = "wall"
north = "open"
[[source]]
name = "overflow"
at = [300.0, 300.0]
mass = 1.0e13
start = 0.0
spread = 20.0
[[receptor]]
name = "swimming area"
at = [700.0, 300.0]
threshold = 5.0e6
[[receptor]]
name = "lifeguard post, far end of the beach"
at = [1000.0, 320.0]
threshold = 5.0e6
[run]
end = 3600.0
frames = 1
log_every = 5
[output]
colour = "log"
"#;

    /// Columns of a CSV text by header name.
    fn columns(text: &str) -> (Vec<String>, Vec<Vec<f64>>) {
        let mut lines = text.lines();
        let head: Vec<String> = csv_names(lines.next().unwrap());
        let mut cols = vec![Vec::new(); head.len()];
        for l in lines {
            for (c, v) in cols.iter_mut().zip(l.split(',')) {
                c.push(v.parse().unwrap());
            }
        }
        (head, cols)
    }

    /// Header names, with the quoted ones unquoted.
    fn csv_names(line: &str) -> Vec<String> {
        let mut out = vec![String::new()];
        let mut quoted = false;
        for ch in line.chars() {
            match ch {
                '"' => quoted = !quoted,
                ',' if !quoted => out.push(String::new()),
                c => out.last_mut().unwrap().push(c),
            }
        }
        out
    }

    fn rows_from_csv(text: &str) -> Vec<BudgetRow> {
        let (_, c) = columns(text);
        (0..c[0].len())
            .map(|k| BudgetRow {
                time: c[0][k],
                step: c[1][k] as u64,
                dt: c[2][k],
                mass: c[3][k],
                added: c[4][k],
                inflow: c[5][k],
                outflow: c[6][k],
                decayed: c[7][k],
                residual: c[8][k],
                min: c[9][k],
                max: c[10][k],
                courant: c[11][k],
            })
            .collect()
    }

    /// Non-white pixels of a written chart.
    fn check_png(path: &Path) -> usize {
        let img = image::open(path).unwrap().to_rgb8();
        assert_eq!(img.height(), crate::output::chart::DEFAULT_SIZE.1);
        assert!(img.width() >= crate::output::chart::DEFAULT_SIZE.0);
        img.pixels().filter(|p| p.0 != [255, 255, 255]).count()
    }

    #[test]
    fn a_real_run_gives_every_chart() {
        let tmp = tempfile::tempdir().unwrap();
        let scn_path = tmp.path().join("puff.toml");
        std::fs::write(&scn_path, SCENARIO).unwrap();
        let scn = crate::scenario::load(&scn_path, &[]).unwrap();
        let out = crate::run::execute(&scn, tmp.path(), &mut |_| {}, &mut |_| {}).unwrap();
        let rows = rows_from_csv(&std::fs::read_to_string(out.dir.join("budget.csv")).unwrap());
        assert!(rows.len() > 3);
        let (names, cols) = columns(&std::fs::read_to_string(out.dir.join("receptors.csv")).unwrap());
        let stats = &out.summary.receptors;
        assert_eq!(names.len(), stats.len() + 1);
        let receptors: Vec<ReceptorCurve> = stats
            .iter()
            .zip(&cols[1..])
            .map(|(s, v)| ReceptorCurve {
                name: &s.name,
                threshold: s.threshold,
                times: &cols[0],
                values: v,
                arrival: s.arrival_time,
                peak: s.peak,
                peak_time: s.peak_time,
            })
            .collect();
        // The plume reaches the first receptor within the hour (0.15 m/s over 400 m).
        assert!(stats[0].arrival_time.is_some(), "{stats:?}");
        let times: Vec<f64> = rows.iter().map(|r| r.time).collect();
        let fraction: Vec<f64> = rows.iter().map(|r| r.mass / rows[0].mass).collect();
        let samples: Vec<(f64, f64)> = rows.iter().map(|r| (r.time, r.mass)).collect();
        let fl = crate::diagnostics::flushing::flushing(&samples, None).unwrap();
        let area: Vec<f64> = fraction.iter().map(|f| 4.0e5 * f).collect();
        let plots = RunPlots {
            scenario: &scn.name,
            tracer: "E. coli",
            units: "CFU/m3",
            scale: ColourScale::Log,
            rows: &rows,
            receptors,
            flushing: Some(FlushingCurve {
                times: &times,
                fraction: &fraction,
                rate: fl.fitted_rate,
                e_folding: fl.e_folding_time,
            }),
            exceedance: Some((&times, vec![("above 5e6 CFU/m3".into(), area)])),
        };
        let dir = out.dir.join("plots");
        let written = write_run_plots(&dir, &plots).unwrap();
        let names: Vec<String> = written
            .iter()
            .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, ["receptors.png", "budget.png", "flushing.png", "exceedance.png"]);
        for p in &written {
            assert!(check_png(p) > 5000, "{}", p.display());
        }
        // Without receptors, flushing and exceedance only the budget is drawn.
        let bare = RunPlots {
            receptors: Vec::new(),
            flushing: None,
            exceedance: Some((&times, Vec::new())),
            ..plots
        };
        let written = write_run_plots(&tmp.path().join("bare"), &bare).unwrap();
        assert_eq!(written.len(), 1);
        assert!(written[0].ends_with("budget.png"));
    }

    #[test]
    fn empty_and_degenerate_inputs_still_draw() {
        let tmp = tempfile::tempdir().unwrap();
        let t = [0.0];
        let v = [0.0];
        let p = RunPlots {
            scenario: "empty",
            tracer: "salt",
            units: "kg/m3",
            scale: ColourScale::Log,
            rows: &[],
            receptors: vec![ReceptorCurve {
                name: "r",
                threshold: Some(0.0),
                times: &t,
                values: &v,
                arrival: Some(0.0),
                peak: f64::NEG_INFINITY,
                peak_time: 0.0,
            }],
            flushing: Some(FlushingCurve {
                times: &t,
                fraction: &v,
                rate: f64::NAN,
                e_folding: None,
            }),
            exceedance: Some((&t, vec![("above 1 kg/m3".into(), vec![f64::NAN])])),
        };
        assert_eq!(write_run_plots(tmp.path(), &p).unwrap().len(), 4);
    }

    #[test]
    fn units_and_time_axes() {
        assert_eq!(crate::report::mass_unit("kg/m3"), "kg");
        assert_eq!(crate::report::mass_unit("CFU/m3"), "CFU");
        assert_eq!(crate::report::mass_unit("ppm"), "ppm × m³");
        // Common practice: hours beyond 3 h, minutes beyond 3 min.
        assert_eq!(unit_of(&[0.0, 7200.0]).1, "min");
        assert_eq!(unit_of(&[0.0, 86400.0]).1, "h");
        assert_eq!(unit_of(&[0.0, 60.0]).1, "s");
    }
}
