//! The tidal implicit-step benchmark: backward-Euler steps on a harbour (a coastal stream past
//! a breakwater with one entrance, two piers in the basin, 1 km by 500 m, 4 m deep) with a
//! semi-diurnal tide (the stream times `cos`, a 1 m rise and fall filling the basin through its
//! entrance) against the same harbour with the tide removed (the stream steady at its peak, no
//! level change). Both runs are stepped in interleaved rounds (per round one untimed step each,
//! then `ROUND_STEPS` timed ones), so a drifting machine load enters both alike; the result is
//! the per-step times and the ratio tidal / steady. Nothing here prints; callers report.

use super::{Scheme, Simulation, TimeScheme};
use crate::grid::Mask;
use crate::ops::limiter::Limiter;
use crate::solve::bench::median;
use std::time::Instant;

/// The harbour as a scenario (the land is added in code): a 1000 m by 500 m model; the sea
/// strip south of the breakwater carries a 120 m3/s stream from west to east (about 0.2 m/s).
const HARBOUR: &str = r#"name = "tide-bench-harbour"
[grid]
nx = 400
ny = 200
size = [1000.0, 500.0]
depth = 4.0
[tracer]
name = "dye"
units = "ug/L"
diffusivity = 0.2
[flow]
kind = "openings"
tide = { period = 44712.0, phase = 0.0, amplitude = 1.0 }
[[flow.opening]]
name = "west-sea"
side = "west"
from = 0.0
to = 150.0
discharge = 120.0
[[flow.opening]]
name = "east-sea"
side = "east"
from = 0.0
to = 150.0
discharge = -120.0
[boundary]
west = "open"
east = "open"
south = "wall"
north = "wall"
[[source]]
name = "berth"
at = [330.0, 300.0]
mass = 5.0e6
start = 0.0
spread = 20.0
[scheme]
time = "implicit"
[run]
end = 44712.0
frames = 1
"#;

/// Timed steps per variant and round, after one untimed step that brings the variant's data
/// back into the caches the other variant used meanwhile.
const ROUND_STEPS: usize = 2;

/// Breakwater (with an 80 m entrance) and two piers, in metres.
fn is_land(x: f64, y: f64) -> bool {
    let breakwater = (150.0..170.0).contains(&y) && !(700.0..780.0).contains(&x);
    let pier1 = (200.0..215.0).contains(&x) && (170.0..350.0).contains(&y);
    let pier2 = (450.0..465.0).contains(&x) && (170.0..380.0).contains(&y);
    breakwater || pier1 || pier2
}

/// The benchmark simulation: `nx` by `nx / 2` cells, backward Euler with `limiter`, with the
/// tide (`tidal`) or without it (the stream steady at the tide's peak factor 1).
pub fn harbour_simulation(nx: usize, limiter: Limiter, tidal: bool) -> Result<Simulation, String> {
    if nx < 40 {
        return Err(format!("the harbour needs at least 40 cells across (got {nx})"));
    }
    let sets = [format!("grid.nx={nx}"), format!("grid.ny={}", nx / 2)];
    let mut scn = crate::scenario::parse(HARBOUR, std::path::Path::new("tide-bench-harbour.toml"), &sets)
        .map_err(|e| e.to_string())?;
    let grid = scn.model.grid;
    scn.model.mask = Some(
        Mask::all_water(&grid)
            .with_land(&grid, is_land)
            .map_err(|e| e.to_string())?,
    );
    if !tidal {
        scn.model.flow.tide = None;
    }
    let scheme = Scheme {
        limiter,
        time: TimeScheme::Implicit,
        ..scn.scheme
    };
    let model = scn.build_model().map_err(|e| e.to_string())?;
    let c0 = model.field_from(|_, _| 0.0);
    Simulation::new(model, scheme, c0).map_err(|e| e.to_string())
}

/// Results of [`tide_vs_steady`] for one limiter.
#[derive(Debug, Clone, PartialEq)]
pub struct TideBench {
    /// The convection scheme.
    pub limiter: Limiter,
    /// Cells across (the grid is `nx` by `nx / 2`).
    pub nx: usize,
    /// The step, s (the tidal run's automatic step; the steady run takes the same).
    pub dt: f64,
    /// rayon threads in the pool that ran it.
    pub threads: usize,
    /// Seconds of each timed tidal step.
    pub tidal: Vec<f64>,
    /// Seconds of each timed steady step (step k ran in the same round as tidal step k).
    pub steady: Vec<f64>,
    /// Linear-solver iterations of each timed tidal step, summed over corrections.
    pub tidal_iterations: Vec<usize>,
    /// The same for the steady steps.
    pub steady_iterations: Vec<usize>,
}

impl TideBench {
    /// Median of the per-step ratios tidal / steady (steps of the same round).
    pub fn median_ratio(&self) -> f64 {
        let r: Vec<f64> = self.tidal.iter().zip(&self.steady).map(|(t, s)| t / s).collect();
        median(&r)
    }

    /// Median seconds per tidal step.
    pub fn tidal_median(&self) -> f64 {
        median(&self.tidal)
    }

    /// Median seconds per steady step.
    pub fn steady_median(&self) -> f64 {
        median(&self.steady)
    }

    /// Median iterations per step, (tidal, steady).
    pub fn median_iterations(&self) -> (f64, f64) {
        let m = |v: &[usize]| median(&v.iter().map(|&k| k as f64).collect::<Vec<_>>());
        (m(&self.tidal_iterations), m(&self.steady_iterations))
    }
}

/// Steps the tidal and the steady harbour (`nx` cells across, backward Euler with `limiter`)
/// side by side in interleaved rounds until each has `steps` timed steps, both with the tidal
/// run's automatic step.
pub fn tide_vs_steady(nx: usize, limiter: Limiter, steps: usize) -> Result<TideBench, String> {
    let mut sims = [
        harbour_simulation(nx, limiter, true)?,
        harbour_simulation(nx, limiter, false)?,
    ];
    let dt = sims[0].dt_max();
    if !dt.is_finite() {
        return Err("the harbour's step is not finite".into());
    }
    let mut out = TideBench {
        limiter,
        nx,
        dt,
        threads: rayon::current_num_threads(),
        tidal: Vec::with_capacity(steps),
        steady: Vec::with_capacity(steps),
        tidal_iterations: Vec::with_capacity(steps),
        steady_iterations: Vec::with_capacity(steps),
    };
    let steps = steps.max(1);
    for round in 0..steps.div_ceil(ROUND_STEPS) {
        let timed = ROUND_STEPS.min(steps - round * ROUND_STEPS);
        for (v, sim) in sims.iter_mut().enumerate() {
            sim.step(dt).map_err(|e| e.to_string())?;
            for _ in 0..timed {
                let t = Instant::now();
                sim.step(dt).map_err(|e| e.to_string())?;
                let s = t.elapsed().as_secs_f64();
                let it = sim.last_iterations().0;
                let (secs, its) = if v == 0 {
                    (&mut out.tidal, &mut out.tidal_iterations)
                } else {
                    (&mut out.steady, &mut out.steady_iterations)
                };
                secs.push(s);
                its.push(it);
            }
        }
    }
    Ok(out)
}
