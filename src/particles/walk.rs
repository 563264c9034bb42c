//! One particle step: face velocities on the C-grid, the depth drift, the Gaussian walk, and
//! the cell-by-cell move that reflects at land and walls, wraps at periodic sides and stops at
//! open ones.
//!
//! Velocity at a point of cell (i, j) with fractions (ax, ay) across it: `u` is linear in x
//! between the cell's west and east faces and `v` linear in y between its south and north faces
//! (the C-grid interpolation of Pollock 1988, from memory), so the particle flow has, in every
//! cell, exactly the grid flow's discrete divergence: none where the grid flow has none, and
//! it never crosses a closed face. With a depth field the face transports are interpolated and
//! divided by the depth interpolated between the same faces at the step's level, so that
//! `div(h u)` is the transports' divergence.
//!
//! Drift `K (dh/dx) / h` per axis (K constant per axis): the depth is taken linear across the
//! cell between its face depths, so its gradient is the face difference over the cell width.
//!
//! The move is split by axis: x along the particle's row, then y along its new column. Each
//! walks the cells the step crosses; crossing into land or a wall mirrors the rest of the step
//! about that face (up to [`MAX_BOUNCES`] times, else the particle stays where it was), so a
//! particle never ends a step on land.

use crate::model::Model;
use crate::ops::boundary::{Side, SideKind};
use rand::RngExt;
use rand_distr::StandardNormal;
use rand_xoshiro::Xoshiro256PlusPlus;

/// Reflections tried within one axis of one step before the particle is held in place.
pub(crate) const MAX_BOUNCES: usize = 4;

/// Face values (padded layout) at the middle of the step from `t` to `t + dt` into `u`, `v`:
/// velocities in m/s, or transports in m2/s when the flow is given as transports over a depth
/// field, with the tidal level rising at its mean rate over the step.
pub(super) fn velocities_at(m: &Model, t: f64, dt: f64, u: &mut [f64], v: &mut [f64]) {
    let f = &m.flow;
    let mid = t + 0.5 * dt;
    if f.has_fill() {
        let rate = if dt > 0.0 {
            (f.level(t + dt) - f.level(t)) / dt
        } else {
            0.0
        };
        f.faces_at(mid, rate, u, v);
    } else {
        let k = f.factor(mid);
        for (o, b) in u.iter_mut().zip(&f.u) {
            *o = k * b;
        }
        for (o, b) in v.iter_mut().zip(&f.v) {
            *o = k * b;
        }
    }
}

/// With a flow given as transports over a depth field, the face velocities `u / h` at the
/// step's middle level into `pu`, `pv` (0 where the face is dry), and `true`; else `false`
/// (the face values are velocities already).
pub(super) fn predictor_velocities(
    m: &Model,
    t: f64,
    dt: f64,
    u: &[f64],
    v: &[f64],
    pu: &mut [f64],
    pv: &mut [f64],
) -> bool {
    let (true, Some(d)) = (m.flow.is_transport(), &m.depth_field) else {
        return false;
    };
    let eta = m.flow.level(t + 0.5 * dt);
    let per_depth = |q: f64, h: f64| if h + eta > 0.0 { q / (h + eta) } else { 0.0 };
    for (o, (&q, &h)) in pu.iter_mut().zip(u.iter().zip(&d.fx)) {
        *o = per_depth(q, h);
    }
    for (o, (&q, &h)) in pv.iter_mut().zip(v.iter().zip(&d.fy)) {
        *o = per_depth(q, h);
    }
    true
}

/// What one chunk of particles sent out of the sides and lost to decay in a step.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct ChunkTally {
    pub out: [f64; 4],
    pub decayed: f64,
}

/// Where an axis move ended.
enum Moved {
    /// Inside, at this position in cell units.
    To(f64),
    /// Out through the low (0) or high (1) side.
    Out(usize),
}

/// Everything a step needs, shared read-only by the chunks.
pub(super) struct StepContext<'a> {
    nx: usize,
    ny: usize,
    stride: usize,
    dx: f64,
    dy: f64,
    inv_dx: f64,
    inv_dy: f64,
    x0: f64,
    y0: f64,
    dt: f64,
    wet: &'a [u8],
    u: &'a [f64],
    v: &'a [f64],
    /// Face velocities for the predictor (m/s).
    pu: &'a [f64],
    pv: &'a [f64],
    /// Face depths at the step's level, when the depth varies and the drift is on.
    depth: Option<(&'a [f64], &'a [f64], f64)>,
    /// Face depths and level that turn face transports into velocities, when the flow is given
    /// as transports over a depth field.
    per_depth: Option<(&'a [f64], &'a [f64], f64)>,
    kx: f64,
    ky: f64,
    /// Standard deviations of the walk per axis in cell units.
    sx: f64,
    sy: f64,
    decay: f64,
    sides: [SideKind; 4],
}

impl<'a> StepContext<'a> {
    pub(super) fn new(
        m: &'a Model,
        t: f64,
        dt: f64,
        drift: bool,
        (u, v): (&'a [f64], &'a [f64]),
        (pu, pv): (&'a [f64], &'a [f64]),
    ) -> Self {
        let g = &m.grid;
        let b = &m.boundaries;
        Self {
            nx: g.nx,
            ny: g.ny,
            stride: g.stride(),
            dx: g.dx,
            dy: g.dy,
            inv_dx: 1.0 / g.dx,
            inv_dy: 1.0 / g.dy,
            x0: g.x0,
            y0: g.y0,
            dt,
            wet: &m.wet,
            u,
            v,
            pu,
            pv,
            depth: m
                .depth_field
                .as_ref()
                .filter(|_| drift)
                .map(|d| (&d.fx[..], &d.fy[..], m.flow.level(t))),
            per_depth: m
                .depth_field
                .as_ref()
                .filter(|_| m.flow.is_transport())
                .map(|d| (&d.fx[..], &d.fy[..], m.flow.level(t + 0.5 * dt))),
            kx: m.kx,
            ky: m.ky,
            sx: (2.0 * m.kx * dt).sqrt() / g.dx,
            sy: (2.0 * m.ky * dt).sqrt() / g.dy,
            decay: crate::ops::sources::decay_factor(m.decay_rate, dt),
            sides: [b.west, b.east, b.south, b.north],
        }
    }

    #[inline]
    fn idx(&self, i: isize, j: isize) -> usize {
        ((j + 2) as usize) * self.stride + (i + 2) as usize
    }

    #[inline]
    fn is_wet(&self, i: isize, j: isize) -> bool {
        self.wet[self.idx(i, j)] != 0
    }

    /// Advances one chunk of particles by the step, drawing from `rng` in particle order.
    pub(super) fn advance_chunk(
        &self,
        xs: &mut [f64],
        ys: &mut [f64],
        ms: &mut [f64],
        rng: &mut Xoshiro256PlusPlus,
    ) -> ChunkTally {
        let mut tally = ChunkTally::default();
        let mut decayed = crate::field::Neumaier::default();
        for ((x, y), m) in xs.iter_mut().zip(ys.iter_mut()).zip(ms.iter_mut()) {
            if x.is_nan() {
                continue;
            }
            let before = *m;
            *m *= self.decay;
            decayed.add(before - *m);
            let gx = (*x - self.x0) * self.inv_dx;
            let gy = (*y - self.y0) * self.inv_dy;
            let i = floor(gx).clamp(0, self.nx as isize - 1);
            let j = floor(gy).clamp(0, self.ny as isize - 1);
            let (ax, ay) = (gx - i as f64, gy - j as f64);
            let (vu, vv) = self.midpoint_velocity(gx, gy, i, j, ax, ay);
            let (du, dv) = self.drift(i, j, ax, ay);
            let (rx, ry): (f64, f64) = if self.sx > 0.0 || self.sy > 0.0 {
                (rng.sample(StandardNormal), rng.sample(StandardNormal))
            } else {
                (0.0, 0.0)
            };
            let step_x = (vu + du) * self.dt * self.inv_dx + self.sx * rx;
            let step_y = (vv + dv) * self.dt * self.inv_dy + self.sy * ry;
            let sides_x = (self.sides[Side::West.index()], self.sides[Side::East.index()]);
            let nx_cell = match move_axis(gx, i, step_x, self.nx, sides_x, |c| self.is_wet(c, j)) {
                Moved::To(p) => {
                    *x = self.x0 + p * self.dx;
                    floor(p).clamp(0, self.nx as isize - 1)
                }
                Moved::Out(s) => {
                    tally.out[[Side::West, Side::East][s].index()] += *m;
                    (*x, *m) = (f64::NAN, 0.0);
                    continue;
                }
            };
            let sides_y = (self.sides[Side::South.index()], self.sides[Side::North.index()]);
            match move_axis(gy, j, step_y, self.ny, sides_y, |c| self.is_wet(nx_cell, c)) {
                Moved::To(p) => *y = self.y0 + p * self.dy,
                Moved::Out(s) => {
                    tally.out[[Side::South, Side::North][s].index()] += *m;
                    (*x, *m) = (f64::NAN, 0.0);
                }
            }
        }
        tally.decayed = decayed.value();
        tally
    }

    /// The flow's velocity for the step by the midpoint rule (second order in time): the
    /// velocity where half a step of the velocity at the start position leads, at the step's
    /// middle time; the start velocity when that point is on land or beyond a side. The
    /// half step interpolates face velocities (first order suffices there); the velocity used
    /// interpolates transports and depths, so `div(h u)` stays the grid's.
    #[inline]
    fn midpoint_velocity(&self, gx: f64, gy: f64, i: isize, j: isize, ax: f64, ay: f64) -> (f64, f64) {
        // The predictor only needs first-order accuracy: face velocities, no division.
        let p = self.idx(i, j);
        let u1 = self.pu[p] + ax * (self.pu[p + 1] - self.pu[p]);
        let v1 = self.pv[p] + ay * (self.pv[p + self.stride] - self.pv[p]);
        let mx = gx + 0.5 * u1 * self.dt * self.inv_dx;
        let my = gy + 0.5 * v1 * self.dt * self.inv_dy;
        let (im, jm) = (floor(mx), floor(my));
        if im < 0 || jm < 0 || im >= self.nx as isize || jm >= self.ny as isize || !self.is_wet(im, jm) {
            return self.velocity(i, j, ax, ay);
        }
        self.velocity(im, jm, mx - im as f64, my - jm as f64)
    }

    /// Velocity (m/s) at fractions (ax, ay) of cell (i, j): each component linear along its
    /// own axis between the cell's two faces (with a depth field, the transport is linear and
    /// divided by the depth, linear between the same faces), so `div(h u)` inside the cell is
    /// the grid's discrete divergence of the cell.
    #[inline]
    fn velocity(&self, i: isize, j: isize, ax: f64, ay: f64) -> (f64, f64) {
        let s = self.stride;
        let p = self.idx(i, j);
        let qu = self.u[p] + ax * (self.u[p + 1] - self.u[p]);
        let qv = self.v[p] + ay * (self.v[p + s] - self.v[p]);
        match self.per_depth {
            None => (qu, qv),
            Some((fx, fy, eta)) => {
                let hx = fx[p] + eta + ax * (fx[p + 1] - fx[p]);
                let hy = fy[p] + eta + ay * (fy[p + s] - fy[p]);
                (
                    if hx > 0.0 { qu / hx } else { 0.0 },
                    if hy > 0.0 { qv / hy } else { 0.0 },
                )
            }
        }
    }

    /// Drift `K (dh/dx) / h`, `K (dh/dy) / h` (m/s) at fractions (ax, ay) of cell (i, j).
    #[inline]
    fn drift(&self, i: isize, j: isize, ax: f64, ay: f64) -> (f64, f64) {
        let Some((fx, fy, eta)) = self.depth else {
            return (0.0, 0.0);
        };
        let p = self.idx(i, j);
        let (hw, he) = (fx[p] + eta, fx[p + 1] + eta);
        let (hs, hn) = (fy[p] + eta, fy[p + self.stride] + eta);
        let hx = hw + ax * (he - hw);
        let hy = hs + ay * (hn - hs);
        let dx = if hx > 0.0 {
            self.kx * (he - hw) / (self.dx * hx)
        } else {
            0.0
        };
        let dy = if hy > 0.0 {
            self.ky * (hn - hs) / (self.dy * hy)
        } else {
            0.0
        };
        (dx, dy)
    }
}

/// `x.floor()` as an integer, inlined (the library call is not, without SSE4.1); finite `x`
/// within the isize range.
#[inline(always)]
fn floor(x: f64) -> isize {
    let t = x as isize;
    if (t as f64) > x {
        t - 1
    } else {
        t
    }
}

/// Moves a position `pos` (cell units, in cell `c` of `0..n`) by `d` cells along one axis;
/// `wet(k)` says whether cell k of the line is water; `sides` are the low and high sides.
#[inline]
fn move_axis(pos: f64, c0: isize, d: f64, n: usize, sides: (SideKind, SideKind), wet: impl Fn(isize) -> bool) -> Moved {
    let n = n as isize;
    let mut target = pos + d;
    if !target.is_finite() {
        return Moved::To(pos);
    }
    let mut c = c0;
    for _ in 0..=MAX_BOUNCES {
        let mut tc = floor(target);
        let s = if tc > c { 1 } else { -1 };
        let mut bounced = false;
        while c != tc {
            let next = c + s;
            let mut shift = 0;
            if !(0..n).contains(&next) {
                let (kind, which) = if next < 0 { (sides.0, 0) } else { (sides.1, 1) };
                match kind {
                    SideKind::Wall => {
                        let face = if s > 0 { next as f64 } else { c as f64 };
                        target = 2.0 * face - target;
                        bounced = true;
                        break;
                    }
                    SideKind::Periodic => shift = s * n,
                    SideKind::Open { .. } | SideKind::Fixed { .. } => return Moved::Out(which),
                }
            }
            if !wet(next - shift) {
                // Mirror about the face between c and next (before any wrap).
                let face = if s > 0 { next as f64 } else { c as f64 };
                target = 2.0 * face - target;
                bounced = true;
                break;
            }
            c = next - shift;
            target -= shift as f64;
            tc -= shift;
        }
        if !bounced {
            return Moved::To(target);
        }
    }
    Moved::To(pos)
}

/// [`move_axis`] for the tests: the new position, or `None` when the particle left.
#[cfg(test)]
pub(super) fn move_for_tests(
    pos: f64,
    d: f64,
    n: usize,
    sides: (SideKind, SideKind),
    wet: impl Fn(isize) -> bool,
) -> Option<f64> {
    match move_axis(pos, pos.floor() as isize, d, n, sides, wet) {
        Moved::To(p) => Some(p),
        Moved::Out(_) => None,
    }
}
