//! The discrete transpose of the explicit step for the linear convection schemes (upwind,
//! central, QUICK).
//!
//! One explicit stage is `out = (alpha H_b base + beta (H_s src - dt D F(src))) / H_o`, with
//! `F = Q src` the face fluxes (convection and diffusion; `Q` holds the face-value weights of
//! the scheme, the side conditions and the closures at land), `D` the face-to-cell difference
//! and `H` the cell depths at the base, source and output levels (1 without a depth field). For
//! a linear scheme `Q` is a fixed matrix (the inflow and fixed side values are an affine part
//! that drops out of the transpose), so the transposed stage is
//! `src_bar = H_s mu - dt Q^T D^T mu` with `mu = beta lambda / H_o`, and
//! `base_bar = alpha H_b lambda / H_o`. Here `Q^T D^T mu` is formed in gather form: per face
//! the difference of `mu` across it times the face's four cell weights (far-upwind, behind,
//! ahead, far-ahead), gathered per cell row; what lands on ghost cells is folded back onto the
//! interior cells the ghosts copy (mirror beside walls and open sides, wrap for periodic pairs;
//! ghosts beside fixed sides hold a value and fold nothing). The SSP Runge–Kutta step is
//! transposed by running its stages in reverse order with each stage's own time, flow and
//! levels, and the decay factor of the final stage first.
//!
//! Not transposed: the forward kernel's floor that sets values below
//! [`crate::step::kernel::FLUSH_BELOW`] to zero (a nonlinearity far below any value a run
//! resolves).

use crate::model::Model;
use crate::ops::boundary::SideKind;
use crate::ops::limiter::{Limiter, LimiterKernel};
use crate::ops::sources::decay_factor;
use crate::step::explicit::tableau;
use rayon::prelude::*;

/// `(p0, p1)` with `psi(r) = p0 + p1 r` for the linear schemes, `None` for the others (the
/// limiters, and the Peclet-switched schemes, which this kernel does not cover).
pub fn linear_coefficients(limiter: Limiter) -> Option<(f64, f64)> {
    match limiter {
        Limiter::Upwind | Limiter::Central | Limiter::Quick => Some(crate::with_limiter!(limiter, K => (
            2.0 * K::increment(0.0, 1.0),
            2.0 * K::increment(1.0, 0.0)
        ))),
        _ => None,
    }
}

/// Weights of a face flux on its four cells `[far behind, behind, ahead, far ahead]`: `w` the
/// face velocity (or transport), `uu_b`/`uu_a` whether the far cell behind/ahead is open (the
/// forward kernel drops the upwind difference when it is land), `d` the diffusive conductance
/// (0 across closed faces).
#[inline(always)]
fn weights(w: f64, uu_b: f64, uu_a: f64, d: f64, (p0, p1): (f64, f64)) -> [f64; 4] {
    let cd = 0.5 * p0;
    if w >= 0.0 {
        let cu = 1.0 - cd + 0.5 * p1 * uu_b;
        [-0.5 * p1 * uu_b * w, w * cu + d, w * cd - d, 0.0]
    } else {
        let cu = 1.0 - cd + 0.5 * p1 * uu_a;
        [0.0, w * cd + d, w * cu - d, -0.5 * p1 * uu_a * w]
    }
}

/// Weight of a side face's flux on its inner cell (`crate::ops::boundary::side_flux`
/// differentiated): an open side passes the cell value on outflow, a fixed side conducts
/// `2K/h` to its value, a wall nothing.
#[inline(always)]
fn side_weight(kind: SideKind, w: f64, wet: u8, coef2: f64, low: bool) -> f64 {
    if wet == 0 {
        return 0.0;
    }
    match kind {
        SideKind::Wall | SideKind::Periodic => 0.0,
        SideKind::Open { .. } => {
            let inflow = if low { w > 0.0 } else { w < 0.0 };
            if inflow {
                0.0
            } else {
                w
            }
        }
        SideKind::Fixed { .. } => {
            if low {
                -coef2
            } else {
                coef2
            }
        }
    }
}

/// The interior cell a ghost copies (`k` = 0 next to the side), or `None` beside a fixed side
/// (its ghosts hold the side's value); the transpose of `crate::ops::boundary::fill_ghosts`.
fn ghost_source(kind: SideKind, k: usize, n: usize, high: bool) -> Option<usize> {
    match kind {
        SideKind::Fixed { .. } => None,
        SideKind::Periodic => Some(if high { k % n } else { (n - 1 - (k % n)) % n }),
        SideKind::Wall | SideKind::Open { .. } => {
            let m = k.min(n - 1);
            Some(if high { n - 1 - m } else { m })
        }
    }
}

/// Flow faces of one stage: a factor on the model's base field, or formed face values.
#[derive(Clone, Copy)]
pub(crate) struct StageFlow<'a> {
    pub factor: f64,
    pub u: &'a [f64],
    pub v: &'a [f64],
}

/// Extra zero entries kept at each end of the face buffers, so that every cell's four faces
/// can be read without a bounds test.
const PAD: usize = 3;

/// Scratch of the transposed step, allocated once per run.
#[derive(Debug)]
pub(crate) struct Transposer {
    coef: (f64, f64),
    /// `mu` of the stage (padded; ghosts stay zero).
    mu: Vec<f64>,
    /// Gathered `Q^T D^T mu` (padded, ghosts included until folded).
    acc: Vec<f64>,
    /// Weighted y-face values, per face row `[far behind, behind, ahead, far ahead]` x nx.
    ybuf: Vec<f64>,
    /// Adjoint of the current stage's output and of the step's start.
    cur: Vec<f64>,
    cbar: Vec<f64>,
    /// Face values when the flow is not a factor on the base (tidal filling, file records).
    faces: Option<(Vec<f64>, Vec<f64>)>,
}

impl Transposer {
    /// Scratch for `m`; `limiter` must be linear ([`linear_coefficients`]).
    pub(crate) fn new(m: &Model, limiter: Limiter) -> Option<Self> {
        let coef = linear_coefficients(limiter)?;
        let n = m.grid.padded_len();
        let nx = m.grid.nx;
        Some(Self {
            coef,
            mu: vec![0.0; n],
            acc: vec![0.0; n],
            ybuf: vec![0.0; (m.grid.ny + 1 + 2 * PAD + 2) * 4 * nx],
            cur: vec![0.0; n],
            cbar: vec![0.0; n],
            faces: m.flow.has_fill().then(|| (vec![0.0; n], vec![0.0; n])),
        })
    }

    /// Replaces `lam` (the adjoint of the field at `t + dt`, padded, ghosts zero) by the
    /// adjoint of the field at `t`: the transpose of one explicit SSP-RK step of `dt` with
    /// `stages` stages from time `t`.
    pub(crate) fn step_back(&mut self, m: &Model, stages: u8, lam: &mut Vec<f64>, t: f64, dt: f64) {
        let (tab, _) = tableau(stages);
        let nst = tab.len();
        let (eta0, eta1) = (m.flow.level(t), m.flow.level(t + dt));
        let rate = (eta1 - eta0) / dt;
        // The levels of each stage, by the forward recurrence.
        let mut levels = [(0.0, 0.0); 3];
        let mut eta_src = eta0;
        for (k, &(alpha, beta, _)) in tab.iter().enumerate() {
            let eta_out = if k + 1 == nst {
                eta1
            } else {
                alpha * eta0 + beta * (eta_src + (eta1 - eta0))
            };
            levels[k] = (eta_src, eta_out);
            eta_src = eta_out;
        }
        let decay = decay_factor(m.decay_rate, dt);
        std::mem::swap(&mut self.cur, lam);
        if decay != 1.0 {
            self.cur.iter_mut().for_each(|x| *x *= decay);
        }
        self.cbar.iter_mut().for_each(|x| *x = 0.0);
        let hcell = m.depth_field.as_ref().map(|d| d.cell.as_slice());
        let g = &m.grid;
        for k in (0..nst).rev() {
            let (alpha, beta, toff) = tab[k];
            let ts = t + toff * dt;
            let (es, eo) = levels[k];
            // mu = beta lam / H_o; the base's adjoint gains alpha H_b lam / H_o.
            for j in 0..g.ny {
                let q = g.idx(0, j as isize);
                for p in q..q + g.nx {
                    let (hs, hb, ho) = match hcell {
                        Some(h) => (h[p] + es, h[p] + eta0, h[p] + eo),
                        None => (1.0, 1.0, 1.0),
                    };
                    let l = self.cur[p] / ho;
                    self.mu[p] = beta * l;
                    self.cbar[p] += alpha * hb * l;
                    // H_s is applied after the gather; keep it in `cur` meanwhile.
                    self.cur[p] = hs;
                }
            }
            let flow = match self.faces.as_mut() {
                Some((u, v)) => {
                    m.flow.faces_at(ts, rate, u, v);
                    StageFlow { factor: 1.0, u, v }
                }
                None => StageFlow {
                    factor: m.flow.factor(ts),
                    u: &m.flow.u,
                    v: &m.flow.v,
                },
            };
            gather(m, self.coef, &self.mu, &mut self.acc, &mut self.ybuf, flow, es, dt);
            for j in 0..g.ny {
                let q = g.idx(0, j as isize);
                for p in q..q + g.nx {
                    self.cur[p] = self.cur[p] * self.mu[p] + self.acc[p];
                }
            }
        }
        for j in 0..g.ny {
            let q = g.idx(0, j as isize);
            for p in q..q + g.nx {
                self.cur[p] += self.cbar[p];
            }
        }
        std::mem::swap(&mut self.cur, lam);
    }
}

/// `acc = Q^T g` on the interior of the padded `acc` (its halo is used as scratch and left
/// zero), with `g_f = dt/dx (mu_ahead - mu_behind)` per face (the coefficient of the face's
/// flux in `<lambda, out>`; `mu` is zero outside the grid): the transposed face fluxes of one
/// stage with flow `flow` and level `eta`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn gather(
    m: &Model,
    coef: (f64, f64),
    mu: &[f64],
    acc: &mut [f64],
    ybuf: &mut [f64],
    flow: StageFlow,
    eta: f64,
    dt: f64,
) {
    let g = &m.grid;
    let (s, nx, ny) = (g.stride(), g.nx, g.ny);
    let b = &m.boundaries;
    let masked = m.has_land();
    let wet = &m.wet;
    let depth = m.depth_field.as_ref();
    let (dtdx, dtdy) = (dt / g.dx, dt / g.dy);
    let (kx, ky) = (m.kx / g.dx, m.ky / g.dy);
    let wf = |p: usize| f64::from(wet[p]);
    // Pass 1: weighted y-face values, one face row per task (face row jf stored at jf + PAD).
    let row4 = 4 * nx;
    ybuf.fill(0.0);
    ybuf[PAD * row4..(ny + 1 + PAD) * row4]
        .par_chunks_mut(row4)
        .enumerate()
        .for_each(|(jf, out)| {
            let side = if jf == 0 {
                Some((b.south, true))
            } else if jf == ny {
                Some((b.north, false))
            } else {
                None
            };
            let side = side.filter(|(k, _)| *k != SideKind::Periodic);
            let (oll, rest) = out.split_at_mut(nx);
            let (ol, rest) = rest.split_at_mut(nx);
            let (or, orr) = rest.split_at_mut(nx);
            let p0 = g.idx(0, jf as isize);
            for i in 0..nx {
                let p = p0 + i;
                let gy = dtdy * (mu[p] - mu[p - s]);
                let w = flow.factor * flow.v[p];
                let cond = depth.map_or(ky, |d| ky * (d.fy[p] + eta));
                match side {
                    Some((kind, low)) => {
                        let inner = if low { p } else { p - s };
                        let sw = side_weight(kind, w, wet[inner], 2.0 * cond, low) * gy;
                        (oll[i], ol[i], or[i], orr[i]) = if low { (0.0, 0.0, sw, 0.0) } else { (0.0, sw, 0.0, 0.0) };
                    }
                    None => {
                        let [a, bb, c, d] = if masked {
                            let dd = cond * wf(p - s) * wf(p);
                            weights(w, wf(p - 2 * s), wf(p + s), dd, coef)
                        } else {
                            weights(w, 1.0, 1.0, cond, coef)
                        };
                        (oll[i], ol[i], or[i], orr[i]) = (a * gy, bb * gy, c * gy, d * gy);
                    }
                }
            }
        });
    // Pass 2: per padded row, the x-faces of interior rows and the y-faces gathered.
    let ybuf = &*ybuf;
    let xlen = nx + 1 + 2 * PAD + 2;
    acc.par_chunks_mut(s).enumerate().for_each_init(
        || vec![0.0; 4 * xlen],
        |xb, (jp, row)| {
            row.fill(0.0);
            let jr = jp as isize - 2;
            if (0..ny as isize).contains(&jr) {
                let j = jr as usize;
                xb.fill(0.0);
                let (xll, rest) = xb.split_at_mut(xlen);
                let (xl, rest) = rest.split_at_mut(xlen);
                let (xr, xrr) = rest.split_at_mut(xlen);
                let p0 = g.idx(0, j as isize);
                for f in 0..=nx {
                    let p = p0 + f;
                    let gx = dtdx * (mu[p] - mu[p - 1]);
                    let w = flow.factor * flow.u[p];
                    let cond = depth.map_or(kx, |d| kx * (d.fx[p] + eta));
                    let side = match f {
                        0 if b.west != SideKind::Periodic => Some((b.west, true)),
                        _ if f == nx && b.east != SideKind::Periodic => Some((b.east, false)),
                        _ => None,
                    };
                    let k = f + PAD;
                    match side {
                        Some((kind, true)) => xr[k] = side_weight(kind, w, wet[p], 2.0 * cond, true) * gx,
                        Some((kind, false)) => xl[k] = side_weight(kind, w, wet[p - 1], 2.0 * cond, false) * gx,
                        None => {
                            let [a, bb, c, d] = if masked {
                                let dd = cond * wf(p - 1) * wf(p);
                                weights(w, wf(p - 2), wf(p + 1), dd, coef)
                            } else {
                                weights(w, 1.0, 1.0, cond, coef)
                            };
                            (xll[k], xl[k], xr[k], xrr[k]) = (a * gx, bb * gx, c * gx, d * gx);
                        }
                    }
                }
                // Padded column c (cell c - 2) is the far-ahead cell of face c - 3, ahead
                // of face c - 2, behind face c - 1 and far behind face c (face f at f + PAD).
                for (c, o) in row.iter_mut().enumerate() {
                    let k = c + PAD - 2;
                    *o = xrr[k - 1] + xr[k] + xl[k + 1] + xll[k + 2];
                }
            }
            // Cell row jr is the far-ahead row of face row jr - 1, ahead of jr, behind
            // jr + 1 and far behind jr + 2 (face row jf stored at jf + PAD).
            let k = (jr + PAD as isize) as usize;
            let part = |r: usize, which: usize| &ybuf[r * row4 + which * nx..r * row4 + (which + 1) * nx];
            if k >= 1 && k + 2 < ybuf.len() / row4 {
                let (a, bb, c, d) = (part(k - 1, 3), part(k, 2), part(k + 1, 1), part(k + 2, 0));
                let o = &mut row[2..2 + nx];
                for i in 0..nx {
                    o[i] += a[i] + bb[i] + c[i] + d[i];
                }
            }
        },
    );
    // Pass 3: fold the ghosts onto the cells they copy, then clear them.
    for j in 0..ny {
        let q = g.idx(0, j as isize);
        for kk in 0..2 {
            for (kind, high) in [(b.west, false), (b.east, true)] {
                let ghost = if high { q + nx + kk } else { q - 1 - kk };
                let v = std::mem::take(&mut acc[ghost]);
                if let Some(i) = ghost_source(kind, kk, nx, high) {
                    acc[q + i] += v;
                }
            }
        }
    }
    for i in 0..nx {
        for kk in 0..2 {
            for (kind, high) in [(b.south, false), (b.north, true)] {
                let gj = if high { (ny + kk) as isize } else { -1 - kk as isize };
                let ghost = g.idx(i as isize, gj);
                let v = std::mem::take(&mut acc[ghost]);
                if let Some(j) = ghost_source(kind, kk, ny, high) {
                    acc[g.idx(i as isize, j as isize)] += v;
                }
            }
        }
    }
}
