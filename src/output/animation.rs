//! `animation.gif`: the run's frames as one looping animation that plays in about ten
//! seconds. One 256-colour palette serves every frame: it is learnt (NeuQuant, `color_quant`)
//! from the first frame, which already holds every colour of the run (its colour bar spans the
//! whole ramp, and the range is the same for all frames), so colours do not flicker between
//! frames and each further frame only needs a palette lookup per pixel, done in parallel.

use super::{write_atomic_with, OutputError};
use color_quant::NeuQuant;
use image::RgbImage;
use rayon::prelude::*;
use std::path::Path;

/// Seconds the whole animation plays for.
pub const PLAY_SECONDS: f64 = 10.0;

/// Shortest frame delay browsers honour, ms (shorter delays are often shown slower).
const MIN_DELAY_MS: u32 = 20;

/// NeuQuant sampling factor (1 = best, 30 = fastest).
const QUANT_SPEED: i32 = 10;

/// The palette shared by every frame.
pub struct GifPalette(NeuQuant);

impl GifPalette {
    /// Learns the palette from `img`.
    pub fn learn(img: &RgbImage) -> Self {
        Self(NeuQuant::new(QUANT_SPEED, 256, &rgba(img)))
    }
}

/// One frame as palette indices, already LZW-compressed, ready to be written.
pub struct GifFrame(gif::Frame<'static>);

fn rgba(img: &RgbImage) -> Vec<u8> {
    let mut v = Vec::with_capacity(img.as_raw().len() / 3 * 4);
    for p in img.as_raw().chunks_exact(3) {
        v.extend_from_slice(&[p[0], p[1], p[2], 255]);
    }
    v
}

/// The delay of each of `count` frames so the animation plays in about [`PLAY_SECONDS`],
/// in hundredths of a second (GIF's unit), at least 20 ms.
pub fn frame_delay(count: usize) -> u16 {
    let ms = ((PLAY_SECONDS * 1000.0 / count.max(1) as f64).round() as u32).max(MIN_DELAY_MS);
    (ms / 10).clamp(2, u16::MAX as u32) as u16
}

/// Maps `img` onto `palette` and compresses it (frames can be prepared in parallel). Images
/// larger than GIF's 65535 pixels per side are refused.
pub fn gif_frame(img: &RgbImage, palette: &GifPalette) -> Result<GifFrame, String> {
    let (w, h) = img.dimensions();
    let (Ok(width), Ok(height)) = (u16::try_from(w), u16::try_from(h)) else {
        return Err(format!("a {w} x {h} frame is too large for GIF"));
    };
    let indices = img
        .as_raw()
        .par_chunks(3 * 4096)
        .flat_map_iter(|chunk| {
            chunk
                .chunks_exact(3)
                .map(|p| palette.0.index_of(&[p[0], p[1], p[2], 255]) as u8)
        })
        .collect::<Vec<u8>>();
    let mut frame = gif::Frame {
        width,
        height,
        buffer: std::borrow::Cow::Owned(indices),
        ..gif::Frame::default()
    };
    frame.make_lzw_pre_encoded();
    Ok(GifFrame(frame))
}

/// Writes `frames` (in order, all the same size) with `palette` as a looping GIF at `path`,
/// each shown for `delay` hundredths of a second.
pub fn write_gif(frames: &[GifFrame], palette: &GifPalette, delay: u16, path: &Path) -> Result<(), OutputError> {
    let Some(first) = frames.first() else {
        return Err(OutputError::invalid(path, "no frames to animate"));
    };
    let (w, h) = (first.0.width, first.0.height);
    if frames.iter().any(|f| (f.0.width, f.0.height) != (w, h)) {
        return Err(OutputError::invalid(path, "frames differ in size"));
    }
    let colours = palette.0.color_map_rgb();
    write_atomic_with(path, |out| {
        let mut enc = gif::Encoder::new(out, w, h, &colours).map_err(std::io::Error::other)?;
        enc.set_repeat(gif::Repeat::Infinite).map_err(std::io::Error::other)?;
        for f in frames {
            let frame = gif::Frame {
                delay,
                buffer: std::borrow::Cow::Borrowed(&f.0.buffer),
                ..f.0.clone()
            };
            enc.write_lzw_pre_encoded_frame(&frame).map_err(std::io::Error::other)?;
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn delays_fill_ten_seconds() {
        assert_eq!(frame_delay(10), 100);
        assert_eq!(frame_delay(1000), 2);
        assert_eq!(frame_delay(0), 1000);
    }

    #[test]
    fn a_gif_round_trips_its_frames() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("a.gif");
        let imgs: Vec<RgbImage> = (0..3)
            .map(|k| RgbImage::from_fn(320, 240, |x, y| image::Rgb([(x * 3 / 4) as u8, y as u8, 60 * k as u8])))
            .collect();
        let pal = GifPalette::learn(&imgs[0]);
        let frames: Vec<GifFrame> = imgs.iter().map(|i| gif_frame(i, &pal).unwrap()).collect();
        write_gif(&frames, &pal, frame_delay(3), &p).unwrap();
        let mut dec = gif::DecodeOptions::new();
        dec.set_color_output(gif::ColorOutput::RGBA);
        let mut r = dec.read_info(std::fs::File::open(&p).unwrap()).unwrap();
        let mut n = 0;
        let mut first = Vec::new();
        while let Some(f) = r.read_next_frame().unwrap() {
            assert_eq!((f.width, f.height, f.delay), (320, 240, 333));
            if n == 0 {
                first = f.buffer.to_vec();
            }
            n += 1;
        }
        assert_eq!(n, 3);
        // The first frame, whose colours the palette learnt, comes back close: 57 600 distinct
        // colours of a smooth two-way gradient in 256 palette entries (16 x 16 levels would
        // leave at most 8 per channel) leave a few levels of error on average.
        let err: Vec<i32> = first
            .chunks_exact(4)
            .zip(imgs[0].pixels())
            .map(|(a, b)| (0..3).map(|c| (a[c] as i32 - b[c] as i32).abs()).max().unwrap())
            .collect();
        let mean = err.iter().sum::<i32>() as f64 / err.len() as f64;
        assert!(mean <= 8.0, "mean largest-channel error {mean}");
        assert!(write_gif(&[], &pal, 10, &p).is_err());
    }
}
