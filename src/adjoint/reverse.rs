//! The continuous adjoint, discretised with the run's own scheme: the forward solver on the
//! reversed problem.
//!
//! For a discharge that satisfies continuity (`h_t + div q = 0`), the adjoint of
//! `(h c)_t + div(q c) = div(h K grad c) - lambda h c + S` with the dose
//! `D = int w(t) c_r(t) dt` as the objective is, in reversed time `tau = T - t`,
//! `(h phi)_tau + div(q' phi) = div(h K grad phi) - lambda h phi + w delta_r / A_r` with
//! `q'(tau) = -q(T - tau)` and `h(T - tau)`: a forward transport of the same form, with the
//! receptor's weight as a source of unit rate in the receptor's cell, and `D = m phi(x0, t0)`
//! for a mass `m` released at `x0` at `t0`. The side conditions follow from the boundary terms:
//! where the forward flow enters through an open side the adjoint is carried out, where it
//! leaves the adjoint enters with value zero (absorbing), and a fixed side's value becomes
//! zero; walls and periodic pairs stay. So every open or fixed side keeps its kind with value
//! zero, and the flow is [`crate::flow::Flow::reversed`].

use super::{AdjointError, Step, Window};
use crate::model::Model;
use crate::ops::boundary::{Boundaries, SideKind};
use crate::ops::sources::{Release, Source, SourceSpec};
use crate::step::{Scheme, Simulation};
use ndarray::Array3;

/// The adjoint problem's model: reversed flow about `end`, side values zero, the receptor's
/// weight as its one source.
pub(crate) fn reversed_model(
    model: &Model,
    receptor: (f64, f64),
    window: Window,
    end: f64,
) -> Result<Model, crate::ModelError> {
    let mut rm = homogeneous(model);
    rm.flow = model.flow.reversed(end);
    let release = match window {
        Window::Span { start, end: stop } => Release::Continuous {
            rate: 1.0,
            start: end - stop,
            stop: end - start,
        },
        Window::At(_) => Release::Instant { mass: 1.0, at: 0.0 },
    };
    let spec = SourceSpec {
        name: "receptor weight".into(),
        at: receptor,
        release,
        spread: None,
    };
    rm.sources = vec![Source::new(&spec, "receptor", &rm.grid, &rm.mask)?];
    Ok(rm)
}

/// `model` without its sources and with every open or fixed side's value zero: the linear part
/// of the forward step, whose derivative with respect to a release the maps are.
pub fn homogeneous(model: &Model) -> Model {
    let mut m = model.clone();
    let zero = |k: SideKind| match k {
        SideKind::Open { .. } => SideKind::Open { value: 0.0 },
        SideKind::Fixed { .. } => SideKind::Fixed { value: 0.0 },
        other => other,
    };
    let b = model.boundaries;
    m.boundaries = Boundaries {
        west: zero(b.west),
        east: zero(b.east),
        south: zero(b.south),
        north: zero(b.north),
    };
    m.sources.clear();
    m
}

/// Marches the reversed problem over the forward steps `steps` (taken in reverse order) and
/// stores the field at each release time (ascending in `releases`) into `maps` (land NaN).
pub(crate) fn march(
    model: &Model,
    scheme: &Scheme,
    receptor: (f64, f64),
    window: Window,
    steps: &[Step],
    releases: &[f64],
    maps: &mut Array3<f64>,
) -> Result<(), AdjointError> {
    let end = steps.last().map_or(0.0, |s| s.t1);
    let rm = reversed_model(model, receptor, window, end)?;
    let zero = rm.zero_field();
    let mut sim = Simulation::new(rm, *scheme, &zero)?;
    let mut next = releases.len();
    for s in steps.iter().rev() {
        sim.state.t = end - s.t1;
        sim.step(s.dt)?;
        while next > 0 && releases[next - 1] == s.t {
            next -= 1;
            let g = &sim.model.grid;
            let view = g.interior_view(&sim.state.c);
            let mut map = maps.index_axis_mut(ndarray::Axis(0), next);
            for ((j, i), v) in map.indexed_iter_mut() {
                *v = if sim.model.mask.is_wet(i, j) {
                    view[[j, i]]
                } else {
                    f64::NAN
                };
            }
        }
    }
    Ok(())
}
