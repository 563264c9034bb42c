//! What writing a run's outputs costs: the same scenario marched bare (no observer, no file)
//! and run in full by [`super::execute`] (every output), alternately, several times. Used by
//! `tinct bench --outputs`; nothing here prints.

use super::execute;
use crate::scenario::Scenario;
use crate::step::Simulation;
use std::ops::ControlFlow;
use std::path::Path;
use std::time::Instant;

/// The built-in scenario of the output benchmark: a 1 km by 500 m tidal dock basin on 200 by
/// 100 cells, open to the sea along its south side, a dye release, three receptors with
/// thresholds, one tidal cycle, 12 frames (invented for the benchmark).
pub const BENCH_SCENARIO: &str = r#"name = "dock-basin"
[grid]
nx = 200
ny = 100
dx = 5.0
depth = 4.0
[tracer]
name = "dye"
units = "ug/L"
diffusivity = 0.2
[flow]
kind = "openings"
tide = { period = 44712.0, phase = 1.5708, amplitude = 1.0 }
[[flow.opening]]
name = "sea"
side = "south"
from = 0.0
to = 1000.0
[boundary]
west = "wall"
east = "wall"
south = "open"
north = "wall"
[[source]]
name = "berth"
at = [500.0, 300.0]
mass = 5.0e6
start = 0.0
spread = 10.0
[[receptor]]
name = "beach"
at = [100.0, 450.0]
threshold = 1.0
[[receptor]]
name = "quay"
at = [900.0, 250.0]
threshold = 1.0
[[receptor]]
name = "mouth"
at = [500.0, 20.0]
threshold = 0.5
[scheme]
convection = "van_leer"
[run]
end = 44712.0
frames = 12
log_every = 10
[output]
colour = "log"
animation = true
"#;

/// Wall times of the two ways of running, seconds, one entry per repetition.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OutputCost {
    /// The march alone (model built, stepped to the end, nothing observed or written).
    pub bare: Vec<f64>,
    /// `execute` with every output.
    pub full: Vec<f64>,
    /// Of `full`, the time `execute` itself counted as writing outputs.
    pub writing: Vec<f64>,
}

/// Runs `scn` bare and in full `reps` times, alternately, writing into `out`.
pub fn measure(scn: &Scenario, out: &Path, reps: usize) -> Result<OutputCost, String> {
    let mut cost = OutputCost::default();
    for _ in 0..reps.max(1) {
        let t0 = Instant::now();
        let model = scn.build_model().map_err(|e| e.to_string())?;
        let c0 = model.field_from(|x, y| scn.initial.value_at(x, y));
        let mut sim = Simulation::new(model, scn.scheme, c0).map_err(|e| e.to_string())?;
        sim.advance_to(scn.run.end, |_| ControlFlow::Continue(()))
            .map_err(|e| e.to_string())?;
        cost.bare.push(t0.elapsed().as_secs_f64());

        let t0 = Instant::now();
        let o = execute(scn, out, &mut |_| {}, &mut |_| {}).map_err(|e| e.to_string())?;
        cost.full.push(t0.elapsed().as_secs_f64());
        cost.writing.push(o.summary.output_seconds);
    }
    Ok(cost)
}

/// The median of `v` (NaN when empty).
pub fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    match s.len() {
        0 => f64::NAN,
        n if n % 2 == 1 => s[n / 2],
        n => 0.5 * (s[n / 2 - 1] + s[n / 2]),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_bench_scenario_reads_and_has_twelve_frames() {
        let s = crate::scenario::parse(BENCH_SCENARIO, Path::new("dock-basin.toml"), &[]).unwrap();
        assert_eq!((s.model.grid.nx, s.model.grid.ny), (200, 100));
        assert_eq!(s.run.frames, 12);
        assert_eq!(median(&[3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), 2.5);
    }
}
