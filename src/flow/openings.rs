//! Openings in the basin's sides: where water enters and leaves, how much, and how a tide's
//! filling volume is shared among them.
//!
//! An opening spans `from..to` metres along one side (y for west and east, x for south and
//! north); a face belongs to it when its centre lies in that span and its cell is water. Its
//! discharge is spread over its faces in proportion to face depth times length, so the speed is
//! uniform across the opening.

use super::potential::Discharges;
use crate::error::{invalid, ModelError};
use crate::grid::{Grid, Mask};
use crate::ops::boundary::{Boundaries, Side, SideKind};

/// One opening as the user gives it.
#[derive(Debug, Clone, PartialEq)]
pub struct Opening {
    /// Name used in reports (`opening[k]` when not given).
    pub name: String,
    /// The side it is in.
    pub side: Side,
    /// Start of the span along the side, m (grid coordinates).
    pub from: f64,
    /// End of the span, m.
    pub to: f64,
    /// Through-flow discharge, m3/s, positive into the basin.
    pub discharge: f64,
    /// Fraction of the tidal filling volume this opening carries (default: its share of the
    /// openings' cross-section).
    pub share: Option<f64>,
}

/// The faces of an opening: (face index in [`Discharges`], along x, weight `h_f len`), and the
/// sign that turns an inflow into a discharge along the axis.
#[derive(Debug, Clone)]
pub(crate) struct OpeningFaces {
    pub faces: Vec<(usize, bool, f64)>,
    pub sign: f64,
}

impl OpeningFaces {
    /// Cross-section `sum h_f len`, m2.
    pub fn area(&self) -> f64 {
        self.faces.iter().map(|f| f.2).sum()
    }

    /// Adds an inflow of `q` m3/s spread in proportion to the face weights.
    pub fn add_inflow(&self, q: f64, d: &mut Discharges) {
        let area = self.area();
        for &(face, along_x, w) in &self.faces {
            let v = self.sign * q * w / area;
            if along_x {
                d.x[face] += v;
            } else {
                d.y[face] += v;
            }
        }
    }
}

/// Checks every opening and finds its faces; `hx`, `hy` are face depths (padded layout).
pub(crate) fn resolve(
    openings: &[Opening],
    grid: &Grid,
    mask: &Mask,
    b: &Boundaries,
    hx: &[f64],
    hy: &[f64],
) -> Result<Vec<OpeningFaces>, ModelError> {
    if openings.is_empty() {
        return Err(invalid(
            "flow.opening",
            "none",
            "at least one [[flow.opening]] with flow.kind = \"openings\"",
        ));
    }
    let mut out: Vec<OpeningFaces> = Vec::new();
    let mut taken: Vec<(Side, f64, f64, usize)> = Vec::new();
    for (k, o) in openings.iter().enumerate() {
        let key = |f: &str| format!("flow.opening[{k}].{f}");
        let kind = b.get(o.side);
        if !matches!(kind, SideKind::Open { .. }) {
            return Err(invalid(
                key("side"),
                o.side.name(),
                format!(
                    "a side whose boundary is \"open\" (boundary.{} is {})",
                    o.side.name(),
                    kind.name()
                ),
            ));
        }
        let len = match o.side {
            Side::West | Side::East => grid.ly(),
            Side::South | Side::North => grid.lx(),
        };
        let start = match o.side {
            Side::West | Side::East => grid.y0,
            Side::South | Side::North => grid.x0,
        };
        if !o.from.is_finite() {
            return Err(invalid(key("from"), o.from, "a finite coordinate, m"));
        }
        if !(o.to.is_finite() && o.to > o.from) {
            return Err(invalid(
                key("to"),
                o.to,
                format!("a coordinate above from = {}", o.from),
            ));
        }
        if !o.discharge.is_finite() {
            return Err(invalid(key("discharge"), o.discharge, "a finite discharge, m3/s"));
        }
        if let Some(s) = o.share {
            if !(s.is_finite() && (0.0..=1.0).contains(&s)) {
                return Err(invalid(key("share"), s, "a fraction from 0 to 1"));
            }
        }
        if o.to <= start || o.from >= start + len {
            return Err(invalid(
                key("from"),
                format!("{}..{}", o.from, o.to),
                format!(
                    "a span overlapping the {} side, {start}..{} m",
                    o.side.name(),
                    start + len
                ),
            ));
        }
        for &(side, from, to, other) in &taken {
            if side == o.side && o.from < to && from < o.to {
                return Err(invalid(
                    key("from"),
                    format!("{}..{}", o.from, o.to),
                    format!("a span that does not overlap flow.opening[{other}] ({from}..{to})"),
                ));
            }
        }
        taken.push((o.side, o.from, o.to, k));
        let (nx, ny) = (grid.nx, grid.ny);
        let mut faces = Vec::new();
        match o.side {
            Side::West | Side::East => {
                let i = if o.side == Side::West { 0 } else { nx - 1 };
                let fi = if o.side == Side::West { 0 } else { nx };
                for j in 0..ny {
                    let y = grid.centre(i, j).1;
                    if (o.from..=o.to).contains(&y) && mask.is_wet(i, j) {
                        let h = hx[grid.idx(fi as isize, j as isize)];
                        faces.push((j * (nx + 1) + fi, true, h * grid.dy));
                    }
                }
            }
            Side::South | Side::North => {
                let j = if o.side == Side::South { 0 } else { ny - 1 };
                let fj = if o.side == Side::South { 0 } else { ny };
                for i in 0..nx {
                    let x = grid.centre(i, j).0;
                    if (o.from..=o.to).contains(&x) && mask.is_wet(i, j) {
                        let h = hy[grid.idx(i as isize, fj as isize)];
                        faces.push((fj * nx + i, false, h * grid.dx));
                    }
                }
            }
        }
        if faces.is_empty() {
            return Err(invalid(
                key("from"),
                format!("{}..{}", o.from, o.to),
                format!(
                    "a span that contains the centre of at least one water cell's face on the {} side",
                    o.side.name()
                ),
            ));
        }
        let sign = if matches!(o.side, Side::West | Side::South) {
            1.0
        } else {
            -1.0
        };
        out.push(OpeningFaces { faces, sign });
    }
    Ok(out)
}
