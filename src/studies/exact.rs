//! Exact solutions a scenario may have, for judging schemes without a reference run.
//!
//! - Solid-body rotation (Zalesak 1979) and the time-reversing swirl (LeVeque 1996) with no
//!   diffusion, decay, sources, land or tide, run for a whole number of periods: the exact final
//!   field is the initial one.
//! - A uniform current (no tide, no land) carrying a Gaussian initial field, or one instantaneous
//!   release at t = 0 spread as a Gaussian, with constant diffusivity and first-order decay: the
//!   anisotropic Gaussian puff of Crank (1975, The Mathematics of Diffusion, §3.3 instantaneous
//!   point source, in a moving frame and with decay). An initial variance s0^2 is the variance
//!   a point release reaches after t0 = s0^2/(2K), so with `sx^2 = s0^2 + 2 Kx t`,
//!   `c = M/(2 pi h sx sy) exp(-(x - x0 - u t)^2/(2 sx^2) - (y - y0 - v t)^2/(2 sy^2) - lambda t)`.
//!   Walls parallel to the current are mirrors (method of images, Crank 1975 §3.3: one image per
//!   wall); periodic pairs add shifted copies; open or fixed sides (zero outside value) count as
//!   far only if the plume's centre stays in the domain and the exact field along them stays
//!   below 1e-4 of its peak at 65 evenly spaced times over the run; otherwise the scenario has
//!   no exact solution here.

use crate::flow::FlowKind;
use crate::grid::Grid;
use crate::initial::Initial;
use crate::ops::boundary::{Side, SideKind};
use crate::ops::sources::Release;
use crate::scenario::Scenario;
use ndarray::{Array2, ArrayView2};
use std::f64::consts::PI;

/// Fraction of the peak the exact puff may reach along an open side and still count as far.
pub const FAR_FIELD: f64 = 1e-4;

/// An exact solution of a scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct ExactSolution {
    /// What it is, in words.
    pub description: String,
    /// The published source of the solution.
    pub source: &'static str,
    kind: Kind,
}

#[derive(Debug, Clone, PartialEq)]
enum Kind {
    /// The initial field returns.
    Initial(Initial),
    /// The Gaussian puff.
    Puff(Puff),
}

/// The Gaussian puff's parameters.
#[derive(Debug, Clone, PartialEq)]
struct Puff {
    /// Mass per unit depth (integral of c over the plane).
    m: f64,
    centre: (f64, f64),
    var0: (f64, f64),
    vel: (f64, f64),
    k: (f64, f64),
    lambda: f64,
    /// Image centres along x and y: (offset rule) as (sign, shift): x' = sign x + shift.
    images_x: Vec<(f64, f64)>,
    images_y: Vec<(f64, f64)>,
}

impl Puff {
    fn one_axis(images: &[(f64, f64)], pos: f64, centre: f64, var: f64) -> f64 {
        images
            .iter()
            .map(|&(sign, shift)| {
                let d = pos - (sign * centre + shift);
                (-d * d / (2.0 * var)).exp()
            })
            .sum()
    }

    fn at(&self, x: f64, y: f64, t: f64) -> f64 {
        let vx = self.var0.0 + 2.0 * self.k.0 * t;
        let vy = self.var0.1 + 2.0 * self.k.1 * t;
        let cx = self.centre.0 + self.vel.0 * t;
        let cy = self.centre.1 + self.vel.1 * t;
        self.m / (2.0 * PI * (vx * vy).sqrt())
            * (-self.lambda * t).exp()
            * Self::one_axis(&self.images_x, x, cx, vx)
            * Self::one_axis(&self.images_y, y, cy, vy)
    }

    fn peak(&self, t: f64) -> f64 {
        let vx = self.var0.0 + 2.0 * self.k.0 * t;
        let vy = self.var0.1 + 2.0 * self.k.1 * t;
        self.m / (2.0 * PI * (vx * vy).sqrt()) * (-self.lambda * t).exp()
    }
}

impl ExactSolution {
    /// The exact field at time `t` at the cell centres of `grid`, shape (ny, nx), (y, x)
    /// order, row 0 south (0 where `wet` is false).
    pub fn field(&self, grid: &Grid, wet: ArrayView2<bool>, t: f64) -> Array2<f64> {
        Array2::from_shape_fn(grid.shape(), |(j, i)| {
            if !wet[[j, i]] {
                return 0.0;
            }
            let (x, y) = grid.centre(i, j);
            match &self.kind {
                Kind::Initial(init) => init.value_at(x, y),
                Kind::Puff(p) => p.at(x, y, t),
            }
        })
    }
}

/// Whether `t` is a whole number (at least 1) of `period`s.
fn whole_periods(t: f64, period: f64) -> bool {
    let n = t / period;
    n >= 1.0 - 1e-9 && (n - n.round()).abs() < 1e-9
}

/// The exact solution of `scn` at its end time, if it has one of the kinds above.
pub fn exact_solution(scn: &Scenario) -> Option<ExactSolution> {
    let m = &scn.model;
    let land = m.mask.as_ref().is_some_and(|k| k.has_land());
    if land || m.flow.tide.is_some() {
        return None;
    }
    match m.flow.kind {
        FlowKind::Rotation { period, .. } | FlowKind::Swirl { period, .. } => {
            let still = m.kx == 0.0 && m.ky == 0.0 && m.decay_rate == 0.0 && m.sources.is_empty();
            if !still || !whole_periods(scn.run.end, period) {
                return None;
            }
            let (what, source) = match m.flow.kind {
                FlowKind::Rotation { .. } => (
                    "solid-body rotation",
                    "Zalesak (1979), J. Comput. Phys. 31, 335-362: rotation test",
                ),
                _ => (
                    "time-reversing swirl",
                    "LeVeque (1996), SIAM J. Numer. Anal. 33, 627-665: swirling deformation",
                ),
            };
            Some(ExactSolution {
                description: format!(
                    "exact: the initial field, returned after {} whole period(s) of {what}",
                    (scn.run.end / period).round()
                ),
                source,
                kind: Kind::Initial(scn.initial),
            })
        }
        FlowKind::Uniform { u, v } => puff(scn, u, v).map(|p| ExactSolution {
            description: "exact: the anisotropic Gaussian puff in a uniform current with diffusion and decay".into(),
            source: "Crank (1975), The Mathematics of Diffusion, 2nd ed., §3.3 (instantaneous source)",
            kind: Kind::Puff(p),
        }),
        _ => None,
    }
}

/// The puff of `scn`, if it is one.
fn puff(scn: &Scenario, u: f64, v: f64) -> Option<Puff> {
    let m = &scn.model;
    let (mass, centre, var0) = match (scn.initial, m.sources.as_slice()) {
        (Initial::Gaussian { centre, sigma, peak }, []) => (peak * 2.0 * PI * sigma * sigma, centre, sigma * sigma),
        (Initial::Zero, [src]) => match (src.release, src.spread) {
            (Release::Instant { mass, at }, Some(s)) if at <= 0.0 => (mass / m.depth.uniform()?, src.at, s * s),
            _ => return None,
        },
        _ => return None,
    };
    let g = &m.grid;
    let b = &m.boundaries;
    let axis = |lo: Side, hi: Side, x0: f64, len: f64, normal: f64| -> Option<Vec<(f64, f64)>> {
        let mut im = vec![(1.0, 0.0)];
        match (b.get(lo), b.get(hi)) {
            (SideKind::Periodic, _) => {
                for k in [-2.0, -1.0, 1.0, 2.0] {
                    im.push((1.0, k * len));
                }
                return Some(im);
            }
            (a, c) => {
                for (kind, wall_at) in [(a, x0), (c, x0 + len)] {
                    match kind {
                        SideKind::Wall if normal == 0.0 => im.push((-1.0, 2.0 * wall_at)),
                        SideKind::Wall => return None,
                        SideKind::Open { value } | SideKind::Fixed { value } if value == 0.0 => {}
                        _ => return None,
                    }
                }
            }
        }
        Some(im)
    };
    let p = Puff {
        m: mass,
        centre,
        var0: (var0, var0),
        vel: (u, v),
        k: (m.kx, m.ky),
        lambda: m.decay_rate,
        images_x: axis(Side::West, Side::East, g.x0, g.lx(), u)?,
        images_y: axis(Side::South, Side::North, g.y0, g.ly(), v)?,
    };
    // The centre must stay in the domain along axes that are not periodic, and open sides must
    // be far from the plume (checked at 65 times over the run).
    let (cx, cy) = (centre.0 + u * scn.run.end, centre.1 + v * scn.run.end);
    let inside_x = b.periodic_x() || (cx > g.x0 && cx < g.x0 + g.lx());
    let inside_y = b.periodic_y() || (cy > g.y0 && cy < g.y0 + g.ly());
    if !(inside_x && inside_y) {
        return None;
    }
    let end = scn.run.end;
    for t in (0..=64).map(|k| end * f64::from(k) / 64.0) {
        let lim = FAR_FIELD * p.peak(t);
        for side in Side::ALL {
            if matches!(b.get(side), SideKind::Wall | SideKind::Periodic) {
                continue;
            }
            let near = match side {
                Side::West => g.xs().first().copied().map(|x| (x, None)),
                Side::East => g.xs().last().copied().map(|x| (x, None)),
                Side::South => g.ys().first().copied().map(|y| (y, Some(()))),
                Side::North => g.ys().last().copied().map(|y| (y, Some(()))),
            }?;
            let worst = match near {
                (x, None) => g.ys().into_iter().map(|y| p.at(x, y, t)).fold(0.0, f64::max),
                (y, Some(())) => g.xs().into_iter().map(|x| p.at(x, y, t)).fold(0.0, f64::max),
            };
            if worst > lim {
                return None;
            }
        }
    }
    Some(p)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    #[test]
    fn shipped_examples_have_the_expected_exact_solutions() {
        let load = |name: &str, sets: &[&str]| {
            let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
            crate::scenario::parse(crate::scenario::example(name).unwrap(), Path::new("x.toml"), &sets).unwrap()
        };
        assert!(exact_solution(&load("rotating-cone", &[])).is_some());
        assert!(exact_solution(&load("rotating-cone", &["run.end=300"])).is_none());
        assert!(exact_solution(&load("swirl", &[])).is_some());
        // The beach puff: the south wall is a mirror, the open sides are far.
        let puff = load("gaussian-puff", &[]);
        let e = exact_solution(&puff).expect("puff is exact");
        let g = puff.model.grid;
        let wet = Array2::from_elem(g.shape(), true);
        // The exact field holds the released mass (per unit depth) times the decay factor.
        let f = e.field(&g, wet.view(), 3600.0);
        let total: f64 = f.iter().sum::<f64>() * g.cell_area() * puff.model.depth.uniform().unwrap_or(1.0);
        let expect = 1.0e13 * (-puff.model.decay_rate * 3600.0).exp();
        assert!((total / expect - 1.0).abs() < 1e-3, "{total:e} vs {expect:e}");
        // A receptor-free run to 20 h takes the plume out through the east side: no longer exact.
        assert!(exact_solution(&load("gaussian-puff", &["run.end=72000"])).is_none());
    }
}
