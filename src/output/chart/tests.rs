//! Tests of the line charts: valid images of the expected size with their lines drawn, distinct
//! styles, undrawable and degenerate data, legends that fit.

use super::*;
use std::collections::HashSet;

fn count(img: &RgbImage, c: Rgb) -> usize {
    img.pixels().filter(|p| p.0 == c).count()
}

/// Pixels of the plotting area that are neither white nor grid grey.
fn inked(img: &RgbImage, lay: &ChartLayout) -> usize {
    let (l, t, r, b) = lay.plot;
    let mut n = 0;
    for y in t + 2..b.saturating_sub(2) {
        for x in l + 2..r.saturating_sub(2) {
            let p = img.get_pixel(x, y).0;
            if p.iter().any(|&v| v < 200) {
                n += 1;
            }
        }
    }
    n
}

/// Dark pixels in the bottom band of the image (where the caption goes).
fn inked_below(img: &RgbImage, lay: &ChartLayout) -> usize {
    let mut n = 0;
    for y in lay.height - CAPTION_H..lay.height {
        for x in 0..lay.width {
            if img.get_pixel(x, y).0.iter().all(|&v| v < 120) {
                n += 1;
            }
        }
    }
    n
}

fn sample(log_x: bool, log_y: bool) -> Chart {
    let x: Vec<f64> = (1..=50).map(f64::from).collect();
    let y: Vec<f64> = x.iter().map(|v| 1.0 / v).collect();
    let ax = |log| if log { Axis::log("x [m]") } else { Axis::linear("x [m]") };
    let mut c = Chart::new("t", ax(log_x), ax(log_y));
    c.lines.push(Line::new("a", x.clone(), y));
    c
}

#[test]
fn draws_lines_in_palette_colour_for_every_axis_kind() {
    for (lx, ly) in [(false, false), (true, false), (false, true), (true, true)] {
        let c = sample(lx, ly);
        let img = c.render().unwrap();
        assert_eq!((img.width(), img.height()), DEFAULT_SIZE);
        let n = count(&img, PALETTE[0]);
        assert!(n > 300, "{lx} {ly}: {n} line pixels");
    }
}

#[test]
fn writes_a_png_that_reads_back() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("c.png");
    sample(false, true).write(&p).unwrap();
    let img = image::open(&p).unwrap().to_rgb8();
    assert_eq!((img.width(), img.height()), DEFAULT_SIZE);
    assert!(inked(&img, &sample(false, true).layout()) > 300);
}

#[test]
fn twelve_lines_have_twelve_styles_and_all_show() {
    let x: Vec<f64> = (0..20).map(f64::from).collect();
    let mut c = Chart::new("twelve", Axis::linear("x"), Axis::linear("y"));
    for k in 0..12 {
        c.lines.push(Line::new(
            format!("line {k}"),
            x.clone(),
            x.iter().map(|v| v + k as f64).collect(),
        ));
    }
    let st = c.styles();
    let distinct: HashSet<(Rgb, Dash)> = st.iter().map(|s| (s.colour, s.dash)).collect();
    assert_eq!(distinct.len(), 12);
    // Lines 8 to 11 reuse colours 0 to 3 with another stroke.
    assert_eq!(st[8].colour, st[0].colour);
    assert_ne!(st[8].dash, st[0].dash);
    let img = c.render().unwrap();
    for colour in PALETTE {
        assert!(count(&img, colour) > 30, "{colour:?}");
    }
}

#[test]
fn undrawable_values_break_lines_without_failing() {
    let x = vec![0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let y = vec![f64::NAN, 0.0, -1.0, 1e-3, f64::INFINITY, 2.0, 3.0];
    for (lx, ly) in [(false, true), (true, true), (true, false)] {
        let mut c = sample(lx, ly);
        c.lines = vec![Line::new("odd", x.clone(), y.clone())];
        c.render().unwrap();
    }
    // Nothing drawable at all on a log axis: still a chart.
    let mut c = sample(false, true);
    c.lines = vec![Line::new("zeros", x.clone(), vec![0.0; 7])];
    let img = c.render().unwrap();
    assert_eq!((img.width(), img.height()), DEFAULT_SIZE);
}

#[test]
fn one_point_constant_and_empty_charts_render() {
    let cases = [
        (vec![3.0], vec![2.0]),
        (vec![1.0, 2.0, 3.0], vec![5.0; 3]),
        (vec![1.0, 2.0, 3.0], vec![0.0; 3]),
        (vec![4.0, 4.0], vec![1.0, 2.0]),
        (vec![], vec![]),
    ];
    for log in [false, true] {
        for (x, y) in &cases {
            let mut c = sample(false, log);
            c.lines = vec![Line::new("d", x.clone(), y.clone())];
            let img = c.render().unwrap();
            assert_eq!((img.width(), img.height()), DEFAULT_SIZE);
        }
    }
    // A single point shows as a marker.
    let mut c = sample(false, false);
    c.lines = vec![Line::new("p", vec![3.0], vec![2.0])];
    assert!(count(&c.render().unwrap(), PALETTE[0]) > 10);
}

#[test]
fn long_legend_names_fit_in_the_image() {
    let name = "a very long legend entry naming a receptor at the far end of the outer harbour wall";
    let mut c = sample(false, false);
    c.lines[0].name = name.into();
    let lay = c.layout();
    let need = text_width(name, LABEL_PX);
    assert!(
        lay.legend_x as f32 + SWATCH as f32 + 8.0 + need <= lay.width as f32,
        "{lay:?} needs {need}"
    );
    assert!(lay.plot.2 - lay.plot.0 >= MIN_PLOT_W);
    let img = c.render().unwrap();
    assert_eq!(img.width(), lay.width);
    // The legend's text reaches close to its measured end and no further than the image.
    let right = (0..img.width())
        .rev()
        .find(|&x| (lay.plot.1..lay.plot.1 + 30).any(|y| img.get_pixel(x, y).0 != [255, 255, 255]))
        .unwrap();
    let end = lay.legend_x as f32 + SWATCH as f32 + 8.0 + need;
    assert!((right as f32 - end).abs() < 6.0, "{right} vs {end}");
}

#[test]
fn many_legend_entries_take_more_columns() {
    let mut c = Chart::new("many", Axis::linear("x"), Axis::linear("y"));
    for k in 0..40 {
        c.lines
            .push(Line::new(format!("series {k}"), vec![0.0, 1.0], vec![k as f64, 1.0]));
    }
    let lay = c.layout();
    assert!(lay.legend_cols >= 2, "{lay:?}");
    assert!(lay.legend_x + lay.legend_cols * lay.legend_col_w <= lay.width);
    c.render().unwrap();
}

#[test]
fn reference_lines_and_marks_are_drawn() {
    let mut c = sample(false, false);
    c.refs.push(RefLine {
        name: "limit".into(),
        y: 0.5,
        colour: Some([0, 200, 0]),
    });
    c.notes.push(Annotation {
        x: 2.0,
        y: 0.5,
        label: "arrival".into(),
        colour: Some([200, 0, 200]),
    });
    let without = inked_below(&c.render().unwrap(), &c.layout());
    c.caption = Some("caption under the chart".into());
    let img = c.render().unwrap();
    assert!(inked_below(&img, &c.layout()) > without + 50, "the caption is drawn");
    assert!(count(&img, [0, 200, 0]) > 200);
    assert!(count(&img, [200, 0, 200]) > 10);
}

#[test]
fn ranges_and_ticks() {
    // Common practice: log axes on whole decades, linear ones with a small margin.
    let near = |(a, b): (f64, f64), (x, y): (f64, f64)| (a / x - 1.0).abs() < 1e-8 && (b / y - 1.0).abs() < 1e-8;
    assert!(near(axis_range(&Axis::log(""), 0.03, 7.0, true), (0.01, 10.0)));
    assert!(near(axis_range(&Axis::log(""), 5.0, 5.0, true), (1.0, 10.0)));
    assert_eq!(axis_range(&Axis::linear(""), 0.0, 0.0, true), (-1.0, 1.0));
    assert_eq!(axis_range(&Axis::linear(""), 0.0, 10.0, false), (0.0, 10.0));
    let (a, b) = axis_range(&Axis::linear(""), f64::INFINITY, f64::NEG_INFINITY, true);
    assert!(b > a);
    assert_eq!(fmt_tick(0.25), "0.25");
    assert_eq!(fmt_tick(2e-5), "2e-5");
    assert_eq!(fmt_log_tick(1e-6), "1e-6");
    assert_eq!(fmt_log_tick(3e-6), "");
    assert_eq!(fmt_log_tick(500.0), "500");
    assert_eq!(time_unit(100.0), (1.0, "s"));
    assert_eq!(time_unit(600.0), (60.0, "min"));
    assert_eq!(time_unit(86400.0), (3600.0, "h"));
}

#[test]
fn render_time_for_the_record() {
    // Printed only with --nocapture; not an assertion.
    let x: Vec<f64> = (0..2000).map(|k| f64::from(k) * 10.0).collect();
    let mut c = Chart::new("timing", Axis::linear("t [s]"), Axis::log("c"));
    for k in 0..6 {
        c.lines.push(Line::new(
            format!("r{k}"),
            x.clone(),
            x.iter()
                .map(|t| (-(t - 5000.0 * k as f64).powi(2) / 1e7).exp())
                .collect(),
        ));
    }
    let t0 = std::time::Instant::now();
    let n = 10;
    for _ in 0..n {
        c.render().unwrap();
    }
    println!(
        "900x560 chart, 6 lines x 2000 points: {:.1} ms each",
        t0.elapsed().as_secs_f64() * 1e3 / f64::from(n)
    );
}
