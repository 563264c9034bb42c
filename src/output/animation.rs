//! `animation.gif`: the run's frames as one looping animation that plays in about ten
//! seconds, encoded with the `image` crate's GIF encoder at its fast quantisation setting.

use super::{write_atomic_with, OutputError};
use image::codecs::gif::{GifEncoder, Repeat};
use image::{Delay, Frame};
use std::path::{Path, PathBuf};

/// Seconds the whole animation plays for.
pub const PLAY_SECONDS: f64 = 10.0;

/// Shortest frame delay browsers honour, ms (shorter delays are often shown slower).
const MIN_DELAY_MS: u32 = 20;

/// Writes the PNG `frames` (in order) as a looping GIF at `path`, each shown for
/// `PLAY_SECONDS / frames` (at least 20 ms).
pub fn write_gif(frames: &[PathBuf], path: &Path) -> Result<(), OutputError> {
    if frames.is_empty() {
        return Err(OutputError::invalid(path, "no frames to animate"));
    }
    let delay_ms = ((PLAY_SECONDS * 1000.0 / frames.len() as f64).round() as u32).max(MIN_DELAY_MS);
    let mut images = Vec::with_capacity(frames.len());
    for f in frames {
        let img = image::open(f).map_err(|e| OutputError::invalid(f, format!("cannot read the frame: {e}")))?;
        images.push(img.to_rgba8());
    }
    write_atomic_with(path, |w| {
        let mut enc = GifEncoder::new_with_speed(w, 10);
        enc.set_repeat(Repeat::Infinite).map_err(std::io::Error::other)?;
        for img in images {
            let frame = Frame::from_parts(img, 0, 0, Delay::from_numer_denom_ms(delay_ms, 1));
            enc.encode_frame(frame).map_err(std::io::Error::other)?;
        }
        Ok(())
    })
}
