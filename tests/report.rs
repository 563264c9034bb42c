//! `report.html` of a run, a comparison and a convergence study, through the real binary:
//! each parses as HTML5 without errors (html5ever), links nothing outside its folder, embeds
//! its pictures as `data:` URIs, names every receptor with its peak from `summary.json` and
//! carries the caution. With Chromium on PATH, the run report is also rendered and printed.

mod common;

use common::{root, tinct};
use html5ever::tendril::TendrilSink;
use markup5ever_rcdom::{Handle, NodeData, RcDom};
use std::path::Path;

/// A basin with a through-flow, a decaying release and two receptors with thresholds (one
/// name with markup characters, to check the escaping).
const BASIN: &str = r#"name = "small-basin"
[grid]
nx = 40
ny = 24
dx = 10.0
depth = 3.0
[tracer]
name = "dye"
units = "ug/L"
diffusivity = 0.5
t90 = 36000.0
[flow]
kind = "openings"
[[flow.opening]]
name = "river"
side = "west"
from = 60.0
to = 180.0
discharge = 4.0
[[flow.opening]]
name = "mouth"
side = "east"
from = 80.0
to = 160.0
discharge = -4.0
[boundary]
west = "open"
east = "open"
south = "wall"
north = "wall"
[[source]]
name = "spill"
at = [80.0, 120.0]
mass = 2.0e6
spread = 15.0
[[receptor]]
name = "beach <north> & co"
at = [200.0, 200.0]
threshold = 1.0
[[receptor]]
name = "mouth-buoy"
at = [380.0, 120.0]
threshold = 5.0
[run]
end = 7200.0
frames = 12
"#;

/// A parsed page: its text, every (element, attribute, value) and the parser's errors.
struct Page {
    raw: String,
    text: String,
    attrs: Vec<(String, String, String)>,
    errors: Vec<String>,
}

fn walk(h: &Handle, text: &mut String, attrs: &mut Vec<(String, String, String)>) {
    match &h.data {
        NodeData::Text { contents } => text.push_str(&contents.borrow()),
        NodeData::Element { name, attrs: a, .. } => {
            for at in a.borrow().iter() {
                attrs.push((name.local.to_string(), at.name.local.to_string(), at.value.to_string()));
            }
        }
        _ => {}
    }
    for c in h.children.borrow().iter() {
        walk(c, text, attrs);
    }
}

fn parse(path: &Path) -> Page {
    let raw = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let dom: RcDom = html5ever::parse_document(RcDom::default(), Default::default())
        .from_utf8()
        .read_from(&mut raw.as_bytes())
        .unwrap();
    let (mut text, mut attrs) = (String::new(), Vec::new());
    walk(&dom.document, &mut text, &mut attrs);
    let errors = dom.errors.borrow().iter().map(|e| e.to_string()).collect();
    Page {
        raw,
        text,
        attrs,
        errors,
    }
}

/// The checks every report passes: no parse error at all (the page is written as strict
/// HTML5, so none is benign), a doctype, no link or source outside the folder, every image a
/// PNG data URI, and the caution.
fn check_common(p: &Page) {
    assert!(p.errors.is_empty(), "HTML5 parse errors: {:?}", p.errors);
    assert!(p.raw.starts_with("<!DOCTYPE html>"));
    for (el, name, value) in &p.attrs {
        if name == "src" || name == "href" {
            let v = value.trim().to_ascii_lowercase();
            for bad in ["http:", "https:", "//", "file:", "javascript:"] {
                assert!(!v.starts_with(bad), "<{el} {name}=\"{value}\">");
            }
        }
        if el == "img" && name == "src" {
            assert!(value.starts_with("data:image/png;base64,"), "img src {value:.60}");
        }
    }
    assert!(!p.raw.contains("<script"), "no script");
    assert!(
        !p.raw.to_ascii_lowercase().contains("url("),
        "no external resource in the CSS"
    );
    assert!(!p.raw.contains("http://") && !p.raw.contains("https://"));
    assert!(p.text.contains(tinct::run::CAUTION), "the caution is on the page");
}

/// Whether the page embeds the PNG at `path` (its exact bytes).
fn embeds(p: &Page, path: &Path) -> bool {
    use base64::Engine as _;
    let b64 = base64::engine::general_purpose::STANDARD.encode(std::fs::read(path).unwrap());
    p.attrs
        .iter()
        .any(|(el, n, v)| el == "img" && n == "src" && v.strip_prefix("data:image/png;base64,") == Some(&b64))
}

fn run_basin(dir: &Path) -> std::path::PathBuf {
    std::fs::write(dir.join("basin.toml"), BASIN).unwrap();
    let o = tinct(&["run", "basin.toml", "--out", "out", "--quiet"], dir);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir.join("out/small-basin")
}

#[test]
fn the_run_report_answers_and_embeds_everything() {
    let dir = tempfile::tempdir().unwrap();
    let run = run_basin(dir.path());
    let p = parse(&run.join("report.html"));
    check_common(&p);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    let files: Vec<&str> = summary["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_str().unwrap())
        .collect();
    assert!(files.contains(&"report.html"), "{files:?}");
    let receptors = summary["receptors"].as_array().unwrap();
    assert_eq!(receptors.len(), 2);
    for r in receptors {
        let name = r["name"].as_str().unwrap();
        // The receptor's name survives escaping, and its peak appears with three significant
        // figures (the report's rounding; common practice).
        assert!(p.text.contains(name), "{name}");
        let peak = tinct::report::num(r["peak"].as_f64().unwrap());
        assert!(p.text.contains(&format!("peak {peak} ug/L")), "{name}: peak {peak}");
    }
    assert!(
        p.raw.contains("beach &lt;north&gt; &amp; co"),
        "escaped once, not twice"
    );
    // The first receptor reaches its threshold: its arrival time is in its sentence.
    let arrival = receptors[0]["arrival_time"].as_f64().expect("the beach is reached");
    assert!(p
        .text
        .contains(&format!("reached 1 ug/L at {}", tinct::output::format_time(arrival))));
    assert!(embeds(&p, &run.join("envelope.png")), "envelope.png embedded");
    if let Ok(rd) = std::fs::read_dir(run.join("plots")) {
        for e in rd
            .flatten()
            .filter(|e| e.path().extension().is_some_and(|x| x == "png"))
        {
            assert!(embeds(&p, &e.path()), "{} embedded", e.path().display());
        }
    }
    // The first and last frames are in the strip (13 frames: 0, 2, 5, 7, 10, 12).
    assert!(embeds(&p, &run.join("frames/00000.png")) && embeds(&p, &run.join("frames/00012.png")));
    assert!(p.text.contains("frame 12, t = 2 h 00 min"));
    // Print layout: A4 page and figures kept whole.
    assert!(p.raw.contains("size: A4") && p.raw.contains("break-inside: avoid"));
}

#[test]
fn the_run_report_embeds_every_plot_it_finds() {
    // Through the library: a run, then pictures dropped into plots/ and the report rewritten.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("basin.toml"), BASIN).unwrap();
    let scn = tinct::scenario::load(&dir.path().join("basin.toml"), &[]).unwrap();
    let out = tinct::run::execute(&scn, &dir.path().join("out"), &mut |_| {}, &mut |_| {}).unwrap();
    let plots = out.dir.join("plots");
    std::fs::create_dir_all(&plots).unwrap();
    std::fs::copy(out.dir.join("frames/00003.png"), plots.join("receptors.png")).unwrap();
    std::fs::copy(out.dir.join("frames/00004.png"), plots.join("other.png")).unwrap();
    let path = tinct::report::write_run_report(&out.dir, &scn, &out.summary).unwrap();
    let p = parse(&path);
    check_common(&p);
    assert!(embeds(&p, &plots.join("receptors.png")) && embeds(&p, &plots.join("other.png")));
}

#[test]
fn a_stopped_run_says_so_before_the_answers() {
    // The report of a run that stopped early states it, and why, ahead of any figure.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("basin.toml"), BASIN).unwrap();
    let scn = tinct::scenario::load(&dir.path().join("basin.toml"), &[]).unwrap();
    let out = tinct::run::execute(&scn, &dir.path().join("out"), &mut |_| {}, &mut |_| {}).unwrap();
    let p = parse(&out.dir.join("report.html"));
    let done = p.text.find("Completed").expect("status shown");
    assert!(done < p.text.find("Answers").unwrap());
    assert!(!p.text.contains("did not complete"));
    let mut stopped = out.summary.clone();
    stopped.status = "diverged".into();
    stopped.error = Some("the field became non-finite at step 99".into());
    let path = tinct::report::write_run_report(&out.dir, &scn, &stopped).unwrap();
    let p = parse(&path);
    check_common(&p);
    let warn = p
        .text
        .find("The run did not complete: it diverged")
        .expect("stopped status");
    assert!(warn < p.text.find("Answers").unwrap());
    assert!(p.text.contains("non-finite at step 99"));
}

#[test]
fn the_compare_report_has_the_metrics_and_the_panel() {
    let dir = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/rotating-cone.toml");
    let o = tinct(
        &[
            "compare",
            scn.to_str().unwrap(),
            "--schemes",
            "upwind,van_leer",
            "--out",
            "out",
            "--set",
            "grid.nx=32",
            "--set",
            "grid.ny=32",
            "--quiet",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let folder = dir.path().join("out/rotating-cone/compare");
    let p = parse(&folder.join("report.html"));
    check_common(&p);
    assert!(embeds(&p, &folder.join("panel.png")));
    if folder.join("profiles.png").is_file() {
        assert!(embeds(&p, &folder.join("profiles.png")));
    }
    // Every row of metrics.csv is in the table with its L1 error.
    let mut r = csv::Reader::from_path(folder.join("metrics.csv")).unwrap();
    let mut rows = 0;
    for rec in r.records() {
        let rec = rec.unwrap();
        let l1: f64 = rec[1].parse().unwrap();
        assert!(p.text.contains(&rec[0]), "{}", &rec[0]);
        assert!(p.text.contains(&tinct::report::num(l1)), "L1 {l1}");
        rows += 1;
    }
    assert_eq!(rows, 2);
    assert!(p.text.contains("Zalesak"), "the exact solution's source is named");
}

#[test]
fn the_converge_report_has_the_order_and_the_plot() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("puff.toml"),
        r#"name = "puff-study"
[grid]
nx = 30
ny = 20
dx = 8.0
[tracer]
diffusivity = [0.1, 0.05]
[flow]
kind = "uniform"
velocity = [0.5, 0.25]
[boundary]
west = "periodic"
east = "periodic"
south = "periodic"
north = "periodic"
[initial]
kind = "gaussian"
centre = [100.0, 70.0]
sigma = 20.0
peak = 1.0
[run]
end = 100.0
frames = 1
"#,
    )
    .unwrap();
    let o = tinct(
        &[
            "converge",
            "puff.toml",
            "--out",
            "out",
            "--quiet",
            "--quantity",
            "l1,max",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let folder = dir.path().join("out/puff-study/converge");
    let p = parse(&folder.join("report.html"));
    check_common(&p);
    assert!(embeds(&p, &folder.join("converge.png")));
    assert!(p.text.contains("Celik et al. (2008)"));
    // The observed order of the finest triple from converge.csv, as the table shows it.
    let mut r = csv::Reader::from_path(folder.join("converge.csv")).unwrap();
    let orders: Vec<f64> = r
        .records()
        .filter_map(|rec| rec.unwrap()[8].parse::<f64>().ok())
        .collect();
    assert!(!orders.is_empty());
    for p_obs in orders {
        assert!(p.text.contains(&tinct::report::num(p_obs)), "order {p_obs}");
    }
}

/// `chromium` or `chromium-browser` on PATH.
fn chromium() -> Option<std::path::PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|d| [d.join("chromium"), d.join("chromium-browser")])
        .find(|p| p.is_file())
}

#[test]
fn chromium_renders_and_prints_the_run_report() {
    let Some(browser) = chromium() else {
        println!("skipped: no chromium or chromium-browser on PATH");
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let run = run_basin(dir.path());
    let report = run.join("report.html");
    let url = format!("file://{}", report.display());
    let shot = dir.path().join("shot.png");
    let pdf = dir.path().join("report.pdf");
    let browse = |extra: &str, profile: &str| {
        let profile = dir.path().join(profile);
        let o = std::process::Command::new(&browser)
            .args(["--headless", "--no-sandbox", "--disable-gpu"])
            .arg(format!("--user-data-dir={}", profile.display()))
            .arg(extra)
            .arg(&url)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    };
    browse(&format!("--screenshot={}", shot.display()), "p1");
    let img = image::open(&shot).unwrap().to_rgb8();
    // A rendered page with text, tables and maps: many distinct colours and a fair share of
    // non-white pixels (common practice for a blank-page check).
    let mut colours = std::collections::HashSet::new();
    let mut ink = 0usize;
    for px in img.pixels() {
        colours.insert(px.0);
        if px.0 != [255, 255, 255] {
            ink += 1;
        }
    }
    let share = ink as f64 / (img.width() * img.height()) as f64;
    assert!(colours.len() > 200, "{} colours", colours.len());
    assert!(share > 0.05, "non-white share {share}");
    browse(&format!("--print-to-pdf={}", pdf.display()), "p2");
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF"));
    // The embedded pictures alone weigh tens of kilobytes.
    assert!(bytes.len() > 30_000, "{} bytes", bytes.len());
}

#[test]
fn the_run_report_gives_the_flushing_time_of_summary_json() {
    // A basin that starts uniformly dyed, with no release: the report quotes the e-folding
    // time that summary.json holds (definition: Monsen et al. 2002; common practice).
    let dir = tempfile::tempdir().unwrap();
    let start = BASIN.find("[[source]]").unwrap();
    let end = BASIN.find("[[receptor]]").unwrap();
    let text = format!(
        "{}[initial]\nkind = \"uniform\"\nvalue = 10.0\n{}",
        &BASIN[..start],
        &BASIN[end..]
    );
    std::fs::write(dir.path().join("flush.toml"), text).unwrap();
    let o = tinct(
        &["run", "flush.toml", "--out", "out", "--quiet", "--set", "run.end=18000"],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let run = dir.path().join("out/small-basin");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("summary.json")).unwrap()).unwrap();
    let e = summary["flushing"]["e_folding_time"]
        .as_f64()
        .expect("e-folding time reached");
    let p = parse(&run.join("report.html"));
    check_common(&p);
    let sentence = format!("fell to 1/e (37%) of its start after {}", tinct::output::format_time(e));
    assert!(p.text.contains(&sentence), "{sentence}");
}
