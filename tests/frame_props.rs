//! Property test (common practice): rendering a frame or a diagnostic map never panics and
//! always gives an image of the documented size, whatever the field and the colour range:
//! random, constant and all-zero fields; ranges that are automatic, ordinary, zero-width,
//! subnormal, inverted or huge (1e300); linear and logarithmic colour; with or without a
//! geographic extent (tiny, huge, offset, inverted or non-finite) and markers anywhere,
//! including far outside the map, on very elongated grids.

use proptest::prelude::*;
use tinct::output::maps::{render_scalar, ScalarMap};
use tinct::output::{frame_layout, render_frame, ColourScale, Extent, FrameSpec, Marker, MarkerKind, Ramp};

/// A field of `n` values: random of any sign and size, constant, or all zero.
fn field(n: usize) -> impl Strategy<Value = Vec<f64>> {
    let value = prop_oneof![
        -1e3..1e3f64,
        (-300i32..300, -1.0..1.0f64).prop_map(|(e, m)| m * 10f64.powi(e)),
        Just(5e-324),
        Just(0.0),
    ];
    prop_oneof![
        prop::collection::vec(value.clone(), n),
        value.prop_map(move |v| vec![v; n]),
        Just(vec![0.0; n]),
    ]
}

/// A colour range: none (follow the data) or one of the troublesome kinds.
fn range() -> impl Strategy<Value = Option<(f64, f64)>> {
    let any_end = prop_oneof![
        -1e300..1e300f64,
        (-320i32..300, -1.0..1.0f64).prop_map(|(e, m)| m * 10f64.powi(e)),
        Just(0.0),
        Just(5e-324),
        Just(-5e-324),
        Just(f64::MIN_POSITIVE),
        Just(1e300),
        Just(-1e300),
    ];
    prop_oneof![
        Just(None),
        Just(Some((0.0, 5e-324))),
        Just(Some((5e-324, 0.0))),
        Just(Some((-1e300, 1e300))),
        Just(Some((1e-310, 2e-310))),
        Just(Some((1e300, 1e300 * (1.0 + 4.0 * f64::EPSILON)))),
        any_end.clone().prop_map(|v| Some((v, v))),
        (any_end.clone(), any_end).prop_map(Some),
    ]
}

fn scale() -> impl Strategy<Value = ColourScale> {
    prop_oneof![Just(ColourScale::Linear), Just(ColourScale::Log)]
}

fn case() -> impl Strategy<Value = (usize, usize, Vec<f64>, Option<(f64, f64)>, ColourScale)> {
    (1usize..6, 1usize..6).prop_flat_map(|(nx, ny)| (Just(nx), Just(ny), field(nx * ny), range(), scale()))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    #[test]
    fn frames_render_for_any_field_and_range((nx, ny, values, range, scale) in case()) {
        let spec = FrameSpec {
            nx,
            ny,
            values: &values,
            wet: None,
            tracer: "dye",
            units: "kg/m3",
            time_s: 60.0,
            scale,
            range,
            title: Some("property"),
            extent: None,
            markers: &[],
        };
        let img = render_frame(&spec).expect("consistent input renders");
        let layout = frame_layout(nx, ny);
        prop_assert_eq!((img.width(), img.height()), (layout.width, layout.height));
    }

    #[test]
    fn diagnostic_maps_render_for_any_field_and_range((nx, ny, values, range, scale) in case()) {
        let map = ScalarMap {
            nx,
            ny,
            values: &values,
            wet: None,
            range: range.unwrap_or((0.0, 1.0)),
            scale,
            ramp: Ramp::Sequential,
            caption: "value",
            title: "property",
            extent: None,
            markers: &[],
        };
        let img = render_scalar(&map).expect("consistent input renders");
        let layout = frame_layout(nx, ny);
        prop_assert_eq!((img.width(), img.height()), (layout.width, layout.height));
    }

    #[test]
    fn decorated_frames_render_for_any_extent_and_markers(
        (nx, ny) in prop_oneof![(1usize..6, 1usize..6), (1usize..3, 200usize..1200), (200usize..1200, 1usize..3)],
        extent in extent(),
        markers in prop::collection::vec(marker(), 0..4),
    ) {
        let values = vec![1.0; nx * ny];
        let spec = FrameSpec {
            nx,
            ny,
            values: &values,
            wet: None,
            tracer: "dye",
            units: "kg/m3",
            time_s: 60.0,
            scale: ColourScale::Log,
            range: None,
            title: Some("property"),
            extent: Some(extent),
            markers: &markers,
        };
        let img = render_frame(&spec).expect("consistent input renders");
        let layout = frame_layout(nx, ny);
        prop_assert_eq!((img.width(), img.height()), (layout.width, layout.height));
        // The map keeps clear of the y-axis labels and the bands under it.
        prop_assert!(layout.map_x >= 60 && layout.strip_y >= layout.map_y + layout.map_h + 40);
    }
}

/// An extent: ordinary, tiny, continental, far from the origin, inverted or not finite.
fn extent() -> impl Strategy<Value = Extent> {
    let origin = prop_oneof![Just(0.0), -1e7..1e7f64, Just(f64::NAN), Just(f64::INFINITY)];
    let size = prop_oneof![
        1e-3..1e-1f64,
        1.0..1e4f64,
        1e4..1e7f64,
        Just(0.0),
        Just(-50.0),
        Just(1e300)
    ];
    (origin.clone(), size.clone(), origin, size).prop_map(|(x0, w, y0, h)| Extent {
        x0,
        x1: x0 + w,
        y0,
        y1: y0 + h,
    })
}

/// A marker anywhere, including outside any extent and at non-finite places, with any label.
fn marker() -> impl Strategy<Value = Marker> {
    let at = prop_oneof![-1e7..1e7f64, -10.0..10.0f64, Just(f64::NAN), Just(f64::NEG_INFINITY)];
    (at.clone(), at, ".{0,40}", prop::bool::ANY).prop_map(|(x, y, label, s)| Marker {
        x,
        y,
        label,
        kind: if s { MarkerKind::Source } else { MarkerKind::Receptor },
    })
}
