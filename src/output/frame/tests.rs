//! Tests of the frames: layout and orientation, aspect, colours of land and extremes, the
//! caption's pixels, log scales, tick labels, time labels, degenerate inputs and large grids.

use super::labels::{linear_ticks, ticks};
use super::render::effective_range;
use super::*;
use crate::output::colour::ramp_rgb;
use crate::output::colour::{ColourScale, Ramp, RampLut, LAND_RGB};
use image::RgbImage;

fn spec<'a>(nx: usize, ny: usize, values: &'a [f64], wet: Option<&'a [bool]>) -> FrameSpec<'a> {
    FrameSpec {
        nx,
        ny,
        values,
        wet,
        tracer: "dye",
        units: "kg/m3",
        time_s: 21900.0,
        scale: ColourScale::Linear,
        range: None,
        title: Some("harbour test"),
        extent: None,
        markers: &[],
    }
}

/// Pixel at the centre of cell (i, j) (j counted from the south).
fn cell_pixel(img: &RgbImage, l: &FrameLayout, nx: usize, ny: usize, i: usize, j: usize) -> [u8; 3] {
    let x = l.map_x + ((2 * i + 1) as u32 * l.map_w) / (2 * nx as u32);
    let y_from_south = ((2 * j + 1) as u32 * l.map_h) / (2 * ny as u32);
    let y = l.map_y + l.map_h - 1 - y_from_south;
    img.get_pixel(x, y).0
}

#[test]
fn image_size_matches_layout_and_north_is_up() {
    let (nx, ny) = (40, 20);
    // Value increases northward.
    let values: Vec<f64> = (0..nx * ny).map(|k| (k / nx) as f64).collect();
    let img = render_frame(&spec(nx, ny, &values, None)).unwrap();
    let l = frame_layout(nx, ny);
    assert_eq!(img.dimensions(), (l.width, l.height));
    assert_eq!(l.width % 2, 0);
    assert_eq!(l.height % 2, 0);
    // Top-left map pixel is the north row (maximum), bottom-left the south row.
    assert_eq!(img.get_pixel(l.map_x, l.map_y).0, ramp_rgb(Ramp::Sequential, 1.0));
    assert_eq!(
        img.get_pixel(l.map_x, l.map_y + l.map_h - 1).0,
        ramp_rgb(Ramp::Sequential, 0.0)
    );
}

#[test]
fn map_keeps_grid_aspect() {
    for (nx, ny) in [
        (200, 100),
        (1, 50),
        (50, 1),
        (3000, 1000),
        (1000, 3000),
        (37, 911),
        (1, 1),
        (4096, 4096),
        (1, 5000),
    ] {
        let l = frame_layout(nx, ny);
        let (w, h) = (f64::from(l.map_w), f64::from(l.map_h));
        if nx >= ny {
            assert!((h - w * ny as f64 / nx as f64).abs() <= 1.0, "{nx}x{ny}: {l:?}");
        } else {
            assert!((w - h * nx as f64 / ny as f64).abs() <= 1.0, "{nx}x{ny}: {l:?}");
        }
        let long = l.map_w.max(l.map_h);
        assert!(long <= 1000, "{nx}x{ny}: {l:?}");
        if nx.max(ny) <= 1000 {
            // Integer cell size: exact aspect, long side of a useful size.
            assert_eq!(l.map_w as usize % nx, 0, "{nx}x{ny}");
            assert_eq!(l.map_w as usize / nx, l.map_h as usize / ny, "{nx}x{ny}");
            assert!(long >= 450, "{nx}x{ny}: {l:?}");
        }
        assert!(l.map_x + l.map_w <= l.width && l.map_y + l.map_h < l.height);
    }
}

#[test]
fn land_cells_are_land_grey_and_max_is_top_colour() {
    let (nx, ny) = (10, 8);
    let values: Vec<f64> = (0..nx * ny).map(|k| k as f64 * 0.5).collect();
    let mut wet = vec![true; nx * ny];
    wet[3 * nx + 4] = false; // cell (4, 3)
    wet[nx * ny - 1] = false; // the maximum is on land: not part of the range
    let img = render_frame(&spec(nx, ny, &values, Some(&wet))).unwrap();
    let l = frame_layout(nx, ny);
    assert_eq!(cell_pixel(&img, &l, nx, ny, 4, 3), LAND_RGB);
    assert_eq!(cell_pixel(&img, &l, nx, ny, nx - 1, ny - 1), LAND_RGB);
    // Highest wet value maps to the top of the ramp, lowest to the bottom.
    assert_eq!(
        cell_pixel(&img, &l, nx, ny, nx - 2, ny - 1),
        ramp_rgb(Ramp::Sequential, 1.0)
    );
    assert_eq!(cell_pixel(&img, &l, nx, ny, 0, 0), ramp_rgb(Ramp::Sequential, 0.0));
    assert_ne!(cell_pixel(&img, &l, nx, ny, 5, 3), LAND_RGB);
}

#[test]
fn time_label_pixels_appear_in_the_strip() {
    let (nx, ny) = (30, 30);
    let values = vec![1.0; nx * ny];
    let l = frame_layout(nx, ny);
    let s = l.strip();
    let mut a = spec(nx, ny, &values, None);
    a.time_s = 12.5;
    let mut b = a;
    b.time_s = 3.0 * 86400.0 + 7.0 * 3600.0;
    let ia = render_frame(&a).unwrap();
    let ib = render_frame(&b).unwrap();
    // Right half of the caption line, where the time label is drawn.
    let region = |img: &RgbImage| -> Vec<[u8; 3]> {
        let mut px = Vec::new();
        for y in s.caption_y..s.caption_y + CAPTION_LINE {
            for x in s.bar_x + s.bar_w / 2..s.bar_x + s.bar_w {
                px.push(img.get_pixel(x, y).0);
            }
        }
        px
    };
    let (ra, rb) = (region(&ia), region(&ib));
    let inked = |r: &[[u8; 3]]| r.iter().filter(|p| **p != BACKGROUND).count();
    assert!(inked(&ra) > 20, "no text pixels for the time label");
    assert!(inked(&rb) > inked(&ra), "longer label should ink more pixels");
    assert_ne!(ra, rb);
    // Tick labels below the bar are drawn too.
    let mut tick_ink = 0;
    for y in s.tick_label_y..s.tick_label_y + TICK_LINE {
        for x in 0..l.width {
            tick_ink += usize::from(ia.get_pixel(x, y).0 != BACKGROUND);
        }
    }
    assert!(tick_ink > 20);
}

#[test]
fn log_scale_maps_decades() {
    // Cells hold 1e-3, 1e-2, 1e-1, 1, 10 from west to east.
    let values: Vec<f64> = (0..5).map(|i| 10f64.powi(i - 3)).collect();
    let mut sp = spec(5, 1, &values, None);
    sp.scale = ColourScale::Log;
    sp.range = Some((1e-3, 10.0));
    let img = render_frame(&sp).unwrap();
    let l = frame_layout(5, 1);
    let lut = RampLut::new(Ramp::Sequential);
    for i in 0..5 {
        assert_eq!(cell_pixel(&img, &l, 5, 1, i, 0), lut.get(i as f64 / 4.0), "cell {i}");
    }
    let labels: Vec<String> = ticks(1e-3, 10.0, ColourScale::Log).into_iter().map(|t| t.1).collect();
    assert_eq!(labels, ["0.001", "0.01", "0.1", "1", "10"]);
    let labels: Vec<String> = ticks(1e-8, 1.0, ColourScale::Log).into_iter().map(|t| t.1).collect();
    assert_eq!(labels, ["1e-8", "1e-6", "1e-4", "1e-2", "1"]);
}

#[test]
fn automatic_log_range_spans_four_decades_below_max() {
    let values = [0.0, 2e-4, 2e-2, 2.0];
    let mut sp = spec(4, 1, &values, None);
    sp.scale = ColourScale::Log;
    let (lo, hi) = effective_range(&sp);
    assert_eq!(hi, 2.0);
    assert!((lo - 2e-4).abs() < 1e-18);
}

#[test]
fn linear_ticks_are_nice() {
    let t = linear_ticks(0.0, 1.0);
    let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
    assert!((3..=5).contains(&labels.len()), "{labels:?}");
    assert_eq!(labels, ["0.0", "0.5", "1.0"]);
    let t = linear_ticks(-0.3, 0.7);
    assert!(t.iter().all(|(_, s)| s.len() <= 4 && !s.contains("0000")), "{t:?}");
    assert!(t.iter().any(|(_, s)| s == "0.0"), "{t:?}");
    assert!(!t
        .iter()
        .any(|(_, s)| s.starts_with('-') && s.trim_matches(['-', '0', '.']).is_empty()));
    let t = linear_ticks(1.0e6, 3.5e6);
    let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
    assert_eq!(labels, ["1e6", "2e6", "3e6"]);
    let t = linear_ticks(1.0e6, 2.0e6);
    assert!(t.iter().any(|(_, s)| s == "1.5e6"), "{t:?}");
    let t = linear_ticks(0.0, 2.5e-3);
    let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
    assert_eq!(labels, ["0.000", "0.001", "0.002"]);
    let t = linear_ticks(0.0, 2.5e-5);
    assert!(t.iter().all(|(_, s)| s.contains('e') || s == "0"), "{t:?}");
}

#[test]
fn format_time_examples() {
    assert_eq!(format_time(12.5), "12.5 s");
    assert_eq!(format_time(12.0), "12 s");
    assert_eq!(format_time(0.25), "0.25 s");
    assert_eq!(format_time(0.0), "0 s");
    assert_eq!(format_time(307.0), "5 min 07 s");
    assert_eq!(format_time(6.0 * 3600.0 + 5.0 * 60.0), "6 h 05 min");
    assert_eq!(format_time(3599.7), "1 h 00 min");
    assert_eq!(format_time(59.99), "1 min 00 s");
    assert_eq!(format_time(2.0 * 86400.0 + 3.0 * 3600.0 + 600.0), "2 d 03 h 10 min");
    assert_eq!(format_time(-30.0), "-30 s");
    assert_eq!(format_time(f64::NAN), "?");
}

#[test]
fn degenerate_inputs_do_not_panic() {
    let nan = vec![f64::NAN; 12];
    let uniform = vec![3.0; 12];
    let land = vec![false; 12];
    let inf = vec![f64::INFINITY, f64::NEG_INFINITY, 0.0, 1.0];
    for scale in [ColourScale::Linear, ColourScale::Log] {
        for range in [
            None,
            Some((2.0, 2.0)),
            Some((-1.0, 5.0)),
            Some((f64::NAN, 1.0)),
            Some((5.0, -5.0)),
        ] {
            let mut s = spec(4, 3, &nan, None);
            s.scale = scale;
            s.range = range;
            let img = render_frame(&s).unwrap();
            let l = frame_layout(4, 3);
            assert_eq!(img.get_pixel(l.map_x, l.map_y).0, crate::output::NAN_RGB);
            s.values = &uniform;
            render_frame(&s).unwrap();
            s.wet = Some(&land);
            let img = render_frame(&s).unwrap();
            assert_eq!(img.get_pixel(l.map_x, l.map_y).0, LAND_RGB);
            let mut s = spec(2, 2, &inf, None);
            s.scale = scale;
            s.range = range;
            s.time_s = f64::INFINITY;
            render_frame(&s).unwrap();
        }
    }
    let one = [1.0];
    render_frame(&spec(1, 1, &one, None)).unwrap();
    assert!(render_frame(&spec(2, 1, &one, None)).is_err());
    assert!(render_frame(&spec(0, 1, &[], None)).is_err());
    assert!(render_frame(&spec(1, 1, &one, Some(&[true, false]))).is_err());
}

#[test]
fn large_grid_is_sampled_and_png_is_written() {
    let (nx, ny) = (3000, 1000);
    let values: Vec<f64> = (0..nx * ny).map(|k| (k % nx) as f64).collect();
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("frame.png");
    write_frame_png(&p, &spec(nx, ny, &values, None)).unwrap();
    let back = image::open(&p).unwrap().to_rgb8();
    let l = frame_layout(nx, ny);
    assert_eq!(back.dimensions(), (l.width, l.height));
    assert_eq!((l.map_w, l.map_h), (1000, 333));
    // West edge lowest, east edge highest.
    assert_eq!(back.get_pixel(l.map_x, l.map_y + 5).0, ramp_rgb(Ramp::Sequential, 0.0));
    let east = back.get_pixel(l.map_x + l.map_w - 1, l.map_y + 5).0;
    assert!(srgb_dist(east, ramp_rgb(Ramp::Sequential, 1.0)) <= 6, "{east:?}");
    let err = write_frame_png(&d.path().join("x.png"), &spec(2, 2, &values[..3], None)).unwrap_err();
    assert!(err.to_string().contains("x.png"), "{err}");
}

fn srgb_dist(a: [u8; 3], b: [u8; 3]) -> u32 {
    (0..3).map(|k| u32::from(a[k].abs_diff(b[k]))).sum()
}

/// Timing of full renders; run with `cargo test --release -- --ignored --nocapture`.
#[test]
#[ignore]
fn render_timing() {
    for n in [1024usize, 4096] {
        let values: Vec<f64> = (0..n * n).map(|k| ((k % n) as f64 * 0.01).sin().abs()).collect();
        let wet: Vec<bool> = (0..n * n).map(|k| k % 97 != 0).collect();
        let mut times = Vec::new();
        for _ in 0..3 {
            let t0 = std::time::Instant::now();
            let img = render_frame(&spec(n, n, &values, Some(&wet))).unwrap();
            times.push(t0.elapsed().as_secs_f64());
            assert!(img.width() > 0);
        }
        times.sort_by(f64::total_cmp);
        println!("render {n}x{n}: median {:.1} ms ({times:?})", times[1] * 1e3);
    }
}

#[test]
fn ticks_of_a_subnormal_or_huge_span_stay_few() {
    // Worked by hand: the span 5e-324 once gave a tick step of 0 and an unbounded tick count.
    let t = linear_ticks(0.0, 5e-324);
    assert_eq!(t.iter().map(|(v, _)| *v).collect::<Vec<_>>(), vec![0.0, 5e-324]);
    assert!(t.iter().all(|(_, l)| !l.is_empty()), "{t:?}");
    for (lo, hi) in [
        (1e-310, 2e-310),
        (-1e300, 1e300),
        (-1e308, 1e308),
        (1e300, 1e300 * (1.0 + 1e-15)),
    ] {
        let n = ticks(lo, hi, ColourScale::Linear).len();
        assert!((1..=8).contains(&n), "[{lo}, {hi}]: {n} ticks");
    }
}
