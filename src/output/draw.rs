//! Small pixel-drawing helpers shared by frames, maps and plots: the ink colour, a clipped
//! pixel write and one-pixel rectangle outlines.

use image::RgbImage;

/// Near-black ink for outlines, ticks and text.
pub(crate) const INK: [u8; 3] = [28, 28, 30];

/// Sets one pixel; points outside the image are ignored.
pub(crate) fn put(img: &mut RgbImage, x: i64, y: i64, rgb: [u8; 3]) {
    if x >= 0 && y >= 0 && x < i64::from(img.width()) && y < i64::from(img.height()) {
        img.put_pixel(x as u32, y as u32, image::Rgb(rgb));
    }
}

/// One-pixel outline in `rgb` of the rectangle with top-left `(x, y)` and size `w x h`.
pub(crate) fn outline(img: &mut RgbImage, x: i64, y: i64, w: i64, h: i64, rgb: [u8; 3]) {
    for d in 0..w {
        put(img, x + d, y, rgb);
        put(img, x + d, y + h - 1, rgb);
    }
    for d in 0..h {
        put(img, x, y + d, rgb);
        put(img, x + w - 1, y + d, rgb);
    }
}

/// [`outline`] in ink with an unsigned size.
pub(crate) fn outline_ink(img: &mut RgbImage, x: i64, y: i64, w: u32, h: u32) {
    outline(img, x, y, i64::from(w), i64::from(h), INK);
}
