//! The `[grid]` section: cell counts, cell size or extent, origin, depth (a number or a depth
//! file) and the land image.

use super::super::reader::{Problems, Section};
use super::super::{depth, land};
use super::limits::{within, CELL_SIZE, DEPTH, MAX_ORIGIN};
use super::{engine_problem, positive, required_table, GridOut, GRID, MAX_SIDE};
use crate::depth::Depth;
use crate::grid::{Grid, Mask, MAX_CELLS};
use std::path::{Path, PathBuf};
use toml::Value;

/// The depth as written: a number or a file.
enum DepthIn {
    Uniform(f64),
    File(PathBuf),
}

/// `[grid]`, including the land image.
pub(super) fn grid_section(root: Section, path: &Path, p: &mut Problems) -> Option<GridOut> {
    let s = required_table(root, "grid", p)?;
    s.check_keys(GRID, "in [grid]", p);
    let before = p.len();
    let int = |key: &str, p: &mut Problems| {
        if s.require(key, &format!("the number of cells {key}"), p) {
            s.int(key, 1, MAX_SIDE, p)
        } else {
            None
        }
    };
    let nx = int("nx", p);
    let ny = int("ny", p);
    let size = s.pair("size", p);
    if s.has("size") && (s.has("dx") || s.has("dy")) {
        p.add("grid.size", "give either size = [Lx, Ly] or dx (and dy), not both");
    }
    let size = size.and_then(|(lx, ly)| {
        Some((
            positive(Some(lx), "grid.size[0]", p)?,
            positive(Some(ly), "grid.size[1]", p)?,
        ))
    });
    let cell = |key: &str, p: &mut Problems| {
        within(
            s.num(key, p),
            &format!("grid.{key}"),
            CELL_SIZE,
            "m",
            "the cell size",
            p,
        )
    };
    let dx = cell("dx", p);
    let dy = cell("dy", p);
    if !s.has("size") && !s.has("dx") {
        p.add(
            "grid.dx",
            "missing: give the cell size dx (and dy, default dx) or size = [Lx, Ly]",
        );
    }
    let origin = if s.has("origin") {
        let far = (-MAX_ORIGIN, MAX_ORIGIN);
        let why = "the coordinates of the lower-left corner";
        s.pair("origin", p).and_then(|(x0, y0)| {
            let x0 = within(Some(x0), "grid.origin[0]", far, "m", why, p);
            let y0 = within(Some(y0), "grid.origin[1]", far, "m", why, p);
            Some((x0?, y0?))
        })
    } else {
        Some((0.0, 0.0))
    };
    // A number, or a file: a CSV grid or a grey-level PNG (with depth_range).
    let depth = match s.table.get("depth") {
        None => Some(DepthIn::Uniform(1.0)),
        Some(Value::String(rel)) => {
            let joined = path.parent().unwrap_or(Path::new("")).join(rel);
            Some(DepthIn::File(std::path::absolute(&joined).unwrap_or(joined)))
        }
        Some(_) => within(s.num("depth", p), "grid.depth", DEPTH, "m", "the water depth", p).map(DepthIn::Uniform),
    };
    let depth_range = s.pair("depth_range", p);
    if s.has("depth_range") && !matches!(depth, Some(DepthIn::File(_))) {
        p.add(
            "grid.depth_range",
            "only used with a grey-level depth image (grid.depth = \"depth.png\"); remove it",
        );
    }
    let land = s.string("land", p);
    let (nx, ny) = (nx?, ny?);
    if nx == 1 && ny == 1 {
        p.add(
            "grid.nx",
            "nx = ny = 1 is a single cell, not a domain: nothing can move between cells; use at least 2 cells along one side (one cell across, ny = 1, is a 1D channel)",
        );
        return None;
    }
    if nx.saturating_mul(ny) > MAX_CELLS as i64 {
        p.add(
            "grid",
            format!(
                "nx * ny = {} cells is above the limit of {MAX_CELLS}: use fewer cells",
                nx * ny
            ),
        );
        return None;
    }
    let (nx, ny) = (nx as usize, ny as usize);
    let (dx, dy) = match size {
        Some((lx, ly)) => {
            let why = "grid.size / grid.nx or grid.ny, the cell size";
            let dx = within(Some(lx / nx as f64), "grid.size[0]", CELL_SIZE, "m", why, p);
            let dy = within(Some(ly / ny as f64), "grid.size[1]", CELL_SIZE, "m", why, p);
            (dx?, dy?)
        }
        None => {
            let dx = dx?;
            (dx, if s.has("dy") { dy? } else { dx })
        }
    };
    if p.len() > before {
        return None;
    }
    let (x0, y0) = origin?;
    let grid = match Grid::new(nx, ny, dx, dy, x0, y0) {
        Ok(g) => g,
        Err(e) => {
            p.0.push(engine_problem(&e));
            return None;
        }
    };
    let (mask, land) = match land {
        None if s.has("land") => return None,
        None => (None, None),
        Some(rel) => {
            let joined = path.parent().unwrap_or(Path::new("")).join(rel);
            let file = std::path::absolute(&joined).unwrap_or(joined);
            match land::load_mask(&file, &grid) {
                Ok(m) => (Some(m), Some(file)),
                Err(msg) => {
                    p.add("grid.land", msg);
                    return None;
                }
            }
        }
    };
    let (depth, depth_file) = match depth? {
        DepthIn::Uniform(h) => (Depth::Uniform(h), None),
        DepthIn::File(file) => {
            let all = Mask::all_water(&grid);
            match depth::load_depth(&file, &grid, mask.as_ref().unwrap_or(&all), depth_range) {
                Ok(v) => (Depth::Field(v), Some((file, depth_range))),
                Err(msg) => {
                    p.add("grid.depth", msg);
                    return None;
                }
            }
        }
    };
    Some(GridOut {
        grid,
        mask,
        depth,
        depth_file,
        land,
    })
}
