//! The land mask image: a PNG whose dark pixels (luminance below one half) are land, top row
//! the grid's north edge, resampled to the grid by nearest pixel when the sizes differ.

use crate::diagnostics::advice::sig;
use crate::grid::{Grid, Mask};
use std::path::Path;

/// Largest accepted image side, pixels (a mask needs no more than one pixel per cell).
const MAX_SIDE_PX: u32 = 1 << 14;

/// Largest relative difference between the image's and the grid's aspect ratios.
const ASPECT_TOLERANCE: f64 = 0.01;

/// Reads the image at `path` and builds the grid's mask; the error is a message for the key
/// `grid.land`.
pub(super) fn load_mask(path: &Path, grid: &Grid) -> Result<Mask, String> {
    // A pixel is land when its luminance is below one half.
    let wet = grid_image(path, grid)?
        .into_iter()
        .map(|l| f64::from(l) >= 32767.5)
        .collect();
    Mask::from_wet(grid, wet).map_err(|_| format!("{} makes every cell land: no water left", path.display()))
}

/// Reads a grey-level image for the grid: the 16-bit grey level (8-bit images scaled by 257)
/// of the nearest pixel to each cell centre, `nx * ny` values row-major, row 0 south (the
/// image's bottom row). The image must have the grid's aspect within 1%.
pub(super) fn grid_image(path: &Path, grid: &Grid) -> Result<Vec<u16>, String> {
    let name = path.display();
    let reader = image::ImageReader::open(path).map_err(|e| format!("cannot open {name}: {e}"))?;
    let mut reader = reader
        .with_guessed_format()
        .map_err(|e| format!("cannot read {name}: {e}"))?;
    let mut limits = image::Limits::default();
    limits.max_image_width = Some(MAX_SIDE_PX);
    limits.max_image_height = Some(MAX_SIDE_PX);
    limits.max_alloc = Some(1 << 30);
    reader.limits(limits);
    let img = reader
        .decode()
        .map_err(|e| format!("cannot decode {name} as an image (a PNG is expected): {e}"))?;
    let grey = img.to_luma16();
    let (w, h) = grey.dimensions();
    if w == 0 || h == 0 {
        return Err(format!("{name} is an empty image"));
    }
    let image_aspect = w as f64 / h as f64;
    let grid_aspect = grid.lx() / grid.ly();
    if (image_aspect / grid_aspect - 1.0).abs() > ASPECT_TOLERANCE {
        return Err(format!(
            "{name} is {w} by {h} pixels (aspect {}) but the grid is {} by {} m (aspect {}): \
             the aspects must agree within 1%",
            sig(image_aspect, 4),
            sig(grid.lx(), 4),
            sig(grid.ly(), 4),
            sig(grid_aspect, 4)
        ));
    }
    let mut out = Vec::with_capacity(grid.cells());
    for j in 0..grid.ny {
        // Row 0 of the grid is the south edge, the image's last row.
        let py = (((grid.ny - 1 - j) as f64 + 0.5) * h as f64 / grid.ny as f64) as u32;
        for i in 0..grid.nx {
            let px = ((i as f64 + 0.5) * w as f64 / grid.nx as f64) as u32;
            out.push(grey.get_pixel(px.min(w - 1), py.min(h - 1)).0[0]);
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{ImageBuffer, Luma};

    #[test]
    fn mask_image_is_read_north_up() {
        // 4 by 3 cells of 10 m: a 4 by 3 image has the grid's aspect.
        let g = Grid::new(4, 3, 10.0, 10.0, 0.0, 0.0).unwrap();
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("mask.png");
        // Image rows top (north) to bottom (south); 0 and 100 are dark (land), 128 and 255 light.
        #[rustfmt::skip]
        let px: Vec<u8> = vec![
            0,   128, 255, 255,
            255, 255, 255, 100,
            255, 255, 0,   255,
        ];
        ImageBuffer::<Luma<u8>, _>::from_raw(4, 3, px)
            .unwrap()
            .save(&p)
            .unwrap();
        let m = load_mask(&p, &g).unwrap();
        // Worked by hand: image row r is grid row j = 2 - r, pixel column i is cell column i.
        let land = [(0, 2), (3, 1), (2, 0)];
        for j in 0..3 {
            for i in 0..4 {
                assert_eq!(m.is_wet(i, j), !land.contains(&(i, j)), "cell ({i}, {j})");
            }
        }
    }
}
