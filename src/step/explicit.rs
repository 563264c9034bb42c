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
    let pieced = kernel::pieced(m.grid.nx);
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
    }
    total
}

/// Row blocks for the kernel: a few per thread for balance (each recomputes one face row).
pub(crate) fn blocks_for(model: &Model) -> (Vec<Block>, usize) {
    let ny = model.grid.ny;
    let threads = rayon::current_num_threads().max(1);
    let rows_per_block = ny.div_ceil(4 * threads).max(16).min(ny);
    let nblocks = ny.div_ceil(rows_per_block);
    (
        (0..nblocks).map(|_| Block::new(model.grid.nx)).collect(),
        rows_per_block,
    )
}

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
