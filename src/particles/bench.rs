//! Particle throughput: particle steps per second on a basin with land, a tide and decay.

use super::{ParticleConfig, ParticleStepper};
use crate::error::ModelError;
use crate::flow::{FlowSpec, Opening, Tide};
use crate::grid::{Grid, Mask};
use crate::model::{Model, ModelSpec};
use crate::ops::boundary::{Boundaries, Side, SideKind};

/// The benchmark's model: a 200 x 100 basin of 10 m cells, 5 m deep, with an island, an
/// opening in the west side carrying a 0.5 m tide of 12.42 h, K = 1 m2/s and a decay of
/// about 1/day.
pub fn model() -> Result<Model, ModelError> {
    let grid = Grid::new(200, 100, 10.0, 10.0, 0.0, 0.0)?;
    let mask = Mask::all_water(&grid).with_land(&grid, |x, y| {
        (x - 1200.0).powi(2) / 200.0f64.powi(2) + (y - 500.0).powi(2) / 150.0f64.powi(2) < 1.0
    })?;
    let opening = Opening {
        name: "mouth".into(),
        side: Side::West,
        from: 200.0,
        to: 800.0,
        discharge: 0.0,
        share: None,
    };
    let flow = FlowSpec {
        kind: crate::flow::FlowKind::Openings(vec![opening]),
        tide: Some(Tide {
            period: 44_712.0,
            phase: 0.0,
            amplitude: 0.5,
            return_flow: 0.0,
        }),
        project: true,
    };
    let mut b = Boundaries::walls();
    b.west = SideKind::Open { value: 0.0 };
    Model::new(ModelSpec {
        grid,
        mask: Some(mask),
        depth: 5.0.into(),
        kx: 1.0,
        ky: 1.0,
        decay_rate: 1.0 / 86_400.0,
        flow,
        boundaries: b,
        sources: vec![],
    })
}

/// Runs `steps` steps of 10 s with `count` particles started uniformly over the basin and
/// returns particle steps per second of stepping time, counting only the particles still in
/// the water at each step (those that left through the mouth cost nothing); release, set-up
/// and the counting are not timed.
pub fn particle_steps_per_second(count: usize, steps: usize, seed: u64) -> Result<f64, ModelError> {
    let model = model()?;
    let c0 = model.field_from(|_, _| 1.0);
    let cfg = ParticleConfig {
        count,
        seed,
        t0: 0.0,
        t_end: 1e9,
    };
    let mut s = ParticleStepper::new(&model, c0.view(), cfg)?;
    let mut done = 0usize;
    let mut seconds = 0.0;
    for _ in 0..steps {
        done += s.particles().x[..s.released()].iter().filter(|x| !x.is_nan()).count();
        let start = std::time::Instant::now();
        s.step(10.0);
        seconds += start.elapsed().as_secs_f64();
    }
    Ok(done as f64 / seconds.max(1e-9))
}
