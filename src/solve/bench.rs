//! The implicit-diffusion benchmark: backward Euler for pure diffusion on the unit square,
//! N by N cells, diffusion number d = K dt / h^2, zero-flux sides, solved to a relative
//! residual of 1e-10. The first right-hand side is the peers' Gaussian hill plus cone
//! (`../shared/peers/explicit-step`, README §1); each later step uses the previous solution
//! as both right-hand side and initial guess (the transform solver, a direct method, ignores
//! the guess). Only the solves are timed; assembly plus solver set-up is reported separately. Nothing here prints; callers report.

use super::{Sides, SolveError, Solver, SolverParams, Stencil5};
use crate::grid::{Grid, Mask};
use std::time::Instant;

/// Results of [`implicit_diffusion`].
#[derive(Debug, Clone, PartialEq)]
pub struct DiffusionBench {
    /// Cells per side.
    pub n: usize,
    /// Diffusion number K dt / h^2.
    pub d: f64,
    /// rayon threads in the pool that ran it.
    pub threads: usize,
    /// Multigrid levels (0 when the transform solver served alone).
    pub levels: usize,
    /// The method the solver ran (after resolving [`super::Method::Auto`]).
    pub method: super::Method,
    /// Seconds for assembly plus solver set-up.
    pub setup_seconds: f64,
    /// Seconds of each step's solve.
    pub seconds: Vec<f64>,
    /// Iterations of each step.
    pub iterations: Vec<usize>,
    /// True relative residual of each step.
    pub relative_residuals: Vec<f64>,
}

impl DiffusionBench {
    /// Median seconds per step.
    pub fn median_seconds(&self) -> f64 {
        median(&self.seconds)
    }

    /// Median iterations per step.
    pub fn median_iterations(&self) -> f64 {
        let v: Vec<f64> = self.iterations.iter().map(|&k| k as f64).collect();
        median(&v)
    }
}

/// Median of a non-empty list (NaN for an empty one).
pub fn median(v: &[f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let m = s.len() / 2;
    if s.len() % 2 == 1 {
        s[m]
    } else {
        0.5 * (s[m - 1] + s[m])
    }
}

/// The peers' initial field: a Gaussian hill at (0.5, 0.75) of width 0.05 plus a cone of
/// radius 0.15 at (0.5, 0.25).
pub fn hill_and_cone(x: f64, y: f64) -> f64 {
    let g = (-((x - 0.5).powi(2) + (y - 0.75).powi(2)) / (2.0 * 0.05 * 0.05)).exp();
    let c = (1.0 - ((x - 0.5).powi(2) + (y - 0.25).powi(2)).sqrt() / 0.15).max(0.0);
    g + c
}

/// One benchmark problem ready to step: operator, solver, right-hand side and solution.
struct Problem {
    a: Stencil5,
    solver: Solver,
    b: Vec<f64>,
    x: Vec<f64>,
    /// Whether a step has run (the first right-hand side is the initial field).
    started: bool,
    out: DiffusionBench,
}

impl Problem {
    fn new(n: usize, steps: usize, d: f64, params: SolverParams) -> Result<Self, SolveError> {
        let h = 1.0 / n as f64;
        let grid = Grid::new(n, n, h, h, 0.0, 0.0).map_err(|e| SolveError::InvalidOperator(e.to_string()))?;
        let mask = Mask::all_water(&grid);
        let t0 = Instant::now();
        let tk = d * h * h;
        let a = Stencil5::diffusion(&grid, &mask, Sides::closed(), tk, tk)?;
        let solver = Solver::new(&a, params)?;
        let setup_seconds = t0.elapsed().as_secs_f64();
        // Backed by huge pages where the system allows, as the steppers' buffers are.
        let mut b = crate::field::huge_filled(grid.cells(), 0.0);
        for j in 0..n {
            for i in 0..n {
                let (x, y) = grid.centre(i, j);
                b[j * n + i] = hill_and_cone(x, y);
            }
        }
        let mut x = crate::field::huge_filled(grid.cells(), 0.0);
        x.copy_from_slice(&b);
        let out = DiffusionBench {
            n,
            d,
            threads: rayon::current_num_threads(),
            levels: solver.multigrid().map_or(0, |m| m.levels()),
            method: solver.method(),
            setup_seconds,
            seconds: Vec::with_capacity(steps),
            iterations: Vec::with_capacity(steps),
            relative_residuals: Vec::with_capacity(steps),
        };
        Ok(Self {
            a,
            solver,
            b,
            x,
            started: false,
            out,
        })
    }

    /// One step, timed or not: the previous solution becomes the right-hand side (after the
    /// first step).
    fn step(&mut self, timed: bool) -> Result<(), SolveError> {
        if self.started {
            self.b.copy_from_slice(&self.x);
        }
        self.started = true;
        let t = Instant::now();
        let stats = self.solver.solve(&self.a, &self.b, &mut self.x)?;
        if timed {
            self.out.seconds.push(t.elapsed().as_secs_f64());
            self.out.iterations.push(stats.iterations);
            self.out.relative_residuals.push(stats.relative_residual);
        }
        Ok(())
    }
}

/// Timed steps per size and round of [`implicit_diffusion_sizes`], after one untimed step
/// that brings the size's data back into the caches the other sizes used meanwhile.
const ROUND_STEPS: usize = 2;

/// Runs `steps` backward-Euler diffusion steps on `n` by `n` cells at diffusion number `d`
/// with the given solver parameters, in the current rayon pool.
pub fn implicit_diffusion(n: usize, steps: usize, d: f64, params: SolverParams) -> Result<DiffusionBench, SolveError> {
    let mut v = implicit_diffusion_sizes(&[n], steps, d, params)?;
    Ok(v.remove(0))
}

/// [`implicit_diffusion`] for several sizes at once, interleaved in rounds so that the sizes
/// see the same machine (on a shared host the load drifts over seconds, and timing one size
/// after the other would put that drift into their ratio): in each round every size runs one
/// untimed step, which warms the caches the other sizes used, and then two (`ROUND_STEPS`) timed
/// steps. Returns one result per size, in order, with `steps` timed steps each.
pub fn implicit_diffusion_sizes(
    sizes: &[usize],
    steps: usize,
    d: f64,
    params: SolverParams,
) -> Result<Vec<DiffusionBench>, SolveError> {
    let mut problems = sizes
        .iter()
        .map(|&n| Problem::new(n, steps, d, params))
        .collect::<Result<Vec<_>, _>>()?;
    for round in 0..steps.div_ceil(ROUND_STEPS) {
        let timed = ROUND_STEPS.min(steps - round * ROUND_STEPS);
        for p in problems.iter_mut() {
            p.step(false)?;
            for _ in 0..timed {
                p.step(true)?;
            }
        }
    }
    Ok(problems.into_iter().map(|p| p.out).collect())
}

/// Median over timed steps of the ratio of the step times of `b` and `a` (step k of each, run
/// in the same round by [`implicit_diffusion_sizes`]).
pub fn median_step_ratio(a: &DiffusionBench, b: &DiffusionBench) -> f64 {
    let r: Vec<f64> = a.seconds.iter().zip(&b.seconds).map(|(x, y)| y / x).collect();
    median(&r)
}
