//! Turning the initial field and the sources into particles.
//!
//! Each release (the initial field, each source) gets a share of the particle count in
//! proportion to its mass (at least one particle when its mass is positive; the total may
//! differ from the count asked for by rounding), and its particles share its mass equally.
//! The cell of each particle is chosen by systematic sampling of the release's cell weights
//! (the initial field's cell masses `c h dA`, or a source's spread weights, as the grid run
//! deposits them), so cell counts follow the weights to within one particle; within the cell
//! the position is uniform. A continuous release's particles are born at a steady rate over
//! its overlap with the run, at the midpoints of equal time slices, and take their cells in a
//! golden-ratio order so that every cell is fed all along the release.

use super::{ParticleConfig, Particles};
use crate::error::{invalid, ModelError};
use crate::model::Model;
use crate::ops::sources::Release;
use ndarray::ArrayView2;
use rand::RngExt;
use rand_xoshiro::Xoshiro256PlusPlus;

/// One release to represent: its mass, cell weights (padded index, weight), and birth times.
struct Batch {
    mass: f64,
    cells: Vec<(usize, f64)>,
    /// Born all at once at this time, or over (start, stop].
    born: Born,
}

enum Born {
    At(f64),
    Over(f64, f64),
}

/// Places the particles of every release of `model` and of `c0`, sorted by birth time.
pub(super) fn place(
    model: &Model,
    c0: ArrayView2<f64>,
    cfg: ParticleConfig,
    rng: &mut Xoshiro256PlusPlus,
) -> Result<Particles, ModelError> {
    let g = &model.grid;
    let mut batches = Vec::new();
    let mut initial = Vec::new();
    for ((j, i), &c) in c0.indexed_iter() {
        if !(c.is_finite() && c >= 0.0) {
            return Err(invalid(
                format!("initial field cell ({i}, {j})"),
                c,
                "a finite value >= 0",
            ));
        }
        if c > 0.0 && model.mask.is_wet(i, j) {
            let m = c * model.depth_at(i, j, cfg.t0) * g.cell_area();
            initial.push((g.idx(i as isize, j as isize), m));
        }
    }
    let m0: f64 = initial.iter().map(|c| c.1).sum();
    if m0 > 0.0 {
        batches.push(Batch {
            mass: m0,
            cells: initial,
            born: Born::At(cfg.t0),
        });
    }
    for s in &model.sources {
        let (mass, born) = match s.release {
            Release::Instant { mass, at } if at <= cfg.t_end => (mass, Born::At(at.max(cfg.t0))),
            Release::Continuous { rate, start, stop } => {
                let (a, b) = (start.max(cfg.t0), stop.min(cfg.t_end));
                (if b > a { rate * (b - a) } else { 0.0 }, Born::Over(a, b))
            }
            _ => (0.0, Born::At(cfg.t0)),
        };
        if mass > 0.0 {
            batches.push(Batch {
                mass,
                cells: s.cells().to_vec(),
                born,
            });
        }
    }
    let total: f64 = batches.iter().map(|b| b.mass).sum();
    let mut p = Particles::default();
    for b in &batches {
        let n = ((cfg.count as f64 * b.mass / total).round() as usize).max(1);
        let each = b.mass / n as f64;
        let wsum: f64 = b.cells.iter().map(|c| c.1).sum();
        let cum: Vec<f64> = b
            .cells
            .iter()
            .scan(0.0, |acc, c| {
                *acc += c.1 / wsum;
                Some(*acc)
            })
            .collect();
        for k in 0..n {
            let (q, t) = match b.born {
                Born::At(t) => ((k as f64 + 0.5) / n as f64, t),
                Born::Over(a, z) => {
                    let q = ((k as f64 + 0.5) * GOLDEN).fract();
                    (q, a + (k as f64 + 0.5) * (z - a) / n as f64)
                }
            };
            let cell = cum.partition_point(|&c| c < q).min(b.cells.len() - 1);
            let pidx = b.cells[cell].0;
            let (i, j) = (pidx % g.stride() - 2, pidx / g.stride() - 2);
            let (fx, fy): (f64, f64) = (rng.random(), rng.random());
            p.x.push(g.x0 + (i as f64 + fx) * g.dx);
            p.y.push(g.y0 + (j as f64 + fy) * g.dy);
            p.mass.push(each);
            p.born.push(t);
        }
    }
    let mut order: Vec<usize> = (0..p.len()).collect();
    order.sort_by(|&a, &b| p.born[a].total_cmp(&p.born[b]));
    Ok(Particles {
        x: order.iter().map(|&k| p.x[k]).collect(),
        y: order.iter().map(|&k| p.y[k]).collect(),
        mass: order.iter().map(|&k| p.mass[k]).collect(),
        born: order.iter().map(|&k| p.born[k]).collect(),
    })
}

/// The golden ratio's fractional part: successive multiples fill (0, 1) evenly.
const GOLDEN: f64 = 0.618_033_988_749_894_9;
