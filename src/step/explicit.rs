//! Explicit SSP Runge–Kutta stepping (Shu & Osher 1988, 1 to 3 stages): each stage is one
//! fused sweep of [`super::kernel`]; the stage fluxes through the sides enter the budget with
//! the scheme's weights.

use super::kernel::{self, Block, Faces, StageParams};
use super::{Scheme, State};
use crate::model::Model;
use crate::ops::boundary::{fill_ghosts, Side};
use crate::ops::limiter::Limiter;

/// What a transport step produced, for the budget and the divergence check.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct StepOutcome {
    /// Mass carried in and out through each side during the step.
    pub side_mass: [[f64; 2]; 4],
    /// Sum of the transported field before decay (only when decay is active).
    pub transported: f64,
    /// Whether a value ran away or turned non-finite.
    pub bad: bool,
    /// Largest |flow factor| over the step's stage times.
    pub max_factor: f64,
    /// What the final stage set to zero below [`kernel::FLUSH_BELOW`], in the units of
    /// `transported`.
    pub flushed: f64,
}

/// Converts per-unit-length side flux sums into mass over `dt`, weighted by `w`.
pub(crate) fn book_sides(m: &Model, sums: &kernel::BlockSums, w: f64, dt: f64, into: &mut [[f64; 2]; 4]) {
    for side in Side::ALL {
        let len = match side {
            Side::West | Side::East => m.grid.dy,
            _ => m.grid.dx,
        };
        let k = side.index();
        into[k][0] += w * sums.side_in[k] * len * m.flux_depth() * dt;
        into[k][1] += w * sums.side_out[k] * len * m.flux_depth() * dt;
    }
}

/// One kernel sweep `out = alpha base + beta (src + dt L(src))` with `src`'s ghosts already
/// filled, reduced over blocks.
#[allow(clippy::too_many_arguments)]
pub(crate) fn sweep(
    m: &Model,
    limiter: Limiter,
    src: &[f64],
    base: &[f64],
    out: &mut [f64],
    blocks: &mut [Block],
    rows_per_block: usize,
    p: StageParams,
    faces: Faces,
) -> kernel::BlockSums {
    let masked = m.has_land();
    let pieced = kernel::pieced(m);
    crate::with_limiter!(limiter, K => {
        if masked {
            kernel::stage::<K, true>(m, src, base, out, blocks, rows_per_block, p, pieced, faces)
        } else {
            kernel::stage::<K, false>(m, src, base, out, blocks, rows_per_block, p, pieced, faces)
        }
    });
    let mut total = kernel::BlockSums::default();
    for blk in blocks.iter() {
        for k in 0..4 {
            total.side_in[k] += blk.sums.side_in[k];
            total.side_out[k] += blk.sums.side_out[k];
        }
        total.sum.add(blk.sums.sum.value());
        total.bad |= blk.sums.bad;
        total.flushed += blk.sums.flushed;
    }
    total
}

/// Row blocks for the kernel: a few per thread for balance (each recomputes one face row), but
/// no more than one per [`MIN_BLOCK_CELLS`] cells, so a small grid is not cut into pieces whose
/// hand-over costs more than their work (a grid under that size runs as one block, on one
/// thread).
pub(crate) fn blocks_for(model: &Model) -> (Vec<Block>, usize) {
    let (nx, ny) = (model.grid.nx, model.grid.ny);
    let rows_per_block = rows_per_block(nx, ny, rayon::current_num_threads().max(1));
    let nblocks = ny.div_ceil(rows_per_block);
    ((0..nblocks).map(|_| Block::new(nx)).collect(), rows_per_block)
}

/// Rows per kernel block of an `nx` by `ny` grid on `threads` threads (see [`blocks_for`]).
fn rows_per_block(nx: usize, ny: usize, threads: usize) -> usize {
    let by_threads = ny.div_ceil(4 * threads).max(16).min(ny);
    let most = (nx * ny / MIN_BLOCK_CELLS).max(1);
    if ny.div_ceil(by_threads) > most {
        ny.div_ceil(most)
    } else {
        by_threads
    }
}

/// Fewest cells per kernel block.
const MIN_BLOCK_CELLS: usize = 8192;

/// Explicit SSP Runge–Kutta stepper with its scratch.
#[derive(Debug)]
pub(crate) struct Explicit {
    a: Vec<f64>,
    b: Vec<f64>,
    blocks: Vec<Block>,
    rows_per_block: usize,
    /// Face values of a stage when they are not a factor times the base (tidal filling).
    faces: Option<(Vec<f64>, Vec<f64>)>,
}

impl Explicit {
    pub(crate) fn new(model: &Model) -> Self {
        let (blocks, rows_per_block) = blocks_for(model);
        Self {
            // Filled with NaN so that any read of a value no stage wrote shows up at once.
            a: crate::field::huge_filled(model.grid.padded_len(), f64::NAN),
            b: crate::field::huge_filled(model.grid.padded_len(), f64::NAN),
            blocks,
            rows_per_block,
            faces: model
                .flow
                .has_fill()
                .then(|| (vec![0.0; model.grid.padded_len()], vec![0.0; model.grid.padded_len()])),
        }
    }

    /// Advances `state.c` by one SSP-RK step of `dt` (time and step count are left to the
    /// caller); `diffusion` scales the diffusivity (0 for convection alone); decay by the
    /// factor `decay` is applied in the final stage.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn advance(
        &mut self,
        m: &Model,
        scheme: &Scheme,
        state: &mut State,
        dt: f64,
        decay: f64,
        limit: f64,
        diffusion: f64,
    ) -> StepOutcome {
        let (stages, weights) = tableau(scheme.stages);
        let nst = stages.len();
        let mut out = StepOutcome::default();
        // The level's change over the step is carried by a constant filling rate, so every
        // stage's volume is the one continuity gives (exactly h0 + eta1 after the last stage).
        let (eta0, eta1) = (m.flow.level(state.t), m.flow.level(state.t + dt));
        let rate = (eta1 - eta0) / dt;
        let mut eta_src = eta0;
        for (k, &(alpha, beta, toff)) in stages.iter().enumerate() {
            let ts = state.t + toff * dt;
            let (factor, faces) = match self.faces.as_mut() {
                Some((u, v)) => {
                    m.flow.faces_at(ts, rate, u, v);
                    out.max_factor = 1.0;
                    (1.0, Faces { u, v })
                }
                None => {
                    let f = m.flow.factor(ts);
                    out.max_factor = out.max_factor.max(f.abs());
                    (f, Faces::of(m))
                }
            };
            let final_stage = k + 1 == nst;
            let eta_out = if final_stage {
                eta1
            } else {
                alpha * eta0 + beta * (eta_src + (eta1 - eta0))
            };
            let p = StageParams {
                dt,
                factor,
                alpha,
                beta,
                final_stage,
                decay,
                limit,
                diffusion,
                eta_src,
                eta_base: eta0,
                eta_out,
            };
            eta_src = eta_out;
            // Stage buffers: c -> a -> b -> a (3 stages), c -> a -> b (2), c -> a (1).
            match k {
                0 => fill_ghosts(&m.grid, &m.boundaries, &mut state.c),
                1 => fill_ghosts(&m.grid, &m.boundaries, &mut self.a),
                _ => fill_ghosts(&m.grid, &m.boundaries, &mut self.b),
            }
            let (src, dst): (&[f64], &mut [f64]) = match k {
                0 => (&state.c, &mut self.a),
                1 => (&self.a, &mut self.b),
                _ => (&self.b, &mut self.a),
            };
            let sums = sweep(
                m,
                scheme.limiter,
                src,
                &state.c,
                dst,
                &mut self.blocks,
                self.rows_per_block,
                p,
                faces,
            );
            book_sides(m, &sums, weights[k], dt, &mut out.side_mass);
            if p.final_stage {
                out.transported = sums.sum.value();
                out.bad = sums.bad;
                out.flushed = sums.flushed;
            }
        }
        // The final stage wrote into a or b: make it the state.
        match nst {
            2 => std::mem::swap(&mut state.c, &mut self.b),
            _ => std::mem::swap(&mut state.c, &mut self.a),
        }
        out
    }
}

/// SSP-RK stage coefficients (Shu & Osher 1988) as (alpha, beta, time offset) with
/// `u_k = alpha u_n + beta (u_{k-1} + dt L(u_{k-1}))`, and the weights with which each
/// stage's fluxes enter the step.
pub(crate) fn tableau(stages: u8) -> (&'static [(f64, f64, f64)], &'static [f64]) {
    match stages {
        1 => (&[(0.0, 1.0, 0.0)], &[1.0]),
        2 => (&[(0.0, 1.0, 0.0), (0.5, 0.5, 1.0)], &[0.5, 0.5]),
        _ => (
            &[(0.0, 1.0, 0.0), (0.75, 0.25, 1.0), (1.0 / 3.0, 2.0 / 3.0, 0.5)],
            &[1.0 / 6.0, 1.0 / 6.0, 2.0 / 3.0],
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_grids_run_in_few_blocks_and_large_ones_as_before() {
        // 200 x 100 on 2 threads: 20,000 cells give two blocks of 50 rows, not seven of 16.
        assert_eq!(rows_per_block(200, 100, 2), 50);
        // Under 2 x MIN_BLOCK_CELLS: one block.
        assert_eq!(rows_per_block(100, 100, 2), 100);
        // Large grids keep four blocks per thread.
        assert_eq!(rows_per_block(512, 512, 2), 64);
        assert_eq!(rows_per_block(2048, 2048, 2), 256);
        // Every row is in a block, and no block is empty.
        for (nx, ny, t) in [(200, 100, 2), (37, 1000, 3), (5000, 3, 2), (1, 1, 1)] {
            let rpb = rows_per_block(nx, ny, t);
            assert!(rpb >= 1 && rpb <= ny && ny.div_ceil(rpb) * rpb >= ny);
        }
    }
}
