//! Implicit time stepping: backward Euler and the theta method (Crank–Nicolson) for convection
//! and diffusion together, and IMEX (explicit SSP-RK convection, then implicit diffusion).
//!
//! The matrix holds first-order upwind convection and central diffusion at the new time level,
//! `(I - theta dt L_up) c^{n+1} = c^n + (1 - theta) dt L(c^n) + theta dt L_HO(c^{n+1,k})`, where
//! `L_HO = L_limiter - L_up` is the limiter's high-order part, taken from the previous iterate
//! as a deferred correction (Khosla & Rubin 1974) and iterated within the step until it settles.
//! Every explicit piece reuses the fused explicit kernel, so the face values, side conditions
//! and land treatment are those of the explicit path. Side fluxes enter the budget with the
//! theta weights; the budget then closes to the solver tolerance.
//!
//! With a depth field (or a tidal level) the rows are in mass per area:
//! `(h1 - theta dt L_up) c^{n+1} = h0 c^n + (1 - theta) dt L(c^n) + ...` with `h0`, `h1` the
//! cell depths at the two levels and transports in `L`; the filling rate is the same at both
//! levels, so continuity holds exactly and a uniform tracer stays uniform.

use super::explicit::{blocks_for, book_sides, sweep, Explicit, StepOutcome};
use super::kernel::{self, Block, Faces, StageParams};
use super::{Scheme, State, TimeScheme};
use crate::grid::Grid;
use crate::model::Model;
use crate::ops::boundary::{fill_ghosts, Side, SideKind};
use crate::ops::limiter::Limiter;
use crate::solve::{ExtraCoefs, Sides, SolveError, Solver, SolverParams, Stencil5};
use rayon::prelude::*;

/// Why an implicit step failed.
#[derive(Debug, Clone)]
pub(crate) enum ImplicitFailure {
    /// The linear solver stopped above its tolerance.
    Solver(SolveError),
    /// The deferred correction kept changing.
    Correction { iterations: usize, change: f64 },
}

/// The implicit stepper and its scratch (all allocated once).
#[derive(Debug)]
pub(crate) struct Implicit {
    time: TimeScheme,
    limiter: Limiter,
    theta: f64,
    blocks: Vec<Block>,
    rows_per_block: usize,
    /// IMEX: the explicit convection stepper.
    explicit: Option<Explicit>,
    rhs: Vec<f64>,
    iterate: Vec<f64>,
    hi: Vec<f64>,
    lo: Vec<f64>,
    b: Vec<f64>,
    x: Vec<f64>,
    prev: Vec<f64>,
    bc: Vec<f64>,
    /// The previous correction's high-order term (for under-relaxation).
    ho: Vec<f64>,
    extra: [Vec<f64>; 5],
    a: Stencil5,
    solver: Solver,
    /// (dt, convection factor, level at the new time, filling rate) of the assembled matrix.
    assembled: Option<(f64, f64, f64, f64)>,
    /// Face values at the old and new levels when they are not a factor times the base.
    faces: Option<[Vec<f64>; 4]>,
    /// Linear-solver iterations of the last step, summed over corrections.
    pub last_iterations: usize,
    /// Deferred-correction iterations of the last step.
    pub last_corrections: usize,
    /// Steps whose correction stalled above its tolerance (but below [`STALL_LIMIT`]).
    pub unsettled_steps: usize,
}

/// A deferred correction that still changes the field by more than this fraction of its
/// largest value after the iteration cap stops the run; below it, the step is accepted and
/// counted as unsettled (compressive limiters can make the correction cycle at a tiny level).
pub(crate) const STALL_LIMIT: f64 = 1e-3;

/// Under-relaxation of the high-order term from the fourth correction on: the fixed point is
/// unchanged, but cycling between limiter branches is damped.
const RELAX: f64 = 0.5;

/// Fewest rows per parallel piece of the matrix assembly.
const ROWS_MIN: usize = 8;

impl Implicit {
    /// Sets up the stepper for `scheme.time` (not explicit), sizing every buffer.
    pub(crate) fn new(m: &Model, scheme: &Scheme, dt: f64) -> Result<Self, SolveError> {
        let n = m.grid.cells();
        let (blocks, rows_per_block) = blocks_for(m);
        let theta = scheme.effective_theta();
        let sides = Sides::from_boundaries(&m.boundaries);
        let dt0 = if dt.is_finite() { dt } else { 1.0 };
        let a = Stencil5::diffusion(&m.grid, &m.mask, sides, theta * dt0 * m.kx, theta * dt0 * m.ky)?;
        let params = SolverParams {
            rtol: scheme.tolerance,
            max_iter: scheme.max_iterations,
            ..SolverParams::default()
        };
        let solver = Solver::new(&a, params)?;
        let padded = || crate::field::huge_filled(m.grid.padded_len(), f64::NAN);
        Ok(Self {
            time: scheme.time,
            limiter: scheme.limiter,
            theta,
            blocks,
            rows_per_block,
            explicit: (scheme.time == TimeScheme::Imex).then(|| Explicit::new(m)),
            rhs: padded(),
            iterate: padded(),
            hi: padded(),
            lo: padded(),
            b: vec![0.0; n],
            x: vec![0.0; n],
            prev: vec![0.0; n],
            bc: vec![0.0; n],
            ho: vec![0.0; n],
            extra: std::array::from_fn(|_| vec![0.0; n]),
            a,
            solver,
            assembled: None,
            faces: m
                .flow
                .has_fill()
                .then(|| std::array::from_fn(|_| vec![0.0; m.grid.padded_len()])),
            last_iterations: 0,
            last_corrections: 0,
            unsettled_steps: 0,
        })
    }

    /// The method of the linear solver for the current operator.
    pub(crate) fn solver_method(&self) -> crate::solve::Method {
        self.solver.method()
    }

    /// Assembles `I - theta dt (L_up + L_diff)` at flow factor `factor` (convection only when
    /// it is implicit) and the constant side terms of the right-hand side, unless already done
    /// for this `(dt, factor)`.
    fn assemble(
        &mut self,
        m: &Model,
        (dt, factor): (f64, f64),
        (eta1, rate): (f64, f64),
        formed: Option<&[Vec<f64>; 4]>,
    ) -> Result<(), SolveError> {
        let conv_factor = if self.time.implicit_convection() { factor } else { 0.0 };
        if self.assembled == Some((dt, conv_factor, eta1, rate)) {
            return Ok(());
        }
        let td = self.theta * dt;
        let g = &m.grid;
        let (nx, ny) = (g.nx, g.ny);
        let [d, aw, ae, as_, an] = &mut self.extra;
        let b = &m.boundaries;
        // Peclet-switched schemes carry their exact coefficient form in the matrix.
        let scheme = if self.time.implicit_convection() && self.limiter.is_peclet_switched() {
            Some(self.limiter)
        } else {
            None
        };
        let (dx_cond, dy_cond) = (m.kx / g.dx, m.ky / g.dy);
        // The new level's faces: the model's base times the factor, or the formed values.
        let (fu, fv, fac): (&[f64], &[f64], f64) = match formed {
            Some([_, _, u1, v1]) if conv_factor != 0.0 => (u1, v1, 1.0),
            _ => (&m.flow.u, &m.flow.v, conv_factor),
        };
        let depth = m.depth_field.as_ref();
        let s = g.stride();
        let (periodic_x, periodic_y) = (b.periodic_x(), b.periodic_y());
        let (cx, cy) = (td / g.dx, td / g.dy);
        // Every cell's row depends on the step's inputs only: rows are assembled in parallel.
        let rows = d
            .par_chunks_mut(nx)
            .zip(aw.par_chunks_mut(nx))
            .zip(ae.par_chunks_mut(nx))
            .zip(as_.par_chunks_mut(nx))
            .zip(an.par_chunks_mut(nx))
            .zip(self.bc.par_chunks_mut(nx));
        rows.with_min_len(ROWS_MIN)
            .enumerate()
            .for_each(|(j, (((((d, aw), ae), as_), an), bcr))| {
                for i in 0..nx {
                    let k = i;
                    let p = g.idx(i as isize, j as isize);
                    if m.wet[p] == 0 {
                        d[k] = 0.0;
                        bcr[k] = 0.0;
                        aw[k] = 0.0;
                        ae[k] = 0.0;
                        as_[k] = 0.0;
                        an[k] = 0.0;
                        continue;
                    }
                    let uw = fac * fu[p];
                    let ue = fac * fu[p + 1];
                    let vs = fac * fv[p];
                    let vn = fac * fv[p + s];
                    // Face conductances K h_f / dx with a depth field (times theta dt / dx in
                    // the matrix), K / dx otherwise (the diffusion matrix adds those itself).
                    let face = |c: f64, d: f64| Face { c, d, scheme };
                    let (hw, he, hs, hn) = match depth {
                        Some(d) => (d.fx[p] + eta1, d.fx[p + 1] + eta1, d.fy[p] + eta1, d.fy[p + s] + eta1),
                        None => (1.0, 1.0, 1.0, 1.0),
                    };
                    let mut diag = 0.0;
                    let mut bc = 0.0;
                    // West face: flux into the cell is uw * (upwind value).
                    face(cx, dx_cond * hw).terms(i == 0, b.west, uw, true, &mut diag, &mut aw[k], &mut bc);
                    face(cx, dx_cond * he).terms(i + 1 == nx, b.east, ue, false, &mut diag, &mut ae[k], &mut bc);
                    face(cy, dy_cond * hs).terms(j == 0, b.south, vs, true, &mut diag, &mut as_[k], &mut bc);
                    face(cy, dy_cond * hn).terms(j + 1 == ny, b.north, vn, false, &mut diag, &mut an[k], &mut bc);
                    if let Some(dep) = depth {
                        // Central diffusion through open faces, and the new depth on the
                        // diagonal (the operator adds 1 itself).
                        let wet = |q: usize| m.wet[q] != 0;
                        let inside = [
                            (i > 0 || periodic_x) && wet(p - 1),
                            (i + 1 < nx || periodic_x) && wet(p + 1),
                            (j > 0 || periodic_y) && wet(p - s),
                            (j + 1 < ny || periodic_y) && wet(p + s),
                        ];
                        let cond = [
                            td * dx_cond * hw / g.dx,
                            td * dx_cond * he / g.dx,
                            td * dy_cond * hs / g.dy,
                            td * dy_cond * hn / g.dy,
                        ];
                        let offs = [&mut aw[k], &mut ae[k], &mut as_[k], &mut an[k]];
                        for ((open, c), off) in inside.into_iter().zip(cond).zip(offs) {
                            if open {
                                diag += c;
                                *off += c;
                            }
                        }
                        let edges = [
                            (i == 0, b.west, cond[0]),
                            (i + 1 == nx, b.east, cond[1]),
                            (j == 0, b.south, cond[2]),
                            (j + 1 == ny, b.north, cond[3]),
                        ];
                        for (edge, kind, c) in edges {
                            if let (true, SideKind::Fixed { value }) = (edge, kind) {
                                diag += 2.0 * c;
                                bc += 2.0 * c * value;
                            }
                        }
                        diag += dep.cell[p] + eta1 - 1.0;
                    }
                    d[k] = diag;
                    bcr[k] = bc;
                }
            });
        // Uniform depth: the diffusion matrix carries K; Dirichlet diffusion at fixed sides has
        // the conductance 2 theta dt K / h^2 times the value. (With a depth field both are in
        // the coefficients above.)
        let (tkx, tky) = if depth.is_some() {
            (0.0, 0.0)
        } else {
            (td * m.kx, td * m.ky)
        };
        dirichlet_terms(g, &m.mask, &m.boundaries, tkx, tky, &mut self.bc);
        let extra = ExtraCoefs {
            diag: d,
            aw,
            ae,
            as_,
            an,
        };
        let sides = Sides::from_boundaries(&m.boundaries);
        self.a.assemble(g, &m.mask, sides, tkx, tky, Some(&extra))?;
        self.solver.update(&self.a)?;
        self.assembled = Some((dt, conv_factor, eta1, rate));
        Ok(())
    }

    /// Advances `state.c` by one step of `dt` (time and step count are left to the caller).
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn advance(
        &mut self,
        m: &Model,
        scheme: &Scheme,
        state: &mut State,
        dt: f64,
        decay: f64,
        limit: f64,
    ) -> Result<StepOutcome, ImplicitFailure> {
        // The formed faces are lent out for the step (the matrix assembly borrows self). Both
        // levels carry the same filling rate, so continuity holds exactly.
        let mut faces = self.faces.take();
        if let Some([u0, v0, u1, v1]) = faces.as_mut() {
            let (t0, t1) = (state.t, state.t + dt);
            let rate = (m.flow.level(t1) - m.flow.level(t0)) / dt;
            m.flow.faces_at(t0, rate, u0, v0);
            m.flow.faces_at(t1, rate, u1, v1);
        }
        let out = self.advance_with(m, scheme, state, (dt, decay, limit), &faces);
        self.faces = faces;
        out
    }

    fn advance_with(
        &mut self,
        m: &Model,
        scheme: &Scheme,
        state: &mut State,
        (dt, decay, limit): (f64, f64, f64),
        formed: &Option<[Vec<f64>; 4]>,
    ) -> Result<StepOutcome, ImplicitFailure> {
        let g = m.grid;
        let th = self.theta;
        let t0 = state.t;
        let f1 = m.flow.factor(t0 + dt);
        let mut out = StepOutcome::default();
        let implicit_conv = self.time.implicit_convection();
        let (eta0, eta1) = (m.flow.level(t0), m.flow.level(t0 + dt));
        let rate = (eta1 - eta0) / dt;
        // IMEX: convection first, explicitly; then the diffusion solve starts from its result.
        if let Some(ex) = self.explicit.as_mut() {
            let conv = ex.advance(m, scheme, state, dt, 1.0, limit, 0.0);
            out = conv;
            out.transported = 0.0;
        } else {
            out.max_factor = m.flow.factor(t0).abs().max(f1.abs());
            if formed.is_some() {
                out.max_factor = 1.0;
            }
        }
        // The faces and factors at the old and new levels.
        let (faces0, fac0, faces1, fac1) = match formed {
            Some([u0, v0, u1, v1]) if implicit_conv => (Faces { u: u0, v: v0 }, 1.0, Faces { u: u1, v: v1 }, 1.0),
            _ => (Faces::of(m), m.flow.factor(t0), Faces::of(m), f1),
        };
        // The level of the explicit part: the old one, or the new one after IMEX convection.
        let eta_rhs = if implicit_conv { eta0 } else { eta1 };
        // Explicit part: rhs = c + (1 - theta) dt L(c) (convection at t0 only when implicit).
        fill_ghosts(&g, &m.boundaries, &mut state.c);
        if th < 1.0 {
            let (lim, factor) = if implicit_conv {
                (scheme.limiter, fac0)
            } else {
                (Limiter::Upwind, 0.0)
            };
            let p = StageParams::forward((1.0 - th) * dt, factor, 1.0, limit, eta_rhs);
            let sums = sweep(
                m,
                lim,
                &state.c,
                &state.c,
                &mut self.rhs,
                &mut self.blocks,
                self.rows_per_block,
                p,
                faces0,
            );
            book_sides(m, &sums, 1.0, (1.0 - th) * dt, &mut out.side_mass);
        } else {
            self.rhs.copy_from_slice(&state.c);
        }
        // With a depth field the rows are in mass per area: the right-hand side times h.
        if let Some(d) = m.depth_field.as_ref() {
            for j in 0..g.ny {
                let q = g.idx(0, j as isize);
                for (r, h) in self.rhs[q..q + g.nx].iter_mut().zip(&d.cell[q..q + g.nx]) {
                    *r *= h + eta_rhs;
                }
            }
        }
        self.assemble(m, (dt, fac1), (eta1, rate), formed.as_ref())
            .map_err(ImplicitFailure::Solver)?;
        copy_interior(&g, &state.c, &mut self.x);
        let corrections = implicit_conv && scheme.limiter != Limiter::Upwind && !scheme.limiter.is_peclet_switched();
        let max_it = if corrections { scheme.max_corrections.max(1) } else { 1 };
        self.last_iterations = 0;
        self.last_corrections = 0;
        let mut last_change = 1.0f64;
        for it in 0..max_it {
            copy_interior(&g, &self.rhs, &mut self.b);
            for (bv, c) in self.b.iter_mut().zip(&self.bc) {
                *bv += c;
            }
            if corrections {
                // theta dt (L_limiter - L_up)(current iterate), convection only.
                spread_interior(&g, &self.x, &mut self.iterate);
                fill_ghosts(&g, &m.boundaries, &mut self.iterate);
                let p = StageParams::forward(th * dt, fac1, 0.0, limit, eta1);
                sweep(
                    m,
                    scheme.limiter,
                    &self.iterate,
                    &self.iterate,
                    &mut self.hi,
                    &mut self.blocks,
                    self.rows_per_block,
                    p,
                    faces1,
                );
                sweep(
                    m,
                    Limiter::Upwind,
                    &self.iterate,
                    &self.iterate,
                    &mut self.lo,
                    &mut self.blocks,
                    self.rows_per_block,
                    p,
                    faces1,
                );
                let w = if it >= 3 { RELAX } else { 1.0 };
                for j in 0..g.ny {
                    let q = g.idx(0, j as isize);
                    let k0 = j * g.nx;
                    let rows = self.b[k0..k0 + g.nx].iter_mut().zip(&mut self.ho[k0..k0 + g.nx]);
                    let hrow = m.depth_field.as_ref().map(|d| &d.cell[q..q + g.nx]);
                    for (n, ((bv, ho), (h, l))) in rows
                        .zip(self.hi[q..q + g.nx].iter().zip(&self.lo[q..q + g.nx]))
                        .enumerate()
                    {
                        // In mass per area with a depth field (the sweeps divided by h1).
                        let dh = hrow.map_or(1.0, |r| r[n] + eta1);
                        let term = if it == 0 {
                            dh * (h - l)
                        } else {
                            w * dh * (h - l) + (1.0 - w) * *ho
                        };
                        *ho = term;
                        *bv += term;
                    }
                }
                self.prev.copy_from_slice(&self.x);
            }
            // Inexact corrections: while the correction still moves the field, solve only a
            // little below that movement; the accepted iterate is solved to full tolerance.
            let rtol = if corrections {
                (1e-2 * last_change).clamp(scheme.tolerance, 1e-4)
            } else {
                scheme.tolerance
            };
            self.solver.set_rtol(rtol).map_err(ImplicitFailure::Solver)?;
            let stats = self
                .solver
                .solve(&self.a, &self.b, &mut self.x)
                .map_err(ImplicitFailure::Solver)?;
            self.last_iterations += stats.iterations;
            self.last_corrections = it + 1;
            if !corrections {
                break;
            }
            let (mut dmax, mut xmax) = (0.0f64, 0.0f64);
            for (x, p) in self.x.iter().zip(&self.prev) {
                dmax = dmax.max((x - p).abs());
                xmax = xmax.max(x.abs());
            }
            let change = dmax / xmax.max(f64::MIN_POSITIVE);
            last_change = change;
            let done = change <= scheme.correction_tolerance;
            if !done && it + 1 == max_it {
                if change > STALL_LIMIT {
                    return Err(ImplicitFailure::Correction {
                        iterations: max_it,
                        change,
                    });
                }
                self.unsettled_steps += 1;
            }
            if done || it + 1 == max_it {
                if rtol > scheme.tolerance {
                    self.solver
                        .set_rtol(scheme.tolerance)
                        .map_err(ImplicitFailure::Solver)?;
                    let stats = self
                        .solver
                        .solve(&self.a, &self.b, &mut self.x)
                        .map_err(ImplicitFailure::Solver)?;
                    self.last_iterations += stats.iterations;
                }
                break;
            }
        }
        spread_interior(&g, &self.x, &mut state.c);
        // Side fluxes at the new level, with the implicit weight.
        let sums = kernel::side_sums(m, &state.c, faces1, if implicit_conv { fac1 } else { 0.0 }, 1.0, eta1);
        book_sides(m, &sums, 1.0, th * dt, &mut out.side_mass);
        // Decay (exact factor) and the blow-up check.
        let mut transported = crate::field::Neumaier::default();
        let mut bad = false;
        for j in 0..g.ny {
            let q = g.idx(0, j as isize);
            let row = &mut state.c[q..q + g.nx];
            match m.depth_field.as_ref() {
                None => transported.add(crate::field::sum_compensated(row)),
                Some(d) => {
                    for (c, h) in row.iter().zip(&d.cell[q..q + g.nx]) {
                        transported.add(c * (h + eta1));
                    }
                }
            }
            for v in row.iter_mut() {
                bad |= !(v.abs() <= limit);
                *v *= decay;
            }
        }
        out.transported = transported.value();
        out.bad |= bad;
        Ok(out)
    }
}

/// One face direction of the implicit matrix: `c = theta dt / h`, `d = K / h` the physical
/// conductance, and the Peclet-switched scheme whose coefficient form replaces upwind, if any.
struct Face {
    c: f64,
    d: f64,
    scheme: Option<Limiter>,
}

impl Face {
    /// Matrix and right-hand-side terms of one face of a cell: `w` the face velocity (positive
    /// along the axis), `low` for the west/south face. Upwind convection, plus for the
    /// Peclet-switched schemes the change `d (A(|P|) - 1)` of the diffusive coupling
    /// (Patankar 1980: `a_nb = D A(|P|) + max(-+F, 0)`; the central `D` is in the diffusion
    /// matrix already). On a non-periodic side the coupling is dropped and the side value goes
    /// to the right-hand side (open inflow, fixed), or the outflow stays on the diagonal (open).
    #[allow(clippy::too_many_arguments)]
    fn terms(&self, on_side: bool, kind: SideKind, w: f64, low: bool, diag: &mut f64, off: &mut f64, bc: &mut f64) {
        let c = self.c;
        // Outflow through this face leaves with the cell value; inflow comes with the neighbour's.
        let (out_v, in_v) = if low {
            ((-w).max(0.0), w.max(0.0))
        } else {
            (w.max(0.0), (-w).max(0.0))
        };
        if !on_side || kind == SideKind::Periodic {
            let switch = self
                .scheme
                .map_or(0.0, |l| self.d * (l.peclet_weight(w / self.d) - 1.0));
            *diag += c * (out_v + switch);
            *off = c * (in_v + switch);
            return;
        }
        *off = 0.0;
        match kind {
            SideKind::Wall | SideKind::Periodic => {}
            SideKind::Open { value } => {
                *diag += c * out_v;
                *bc += c * in_v * value;
            }
            SideKind::Fixed { value } => {
                // Flux w * value through the face whatever its direction: in for low sides when
                // w > 0, out for high sides when w > 0.
                *bc += if low { c * w * value } else { -c * w * value };
            }
        }
    }
}

/// Adds the Dirichlet diffusion terms of fixed sides to the right-hand side.
fn dirichlet_terms(
    g: &Grid,
    mask: &crate::grid::Mask,
    b: &crate::ops::boundary::Boundaries,
    tkx: f64,
    tky: f64,
    bc: &mut [f64],
) {
    let (gx, gy) = (2.0 * tkx / (g.dx * g.dx), 2.0 * tky / (g.dy * g.dy));
    for side in Side::ALL {
        let SideKind::Fixed { value } = b.get(side) else {
            continue;
        };
        let cells: Vec<(usize, usize)> = match side {
            Side::West => (0..g.ny).map(|j| (0, j)).collect(),
            Side::East => (0..g.ny).map(|j| (g.nx - 1, j)).collect(),
            Side::South => (0..g.nx).map(|i| (i, 0)).collect(),
            Side::North => (0..g.nx).map(|i| (i, g.ny - 1)).collect(),
        };
        let gc = if matches!(side, Side::West | Side::East) {
            gx
        } else {
            gy
        };
        for (i, j) in cells {
            if mask.is_wet(i, j) {
                bc[j * g.nx + i] += gc * value;
            }
        }
    }
}

/// Copies the interior of a padded field into an `nx * ny` vector.
fn copy_interior(g: &Grid, padded: &[f64], out: &mut [f64]) {
    for j in 0..g.ny {
        let q = g.idx(0, j as isize);
        out[j * g.nx..(j + 1) * g.nx].copy_from_slice(&padded[q..q + g.nx]);
    }
}

/// Writes an `nx * ny` vector into the interior of a padded field.
fn spread_interior(g: &Grid, v: &[f64], padded: &mut [f64]) {
    for j in 0..g.ny {
        let q = g.idx(0, j as isize);
        padded[q..q + g.nx].copy_from_slice(&v[j * g.nx..(j + 1) * g.nx]);
    }
}
