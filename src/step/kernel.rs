//! The fused explicit stage kernel: face fluxes (convection + diffusion) and the cell update in
//! one sweep over row blocks, parallel over blocks with rayon.
//!
//! For each row the x-face fluxes go into a row buffer, the north y-face fluxes into another;
//! the update then reads both and the south fluxes kept from the row below, so every face flux
//! is computed once per block and used by both of its cells (exact conservation up to
//! rounding). Each block recomputes the south-face row at its start. Fluxes through
//! non-periodic sides come from [`crate::ops::boundary::side_flux`] and are summed per side for
//! the mass budget. The whole kernel is monomorphised per limiter and per "has land" flag.
//!
//! With a depth field (or a tidal level) the kernel runs its `DEPTH` form: face values are
//! transports `h_f u_f`, diffusive conductances are `h_f K / dx` with `h_f = h0_f + eta`, and the
//! update is the conservative `c_out = (alpha h_base c_base + beta (h_src c_src - dt div F)) /
//! h_out` with `h = h0 + eta` at the base, source and output levels of the stage; without, the
//! depth cancels and the kernel works in concentration units, as fast as before.
//!
//! When the grid's arrays outgrow the cache ([`pieced`]), rows are swept in pieces of [`PIECE`]
//! cells, x-faces and update together, and while a piece is computed the inputs the next row
//! needs for the same piece are prefetched into L2, so memory is read at an even pace rather
//! than in bursts that the hardware prefetcher restarts at every page. The arithmetic is the
//! same, bit for bit.

use crate::field::Neumaier;
use crate::model::Model;
use crate::ops::boundary::{side_flux, Side, SideKind};
use crate::ops::convection;
use crate::ops::limiter::LimiterKernel;
use crate::solve::blocks::prefetch_l2;
use rayon::prelude::*;

/// Per-block results of one stage.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct BlockSums {
    /// Per side: flux sum into the domain (per unit face length and depth, times face count).
    pub side_in: [f64; 4],
    /// Per side: flux sum out of the domain.
    pub side_out: [f64; 4],
    /// Sum of the transported field (final stage with decay only, before decay).
    pub sum: Neumaier,
    /// Whether a value of the final stage is non-finite or above the run's limit.
    pub bad: bool,
    /// What the final stage set to zero below [`FLUSH_BELOW`] (sum of values, times the
    /// output depth with a depth field).
    pub flushed: f64,
}

/// Values of a final stage smaller in magnitude than this are set to zero and their mass is
/// booked as decayed. Far below anything a run can resolve (rounding already blurs values
/// below 1e-16 of the peak), but a field left to decay or drain would otherwise sink into the
/// subnormal range (below 2.2e-308), where every operation costs about three times as much
/// (measured: the `gaussian-puff` grid slowed from about 900 to about 300 Mcell/s on one
/// thread once its field had drained). The floor keeps the limiter's products of two
/// differences (`a |b|`) at or above 1e-280, clear of that range. Runs whose values never
/// fall below it are unchanged, bit for bit.
pub(crate) const FLUSH_BELOW: f64 = 1e-140;

/// Whether `v` is a nonzero value under `floor` (NaN is not).
#[inline(always)]
fn tiny(v: f64, floor: f64) -> bool {
    (v.abs() < floor) & (v != 0.0)
}

/// Sets the values of `o` under `floor` to zero and returns their sum (times the output depth
/// `h0 + eta` with `DEPTH`). Called only for a row that has such values: the sum runs in
/// order, which would keep the update loop from vectorising.
#[cold]
fn flush_row<const DEPTH: bool>(o: &mut [f64], h0: &[f64], eta: f64, floor: f64) -> f64 {
    let mut sum = 0.0;
    for (k, x) in o.iter_mut().enumerate() {
        if tiny(*x, floor) {
            sum += if DEPTH { *x * (h0[k] + eta) } else { *x };
            *x = 0.0;
        }
    }
    sum
}

/// Scratch of one row block: three face rows.
#[derive(Debug, Clone)]
pub(crate) struct Block {
    fx: Vec<f64>,
    fys: Vec<f64>,
    fyn: Vec<f64>,
    pub sums: BlockSums,
}

impl Block {
    pub fn new(nx: usize) -> Self {
        Self {
            fx: vec![0.0; nx + 1],
            fys: vec![0.0; nx],
            fyn: vec![0.0; nx],
            sums: BlockSums::default(),
        }
    }
}

/// What one stage computes: `out = alpha base + beta (src + dt L(src))`, then, on the final
/// stage, `out *= decay`; values above `limit` in magnitude (or non-finite) are flagged.
#[derive(Debug, Clone, Copy)]
pub(crate) struct StageParams {
    pub dt: f64,
    /// Flow factor at the stage time.
    pub factor: f64,
    pub alpha: f64,
    pub beta: f64,
    pub final_stage: bool,
    pub decay: f64,
    pub limit: f64,
    /// Multiplies the diffusivity: 1 for the full operator, 0 for convection alone.
    pub diffusion: f64,
    /// Tidal level of the source field (diffusive face depths and `h_src`), m.
    pub eta_src: f64,
    /// Tidal level of the base field, m.
    pub eta_base: f64,
    /// Tidal level of the output, m.
    pub eta_out: f64,
}

impl StageParams {
    /// A stage `out = src + dt L(src)` at flow factor `factor` with the diffusivity scaled by
    /// `diffusion`, the level `eta` throughout.
    pub fn forward(dt: f64, factor: f64, diffusion: f64, limit: f64, eta: f64) -> Self {
        Self {
            dt,
            factor,
            alpha: 0.0,
            beta: 1.0,
            final_stage: false,
            decay: 1.0,
            limit,
            diffusion,
            eta_src: eta,
            eta_base: eta,
            eta_out: eta,
        }
    }
}

/// The face values a stage reads: velocities (uniform depth) or transports, padded layout.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Faces<'a> {
    pub u: &'a [f64],
    pub v: &'a [f64],
}

impl<'a> Faces<'a> {
    /// The model's own base field.
    pub fn of(m: &'a Model) -> Self {
        Self {
            u: &m.flow.u,
            v: &m.flow.v,
        }
    }
}

/// Whether a stage on this model sweeps its rows in prefetched pieces: when the arrays it
/// streams (source, output, the two face arrays and the wet flags, plus the base and depths when
/// present) exceed half the last-level cache, a step reads them from memory, and the sweep waits
/// on memory unless the next row's inputs are fetched ahead. Below that the data is in cache
/// from the step before, and whole rows are faster.
pub(crate) fn pieced(m: &Model) -> bool {
    let bytes_per_cell = 5 * 8 + 1 + if m.depth_field.is_some() { 3 * 8 } else { 0 };
    m.grid.padded_len().saturating_mul(bytes_per_cell) > crate::par::last_level_cache_bytes() / 2
}

/// Runs one stage over all row blocks, the rows swept in prefetched pieces or whole (the
/// same arithmetic, bit for bit; [`pieced`] chooses). `src` must have its ghosts filled.
#[allow(clippy::too_many_arguments)]
pub(crate) fn stage<K: LimiterKernel, const MASKED: bool>(
    m: &Model,
    src: &[f64],
    base: &[f64],
    out: &mut [f64],
    blocks: &mut [Block],
    rows_per_block: usize,
    p: StageParams,
    pieced: bool,
    faces: Faces,
) {
    let g = &m.grid;
    let s = g.stride();
    let depth = m.depth_field.is_some();
    let inner = &mut out[2 * s..(g.ny + 2) * s];
    inner
        .par_chunks_mut(rows_per_block * s)
        .zip(blocks.par_iter_mut())
        .enumerate()
        .for_each(|(b, (chunk, blk))| {
            let j0 = b * rows_per_block;
            let a = (m, src, base, faces);
            match (p.alpha == 0.0, pieced, depth) {
                (true, _, true) => block::<K, MASKED, false, false, true>(a, chunk, blk, j0, p),
                (false, _, true) => block::<K, MASKED, true, false, true>(a, chunk, blk, j0, p),
                (true, false, false) => block::<K, MASKED, false, false, false>(a, chunk, blk, j0, p),
                (true, true, false) => block::<K, MASKED, false, true, false>(a, chunk, blk, j0, p),
                (false, false, false) => block::<K, MASKED, true, false, false>(a, chunk, blk, j0, p),
                (false, true, false) => block::<K, MASKED, true, true, false>(a, chunk, blk, j0, p),
            }
        });
}

/// Cells per piece of a row in the fused sweep (eight cache lines of `f64`).
const PIECE: usize = 64;

#[inline(always)]
fn wet_f(w: u8) -> f64 {
    f64::from(w)
}

/// The four cell rows around a row of y-faces (between cell rows jf-1 and jf), the face
/// velocities, the face depths (the velocities again, unread, without a depth field) and the
/// wet flags, each `nx` long.
struct YRows<'a> {
    ll: &'a [f64],
    l: &'a [f64],
    r: &'a [f64],
    rr: &'a [f64],
    v: &'a [f64],
    h: &'a [f64],
    wll: &'a [u8],
    wl: &'a [u8],
    wr: &'a [u8],
    wrr: &'a [u8],
}

impl<'a> YRows<'a> {
    #[inline(always)]
    fn new(m: &'a Model, src: &'a [f64], jf: usize, fv: &'a [f64]) -> Self {
        let (s, nx) = (m.grid.stride(), m.grid.nx);
        let p = (jf + 2) * s + 2;
        let (a, b, c, d) = (p - 2 * s, p - s, p, p + s);
        let hy = m.depth_field.as_ref().map_or(fv, |f| &f.fy);
        Self {
            ll: &src[a..a + nx],
            l: &src[b..b + nx],
            r: &src[c..c + nx],
            rr: &src[d..d + nx],
            v: &fv[p..p + nx],
            h: &hy[p..p + nx],
            wll: &m.wet[a..a + nx],
            wl: &m.wet[b..b + nx],
            wr: &m.wet[c..c + nx],
            wrr: &m.wet[d..d + nx],
        }
    }

    /// The part `i0 .. i0 + n` of the rows (exact lengths let the compiler drop bounds
    /// checks in the loops).
    #[inline(always)]
    fn window(&self, i0: usize, n: usize) -> Self {
        let r = i0..i0 + n;
        Self {
            ll: &self.ll[r.clone()],
            l: &self.l[r.clone()],
            r: &self.r[r.clone()],
            rr: &self.rr[r.clone()],
            v: &self.v[r.clone()],
            h: &self.h[r.clone()],
            wll: &self.wll[r.clone()],
            wl: &self.wl[r.clone()],
            wr: &self.wr[r.clone()],
            wrr: &self.wrr[r],
        }
    }

    /// Total (convective + diffusive) flux through face i (with `DEPTH`, the conductance is
    /// `coef (h0_f + eta)`).
    #[inline(always)]
    fn flux<K: LimiterKernel, const MASKED: bool, const DEPTH: bool>(
        &self,
        i: usize,
        factor: f64,
        coef: f64,
        s: f64,
        eta: f64,
    ) -> f64 {
        let w = factor * self.v[i];
        let coef = if DEPTH { coef * (self.h[i] + eta) } else { coef };
        if MASKED {
            let uu = convection::pick(w >= 0.0, wet_f(self.wll[i]), wet_f(self.wrr[i]));
            let d = coef * wet_f(self.wl[i]) * wet_f(self.wr[i]);
            convection::face_flux::<K>(w, self.ll[i], self.l[i], self.r[i], self.rr[i], uu, d, s)
        } else {
            convection::face_flux::<K>(w, self.ll[i], self.l[i], self.r[i], self.rr[i], 1.0, coef, s)
        }
    }
}

/// Fluxes through the y-faces of face row `jf` into `f`.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn y_faces<K: LimiterKernel, const MASKED: bool, const DEPTH: bool>(
    m: &Model,
    src: &[f64],
    jf: usize,
    (factor, coef, s, eta): (f64, f64, f64, f64),
    fv: &[f64],
    f: &mut [f64],
) {
    let nx = m.grid.nx;
    let y = YRows::new(m, src, jf, fv).window(0, nx);
    let f = &mut f[..nx];
    for (i, fi) in f.iter_mut().enumerate() {
        *fi = y.flux::<K, MASKED, DEPTH>(i, factor, coef, s, eta);
    }
}

/// Fluxes through x-faces `f0 .. f0 + f.len()` of cell row `j` (`(j, f0)`) (the west face of cell i is
/// face i; a row has nx + 1) into `f`.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn x_faces<K: LimiterKernel, const MASKED: bool, const DEPTH: bool>(
    m: &Model,
    src: &[f64],
    (j, f0): (usize, usize),
    (factor, coef, sd, eta): (f64, f64, f64, f64),
    fu: &[f64],
    f: &mut [f64],
) {
    let g = &m.grid;
    let (s, n) = (g.stride(), f.len());
    let p0 = (j + 2) * s + f0;
    let row = &src[p0..p0 + n + 3];
    let (ll, l, r, rr) = (&row[0..n], &row[1..n + 1], &row[2..n + 2], &row[3..n + 3]);
    let u = &fu[p0 + 2..p0 + 2 + n];
    // Face depths (the velocities again, unread, without a depth field).
    let h = &m.depth_field.as_ref().map_or(fu, |d| &d.fx)[p0 + 2..p0 + 2 + n];
    let cond = |i: usize| if DEPTH { coef * (h[i] + eta) } else { coef };
    if MASKED {
        let wrow = &m.wet[p0..p0 + n + 3];
        let (wll, wl, wr, wrr) = (&wrow[0..n], &wrow[1..n + 1], &wrow[2..n + 2], &wrow[3..n + 3]);
        for i in 0..n {
            let w = factor * u[i];
            let uu = convection::pick(w >= 0.0, wet_f(wll[i]), wet_f(wrr[i]));
            let d = cond(i) * wet_f(wl[i]) * wet_f(wr[i]);
            f[i] = convection::face_flux::<K>(w, ll[i], l[i], r[i], rr[i], uu, d, sd);
        }
    } else {
        for i in 0..n {
            let w = factor * u[i];
            f[i] = convection::face_flux::<K>(w, ll[i], l[i], r[i], rr[i], 1.0, cond(i), sd);
        }
    }
}

/// Replaces the side fluxes of a face row by the side condition and books them.
#[inline]
#[allow(clippy::too_many_arguments)]
fn side_row(
    kind: SideKind,
    side: Side,
    w: &[f64],
    inner: &[f64],
    wet: &[u8],
    factor: f64,
    (coef2, depth): (f64, Option<(&[f64], f64)>),
    f: &mut [f64],
    sums: &mut BlockSums,
) {
    if kind == SideKind::Periodic {
        return;
    }
    let low = matches!(side, Side::West | Side::South);
    let (mut fin, mut fout) = (0.0, 0.0);
    for k in 0..f.len() {
        let c2 = depth.map_or(coef2, |(h, eta)| coef2 * (h[k] + eta));
        let flux = if wet[k] == 0 {
            0.0
        } else {
            side_flux(kind, factor * w[k], inner[k], c2, low)
        };
        f[k] = flux;
        let into = if low { flux } else { -flux };
        if into >= 0.0 {
            fin += into;
        } else {
            fout -= into;
        }
    }
    sums.side_in[side.index()] += fin;
    sums.side_out[side.index()] += fout;
}

/// Book-keeps one side face (west or east) of an x-face row.
#[inline(always)]
fn side_face(kind: SideKind, side: Side, w: f64, inner: f64, wet: u8, coef2: f64, sums: &mut BlockSums) -> Option<f64> {
    if kind == SideKind::Periodic {
        return None;
    }
    let low = side == Side::West;
    let flux = if wet == 0 {
        0.0
    } else {
        side_flux(kind, w, inner, coef2, low)
    };
    let into = if low { flux } else { -flux };
    if into >= 0.0 {
        sums.side_in[side.index()] += into;
    } else {
        sums.side_out[side.index()] -= into;
    }
    Some(flux)
}

#[allow(clippy::type_complexity)]
fn block<K: LimiterKernel, const MASKED: bool, const BASE: bool, const PIECED: bool, const DEPTH: bool>(
    (m, src, base, faces): (&Model, &[f64], &[f64], Faces),
    chunk: &mut [f64],
    blk: &mut Block,
    j0: usize,
    p: StageParams,
) {
    let g = &m.grid;
    let (s, nx, ny) = (g.stride(), g.nx, g.ny);
    let rows = chunk.len() / s;
    let b = &m.boundaries;
    let dtdx = p.dt / g.dx;
    let dtdy = p.dt / g.dy;
    // Physical conductances (the Peclet-switched schemes need them even without diffusion);
    // `p.diffusion` scales the diffusive part.
    let (coef_x, coef_y) = (m.kx / g.dx, m.ky / g.dy);
    let sd = p.diffusion;
    let (cx2, cy2) = (2.0 * sd * coef_x, 2.0 * sd * coef_y);
    let limit = p.limit;
    // Only the final stage's values are flushed (a floor of 0 keeps every value).
    let floor = if p.final_stage { FLUSH_BELOW } else { 0.0 };
    let (fu, fv) = (faces.u, faces.v);
    // Cell and face depths (unread without a depth field).
    let (hc, hx, hy): (&[f64], &[f64], &[f64]) = match &m.depth_field {
        Some(d) if DEPTH => (&d.cell, &d.fx, &d.fy),
        _ => (base, fu, fv),
    };
    let eta = p.eta_src;
    let xp = (p.factor, coef_x, sd, eta);
    let yp = (p.factor, coef_y, sd, eta);
    let Block { fx, fys, fyn, sums } = blk;
    *sums = BlockSums::default();
    // South faces of the block's first row.
    y_faces::<K, MASKED, DEPTH>(m, src, j0, yp, fv, fys);
    if j0 == 0 {
        let q = g.idx(0, 0);
        side_row(
            b.south,
            Side::South,
            &fv[q..q + nx],
            &src[q..q + nx],
            &m.wet[q..q + nx],
            p.factor,
            (cy2, DEPTH.then_some((&hy[q..q + nx], eta))),
            fys,
            sums,
        );
    }
    for r in 0..rows {
        let j = j0 + r;
        let q = g.idx(0, j as isize);
        let c2 = |k: usize| if DEPTH { cx2 * (hx[k] + eta) } else { cx2 };
        let west = side_face(b.west, Side::West, p.factor * fu[q], src[q], m.wet[q], c2(q), sums);
        let east = side_face(
            b.east,
            Side::East,
            p.factor * fu[q + nx],
            src[q + nx - 1],
            m.wet[q + nx - 1],
            c2(q + nx),
            sums,
        );
        let c = &src[q..q + nx];
        let bs = &base[q..q + nx];
        let h0 = &hc[q..q + nx];
        let (cur, later) = chunk.split_at_mut((r + 1) * s);
        let o = &mut cur[r * s + 2..r * s + 2 + nx];
        let fs = &mut fys[..nx];
        // x-face fluxes of faces i0 .. i0 + f.len() of this row, the side faces replaced by
        // the side conditions.
        let faces = |i0: usize, f: &mut [f64]| {
            x_faces::<K, MASKED, DEPTH>(m, src, (j, i0), xp, fu, f);
            let last = f.len() - 1;
            if let (0, Some(w)) = (i0, west) {
                f[0] = w;
            }
            if let (true, Some(e)) = (i0 + last == nx, east) {
                f[last] = e;
            }
        };
        // The conservative update; with DEPTH in mass per area, divided by the output depth.
        let update = |c: f64, bs: f64, dfx: f64, dfy: f64, h0: f64| -> f64 {
            if DEPTH {
                let v = (h0 + p.eta_src) * c - dtdx * dfx - dtdy * dfy;
                let num = if BASE {
                    p.alpha * (h0 + p.eta_base) * bs + p.beta * v
                } else {
                    p.beta * v
                };
                num / (h0 + p.eta_out)
            } else {
                let v = c - dtdx * dfx - dtdy * dfy;
                if BASE {
                    p.alpha * bs + p.beta * v
                } else {
                    p.beta * v
                }
            }
        };
        if j + 1 == ny && b.north != SideKind::Periodic {
            // North side row: side fluxes first, then the update.
            faces(0, &mut fx[..nx + 1]);
            y_faces::<K, MASKED, DEPTH>(m, src, j + 1, yp, fv, fyn);
            let qn = g.idx(0, ny as isize);
            side_row(
                b.north,
                Side::North,
                &fv[qn..qn + nx],
                c,
                &m.wet[q..q + nx],
                p.factor,
                (cy2, DEPTH.then_some((&hy[qn..qn + nx], eta))),
                fyn,
                sums,
            );
            let (fxw, fxe, fnr) = (&fx[..nx], &fx[1..nx + 1], &fyn[..nx]);
            let (mut bad, mut small) = (false, false);
            for i in 0..nx {
                let v = update(
                    c[i],
                    bs[i],
                    fxe[i] - fxw[i],
                    fnr[i] - fs[i],
                    if DEPTH { h0[i] } else { 0.0 },
                );
                bad |= !(v.abs() <= limit);
                small |= tiny(v, floor);
                o[i] = v;
            }
            sums.bad |= bad;
            if small {
                sums.flushed += flush_row::<DEPTH>(o, h0, p.eta_out, floor);
            }
            fs.copy_from_slice(fnr);
        } else {
            // Fused: the x-face fluxes of a piece of the row (the whole row unless PIECED)
            // into the face buffer, then each north face flux is computed, used, and kept as
            // the next south flux. When PIECED, the inputs the next row of the block will need
            // for the same piece are prefetched meanwhile, so memory is read at an even pace
            // instead of in bursts that the hardware prefetcher restarts at every page.
            let y = YRows::new(m, src, j + 1, fv);
            let (piece, ahead) = if PIECED { (PIECE, r + 1 < rows) } else { (nx, false) };
            let (mut bad, mut small) = (false, false);
            for i0 in (0..nx).step_by(piece) {
                let nb = piece.min(nx - i0);
                if ahead {
                    // The next row reads cell row j + 3 (its north faces' far cells), its own
                    // x-face velocities, the velocities of face row j + 2, and writes its output.
                    prefetch_l2(&src[q + 3 * s + i0..q + 3 * s + i0 + nb]);
                    prefetch_l2(&fu[q + s + i0..q + s + i0 + nb + 1]);
                    prefetch_l2(&fv[q + 2 * s + i0..q + 2 * s + i0 + nb]);
                    if let Some(next) = later.get(2 + i0..2 + i0 + nb) {
                        prefetch_l2(next);
                    }
                }
                let fxb = &mut fx[..nb + 1];
                faces(i0, fxb);
                let yb = y.window(i0, nb);
                let (fxw, fxe) = (&fxb[..nb], &fxb[1..nb + 1]);
                let (cb, bsb, hb) = (&c[i0..i0 + nb], &bs[i0..i0 + nb], &h0[i0..i0 + nb]);
                let (ob, fsb) = (&mut o[i0..i0 + nb], &mut fs[i0..i0 + nb]);
                for k in 0..nb {
                    let fn_k = yb.flux::<K, MASKED, DEPTH>(k, p.factor, coef_y, sd, eta);
                    let v = update(
                        cb[k],
                        bsb[k],
                        fxe[k] - fxw[k],
                        fn_k - fsb[k],
                        if DEPTH { hb[k] } else { 0.0 },
                    );
                    bad |= !(v.abs() <= limit);
                    small |= tiny(v, floor);
                    ob[k] = v;
                    fsb[k] = fn_k;
                }
            }
            sums.bad |= bad;
            if small {
                sums.flushed += flush_row::<DEPTH>(o, h0, p.eta_out, floor);
            }
        }
        if p.final_stage && p.decay != 1.0 {
            if DEPTH {
                let mut acc = Neumaier::default();
                for (x, h) in o.iter().zip(h0) {
                    acc.add(x * (h + p.eta_out));
                }
                sums.sum.add(acc.value());
            } else {
                sums.sum.add(row_sum(o));
            }
            for x in o.iter_mut() {
                *x *= p.decay;
            }
        }
    }
}

/// Sum of a row, eight lanes at a time (vectorises; the row is in L1).
#[inline]
fn row_sum(xs: &[f64]) -> f64 {
    let mut acc = [0.0f64; 8];
    let chunks = xs.chunks_exact(8);
    let rest = chunks.remainder();
    for ch in chunks {
        for k in 0..8 {
            acc[k] += ch[k];
        }
    }
    let mut sum = Neumaier::default();
    for &a in acc.iter().chain(rest) {
        sum.add(a);
    }
    sum.value()
}

/// Fluxes through the non-periodic sides of a padded field `c` (no interior work): the side
/// terms of the budget for implicit steps, computed exactly as the sweep computes them, with
/// face values `faces` times `factor` and the level `eta`.
pub(crate) fn side_sums(m: &Model, c: &[f64], faces: Faces, factor: f64, diffusion: f64, eta: f64) -> BlockSums {
    let g = &m.grid;
    let (nx, ny) = (g.nx, g.ny);
    let (cx2, cy2) = (2.0 * diffusion * m.kx / g.dx, 2.0 * diffusion * m.ky / g.dy);
    let b = &m.boundaries;
    let (fu, fv) = (faces.u, faces.v);
    let depth = m.depth_field.as_ref();
    let cx = |p: usize| depth.map_or(cx2, |d| cx2 * (d.fx[p] + eta));
    let mut sums = BlockSums::default();
    for j in 0..ny {
        let q = g.idx(0, j as isize);
        side_face(b.west, Side::West, factor * fu[q], c[q], m.wet[q], cx(q), &mut sums);
        side_face(
            b.east,
            Side::East,
            factor * fu[q + nx],
            c[q + nx - 1],
            m.wet[q + nx - 1],
            cx(q + nx),
            &mut sums,
        );
    }
    let mut scratch = [0.0f64; 1];
    for i in 0..nx {
        let q = g.idx(i as isize, 0);
        let qn = g.idx(i as isize, ny as isize);
        let qi = g.idx(i as isize, ny as isize - 1);
        let hs = depth.map(|d| (&d.fy[q..q + 1], eta));
        let hn = depth.map(|d| (&d.fy[qn..qn + 1], eta));
        side_row(
            b.south,
            Side::South,
            &fv[q..q + 1],
            &c[q..q + 1],
            &m.wet[q..q + 1],
            factor,
            (cy2, hs),
            &mut scratch,
            &mut sums,
        );
        side_row(
            b.north,
            Side::North,
            &fv[qn..qn + 1],
            &c[qi..qi + 1],
            &m.wet[qi..qi + 1],
            factor,
            (cy2, hn),
            &mut scratch,
            &mut sums,
        );
    }
    sums
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::flow::{FlowKind, FlowSpec};
    use crate::grid::{Grid, Mask};
    use crate::model::ModelSpec;
    use crate::ops::boundary::{fill_ghosts, Boundaries};
    use crate::ops::limiter::VanLeer;

    /// One stage of both sweeps on a grid whose rows end in a partial piece, several row
    /// blocks, every side kind and an island; returns the two outputs and block sums.
    fn both_sweeps<const MASKED: bool>(boundaries: Boundaries, alpha: f64) -> [(Vec<f64>, Vec<BlockSums>); 2] {
        let grid = Grid::new(150, 37, 1.0, 2.0, 0.0, 0.0).unwrap();
        let mask = MASKED.then(|| {
            Mask::all_water(&grid)
                .with_land(&grid, |x, y| (60.0..80.0).contains(&x) && (20.0..40.0).contains(&y))
                .unwrap()
        });
        let spec = ModelSpec {
            grid,
            mask,
            depth: 1.0.into(),
            kx: 0.3,
            ky: 0.2,
            decay_rate: 0.0,
            flow: FlowSpec::steady(FlowKind::Rotation {
                centre: (70.0, 30.0),
                period: 900.0,
            }),
            boundaries,
            sources: vec![],
        };
        let m = Model::new(spec).unwrap();
        assert_eq!(m.has_land(), MASKED);
        let g = &m.grid;
        let mut c = vec![0.0; g.padded_len()];
        for j in 0..g.ny {
            for i in 0..g.nx {
                c[g.idx(i as isize, j as isize)] = ((i * 7 + j * 13) % 17) as f64 * 0.1 + (i as f64 * 0.05).sin();
            }
        }
        fill_ghosts(g, &m.boundaries, &mut c);
        let base: Vec<f64> = c.iter().map(|v| 0.5 * v + 0.25).collect();
        let p = StageParams {
            alpha,
            beta: 1.0 - alpha,
            final_stage: true,
            decay: 0.9,
            ..StageParams::forward(0.2, 1.0, 1.0, 1e9, 0.0)
        };
        let rows = 8;
        [false, true].map(|pieced| {
            let mut out = vec![f64::NAN; g.padded_len()];
            let mut blocks: Vec<Block> = (0..g.ny.div_ceil(rows)).map(|_| Block::new(g.nx)).collect();
            stage::<VanLeer, MASKED>(&m, &c, &base, &mut out, &mut blocks, rows, p, pieced, Faces::of(&m));
            (out, blocks.iter().map(|b| b.sums).collect())
        })
    }

    /// The pieced, prefetching sweep of long rows computes the same numbers as the whole-row
    /// sweep, bit for bit, including the side fluxes booked for the budget (common practice:
    /// a reordering of loops that keeps every operation must not change a result).
    #[test]
    fn pieced_sweep_equals_whole_rows() {
        let open = SideKind::Open { value: 0.7 };
        let fixed = SideKind::Fixed { value: 1.3 };
        let mixed = Boundaries {
            west: open,
            east: fixed,
            south: SideKind::Wall,
            north: open,
        };
        let periodic = Boundaries {
            west: SideKind::Periodic,
            east: SideKind::Periodic,
            south: fixed,
            north: SideKind::Wall,
        };
        for alpha in [0.0, 0.25] {
            for (whole, pieced) in [
                both_sweeps::<true>(mixed, alpha),
                both_sweeps::<false>(mixed, alpha),
                both_sweeps::<false>(periodic, alpha),
            ]
            .map(|[a, b]| (a, b))
            {
                assert!(whole.0.iter().zip(&pieced.0).all(|(a, b)| a.to_bits() == b.to_bits()));
                for (a, b) in whole.1.iter().zip(&pieced.1) {
                    assert_eq!(a.side_in, b.side_in);
                    assert_eq!(a.side_out, b.side_out);
                    assert_eq!(a.sum.value().to_bits(), b.sum.value().to_bits());
                    assert_eq!(a.bad, b.bad);
                }
                assert!(
                    whole.1.iter().any(|s| s.side_in.iter().any(|&v| v > 0.0)),
                    "some inflow booked"
                );
            }
        }
    }
}
