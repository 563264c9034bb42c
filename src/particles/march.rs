//! A particle run over a scenario's span: the step size, the receptor series with their
//! counting errors and kernel estimates, the budget rows and the frames.
//!
//! The step is the largest that moves no particle more than half a cell by the flow (at the
//! fastest face over the run) and whose random step has a standard deviation of at most half a
//! cell, `sqrt(2 K dt) <= min(dx, dy) / 2`, so that the interpolated velocity and the depth
//! drift are sampled at least twice per cell crossed (common practice for random-walk models:
//! the step must resolve the scales of the flow and depth). Steps end on the frame times.
//!
//! After every step each receptor gets two values from the particles in play:
//! - the *cell* value: the mass of the particles in the receptor's cell over its water volume,
//!   with the counting error `sqrt(sum m^2) / V` ([`super::Tally`]);
//! - the *kernel* value: the cell masses within [`KERNEL_REACH`] bandwidths weighted by a
//!   Gaussian of standard deviation `bandwidth` cells per axis, over the water volumes weighted
//!   alike, `sum g M / sum g V` (a ratio estimate, so a uniform tracer reads true next to land
//!   and walls); its error is `sqrt(sum g^2 M2) / sum g V`. It is smoother but widens a plume
//!   by the bandwidth (its variance adds `bandwidth^2` cells^2 per axis).

use super::{ParticleBudget, ParticleConfig, ParticleStepper, CHUNK};
use crate::error::ModelError;
use crate::model::Model;
use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;
use std::sync::atomic::{AtomicBool, Ordering};

/// The kernel is cut off at this many bandwidths.
pub const KERNEL_REACH: f64 = 3.0;

/// The default kernel bandwidth (standard deviation), in cells.
pub const DEFAULT_BANDWIDTH: f64 = 1.0;

/// What a particle run is asked for.
#[derive(Debug, Clone, PartialEq)]
pub struct MarchSpec {
    /// Particles, spread over the releases by mass.
    pub count: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// End time, s (the run starts at 0).
    pub end: f64,
    /// Frames over the run: `frames + 1` maps at `k end / frames`.
    pub frames: usize,
    /// Receptors: name, position (m), threshold.
    pub receptors: Vec<(String, (f64, f64), Option<f64>)>,
    /// Kernel standard deviation, cells.
    pub bandwidth: f64,
    /// A fixed step, s, instead of [`particle_dt`].
    pub dt: Option<f64>,
}

/// One receptor sample.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize)]
pub struct Sample {
    /// Cell value: particle mass in the receptor's cell over its water volume.
    pub value: f64,
    /// Its counting error.
    pub std_error: f64,
    /// Particles in the cell.
    pub count: u32,
    /// Kernel value.
    pub kernel: f64,
    /// Its error.
    pub kernel_error: f64,
}

/// One receptor's series and statistics (from the cell values, as the grid run's are).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ParticleReceptor {
    /// Name.
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// Threshold, if given.
    pub threshold: Option<f64>,
    /// One sample per time of [`ParticleRun::times`].
    #[serde(skip)]
    pub samples: Vec<Sample>,
    /// The largest cell value.
    pub peak: f64,
    /// When, s.
    pub peak_time: f64,
    /// The sample at the peak (its error and particle count).
    pub at_peak: Sample,
    /// The largest kernel value.
    pub kernel_peak: f64,
    /// First time the cell value reached the threshold, s.
    pub arrival_time: Option<f64>,
    /// Time at or above the threshold, s (each step counted when its end sample is).
    pub time_above_threshold: Option<f64>,
}

/// One row of the particle budget.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BudgetLine {
    /// Time, s.
    pub time: f64,
    /// Steps taken.
    pub step: u64,
    /// Mass released so far.
    pub released: f64,
    /// Mass of the particles in the water.
    pub in_water: f64,
    /// Mass out through each side (west, east, south, north).
    pub out: [f64; 4],
    /// Mass removed by decay.
    pub decayed: f64,
    /// `(in_water + out + decayed - released) / released`.
    pub residual: f64,
    /// Particles released so far.
    pub released_count: usize,
    /// Of them, still in the water.
    pub in_water_count: usize,
}

/// Concentration maps at a frame time, (y, x) order, row 0 south, 0 on land.
#[derive(Debug, Clone)]
pub struct ParticleFrame {
    /// Time, s.
    pub time: f64,
    /// Cell values.
    pub cells: Array2<f64>,
    /// Kernel values.
    pub kernel: Array2<f64>,
}

/// A finished (or stopped) particle run.
#[derive(Debug, Clone)]
pub struct ParticleRun {
    /// The step, s.
    pub dt: f64,
    /// Steps taken.
    pub steps: u64,
    /// Particles in all.
    pub particles: usize,
    /// Seed.
    pub seed: u64,
    /// Kernel bandwidth, cells.
    pub bandwidth: f64,
    /// Sample times, s (0 first).
    pub times: Vec<f64>,
    /// Receptor series and statistics.
    pub receptors: Vec<ParticleReceptor>,
    /// Budget, one row per sample time.
    pub budget: Vec<BudgetLine>,
    /// Frames written so far.
    pub frames: Vec<ParticleFrame>,
    /// Particle steps taken (particles in play summed over the steps).
    pub particle_steps: u64,
    /// Whether the stop flag ended the run early.
    pub interrupted: bool,
}

/// The particle step for `model` over `0..end` (see the module documentation).
pub fn particle_dt(model: &Model, end: f64) -> f64 {
    let g = &model.grid;
    let h = g.dx.min(g.dy);
    let k = model.kx.max(model.ky);
    let mut dt = if k > 0.0 { h * h / (8.0 * k) } else { f64::INFINITY };
    // The fastest face over the run, sampled at 64 times (a tide's peak within 2% of it).
    let n = g.padded_len();
    let (mut u, mut v) = (vec![0.0; n], vec![0.0; n]);
    let mut rate = 0.0f64;
    for s in 0..=64 {
        let t = end * s as f64 / 64.0;
        super::walk::velocities_at(model, t, (end / 64.0).max(1e-9), &mut u, &mut v);
        let level = model.flow.level(t);
        let per_depth = |q: f64, h: f64| {
            if model.flow.is_transport() {
                q / (h + level).max(1e-3)
            } else {
                q
            }
        };
        for j in 0..g.ny as isize {
            for i in 0..g.nx as isize {
                let p = g.idx(i, j);
                if model.wet[p] == 0 {
                    continue;
                }
                let (hx, hy) = match &model.depth_field {
                    Some(d) => (d.fx[p].min(d.fx[p + 1]), d.fy[p].min(d.fy[p + g.stride()])),
                    None => (model.depth, model.depth),
                };
                let cu = per_depth(u[p].abs().max(u[p + 1].abs()), hx) / g.dx;
                let cv = per_depth(v[p].abs().max(v[p + g.stride()].abs()), hy) / g.dy;
                rate = rate.max(cu + cv);
            }
        }
    }
    if rate > 0.0 {
        dt = dt.min(0.5 / rate);
    }
    if !dt.is_finite() {
        dt = end.max(1.0);
    }
    dt
}

/// A receptor's place on the grid and its kernel weights.
struct Probe {
    i: isize,
    j: isize,
    reach: isize,
    /// Gaussian weights over the (2 reach + 1)^2 window, row by row from the south-west.
    weights: Vec<f64>,
    /// Sum of the weights times the cells' water volumes at the current time.
    weighted_volume: f64,
    volume: f64,
}

impl Probe {
    /// Sums this probe takes in a chunk's accumulator: the cell's count, mass and mass
    /// squared, then the window's masses and squared masses.
    fn slots(&self) -> usize {
        3 + 2 * self.weights.len()
    }

    fn width(&self) -> usize {
        (2 * self.reach + 1) as usize
    }

    /// Window slot of cell (i, j), if inside.
    #[inline]
    fn slot(&self, i: isize, j: isize) -> Option<usize> {
        let (di, dj) = (i - self.i, j - self.j);
        (di.abs() <= self.reach && dj.abs() <= self.reach)
            .then(|| ((dj + self.reach) as usize) * self.width() + (di + self.reach) as usize)
    }

    fn set_time(&mut self, model: &Model, t: f64) {
        let g = &model.grid;
        let w = self.width();
        self.weighted_volume = 0.0;
        for (s, &wt) in self.weights.iter().enumerate() {
            let (i, j) = (
                self.i - self.reach + (s % w) as isize,
                self.j - self.reach + (s / w) as isize,
            );
            if (0..g.nx as isize).contains(&i)
                && (0..g.ny as isize).contains(&j)
                && model.mask.is_wet(i as usize, j as usize)
            {
                self.weighted_volume += wt * model.depth_at(i as usize, j as usize, t) * g.cell_area();
            }
        }
        self.volume = if model.mask.is_wet(self.i as usize, self.j as usize) {
            model.depth_at(self.i as usize, self.j as usize, t) * g.cell_area()
        } else {
            0.0
        };
    }
}

/// Sums one chunk of particles into the probes: per probe the cell's count, mass and mass
/// squared, then the window's masses and squared masses; last the mass and count in the water.
fn probe_chunk(model: &Model, probes: &[Probe], xs: &[f64], ys: &[f64], ms: &[f64]) -> Vec<f64> {
    let g = &model.grid;
    let total: usize = probes.iter().map(Probe::slots).sum();
    let mut acc = vec![0.0; total + 2];
    let (inv_dx, inv_dy) = (1.0 / g.dx, 1.0 / g.dy);
    let mut water = crate::field::Neumaier::default();
    for ((&x, &y), &m) in xs.iter().zip(ys).zip(ms) {
        if x.is_nan() {
            continue;
        }
        water.add(m);
        acc[total + 1] += 1.0;
        let i = (((x - g.x0) * inv_dx).floor() as isize).clamp(0, g.nx as isize - 1);
        let j = (((y - g.y0) * inv_dy).floor() as isize).clamp(0, g.ny as isize - 1);
        let mut off = 0;
        for p in probes {
            if let Some(s) = p.slot(i, j) {
                if i == p.i && j == p.j {
                    acc[off] += 1.0;
                    acc[off + 1] += m;
                    acc[off + 2] += m * m;
                }
                let n = p.weights.len();
                acc[off + 3 + s] += m;
                acc[off + 3 + n + s] += m * m;
            }
            off += p.slots();
        }
    }
    acc[total] = water.value();
    acc
}

/// Marches `count` particles of `model`'s releases and initial field `c0` over `0..end`,
/// sampling the receptors after every step and keeping a frame at each frame time. `progress`
/// gets the time after each step; a raised `stop` ends the run after the step under way.
pub fn march(
    model: &Model,
    c0: ArrayView2<f64>,
    spec: &MarchSpec,
    stop: Option<&AtomicBool>,
    progress: &mut dyn FnMut(f64),
) -> Result<ParticleRun, ModelError> {
    if !(spec.end.is_finite() && spec.end > 0.0) {
        return Err(crate::error::invalid("run.end", spec.end, "a finite time > 0"));
    }
    if !(spec.bandwidth.is_finite() && spec.bandwidth > 0.0) {
        return Err(crate::error::invalid(
            "particle kernel bandwidth",
            spec.bandwidth,
            "a number of cells > 0",
        ));
    }
    let dt = match spec.dt {
        Some(d) if d.is_finite() && d > 0.0 => d,
        Some(d) => return Err(crate::error::invalid("particle step", d, "a finite step > 0")),
        None => particle_dt(model, spec.end),
    };
    let cfg = ParticleConfig {
        count: spec.count,
        seed: spec.seed,
        t0: 0.0,
        t_end: spec.end,
    };
    let mut stepper = ParticleStepper::new(model, c0, cfg)?;
    let g = &model.grid;
    let reach = (KERNEL_REACH * spec.bandwidth).ceil() as isize;
    let mut probes = Vec::new();
    for (name, at, _) in &spec.receptors {
        let (i, j) = g.cell_at(at.0, at.1).ok_or_else(|| {
            crate::error::invalid(format!("receptor {name}"), format!("{at:?}"), "a point inside the grid")
        })?;
        let w = 2 * reach + 1;
        let weights = (0..w * w)
            .map(|s| {
                let (di, dj) = ((s % w - reach) as f64, (s / w - reach) as f64);
                (-(di * di + dj * dj) / (2.0 * spec.bandwidth * spec.bandwidth)).exp()
            })
            .collect();
        probes.push(Probe {
            i: i as isize,
            j: j as isize,
            reach,
            weights,
            weighted_volume: 0.0,
            volume: 0.0,
        });
    }
    let mut run = ParticleRun {
        dt,
        steps: 0,
        particles: stepper.particles().len(),
        seed: spec.seed,
        bandwidth: spec.bandwidth,
        times: Vec::new(),
        receptors: spec
            .receptors
            .iter()
            .map(|(name, at, threshold)| ParticleReceptor {
                name: name.clone(),
                at: *at,
                threshold: *threshold,
                samples: Vec::new(),
                peak: f64::NEG_INFINITY,
                peak_time: 0.0,
                at_peak: Sample::default(),
                kernel_peak: f64::NEG_INFINITY,
                arrival_time: None,
                time_above_threshold: threshold.map(|_| 0.0),
            })
            .collect(),
        budget: Vec::new(),
        frames: Vec::new(),
        particle_steps: 0,
        interrupted: false,
    };
    observe(model, &stepper, &mut probes, &mut run, 0.0);
    run.frames.push(frame(&stepper, spec.bandwidth));
    let frames = spec.frames.max(1);
    for k in 1..=frames {
        let target = if k == frames {
            spec.end
        } else {
            spec.end * k as f64 / frames as f64
        };
        while stepper.time() < target {
            let t = stepper.time();
            let mut h = dt.min(target - t);
            // A sliver left before the target joins this step.
            if target - t - h < 1e-9 * dt {
                h = target - t;
            }
            run.particle_steps += stepper.released() as u64;
            stepper.step(h);
            if target - stepper.time() < 1e-9 * dt {
                stepper.set_time(target);
            }
            run.steps += 1;
            observe(model, &stepper, &mut probes, &mut run, h);
            progress(stepper.time());
            if stop.is_some_and(|s| s.load(Ordering::Relaxed)) {
                run.interrupted = true;
                return Ok(run);
            }
        }
        run.frames.push(frame(&stepper, spec.bandwidth));
    }
    Ok(run)
}

/// Samples every receptor and the budget after a step of `h` (0 at the start).
fn observe(model: &Model, s: &ParticleStepper, probes: &mut [Probe], run: &mut ParticleRun, h: f64) {
    let t = s.time();
    for p in probes.iter_mut() {
        p.set_time(model, t);
    }
    let n = s.released();
    let pt = s.particles();
    let sums = pt.x[..n]
        .par_chunks(CHUNK)
        .zip(pt.y[..n].par_chunks(CHUNK))
        .zip(pt.mass[..n].par_chunks(CHUNK))
        .map(|((x, y), m)| probe_chunk(model, probes, x, y, m))
        .collect::<Vec<_>>()
        .into_iter()
        // Summed in chunk order, so the sums do not depend on the thread count.
        .reduce(|mut a, b| {
            a.iter_mut().zip(&b).for_each(|(a, b)| *a += b);
            a
        })
        .unwrap_or_else(|| {
            let total: usize = probes.iter().map(Probe::slots).sum();
            vec![0.0; total + 2]
        });
    let mut off = 0;
    for (p, r) in probes.iter().zip(run.receptors.iter_mut()) {
        let nw = p.weights.len();
        let a = &sums[off..off + p.slots()];
        let (gm, gm2) = (0..nw).fold((0.0, 0.0), |(x, y), s| {
            (x + p.weights[s] * a[3 + s], y + p.weights[s].powi(2) * a[3 + nw + s])
        });
        let sample = Sample {
            value: if p.volume > 0.0 { a[1] / p.volume } else { 0.0 },
            std_error: if p.volume > 0.0 { a[2].sqrt() / p.volume } else { 0.0 },
            count: a[0] as u32,
            kernel: if p.weighted_volume > 0.0 {
                gm / p.weighted_volume
            } else {
                0.0
            },
            kernel_error: if p.weighted_volume > 0.0 {
                gm2.sqrt() / p.weighted_volume
            } else {
                0.0
            },
        };
        if sample.value > r.peak {
            (r.peak, r.peak_time, r.at_peak) = (sample.value, t, sample);
        }
        r.kernel_peak = r.kernel_peak.max(sample.kernel);
        if let Some(th) = r.threshold {
            if sample.value >= th {
                r.arrival_time.get_or_insert(t);
                if let Some(a) = r.time_above_threshold.as_mut() {
                    *a += h;
                }
            }
        }
        r.samples.push(sample);
        off += p.slots();
    }
    let b: ParticleBudget = s.budget();
    let in_water = sums[off];
    let released = b.released;
    let residual = if released > 0.0 {
        (in_water + b.out_total() + b.decayed - released) / released
    } else {
        0.0
    };
    run.times.push(t);
    run.budget.push(BudgetLine {
        time: t,
        step: run.steps,
        released,
        in_water,
        out: b.out,
        decayed: b.decayed,
        residual,
        released_count: n,
        in_water_count: sums[off + 1] as usize,
    });
}

/// The cell and kernel maps of the particles in play.
fn frame(s: &ParticleStepper, bandwidth: f64) -> ParticleFrame {
    let tally = s.tally();
    ParticleFrame {
        time: s.time(),
        cells: tally.concentration(),
        kernel: kernel_map(&tally.mass, &tally.volume, bandwidth),
    }
}

/// `(G * M) / (G * V)` with G the Gaussian of standard deviation `bandwidth` cells, cut at
/// [`KERNEL_REACH`] bandwidths, applied along x then y; 0 where the volume is 0 (land).
pub fn kernel_map(mass: &Array2<f64>, volume: &Array2<f64>, bandwidth: f64) -> Array2<f64> {
    let reach = (KERNEL_REACH * bandwidth).ceil() as isize;
    let w: Vec<f64> = (-reach..=reach)
        .map(|d| (-((d * d) as f64) / (2.0 * bandwidth * bandwidth)).exp())
        .collect();
    let smooth = |a: &Array2<f64>| -> Array2<f64> {
        let (ny, nx) = a.dim();
        let pass = |a: &Array2<f64>, along_x: bool| {
            Array2::from_shape_fn((ny, nx), |(j, i)| {
                let mut s = 0.0;
                for (k, wk) in w.iter().enumerate() {
                    let d = k as isize - reach;
                    let (ii, jj) = if along_x {
                        (i as isize + d, j as isize)
                    } else {
                        (i as isize, j as isize + d)
                    };
                    if (0..nx as isize).contains(&ii) && (0..ny as isize).contains(&jj) {
                        s += wk * a[[jj as usize, ii as usize]];
                    }
                }
                s
            })
        };
        pass(&pass(a, true), false)
    };
    let (m, v) = (smooth(mass), smooth(volume));
    ndarray::Zip::from(&m)
        .and(&v)
        .and(volume)
        .map_collect(|&m, &v, &own| if own > 0.0 && v > 0.0 { m / v } else { 0.0 })
}
