//! Random-walk particle tracking on the model's flow and depth: an independent estimate of
//! the same release with no numerical diffusion.
//!
//! Every release (the initial field and each source) becomes particles carrying mass. Each
//! step of `dt` moves a particle by the grid run's face velocities (interpolated on the
//! C-grid, [`walk`]) by the midpoint rule at the step's middle time, by the drift `(1/h) grad(h K)` that keeps a
//! well-mixed tracer well mixed over a varying depth, and by a Gaussian step of standard
//! deviation `sqrt(2 K dt)` per axis (Visser 1997, Mar. Ecol. Prog. Ser. 158, 275; from
//! memory). Land and walls reflect, open and fixed sides absorb (the mass is booked as outflow
//! through that side), periodic sides wrap, and decay multiplies each mass by
//! `exp(-lambda dt)`. The budget (in water + out + decayed = released) holds to round-off.
//!
//! State is a structure of arrays of `f64` x, y, mass and release time: 32 bytes per particle.
//! A particle that left through a side has x = NaN and mass 0. Particles are ordered by
//! release time; the first `released` of them are in play. Random numbers come from one
//! `Xoshiro256PlusPlus` stream per fixed chunk of [`CHUNK`] particles (the seed's stream,
//! jumped once per chunk), so results are identical for any thread count.

mod release;
mod tally;
mod walk;

pub mod bench;
pub mod compare;
pub mod march;

#[cfg(test)]
mod tests;

pub use tally::{ReceptorValue, Tally};

use crate::error::{invalid, ModelError};
use crate::model::Model;
use ndarray::ArrayView2;
use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;

/// Memory of one particle's state: x, y, mass and release time.
pub const BYTES_PER_PARTICLE: usize = 4 * std::mem::size_of::<f64>();

/// Particles per random-number stream and per unit of parallel work.
pub const CHUNK: usize = 4096;

/// Particle state as a structure of arrays, ordered by release time.
#[derive(Debug, Clone, Default)]
pub struct Particles {
    /// Easting, m (NaN once the particle has left through an open side).
    pub x: Vec<f64>,
    /// Northing, m.
    pub y: Vec<f64>,
    /// Mass carried (tracer units times m3).
    pub mass: Vec<f64>,
    /// Release time, s (non-decreasing along the arrays).
    pub born: Vec<f64>,
}

impl Particles {
    /// Number of particles, released or not.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Whether there are no particles.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// What a particle run is asked for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParticleConfig {
    /// Total number of particles, spread over the releases by mass.
    pub count: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Start time, s (the initial field and instantaneous releases at or before it start here).
    pub t0: f64,
    /// End time, s: a continuous release is represented over its overlap with `t0..t_end`.
    pub t_end: f64,
}

/// Mass accounts of a particle run, tracer units times m3.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct ParticleBudget {
    /// Mass released so far.
    pub released: f64,
    /// Mass that left through each side, in [`crate::ops::boundary::Side::index`] order.
    pub out: [f64; 4],
    /// Mass removed by decay.
    pub decayed: f64,
}

impl ParticleBudget {
    /// Total mass that left through the sides.
    pub fn out_total(&self) -> f64 {
        self.out.iter().sum()
    }
}

/// Steps [`Particles`] on a [`Model`]'s flow and depth.
#[derive(Debug)]
pub struct ParticleStepper<'m> {
    model: &'m Model,
    particles: Particles,
    streams: Vec<Xoshiro256PlusPlus>,
    released: usize,
    t: f64,
    budget: ParticleBudget,
    /// Compensated sums behind `budget`: released, decayed, out through each side.
    sums: [crate::field::Neumaier; 6],
    drift: bool,
    /// Face velocities (m/s, padded) at the current step's time.
    u: Vec<f64>,
    v: Vec<f64>,
    /// Face velocities (m/s) for the midpoint rule's predictor: the face transports over the
    /// face depths when the flow is given as transports, else unused.
    pu: Vec<f64>,
    pv: Vec<f64>,
}

impl<'m> ParticleStepper<'m> {
    /// Represents the initial field `c0` (shape (ny, nx), (y, x) order, row 0 south) and every
    /// source of `model` by `config.count` particles, placed deterministically for the seed.
    pub fn new(model: &'m Model, c0: ArrayView2<f64>, config: ParticleConfig) -> Result<Self, ModelError> {
        model.grid.check_shape("initial field", c0.shape())?;
        if config.count == 0 {
            return Err(invalid("particles", config.count, "an integer >= 1"));
        }
        if !(config.t0.is_finite() && config.t_end.is_finite() && config.t_end >= config.t0) {
            return Err(invalid(
                "particles end time",
                config.t_end,
                "a finite time >= the start",
            ));
        }
        let mut base = Xoshiro256PlusPlus::seed_from_u64(config.seed);
        let mut placer = base.clone();
        let particles = release::place(model, c0, config, &mut placer)?;
        let streams = (0..particles.len().div_ceil(CHUNK))
            .map(|_| {
                base.jump();
                base.clone()
            })
            .collect();
        let padded = model.grid.padded_len();
        let mut s = Self {
            model,
            particles,
            streams,
            released: 0,
            t: config.t0,
            budget: ParticleBudget::default(),
            sums: Default::default(),
            drift: true,
            u: vec![0.0; padded],
            v: vec![0.0; padded],
            pu: vec![0.0; padded],
            pv: vec![0.0; padded],
        };
        s.release_until(config.t0);
        Ok(s)
    }

    /// Turns the drift correction on or off (on by default; off only to show what it does).
    pub fn set_drift(&mut self, on: bool) {
        self.drift = on;
    }

    /// Current time, s.
    pub fn time(&self) -> f64 {
        self.t
    }

    /// The particles (all of them; the first [`Self::released`] are in play).
    pub fn particles(&self) -> &Particles {
        &self.particles
    }

    /// Number of particles released so far.
    pub fn released(&self) -> usize {
        self.released
    }

    /// Mass accounts so far.
    pub fn budget(&self) -> ParticleBudget {
        self.budget
    }

    /// Mass of the released particles still in the water (compensated sum).
    pub fn mass_in_water(&self) -> f64 {
        let mut acc = crate::field::Neumaier::default();
        for &m in &self.particles.mass[..self.released] {
            acc.add(m);
        }
        acc.value()
    }

    /// Sets the clock to `t` after a step that ended within round-off of it (a frame time).
    pub(super) fn set_time(&mut self, t: f64) {
        self.t = t;
    }

    /// Puts into play every particle released at or before `t`.
    fn release_until(&mut self, t: f64) {
        let born = &self.particles.born;
        while self.released < born.len() && born[self.released] <= t {
            self.sums[0].add(self.particles.mass[self.released]);
            self.released += 1;
        }
        self.budget.released = self.sums[0].value();
    }

    /// Advances every particle by one step of `dt` seconds: particles born during the step
    /// join at its start; each moves with the flow at the step's start time, drifts, walks,
    /// reflects or leaves, and decays by `exp(-lambda dt)`.
    pub fn step(&mut self, dt: f64) {
        let t = self.t;
        self.release_until(t + dt);
        walk::velocities_at(self.model, t, dt, &mut self.u, &mut self.v);
        let predictor = walk::predictor_velocities(self.model, t, dt, &self.u, &self.v, &mut self.pu, &mut self.pv);
        let (pu, pv) = if predictor {
            (&self.pu[..], &self.pv[..])
        } else {
            (&self.u[..], &self.v[..])
        };
        let ctx = walk::StepContext::new(self.model, t, dt, self.drift, (&self.u, &self.v), (pu, pv));
        let n = self.released;
        let p = &mut self.particles;
        let tallies: Vec<walk::ChunkTally> = p.x[..n]
            .par_chunks_mut(CHUNK)
            .zip(p.y[..n].par_chunks_mut(CHUNK))
            .zip(p.mass[..n].par_chunks_mut(CHUNK))
            .zip(self.streams.par_iter_mut())
            .map(|(((x, y), m), rng)| ctx.advance_chunk(x, y, m, rng))
            .collect();
        for c in &tallies {
            self.sums[1].add(c.decayed);
            for k in 0..4 {
                self.sums[2 + k].add(c.out[k]);
            }
        }
        self.budget.decayed = self.sums[1].value();
        for k in 0..4 {
            self.budget.out[k] = self.sums[2 + k].value();
        }
        self.t = t + dt;
    }

    /// Cell counts, mass and mass squared of the particles in play, for concentrations and
    /// receptor uncertainties.
    pub fn tally(&self) -> Tally {
        Tally::new(self.model, &self.particles, self.released, self.t)
    }
}
