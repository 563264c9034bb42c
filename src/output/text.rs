//! Minimal antialiased text drawing with the embedded DejaVu Sans font.
//!
//! Glyph coverage from `ab_glyph` is alpha-blended onto an `RgbImage`.
//! If the embedded font cannot be parsed, text is silently skipped rather
//! than failing the frame.

use std::sync::OnceLock;

use ab_glyph::{point, Font, FontRef, GlyphId, PxScale, ScaleFont};
use image::RgbImage;

/// The parsed embedded font, or `None` if parsing failed.
fn font() -> Option<&'static FontRef<'static>> {
    static FONT: OnceLock<Option<FontRef<'static>>> = OnceLock::new();
    FONT.get_or_init(|| FontRef::try_from_slice(dejavu::sans::regular()).ok())
        .as_ref()
}

/// Width in pixels of `text` set at `px` pixels per em.
pub(crate) fn text_width(text: &str, px: f32) -> f32 {
    let Some(font) = font() else { return 0.0 };
    let scaled = font.as_scaled(PxScale::from(px));
    let mut width = 0.0;
    let mut prev: Option<GlyphId> = None;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = prev {
            width += scaled.kern(p, id);
        }
        width += scaled.h_advance(id);
        prev = Some(id);
    }
    width
}

/// Draws `text` with its top-left corner (of the line box) at `(x, y_top)`.
/// Pixels outside the image are clipped. Returns the advance width.
pub(crate) fn draw_text(img: &mut RgbImage, text: &str, x: f32, y_top: f32, px: f32, colour: [u8; 3]) -> f32 {
    let Some(font) = font() else { return 0.0 };
    let scaled = font.as_scaled(PxScale::from(px));
    let baseline = y_top + scaled.ascent();
    let (w, h) = img.dimensions();
    let mut caret = x;
    let mut prev: Option<GlyphId> = None;
    for c in text.chars() {
        let id = scaled.glyph_id(c);
        if let Some(p) = prev {
            caret += scaled.kern(p, id);
        }
        let glyph = id.with_scale_and_position(PxScale::from(px), point(caret, baseline));
        caret += scaled.h_advance(id);
        prev = Some(id);
        let Some(outlined) = font.outline_glyph(glyph) else {
            continue;
        };
        let b = outlined.px_bounds();
        outlined.draw(|gx, gy, cov| {
            let ix = b.min.x as i64 + i64::from(gx);
            let iy = b.min.y as i64 + i64::from(gy);
            if ix < 0 || iy < 0 || ix >= i64::from(w) || iy >= i64::from(h) {
                return;
            }
            let a = cov.clamp(0.0, 1.0);
            let p = img.get_pixel_mut(ix as u32, iy as u32);
            for (c, &fg) in p.0.iter_mut().zip(colour.iter()) {
                let bg = f32::from(*c);
                *c = (bg + (f32::from(fg) - bg) * a).round() as u8;
            }
        });
    }
    caret - x
}
