//! `output.animation = true` writes `animation.gif`: a valid GIF with one image per frame of
//! the run, each of the frame's size (common practice: a looping animation of the frames).

mod common;

use common::{root, tinct};
use image::AnimationDecoder;

#[test]
fn the_animation_has_every_frame_of_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let scn = root().join("scenarios/gaussian-puff.toml");
    let o = tinct(
        &[
            "run",
            scn.to_str().unwrap(),
            "--out",
            "out",
            "--quiet",
            "--set",
            "output.animation=true",
            "--set",
            "run.frames=6",
            "--set",
            "run.end=1200",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let run = dir.path().join("out/gaussian-puff");
    let first = image::open(run.join("frames/00000.png")).unwrap();
    let file = std::io::BufReader::new(std::fs::File::open(run.join("animation.gif")).unwrap());
    let frames = image::codecs::gif::GifDecoder::new(file)
        .unwrap()
        .into_frames()
        .collect_frames()
        .unwrap();
    assert_eq!(frames.len(), 7);
    for f in &frames {
        assert_eq!(f.buffer().dimensions(), (first.width(), first.height()));
        let (n, d) = f.delay().numer_denom_ms();
        assert!(
            (f64::from(n) / f64::from(d) - 10_000.0 / 7.0).abs() < 10.0,
            "delay {n}/{d} ms"
        );
    }
    let summary = std::fs::read_to_string(run.join("summary.json")).unwrap();
    assert!(summary.contains("animation.gif"));
    // Off by default: no GIF.
    let o = tinct(
        &[
            "run",
            scn.to_str().unwrap(),
            "--out",
            "plain",
            "--quiet",
            "--set",
            "run.end=600",
        ],
        dir.path(),
    );
    assert!(o.status.success());
    assert!(!dir.path().join("plain/gaussian-puff/animation.gif").exists());
}
