//! Krylov drivers preconditioned by one multigrid V-cycle: conjugate gradients for symmetric
//! operators (Hestenes & Stiefel 1952; preconditioned form as in Saad, "Iterative Methods for
//! Sparse Linear Systems", 2nd ed. 2003, Alg. 9.1) and BiCGStab for non-symmetric ones
//! (van der Vorst 1992, right-preconditioned; Saad 2003, Alg. 7.7 with preconditioning).
//!
//! The previous solution is the initial guess (`x` is in/out). Convergence is judged on the
//! recurrence residual, then confirmed on the true residual `||b - A x|| / ||b||`, which is the
//! value reported; if the two have drifted apart the iteration restarts from the true residual
//! while iterations remain.

use super::blocks::{dot_lanes, sum_rows, MAX_BLOCKS};
use super::multigrid::{Multigrid, MultigridParams};
use super::stencil::Stencil5;
use super::transform::Transform;
use super::{check_len, SolveError};
use rayon::prelude::*;

/// Which method a [`Solver`] uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Method {
    /// The transform solver when the operator qualifies, else conjugate gradients when it is
    /// exactly symmetric, else BiCGStab.
    #[default]
    Auto,
    /// Preconditioned conjugate gradients (symmetric positive definite operators only).
    Cg,
    /// Preconditioned BiCGStab (van der Vorst 1992), for any non-singular operator.
    BiCgStab,
    /// Exact solve by a fast cosine/sine transform along x and elimination along y (see the
    /// `transform` module): uniform diffusion on a rectangle of water whose west and east sides
    /// are both closed or both fixed and whose south and north ends are closed or fixed.
    /// [`Method::Auto`] takes it whenever the operator qualifies; conjugate gradients finish
    /// the solve should its residual miss the tolerance.
    Transform,
}

impl Method {
    /// Name of the method as run reports give it.
    pub fn name(self) -> &'static str {
        match self {
            Method::Auto => "auto",
            Method::Cg => "multigrid_cg",
            Method::BiCgStab => "multigrid_bicgstab",
            Method::Transform => "transform",
        }
    }
}

/// `z = M r` by one V-cycle (the identity if no hierarchy was built, which `solve` prevents);
/// returns `r . z` when the V-cycle formed it.
fn precondition(mg: &mut Option<Multigrid>, a: &Stencil5, r: &[f64], z: &mut [f64]) -> Option<f64> {
    match mg {
        Some(m) => m.vcycle(a, r, z),
        None => {
            z.copy_from_slice(r);
            None
        }
    }
}

/// Tolerances and caps of a solve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SolverParams {
    /// Stop when `||b - A x|| <= rtol ||b||` (default 1e-10).
    pub rtol: f64,
    /// Most iterations (default 100; a BiCGStab iteration does two products and two V-cycles).
    pub max_iter: usize,
    /// The Krylov method (default [`Method::Auto`]).
    pub method: Method,
    /// The preconditioner's hierarchy and cycle.
    pub multigrid: MultigridParams,
}

impl Default for SolverParams {
    fn default() -> Self {
        Self {
            rtol: 1e-10,
            max_iter: 100,
            method: Method::Auto,
            multigrid: MultigridParams::default(),
        }
    }
}

/// What a successful solve did.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SolveStats {
    /// Krylov iterations.
    pub iterations: usize,
    /// True relative residual `||b - A x|| / ||b||`, recomputed at the end (0 when b = 0).
    pub relative_residual: f64,
    /// The method used.
    pub method: Method,
}

/// A preconditioned Krylov solver for one operator, holding the multigrid hierarchy and every
/// vector a solve needs.
#[derive(Debug, Clone)]
pub struct Solver {
    params: SolverParams,
    method: Method,
    krylov: Method,
    /// Built when a Krylov solve may run (not while the transform solver serves alone).
    mg: Option<Multigrid>,
    transform: Option<Transform>,
    n: usize,
    nx: usize,
    rpb: usize,
    land: Vec<usize>,
    r: Vec<f64>,
    z: Vec<f64>,
    p: Vec<f64>,
    q: Vec<f64>,
    rhat: Vec<f64>,
    zz: Vec<f64>,
    t: Vec<f64>,
}

impl Solver {
    /// Builds the solver for `a`: the transform solver when `a` qualifies (see
    /// [`Method::Transform`]), else the multigrid hierarchy, and all scratch.
    pub fn new(a: &Stencil5, params: SolverParams) -> Result<Self, SolveError> {
        check_rtol(params.rtol)?;
        if params.max_iter == 0 {
            return Err(SolveError::InvalidParameter {
                what: "max_iter",
                value: "0".into(),
                allowed: ">= 1",
            });
        }
        params.multigrid.validate()?;
        let mut s = Self {
            params,
            method: Method::Auto,
            krylov: Method::Cg,
            mg: None,
            transform: None,
            n: a.cells(),
            nx: a.nx(),
            rpb: a.rpb(),
            land: Vec::new(),
            r: Vec::new(),
            z: Vec::new(),
            p: Vec::new(),
            q: Vec::new(),
            rhat: Vec::new(),
            zz: Vec::new(),
            t: Vec::new(),
        };
        s.resolve_method(a)?;
        Ok(s)
    }

    /// Refreshes the hierarchy for new coefficients of an operator of the same shape; no
    /// allocation unless the operator changes between symmetric and non-symmetric under
    /// [`Method::Auto`].
    pub fn update(&mut self, a: &Stencil5) -> Result<(), SolveError> {
        if let Some(mg) = self.mg.as_mut() {
            mg.update(a)?;
        }
        self.resolve_method(a)
    }

    /// Builds the multigrid hierarchy for `a` if there is none yet.
    fn ensure_multigrid(&mut self, a: &Stencil5) -> Result<(), SolveError> {
        if self.mg.is_none() {
            self.mg = Some(Multigrid::new(a, self.params.multigrid)?);
        }
        Ok(())
    }

    fn resolve_method(&mut self, a: &Stencil5) -> Result<(), SolveError> {
        self.transform = match self.params.method {
            Method::Auto | Method::Transform => match self.transform.take() {
                Some(mut t) => {
                    if t.refresh(a) {
                        Some(t)
                    } else {
                        Transform::new(a)
                    }
                }
                None => Transform::new(a),
            },
            _ => None,
        };
        if self.params.method == Method::Transform && self.transform.is_none() {
            return Err(SolveError::InvalidOperator(
                "the transform solver needs uniform coefficients on a rectangle of water at least 3 cells \
                 wide and 8 high whose west and east sides are both closed or both fixed and whose south \
                 and north sides are closed or fixed (not periodic); use Method::Auto"
                    .into(),
            ));
        }
        // The Krylov method: the whole solve, or the finish after a transform solve.
        let m = match self.params.method {
            Method::Auto | Method::Transform if a.is_symmetric() => Method::Cg,
            Method::Auto | Method::Transform => Method::BiCgStab,
            m => m,
        };
        if m == Method::Cg {
            if !a.is_symmetric() {
                return Err(SolveError::InvalidOperator(
                    "conjugate gradients need a symmetric operator; use Method::BiCgStab or Method::Auto".into(),
                ));
            }
            let mp = self.params.multigrid;
            if mp.pre_sweeps != mp.post_sweeps {
                return Err(SolveError::InvalidParameter {
                    what: "multigrid.post_sweeps",
                    value: mp.post_sweeps.to_string(),
                    allowed: "equal to pre_sweeps with conjugate gradients (symmetric V-cycle)",
                });
            }
        }
        self.krylov = m;
        self.method = if self.transform.is_some() { Method::Transform } else { m };
        if self.transform.is_none() {
            self.ensure_multigrid(a)?;
        }
        self.land.clear();
        self.land
            .extend(a.land().iter().enumerate().filter(|(_, &l)| l).map(|(k, _)| k));
        let n = self.n;
        for v in [&mut self.r, &mut self.z, &mut self.p, &mut self.q] {
            v.resize(n, 0.0);
        }
        let extra = if m == Method::BiCgStab { n } else { 0 };
        for v in [&mut self.rhat, &mut self.zz, &mut self.t] {
            v.resize(extra, 0.0);
        }
        Ok(())
    }

    /// Changes the stopping tolerance of later solves (`rtol` in (0, 1)), keeping the
    /// hierarchy and all scratch: for inexact inner solves whose tolerance varies per step.
    pub fn set_rtol(&mut self, rtol: f64) -> Result<(), SolveError> {
        check_rtol(rtol)?;
        self.params.rtol = rtol;
        Ok(())
    }

    /// The stopping tolerance of the next solve.
    pub fn rtol(&self) -> f64 {
        self.params.rtol
    }

    /// The method solves use (after resolving [`Method::Auto`]).
    pub fn method(&self) -> Method {
        self.method
    }

    /// The multigrid preconditioner (`None` while the transform solver serves alone).
    pub fn multigrid(&self) -> Option<&Multigrid> {
        self.mg.as_ref()
    }

    /// Solves `A x = b` to the relative tolerance, starting from `x`. `a` must be the operator
    /// the solver was built or last updated for. On [`SolveError::NotConverged`], `x` holds the
    /// last iterate.
    pub fn solve(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64]) -> Result<SolveStats, SolveError> {
        check_len("b", b, self.n)?;
        check_len("x", x, self.n)?;
        if a.cells() != self.n || a.nx() != self.nx {
            return Err(SolveError::InvalidOperator(
                "operator shape differs from the one the solver was built for".into(),
            ));
        }
        // The transform solver forms ||b|| and the true residual on its way.
        let mut done = None;
        if let (Method::Transform, Some(t)) = (self.method, self.transform.as_mut()) {
            let (bb, rr) = t.solve(a, b, x);
            done = Some((bb.sqrt(), rr.sqrt()));
        }
        let bnorm = match done {
            Some((bn, _)) => bn,
            None => dot(b, b, self.nx, self.rpb).sqrt(),
        };
        if !bnorm.is_finite() {
            return Err(SolveError::NonFinite("the right-hand side"));
        }
        if bnorm == 0.0 {
            x.fill(0.0);
            return Ok(SolveStats {
                iterations: 0,
                relative_residual: 0.0,
                method: self.method,
            });
        }
        // Land rows are the identity: set x = b there, so the residual, the preconditioned
        // residual and every search direction are exactly zero on land and x stays b.
        for &k in &self.land {
            x[k] = b[k];
        }
        if let Some((_, rn)) = done {
            let rel = rn / bnorm;
            if rel <= self.params.rtol {
                return Ok(SolveStats {
                    iterations: 0,
                    relative_residual: rel,
                    method: Method::Transform,
                });
            }
        }
        // The Krylov finish after a transform solve builds the hierarchy on first use (the
        // only allocation a solve can make).
        self.ensure_multigrid(a)?;
        let (iterations, rel) = match self.krylov {
            Method::BiCgStab => self.bicgstab(a, b, x, bnorm)?,
            _ => self.cg(a, b, x, bnorm)?,
        };
        if rel <= self.params.rtol {
            Ok(SolveStats {
                iterations,
                relative_residual: rel,
                method: self.method,
            })
        } else {
            Err(SolveError::NotConverged {
                iterations,
                relative_residual: rel,
                rtol: self.params.rtol,
            })
        }
    }

    /// Preconditioned CG; returns (iterations, true relative residual).
    fn cg(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], bnorm: f64) -> Result<(usize, f64), SolveError> {
        let (nx, rpb) = (self.nx, self.rpb);
        let tol = self.params.rtol * bnorm;
        let mut it = 0;
        loop {
            // (Re)start from the true residual.
            let rr = a.residual_into(b, x, &mut self.r);
            if !rr.is_finite() {
                return Err(SolveError::NonFinite("the initial guess x"));
            }
            if rr.sqrt() <= tol || it >= self.params.max_iter {
                return Ok((it, rr.sqrt() / bnorm));
            }
            let mut rz = match precondition(&mut self.mg, a, &self.r, &mut self.z) {
                Some(d) => d,
                None => dot(&self.r, &self.z, nx, rpb),
            };
            self.p.copy_from_slice(&self.z);
            while it < self.params.max_iter {
                it += 1;
                let pq = a.apply_dot(&self.p, &mut self.q);
                if !(pq > 0.0) || !(rz > 0.0) {
                    // Not positive definite (or exact convergence): restart from the true residual.
                    break;
                }
                let alpha = rz / pq;
                let rr = update_xr(x, &mut self.r, &self.p, &self.q, alpha, nx, rpb);
                if rr.sqrt() <= tol {
                    break;
                }
                let rz_new = match precondition(&mut self.mg, a, &self.r, &mut self.z) {
                    Some(d) => d,
                    None => dot(&self.r, &self.z, nx, rpb),
                };
                let beta = rz_new / rz;
                rz = rz_new;
                axpby(&mut self.p, &self.z, beta, nx, rpb);
            }
            let true_rr = a.residual_sq(b, x);
            if true_rr.sqrt() <= tol || it >= self.params.max_iter {
                return Ok((it, true_rr.sqrt() / bnorm));
            }
        }
    }

    /// Right-preconditioned BiCGStab; returns (iterations, true relative residual).
    fn bicgstab(&mut self, a: &Stencil5, b: &[f64], x: &mut [f64], bnorm: f64) -> Result<(usize, f64), SolveError> {
        let (nx, rpb) = (self.nx, self.rpb);
        let tol = self.params.rtol * bnorm;
        let mut it = 0;
        let mut restarts_without_progress = 0;
        loop {
            let rr0 = a.residual_into(b, x, &mut self.r);
            if !rr0.is_finite() {
                return Err(SolveError::NonFinite("the initial guess x"));
            }
            if rr0.sqrt() <= tol || it >= self.params.max_iter || restarts_without_progress > 2 {
                return Ok((it, rr0.sqrt() / bnorm));
            }
            self.rhat.copy_from_slice(&self.r);
            self.p.fill(0.0);
            self.q.fill(0.0); // v
            let (mut rho_old, mut alpha, mut omega) = (1.0f64, 1.0f64, 1.0f64);
            let it_start = it;
            while it < self.params.max_iter {
                let rho = dot(&self.rhat, &self.r, nx, rpb);
                if !(rho.abs() > 0.0) || !(omega.abs() > 0.0) {
                    break; // breakdown: restart
                }
                it += 1;
                let beta = (rho / rho_old) * (alpha / omega);
                // p = r + beta (p - omega v)
                bicg_p(&mut self.p, &self.r, &self.q, beta, omega, nx, rpb);
                precondition(&mut self.mg, a, &self.p, &mut self.z); // y = M p
                a.apply_dot(&self.z, &mut self.q); // v = A y
                let rv = dot(&self.rhat, &self.q, nx, rpb);
                if !(rv.abs() > 0.0) {
                    break;
                }
                alpha = rho / rv;
                // s = r - alpha v (in r)
                let ss = axpy_norm(&mut self.r, &self.q, -alpha, nx, rpb);
                if ss.sqrt() <= tol {
                    axpy(x, &self.z, alpha, nx, rpb);
                    break;
                }
                precondition(&mut self.mg, a, &self.r, &mut self.zz); // z = M s
                a.apply_dot(&self.zz, &mut self.t); // t = A z
                let (ts, tt) = dot2(&self.t, &self.r, nx, rpb);
                omega = if tt > 0.0 { ts / tt } else { 0.0 };
                // x += alpha y + omega z; r = s - omega t
                let rr = bicg_update(x, &mut self.r, &self.z, &self.zz, &self.t, alpha, omega, nx, rpb);
                rho_old = rho;
                if rr.sqrt() <= tol {
                    break;
                }
            }
            let true_rr = a.residual_sq(b, x);
            if true_rr.sqrt() <= tol || it >= self.params.max_iter {
                return Ok((it, true_rr.sqrt() / bnorm));
            }
            if it == it_start {
                restarts_without_progress += 1;
            } else {
                restarts_without_progress = 0;
            }
        }
    }
}

fn check_rtol(rtol: f64) -> Result<(), SolveError> {
    if !(rtol > 0.0 && rtol < 1.0) {
        return Err(SolveError::InvalidParameter {
            what: "rtol",
            value: rtol.to_string(),
            allowed: "in (0, 1)",
        });
    }
    Ok(())
}

/// Segment length of the fused update-and-norm loops (fits L1 with its operands).
const SEG: usize = 1024;

/// Runs `f(offset, a_chunk, b_chunk)` over row blocks of two mutable vectors, summing the
/// returned values in block order.
#[inline]
fn blocks2<F>(a: &mut [f64], b: &mut [f64], nx: usize, rpb: usize, f: F) -> f64
where
    F: Fn(usize, &mut [f64], &mut [f64]) -> f64 + Sync + Send,
{
    let chunk = rpb * nx;
    if a.len() <= chunk {
        return f(0, a, b);
    }
    let nb = a.len().div_ceil(chunk);
    let mut partial = [0.0f64; MAX_BLOCKS];
    a.par_chunks_mut(chunk)
        .zip(b.par_chunks_mut(chunk))
        .zip(partial[..nb].par_iter_mut())
        .enumerate()
        .for_each(|(k, ((ca, cb), p))| *p = f(k * chunk, ca, cb));
    partial[..nb].iter().sum()
}

/// Like [`blocks2`] for one mutable vector.
#[inline]
fn blocks1<F>(a: &mut [f64], nx: usize, rpb: usize, f: F) -> f64
where
    F: Fn(usize, &mut [f64]) -> f64 + Sync + Send,
{
    super::blocks::sum_rows_mut(a, nx, rpb, |j0, c| f(j0 * nx, c))
}

/// `a . b`.
fn dot(a: &[f64], b: &[f64], nx: usize, rpb: usize) -> f64 {
    let ny = a.len() / nx;
    sum_rows(ny, rpb, |j0, j1| {
        let (s, e) = (j0 * nx, j1 * nx);
        dot_lanes(&a[s..e], &b[s..e])
    })
}

/// `(a . b, a . a)`.
fn dot2(a: &[f64], b: &[f64], nx: usize, rpb: usize) -> (f64, f64) {
    let ab = dot(a, b, nx, rpb);
    let aa = dot(a, a, nx, rpb);
    (ab, aa)
}

/// `x += alpha p; r -= alpha q`, returning `r . r`.
fn update_xr(x: &mut [f64], r: &mut [f64], p: &[f64], q: &[f64], alpha: f64, nx: usize, rpb: usize) -> f64 {
    blocks2(x, r, nx, rpb, |o, xc, rc| {
        let n = xc.len();
        let (p, q) = (&p[o..o + n], &q[o..o + n]);
        let mut acc = 0.0;
        // Rows of SEG values: update, then sum the squares while the row is in L1.
        for (((xs, rs), ps), qs) in xc
            .chunks_mut(SEG)
            .zip(rc.chunks_mut(SEG))
            .zip(p.chunks(SEG))
            .zip(q.chunks(SEG))
        {
            for (x, pp) in xs.iter_mut().zip(ps) {
                *x += alpha * pp;
            }
            for (r, qq) in rs.iter_mut().zip(qs) {
                *r -= alpha * qq;
            }
            acc += dot_lanes(rs, rs);
        }
        acc
    })
}

/// `p = z + beta p`.
fn axpby(p: &mut [f64], z: &[f64], beta: f64, nx: usize, rpb: usize) {
    blocks1(p, nx, rpb, |o, pc| {
        for (v, &zz) in pc.iter_mut().zip(&z[o..]) {
            *v = zz + beta * *v;
        }
        0.0
    });
}

/// `y += alpha x`.
fn axpy(y: &mut [f64], x: &[f64], alpha: f64, nx: usize, rpb: usize) {
    blocks1(y, nx, rpb, |o, yc| {
        for (v, &xx) in yc.iter_mut().zip(&x[o..]) {
            *v += alpha * xx;
        }
        0.0
    });
}

/// `y += alpha x`, returning `y . y`.
fn axpy_norm(y: &mut [f64], x: &[f64], alpha: f64, nx: usize, rpb: usize) -> f64 {
    blocks1(y, nx, rpb, |o, yc| {
        let mut acc = 0.0;
        for (ys, xs) in yc.chunks_mut(SEG).zip(x[o..].chunks(SEG)) {
            for (v, &xx) in ys.iter_mut().zip(xs) {
                *v += alpha * xx;
            }
            acc += dot_lanes(ys, ys);
        }
        acc
    })
}

/// `p = r + beta (p - omega v)`.
fn bicg_p(p: &mut [f64], r: &[f64], v: &[f64], beta: f64, omega: f64, nx: usize, rpb: usize) {
    blocks1(p, nx, rpb, |o, pc| {
        let n = pc.len();
        let (r, v) = (&r[o..o + n], &v[o..o + n]);
        for i in 0..n {
            pc[i] = r[i] + beta * (pc[i] - omega * v[i]);
        }
        0.0
    });
}

/// `x += alpha y + omega z; r -= omega t`, returning `r . r`.
#[allow(clippy::too_many_arguments)]
fn bicg_update(
    x: &mut [f64],
    r: &mut [f64],
    y: &[f64],
    z: &[f64],
    t: &[f64],
    alpha: f64,
    omega: f64,
    nx: usize,
    rpb: usize,
) -> f64 {
    blocks2(x, r, nx, rpb, |o, xc, rc| {
        let n = xc.len();
        let (y, z, t) = (&y[o..o + n], &z[o..o + n], &t[o..o + n]);
        for i in 0..n {
            xc[i] += alpha * y[i] + omega * z[i];
            rc[i] -= omega * t[i];
        }
        dot_lanes(rc, rc)
    })
}
