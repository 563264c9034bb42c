//! The influence benchmark (`tinct bench --influence`): wall time of one influence map against
//! one forward run (`crate::run::execute`, every output) of the same scenario, interleaved.
//!
//! The map is the scenario's first receptor over the whole run, `(0, end]`, for a release at
//! the start. The forward run writes its folder under `out`; the map is computed only (its
//! files are a few small writes).

use super::{influence, AdjointKind, Window};
use crate::scenario::Scenario;
use std::path::Path;
use std::time::Instant;

/// Timings of one benchmark.
#[derive(Debug, Clone)]
pub struct InfluenceBench {
    /// The adjoint the scenario's scheme uses.
    pub kind: AdjointKind,
    /// Steps of the backward run.
    pub steps: usize,
    /// Forward run seconds per repetition.
    pub forward: Vec<f64>,
    /// Influence map seconds per repetition.
    pub influence: Vec<f64>,
}

/// Median of a non-empty list.
pub fn median(xs: &[f64]) -> f64 {
    let mut v = xs.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

impl InfluenceBench {
    /// Median of the per-repetition ratios influence / forward.
    pub fn median_ratio(&self) -> f64 {
        let r: Vec<f64> = self.influence.iter().zip(&self.forward).map(|(a, b)| a / b).collect();
        median(&r)
    }
}

/// Runs `reps` interleaved repetitions (forward, then map) of `scn`, the forward runs writing
/// under `out`.
pub fn influence_vs_forward(scn: &Scenario, out: &Path, reps: usize) -> Result<InfluenceBench, String> {
    let receptor = scn
        .receptors
        .first()
        .ok_or_else(|| format!("{}: the scenario has no [[receptor]]", scn.path.display()))?;
    let model = scn.build_model().map_err(|e| format!("{}: {e}", scn.path.display()))?;
    let window = Window::Span {
        start: 0.0,
        end: scn.run.end,
    };
    let mut b = InfluenceBench {
        kind: AdjointKind::for_scheme(&scn.scheme),
        steps: 0,
        forward: Vec::new(),
        influence: Vec::new(),
    };
    for _ in 0..reps.max(1) {
        let t0 = Instant::now();
        crate::run::execute(scn, out, &mut |_| {}, &mut |_| {}).map_err(|e| e.to_string())?;
        b.forward.push(t0.elapsed().as_secs_f64());
        let t0 = Instant::now();
        let inf = influence(&model, &scn.scheme, receptor.at, window, &[0.0]).map_err(|e| e.to_string())?;
        b.influence.push(t0.elapsed().as_secs_f64());
        b.steps = inf.steps;
    }
    Ok(b)
}
