//! Library constructors refuse bad values with typed errors that name the quantity; nothing
//! panics on user values.

mod common;

use common::*;
use tinct::flow::FlowKind;
use tinct::grid::Grid;
use tinct::model::Model;
use tinct::ops::boundary::{Boundaries, SideKind};
use tinct::ops::limiter::Limiter;
use tinct::ops::sources::{Release, SourceSpec};
use tinct::step::{Scheme, Simulation};
use tinct::ModelError;

fn base() -> tinct::model::ModelSpec {
    let grid = Grid::new(20, 10, 1.0, 1.0, 0.0, 0.0).unwrap();
    // Not projected (a uniform current in a closed box projects to still water): the step
    // bounds below are those of u = 0.5 m/s.
    let mut sp = spec(grid, FlowKind::Uniform { u: 0.5, v: 0.0 }, Boundaries::walls());
    sp.flow.project = false;
    sp
}

fn err_of(sp: tinct::model::ModelSpec) -> String {
    Model::new(sp).unwrap_err().to_string()
}

#[test]
fn model_errors_name_the_quantity() {
    let mut sp = base();
    sp.kx = -1.0;
    assert!(err_of(sp).contains("tracer.diffusivity[0]"));
    let mut sp = base();
    sp.ky = f64::NAN;
    assert!(err_of(sp).contains("tracer.diffusivity[1]"));
    let mut sp = base();
    sp.depth = 0.0.into();
    assert!(err_of(sp).contains("grid.depth"));
    let mut sp = base();
    sp.decay_rate = f64::INFINITY;
    assert!(err_of(sp).contains("tracer.decay_rate"));
    let mut sp = base();
    sp.boundaries.south = SideKind::Periodic;
    let e = Model::new(sp).unwrap_err();
    assert!(
        matches!(
            e,
            ModelError::UnpairedPeriodic {
                side: "south",
                partner: "north",
                ..
            }
        ),
        "{e}"
    );
    let mut sp = base();
    sp.flow.kind = FlowKind::Uniform {
        u: f64::NEG_INFINITY,
        v: 0.0,
    };
    assert!(err_of(sp).contains("flow.velocity[0]"));
    let mut sp = base();
    sp.sources = vec![
        SourceSpec {
            name: "ok".into(),
            at: (5.0, 5.0),
            release: Release::Instant { mass: 1.0, at: 0.0 },
            spread: None,
        },
        SourceSpec {
            name: "far".into(),
            at: (50.0, 5.0),
            release: Release::Instant { mass: 1.0, at: 0.0 },
            spread: None,
        },
    ];
    let e = Model::new(sp).unwrap_err();
    assert!(
        matches!(&e, ModelError::OutsideWater { what, .. } if what == "source[1]"),
        "{e}"
    );
    let mut sp = base();
    sp.mask = Some(island(&sp.grid, (2.0, 8.0), (2.0, 8.0)));
    sp.sources = vec![SourceSpec {
        name: "on the island".into(),
        at: (5.0, 5.0),
        release: Release::Continuous {
            rate: 1.0,
            start: 0.0,
            stop: 10.0,
        },
        spread: Some(2.0),
    }];
    assert!(err_of(sp).contains("on land"));
}

#[test]
fn fixed_step_above_the_stability_bound_is_refused_with_the_bound() {
    // Courant-number sum 1 at dt = dx/u = 2 s (forward-Euler upwind limit; common practice).
    let model = Model::new(base()).unwrap();
    let c0 = model.zero_field();
    let too_big = Scheme {
        limiter: Limiter::VanLeer,
        dt: Some(2.5),
        ..Scheme::default()
    };
    let e = Simulation::new(model.clone(), too_big, c0.clone()).unwrap_err();
    let ModelError::UnstableDt { bound, .. } = &e else {
        panic!("{e}")
    };
    assert!((bound - 2.0).abs() < 1e-12, "{e}");
    assert!(e.to_string().contains("2.000000e0"), "{e}");
    let ok = Scheme {
        limiter: Limiter::VanLeer,
        dt: Some(1.9),
        ..Scheme::default()
    };
    assert!(Simulation::new(model.clone(), ok, c0.clone()).is_ok());
    for bad in [
        Scheme {
            stages: 4,
            ..Scheme::default()
        },
        Scheme {
            courant: 0.0,
            ..Scheme::default()
        },
        Scheme {
            courant: f64::NAN,
            ..Scheme::default()
        },
        Scheme {
            dt: Some(-1.0),
            ..Scheme::default()
        },
    ] {
        assert!(Simulation::new(model.clone(), bad, c0.clone()).is_err(), "{bad:?}");
    }
    // Diffusion limit: K dt/dx^2 <= 1/2 in 1D-like terms, (Kx + Ky) dt <= 1/2 here.
    let mut sp = base();
    sp.kx = 1.0;
    sp.ky = 1.0;
    let model = Model::new(sp).unwrap();
    let e = Simulation::new(
        model,
        Scheme {
            dt: Some(0.3),
            ..Scheme::default()
        },
        c0,
    )
    .unwrap_err();
    assert!(e.to_string().contains("diffusion number"), "{e}");
}

#[test]
fn non_finite_initial_values_are_refused() {
    let model = Model::new(base()).unwrap();
    let mut c0 = model.zero_field();
    c0[[4, 3]] = f64::NAN; // cell (i, j) = (3, 4): arrays are in (y, x) order
    let e = Simulation::new(model, Scheme::default(), c0).unwrap_err().to_string();
    assert!(e.contains("(3, 4)"), "{e}");
}

#[test]
fn initial_fields_of_another_shape_are_refused_naming_both_shapes() {
    let model = Model::new(base()).unwrap();
    let (ny, nx) = model.grid.shape();
    // (nx, ny) is the transposed shape a caller thinking in (x, y) order would pass.
    let e = Simulation::new(model, Scheme::default(), ndarray::Array2::<f64>::zeros((nx, ny))).unwrap_err();
    assert!(matches!(e, ModelError::InvalidValue { .. }), "{e}");
    let e = e.to_string();
    assert!(
        e.contains("initial field") && e.contains(&format!("[{nx}, {ny}]")) && e.contains(&format!("({ny}, {nx})")),
        "{e}"
    );
}
