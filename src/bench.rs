//! The explicit-step benchmark problem and throughput measurement.
//!
//! The problem is the normative one shared with the hand-written peers (`../shared/peers/
//! explicit-step`, its README §1): N by N cells on the unit square, periodic, the steady vortex
//! psi = sin^2(pi x) sin^2(pi y)/pi on the C-grid, K = h/10 (cell Peclet 10), one forward-Euler
//! stage of van Leer convection with central diffusion, dt = 0.4/(umax/h + vmax/h + 4K/h^2),
//! and a Gaussian hill plus a cone as the initial field. It is set up entirely through tinct's
//! own model and stepper. Nothing here prints; the CLI reports.

use crate::error::ModelError;
use crate::flow::{FlowKind, FlowSpec};
use crate::grid::Grid;
use crate::initial::Initial;
use crate::model::{Model, ModelSpec};
use crate::ops::boundary::Boundaries;
use crate::ops::limiter::Limiter;
use crate::step::{Scheme, Simulation};
use std::time::Instant;

/// Scalars of the benchmark set-up.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PeerSetup {
    /// Cells per side.
    pub n: usize,
    /// Diffusivity, m2/s.
    pub k: f64,
    /// Largest |u| over x-faces.
    pub umax: f64,
    /// Largest |v| over y-faces.
    pub vmax: f64,
    /// The fixed step.
    pub dt: f64,
}

/// The benchmark problem at size `n` with the given convection scheme (one stage).
pub fn peer_simulation(n: usize, limiter: Limiter) -> Result<(Simulation, PeerSetup), ModelError> {
    let h = 1.0 / n as f64;
    let grid = Grid::new(n, n, h, h, 0.0, 0.0)?;
    let k = h / 10.0;
    let spec = ModelSpec {
        grid,
        mask: None,
        depth: 1.0.into(),
        kx: k,
        ky: k,
        decay_rate: 0.0,
        flow: FlowSpec::steady(FlowKind::Vortex { speed: 1.0 }),
        boundaries: Boundaries::periodic(),
        sources: vec![],
    };
    let model = Model::new(spec)?;
    // The N by N distinct faces of each kind (the periodic wrap repeats the first).
    let face_max = |a: &[f64]| {
        let mut m = 0.0f64;
        for j in 0..n {
            for i in 0..n {
                m = m.max(a[grid.idx(i as isize, j as isize)].abs());
            }
        }
        m
    };
    let umax = face_max(&model.flow.u);
    let vmax = face_max(&model.flow.v);
    let dt = 0.4 / (umax / h + vmax / h + 2.0 * k / (h * h) + 2.0 * k / (h * h));
    let hill = Initial::Gaussian {
        centre: (0.5, 0.75),
        sigma: 0.05,
        peak: 1.0,
    };
    let cone = Initial::Cone {
        centre: (0.5, 0.25),
        radius: 0.15,
        peak: 1.0,
    };
    let c0 = model.field_from(|x, y| hill.value_at(x, y) + cone.value_at(x, y));
    let scheme = Scheme {
        limiter,
        stages: 1,
        dt: Some(dt),
        ..Scheme::default()
    };
    let sim = Simulation::new(model, scheme, c0)?;
    Ok((sim, PeerSetup { n, k, umax, vmax, dt }))
}

/// The diagnostics the peers publish after a number of steps.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PeerDiagnostics {
    /// sum(phi) h^2.
    pub mass: f64,
    /// sqrt(sum(phi^2)) h.
    pub l2: f64,
    /// Largest value.
    pub max: f64,
    /// phi at (i = N/2, j = 3N/4).
    pub probe_hill: f64,
    /// phi at (i = N/2, j = N/4).
    pub probe_cone: f64,
    /// phi at (i = N/2 + N/16, j = N/4).
    pub probe_flank: f64,
}

/// Measures the published diagnostics on the current state.
pub fn peer_diagnostics(sim: &Simulation) -> PeerDiagnostics {
    let g = &sim.model.grid;
    let n = g.nx;
    let f = g.interior(&sim.state.c);
    let h = g.dx;
    let at = |i: usize, j: usize| f[j * n + i];
    PeerDiagnostics {
        mass: crate::field::sum_compensated(&f) * h * h,
        l2: f.iter().map(|x| x * x).sum::<f64>().sqrt() * h,
        max: f.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
        probe_hill: at(n / 2, 3 * n / 4),
        probe_cone: at(n / 2, n / 4),
        probe_flank: at(n / 2 + n / 16, n / 4),
    }
}

/// Largest absolute difference between `d` and the reference diagnostics for size `n` after
/// `step` steps (`"step0"`, `"step1"` or `"step10"`) in the peers' `reference_values.json`.
pub fn compare_with_reference(json: &str, n: usize, step: &str, d: &PeerDiagnostics) -> Result<f64, String> {
    let v: serde_json::Value = serde_json::from_str(json).map_err(|e| format!("reference values: {e}"))?;
    let entry = v
        .as_array()
        .and_then(|a| a.iter().find(|e| e["N"].as_u64() == Some(n as u64)))
        .ok_or_else(|| format!("no reference values for N = {n}"))?;
    let r = &entry[step];
    let get = |k: &str| r[k].as_f64().ok_or_else(|| format!("reference {step}.{k} missing"));
    let pairs = [
        (d.mass, get("mass")?),
        (d.l2, get("l2")?),
        (d.max, get("max")?),
        (d.probe_hill, get("phi[j=3N/4][i=N/2]")?),
        (d.probe_cone, get("phi[j=N/4][i=N/2]")?),
        (d.probe_flank, get("phi[j=N/4][i=N/2+N/16]")?),
    ];
    Ok(pairs.iter().map(|(a, b)| (a - b).abs()).fold(0.0, f64::max))
}

/// Throughput of one configuration.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Throughput {
    /// Convection scheme.
    pub scheme: String,
    /// Cells per side.
    pub n: usize,
    /// Median over the repetitions, million cell updates per second.
    pub median: f64,
    /// Slowest repetition.
    pub min: f64,
    /// Fastest repetition.
    pub max: f64,
    /// Steps per repetition.
    pub steps: usize,
    /// Threads used.
    pub threads: usize,
}

/// Times `reps` repetitions of as many steps as fill about `rep_seconds` each (after two
/// warm-up steps), on the benchmark problem at size `n`.
pub fn measure(n: usize, limiter: Limiter, reps: usize, rep_seconds: f64) -> Result<Throughput, ModelError> {
    let (mut sim, setup) = peer_simulation(n, limiter)?;
    let run = |sim: &mut Simulation, k: usize| -> f64 {
        let t = Instant::now();
        // On a pool thread, as a run marches (`Simulation::advance_to`).
        crate::par::in_pool(|| {
            for _ in 0..k {
                // The set-up is stable at Courant 1/3; a failure here is a bug.
                sim.step(setup.dt).expect("benchmark step diverged");
            }
        });
        t.elapsed().as_secs_f64()
    };
    run(&mut sim, 2);
    let one = run(&mut sim, 1).max(1e-6);
    let steps = ((rep_seconds / one).round() as usize).clamp(1, 10_000);
    let mut rates: Vec<f64> = (0..reps.max(1))
        .map(|_| (n * n * steps) as f64 / run(&mut sim, steps) / 1e6)
        .collect();
    rates.sort_by(f64::total_cmp);
    Ok(Throughput {
        scheme: limiter.name().to_string(),
        n,
        median: rates[rates.len() / 2],
        min: rates[0],
        max: rates[rates.len() - 1],
        steps,
        threads: rayon::current_num_threads(),
    })
}
