//! A field left to decay must not sink into subnormal numbers (where arithmetic slows about
//! threefold): the explicit kernel sets values below its floor (1e-140) to zero and books them
//! as decayed, so the mass budget still closes.

use std::ops::ControlFlow;
use tinct::flow::FlowSpec;
use tinct::grid::Grid;
use tinct::model::{Model, ModelSpec};
use tinct::ops::boundary::Boundaries;
use tinct::step::{Scheme, Simulation};

fn decaying(decay_rate: f64) -> Simulation {
    let grid = Grid::new(40, 20, 10.0, 10.0, 0.0, 0.0).unwrap();
    let spec = ModelSpec {
        grid,
        mask: None,
        depth: 2.0.into(),
        kx: 0.5,
        ky: 0.5,
        decay_rate,
        flow: FlowSpec::uniform(0.2, 0.05),
        boundaries: Boundaries::periodic(),
        sources: vec![],
    };
    let model = Model::new(spec).unwrap();
    let c0 = model.field_from(|x, y| 1.0 + 0.5 * (x / 60.0).sin() * (y / 40.0).cos());
    Simulation::new(model, Scheme::default(), c0).unwrap()
}

#[test]
fn a_decaying_field_reaches_zero_without_subnormals_and_the_budget_closes() {
    // Decay e-folds every 100 s: 1e-140 is 322 e-folds (about 32,000 s); without the floor the
    // field would pass through the subnormal range (709 to 745 e-folds) before 90,000 s.
    let mut sim = decaying(0.01);
    let m0 = sim.mass();
    let mut subnormal_steps = 0usize;
    sim.advance_to(90_000.0, |s| {
        if s.field_view().iter().any(|v| v.is_subnormal()) {
            subnormal_steps += 1;
        }
        ControlFlow::Continue(())
    })
    .unwrap();
    assert_eq!(subnormal_steps, 0);
    assert!(
        sim.field_view().iter().all(|&v| v == 0.0),
        "the field drains to exactly zero"
    );
    // Everything that left the water is booked as decayed (exact decay of a periodic field:
    // mass(t) = m0 exp(-lambda t), so all of m0 has decayed; common practice).
    let row = sim.budget_row();
    assert!(
        (row.decayed - m0).abs() <= 1e-12 * m0,
        "decayed {} of {}",
        row.decayed,
        m0
    );
    assert!(row.residual.abs() <= 1e-12, "residual {}", row.residual);
}

#[test]
fn values_above_the_floor_are_untouched() {
    // Mild decay over a short run: no value comes near 1e-140, so the run equals the same run
    // advanced step by step with the exact decay factor applied to the mass (exact:
    // mass(t) = m0 exp(-lambda t) for a periodic, source-free field).
    let mut sim = decaying(1e-3);
    let m0 = sim.mass();
    sim.advance_to(500.0, |_| ControlFlow::Continue(())).unwrap();
    let expected = m0 * (-1e-3f64 * 500.0).exp();
    assert!((sim.mass() - expected).abs() <= 1e-12 * m0);
    assert!(sim.field_view().iter().all(|&v| v > 0.1));
}
