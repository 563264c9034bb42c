//! Defects that need the scenario's geometry: points (sources, receptors, openings) outside the
//! grid or on land, releases after the end of the run, and the files a scenario reads (land
//! image, depth file, flow file) missing, not what their name says, or all land.

use crate::case::{get, parse_path, show, with, Case, Expect, Seg};
use tinct::scenario::Scenario;
use toml::{Table, Value};

fn text(doc: &Table) -> Vec<u8> {
    toml::to_string(doc).expect("a document serialises").into_bytes()
}

fn pair(x: f64, y: f64) -> Value {
    Value::Array(vec![Value::Float(x), Value::Float(y)])
}

/// The centre of a land cell, if the scenario has land.
fn land_point(s: &Scenario) -> Option<(f64, f64)> {
    let mask = s.model.mask.as_ref()?;
    let g = &s.model.grid;
    (0..g.ny)
        .flat_map(|j| (0..g.nx).map(move |i| (i, j)))
        .find(|&(i, j)| !mask.is_wet(i, j))
        .map(|(i, j)| g.centre(i, j))
}

/// A span along `side` (m, in the side's own coordinate) covered by land only, if any.
fn land_span(s: &Scenario, side: &str) -> Option<(f64, f64)> {
    let mask = s.model.mask.as_ref()?;
    let g = &s.model.grid;
    let along_y = matches!(side, "west" | "east");
    let (count, step, origin) = if along_y {
        (g.ny, g.dy, g.y0)
    } else {
        (g.nx, g.dx, g.x0)
    };
    // The cell of the side at position k along it.
    let dry = |k: usize| {
        let (i, j) = match side {
            "west" => (0, k),
            "east" => (g.nx - 1, k),
            "south" => (k, 0),
            _ => (k, g.ny - 1),
        };
        !mask.is_wet(i, j)
    };
    let first = (0..count.saturating_sub(1)).find(|&k| dry(k) && dry(k + 1))?;
    let a = origin + (first as f64 + 0.25) * step;
    Some((a, a + 1.5 * step))
}

/// Point, release-time and opening cases for the shipped scenario `s` (parsed as `doc`).
pub fn points(scenario: &'static str, doc: &Table, s: &Scenario, out: &mut Vec<Case>) {
    let mut push = |category: &'static str, what: String, d: Table, expect: Expect| {
        out.push(Case {
            category,
            scenario,
            what,
            bytes: text(&d),
            extra: vec![],
            expect,
        });
    };
    let g = &s.model.grid;
    let (x1, y1) = (g.x0 + g.lx(), g.y0 + g.ly());
    let (xm, ym) = (g.x0 + 0.5 * g.lx(), g.y0 + 0.5 * g.ly());
    let outside = [
        (g.x0 - 0.5 * g.dx, ym),
        (x1 + 0.5 * g.dx, ym),
        (xm, g.y0 - 0.5 * g.dy),
        (xm, y1 + 0.5 * g.dy),
        (1e9, 1e9),
        (-1e300, 0.0),
    ];
    for table in ["source", "receptor", "candidate"] {
        let n = get(doc, &[Seg::Key(table.into())])
            .and_then(Value::as_array)
            .map_or(0, Vec::len);
        for k in 0..n {
            let at = parse_path(&format!("{table}[{k}].at"));
            let key = show(&at);
            for (x, y) in outside {
                push(
                    "outside the grid",
                    format!("{key} = [{x}, {y}]"),
                    with(doc, &at, Some(pair(x, y))),
                    Expect::key(&key),
                );
            }
            if let Some((x, y)) = land_point(s) {
                push(
                    "on land",
                    format!("{key} = [{x}, {y}] (a land cell)"),
                    with(doc, &at, Some(pair(x, y))),
                    Expect::key(&key),
                );
            }
        }
    }
    // Releases after the end of the run.
    let n = get(doc, &[Seg::Key("source".into())])
        .and_then(Value::as_array)
        .map_or(0, Vec::len);
    for k in 0..n {
        let start = parse_path(&format!("source[{k}].start"));
        let key = show(&start);
        let mut d = with(doc, &start, Some(Value::Float(2.0 * s.run.end)));
        if get(doc, &parse_path(&format!("source[{k}].stop"))).is_some() {
            d = with(
                &d,
                &parse_path(&format!("source[{k}].stop")),
                Some(Value::Float(3.0 * s.run.end)),
            );
        }
        push(
            "release outside the run",
            format!("{key} = 2 x run.end"),
            d,
            Expect::key(&key),
        );
        let d = with(doc, &start, Some(Value::Float(s.run.end * (1.0 + 1e-9))));
        push(
            "release outside the run",
            format!("{key} just after run.end"),
            d,
            Expect::key(&key),
        );
    }
    // Openings beyond their side or on land.
    let n = get(doc, &parse_path("flow.opening"))
        .and_then(Value::as_array)
        .map_or(0, Vec::len);
    for k in 0..n {
        let o = format!("flow.opening[{k}]");
        let side = get(doc, &parse_path(&format!("{o}.side")))
            .and_then(Value::as_str)
            .unwrap_or("west")
            .to_string();
        let length = if matches!(side.as_str(), "west" | "east") {
            g.ly()
        } else {
            g.lx()
        };
        let origin = if matches!(side.as_str(), "west" | "east") {
            g.y0
        } else {
            g.x0
        };
        let mut spans = vec![
            ("outside the grid", origin + length + 10.0, origin + length + 100.0),
            ("outside the grid", origin - 100.0, origin - 10.0),
            ("outside the grid", origin + 0.5 * length, origin + 0.25 * length),
        ];
        if let Some((a, b)) = land_span(s, &side) {
            spans.push(("on land", a, b));
        }
        for (category, a, b) in spans {
            let d = with(doc, &parse_path(&format!("{o}.from")), Some(Value::Float(a)));
            let d = with(&d, &parse_path(&format!("{o}.to")), Some(Value::Float(b)));
            push(category, format!("{o} from {a} to {b}"), d, Expect::key(&o));
        }
    }
}

/// A PNG of `w` by `h` pixels of one grey level.
fn png(w: u32, h: u32, level: u8) -> Vec<u8> {
    let img = image::GrayImage::from_pixel(w, h, image::Luma([level]));
    let mut bytes = std::io::Cursor::new(Vec::new());
    img.write_to(&mut bytes, image::ImageFormat::Png).expect("PNG encodes");
    bytes.into_inner()
}

/// Cases of the files a scenario reads; `tag` makes the data-file names unique in the corpus.
pub fn files(scenario: &'static str, doc: &Table, s: &Scenario, tag: &str, out: &mut Vec<Case>) {
    let g = &s.model.grid;
    let land = parse_path("grid.land");
    let depth = parse_path("grid.depth");
    // Pixels with the grid's aspect (one per cell), and an image of the wrong aspect.
    let (w, h) = (g.nx as u32, g.ny as u32);
    let images: Vec<(&str, Option<Vec<u8>>, &str)> = vec![
        ("missing land image", None, "missing file"),
        ("land image of text", Some(b"not a picture\n".to_vec()), "not PNG"),
        ("empty land image", Some(vec![]), "not PNG"),
        (
            "land image of JPEG magic",
            Some(vec![0xFF, 0xD8, 0xFF, 0xE0, 0, 0]),
            "not PNG",
        ),
        ("all-land image", Some(png(w, h, 0)), "all land"),
        ("land image of the wrong aspect", Some(png(w, 4 * h, 255)), "image"),
    ];
    for (what, bytes, category) in images {
        let name = format!("{tag}-{}.png", what.replace(' ', "-"));
        out.push(Case {
            category,
            scenario,
            what: format!("grid.land = {what}"),
            bytes: text(&with(doc, &land, Some(Value::String(name.clone())))),
            extra: bytes.map(|b| vec![(name, b)]).unwrap_or_default(),
            expect: Expect::key("grid.land"),
        });
    }
    let csv_rows = |rows: usize, value: &str| -> Vec<u8> {
        let row = vec![value; g.nx].join(",");
        (0..rows)
            .map(|_| row.clone())
            .collect::<Vec<_>>()
            .join("\n")
            .into_bytes()
    };
    let depths: Vec<(&str, Option<Vec<u8>>, &str)> = vec![
        ("missing depth file", None, "missing file"),
        ("depth file of text", Some(b"deep,shallow\n".to_vec()), "not CSV"),
        ("depth file one row short", Some(csv_rows(g.ny - 1, "3.0")), "not CSV"),
        ("depth file of NaN", Some(csv_rows(g.ny, "nan")), "not CSV"),
        ("depth file of negative depths", Some(csv_rows(g.ny, "-2.0")), "not CSV"),
    ];
    for (what, bytes, category) in depths {
        let name = format!("{tag}-{}.csv", what.replace(' ', "-"));
        out.push(Case {
            category,
            scenario,
            what: format!("grid.depth = {what}"),
            bytes: text(&with(doc, &depth, Some(Value::String(name.clone())))),
            extra: bytes.map(|b| vec![(name, b)]).unwrap_or_default(),
            expect: Expect::key("grid.depth"),
        });
    }
    // A flow file that is missing or not a flow file.
    for (what, bytes) in [
        ("missing flow file", None),
        ("flow file of text", Some(b"u,v\nfast,slow\n".to_vec())),
    ] {
        let name = format!("{tag}-{}.csv", what.replace(' ', "-"));
        let mut flow = Table::new();
        flow.insert("kind".into(), Value::String("file".into()));
        flow.insert("path".into(), Value::String(name.clone()));
        out.push(Case {
            category: if bytes.is_some() { "not CSV" } else { "missing file" },
            scenario,
            what: format!("flow.path = {what}"),
            bytes: text(&with(doc, &[Seg::Key("flow".into())], Some(Value::Table(flow)))),
            extra: bytes.map(|b| vec![(name, b)]).unwrap_or_default(),
            expect: Expect::key("flow.path"),
        });
    }
}
