//! Report-ready maps from a real run of the marina example through the binary: every source
//! and receptor of the scenario is drawn at its pixel on the first frame and on
//! `envelope.png`, and the frames carry the scale bar under the map.

use std::path::Path;
use std::process::Command;
use tinct::output::decor::{marker_pixel, scale_bar, RECEPTOR_RGB, SOURCE_RGB};
use tinct::output::{frame_layout, MarkerKind};

#[test]
fn marina_frames_and_envelope_mark_sources_and_receptors_at_their_pixels() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("example");
    let run = |args: &[&str]| {
        let out = Command::new(env!("CARGO_BIN_EXE_tinct"))
            .args(args)
            .current_dir(tmp.path())
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    };
    run(&["example", "marina", "--out", dir.to_str().unwrap()]);
    let scn_path = dir.join("marina.toml");
    let results = tmp.path().join("out");
    run(&[
        "run",
        scn_path.to_str().unwrap(),
        "--quiet",
        "--out",
        results.to_str().unwrap(),
        "--set",
        "run.end=600.0",
        "--set",
        "run.frames=1",
    ]);
    let scn = tinct::scenario::load(&scn_path, &[]).unwrap();
    let g = &scn.model.grid;
    let extent = tinct::run::markers::extent(g);
    let markers = tinct::run::markers::markers(&scn);
    assert!(markers.iter().any(|m| m.kind == MarkerKind::Source));
    assert!(markers.iter().any(|m| m.kind == MarkerKind::Receptor));
    let l = frame_layout(g.nx, g.ny);
    let folder = results.join("marina");
    for file in [folder.join("frames/00000.png"), folder.join("envelope.png")] {
        let img = image::open(Path::new(&file)).unwrap().to_rgb8();
        assert_eq!(img.dimensions(), (l.width, l.height), "{}", file.display());
        for m in &markers {
            let (px, py) = marker_pixel(&l, &extent, m.x, m.y).expect("the example's points lie on the grid");
            // A source's centre is its fill; a receptor's ring is 5 px from its centre.
            let (x, want) = match m.kind {
                MarkerKind::Source => (px, SOURCE_RGB),
                MarkerKind::Receptor => (px + 5, RECEPTOR_RGB),
            };
            assert_eq!(img.get_pixel(x, py).0, want, "{} in {}", m.label, file.display());
        }
        // The scale bar's dark left end under the map's west edge.
        assert!(scale_bar(extent.x1 - extent.x0, l.map_w).is_some());
        let bar_y = l.map_y + l.map_h + 22 + 8 + 2;
        assert_eq!(img.get_pixel(l.map_x, bar_y).0, [28, 28, 30], "{}", file.display());
    }
}
