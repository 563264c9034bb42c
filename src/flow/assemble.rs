//! Building a [`Flow`] on a grid: analytic fields through their stream functions, openings
//! through the potential solve, the projection of divergent fields, the tidal filling field,
//! and the figures of the [`FlowReport`].

use super::openings::{self, OpeningFaces};
use super::potential::{Discharges, Net};
use super::{from_stream_function, Flow, FlowKind, FlowReport, FlowSpec, DIVERGENCE_TOLERANCE};
use crate::depth::DepthField;
use crate::error::{invalid, ModelError};
use crate::grid::{Grid, Mask};
use crate::ops::boundary::{Boundaries, Side};
use std::f64::consts::PI;

/// The depth the flow is built for.
#[derive(Debug, Clone, Copy)]
pub enum FaceDepth<'a> {
    /// One depth everywhere: face arrays hold velocities.
    Uniform(f64),
    /// A depth field (or a tidal level): face arrays hold transports `h_f u_f`.
    Field(&'a DepthField),
}

impl Flow {
    /// Evaluates `spec` on the grid for a uniform depth of 1 m (velocities on faces).
    pub fn new(spec: FlowSpec, grid: &Grid, mask: &Mask, bnd: &Boundaries) -> Result<Self, ModelError> {
        Self::with_depth(spec, grid, mask, bnd, FaceDepth::Uniform(1.0))
    }

    /// Evaluates `spec` on the grid for `depth`; faces that touch land, and faces on walls, get
    /// zero normal flow. For a periodic pair the last face copies the first so the wrap is exact.
    pub fn with_depth(
        spec: FlowSpec,
        grid: &Grid,
        mask: &Mask,
        bnd: &Boundaries,
        depth: FaceDepth,
    ) -> Result<Self, ModelError> {
        spec.validate()?;
        let n = grid.padded_len();
        let (hx, hy, transport) = match depth {
            FaceDepth::Uniform(h) => (vec![h; n], vec![h; n], false),
            FaceDepth::Field(d) => (d.fx.clone(), d.fy.clone(), true),
        };
        let cell_depth = |i: usize, j: usize| match depth {
            FaceDepth::Uniform(h) => h,
            FaceDepth::Field(d) => d.cell[grid.idx(i as isize, j as isize)],
        };
        let net = Net::new(grid, mask, bnd, &hx, &hy);
        let amplitude = spec.amplitude();
        let mut report = FlowReport {
            area: mask.wet_count() as f64 * grid.cell_area(),
            ..FlowReport::default()
        };
        report.volume = {
            let mut v = crate::field::Neumaier::default();
            for j in 0..grid.ny {
                for i in 0..grid.nx {
                    if mask.is_wet(i, j) {
                        v.add(cell_depth(i, j) * grid.cell_area());
                    }
                }
            }
            v.value()
        };
        let mut u = crate::field::huge_filled(n, 0.0);
        let mut v = crate::field::huge_filled(n, 0.0);
        let mut fill = None;
        let mut records = Vec::new();
        let open = Side::ALL.map(|s| bnd.get(s).passes_flow());
        match &spec.kind {
            FlowKind::Openings(list) => {
                let faces = openings::resolve(list, grid, mask, bnd, &hx, &hy)?;
                let mut q = Discharges::zeros(grid.nx, grid.ny);
                for (o, f) in list.iter().zip(&faces) {
                    f.add_inflow(o.discharge, &mut q);
                }
                let total_in: f64 = list.iter().map(|o| o.discharge.max(0.0)).sum();
                check_balance(&net, &q, list, &faces, total_in)?;
                let zeros = vec![0.0; grid.cells()];
                net.openings_flow(&mut q, &zeros, "flow.opening")?;
                report.discharge = total_in;
                report.imbalance = net.worst_imbalance(&q, &zeros) / total_in.max(f64::MIN_POSITIVE);
                if total_in > 0.0 {
                    report.residence = Some(report.volume / total_in);
                }
                store(grid, bnd, &q, &hx, &hy, transport, &mut u, &mut v);
                if amplitude > 0.0 {
                    let (fq, worst) = filling(grid, mask, &net, list, &faces)?;
                    report.imbalance = report.imbalance.max(worst);
                    report.prism = Some(2.0 * amplitude * report.area);
                    let mut fu = vec![0.0; n];
                    let mut fv = vec![0.0; n];
                    store(grid, bnd, &fq, &hx, &hy, true, &mut fu, &mut fv);
                    fill = Some((fu, fv));
                }
            }
            kind => {
                // Analytic fields, or each record of a file: closed at land and walls,
                // projected when divergent.
                let times: Vec<Option<f64>> = match kind {
                    FlowKind::File(f) if !f.data.is_steady() => f.data.times.iter().map(|&t| Some(t)).collect(),
                    _ => vec![None],
                };
                for t in times {
                    match kind {
                        FlowKind::File(f) => f.data.faces_at(grid, t.unwrap_or(0.0), &mut u, &mut v),
                        _ => analytic(kind, grid, &mut u, &mut v),
                    }
                    close_faces(grid, mask, bnd, &mut u, &mut v);
                    let mut q = discharges(grid, &u, &v, &hx, &hy);
                    let largest = q.x.iter().chain(&q.y).fold(0.0f64, |a, d| a.max(d.abs()));
                    let zeros = vec![0.0; grid.cells()];
                    let worst = net.worst_imbalance(&q, &zeros);
                    let divergence = if largest > 0.0 { worst / largest } else { 0.0 };
                    report.divergence = report.divergence.max(divergence);
                    if spec.project && divergence > DIVERGENCE_TOLERANCE {
                        net.project(&mut q, open, "flow.project")?;
                        report.projected = true;
                        report.imbalance = report.imbalance.max(net.worst_imbalance(&q, &zeros) / largest);
                        store(grid, bnd, &q, &hx, &hy, transport, &mut u, &mut v);
                    } else {
                        report.imbalance = report.imbalance.max(divergence);
                        if transport {
                            store(grid, bnd, &q, &hx, &hy, true, &mut u, &mut v);
                        }
                    }
                    if let Some(t) = t {
                        records.push((t, u.clone(), v.clone()));
                    }
                }
                if let Some((_, u0, v0)) = records.first() {
                    u.copy_from_slice(u0);
                    v.copy_from_slice(v0);
                }
            }
        }
        let rate_max = spec.tide.map_or(0.0, |t| t.peak_rate());
        let fields: Vec<(&[f64], &[f64])> = if records.is_empty() {
            vec![(&u, &v)]
        } else {
            records.iter().map(|(_, u, v)| (u.as_slice(), v.as_slice())).collect()
        };
        let (mut smin, mut smax, mut crate_, mut div) = (f64::INFINITY, 0.0f64, 0.0f64, 0.0f64);
        for (u, v) in fields {
            let f = Fields {
                u,
                v,
                fill: fill.as_ref(),
                hx: &hx,
                hy: &hy,
                transport,
                amplitude,
                rate_max,
            };
            let (a, b, c, d) = f.rates(grid, mask, &cell_depth);
            (smin, smax, crate_, div) = (smin.min(a), smax.max(b), crate_.max(c), div.max(d));
        }
        report.speed = if smin.is_finite() { (smin, smax) } else { (0.0, 0.0) };
        Ok(Self {
            u,
            v,
            fill,
            records,
            reverse: None,
            transport,
            spec,
            max_divergence: div,
            courant_rate: crate_,
            report,
        })
    }
}

/// Fills `u`, `v` (velocities, padded) with an analytic kind.
fn analytic(kind: &FlowKind, grid: &Grid, u: &mut [f64], v: &mut [f64]) {
    let (nx, ny) = (grid.nx, grid.ny);
    match *kind {
        FlowKind::Uniform { u: u0, v: v0 } => {
            for j in 0..ny as isize {
                for i in 0..=nx as isize {
                    u[grid.idx(i, j)] = u0;
                }
            }
            for j in 0..=ny as isize {
                for i in 0..nx as isize {
                    v[grid.idx(i, j)] = v0;
                }
            }
        }
        FlowKind::Rotation { centre, period } => {
            let w = 2.0 * PI / period;
            let psi = |i: usize, j: usize| {
                let x = grid.x0 + i as f64 * grid.dx - centre.0;
                let y = grid.y0 + j as f64 * grid.dy - centre.1;
                -0.5 * w * (x * x + y * y)
            };
            from_stream_function(grid, u, v, psi);
        }
        FlowKind::Swirl { speed, .. } | FlowKind::Vortex { speed } => {
            // sin(pi k / n) evaluated on min(k, n - k) so both ends are exactly zero.
            let s2 = |k: usize, n: usize| {
                let m = k.min(n - k) as f64 / n as f64;
                let s = (PI * m).sin();
                s * s
            };
            let sx: Vec<f64> = (0..=nx).map(|i| s2(i, nx)).collect();
            let sy: Vec<f64> = (0..=ny).map(|j| s2(j, ny)).collect();
            let a = speed * grid.ly() / PI;
            from_stream_function(grid, u, v, |i, j| a * sx[i] * sy[j]);
        }
        FlowKind::Openings(_) | FlowKind::File(_) => {}
    }
}

/// Periodic pairs copy the first face to the last; faces on walls and beside land are zeroed.
fn close_faces(grid: &Grid, mask: &Mask, bnd: &Boundaries, u: &mut [f64], v: &mut [f64]) {
    let (nx, ny) = (grid.nx, grid.ny);
    if bnd.periodic_x() {
        for j in 0..ny as isize {
            u[grid.idx(nx as isize, j)] = u[grid.idx(0, j)];
        }
    }
    if bnd.periodic_y() {
        for i in 0..nx as isize {
            v[grid.idx(i, ny as isize)] = v[grid.idx(i, 0)];
        }
    }
    let wet = |i: isize, j: isize, side_open: bool| -> bool {
        if i < 0 || j < 0 || i >= nx as isize || j >= ny as isize {
            side_open
        } else {
            mask.is_wet(i as usize, j as usize)
        }
    };
    for j in 0..ny as isize {
        for i in 0..=nx as isize {
            let side = if i == 0 { bnd.west } else { bnd.east };
            let (a, b) = if bnd.periodic_x() && (i == 0 || i == nx as isize) {
                (
                    wet((i - 1).rem_euclid(nx as isize), j, true),
                    wet(i.rem_euclid(nx as isize), j, true),
                )
            } else {
                (wet(i - 1, j, side.passes_flow()), wet(i, j, side.passes_flow()))
            };
            if !(a && b) {
                u[grid.idx(i, j)] = 0.0;
            }
        }
    }
    for j in 0..=ny as isize {
        for i in 0..nx as isize {
            let side = if j == 0 { bnd.south } else { bnd.north };
            let (a, b) = if bnd.periodic_y() && (j == 0 || j == ny as isize) {
                (
                    wet(i, (j - 1).rem_euclid(ny as isize), true),
                    wet(i, j.rem_euclid(ny as isize), true),
                )
            } else {
                (wet(i, j - 1, side.passes_flow()), wet(i, j, side.passes_flow()))
            };
            if !(a && b) {
                v[grid.idx(i, j)] = 0.0;
            }
        }
    }
}

/// Face discharges `u h_f dy` and `v h_f dx` of padded face velocities.
fn discharges(grid: &Grid, u: &[f64], v: &[f64], hx: &[f64], hy: &[f64]) -> Discharges {
    let mut q = Discharges::zeros(grid.nx, grid.ny);
    for j in 0..grid.ny {
        for i in 0..=grid.nx {
            let p = grid.idx(i as isize, j as isize);
            let k = q.xi(i, j);
            q.x[k] = u[p] * hx[p] * grid.dy;
        }
    }
    for j in 0..=grid.ny {
        for i in 0..grid.nx {
            let p = grid.idx(i as isize, j as isize);
            let k = q.yi(i, j);
            q.y[k] = v[p] * hy[p] * grid.dx;
        }
    }
    q
}

/// Writes discharges back as transports (`transport`) or velocities into padded face arrays;
/// periodic pairs repeat the first face at the far end.
#[allow(clippy::too_many_arguments)]
fn store(
    grid: &Grid,
    bnd: &Boundaries,
    q: &Discharges,
    hx: &[f64],
    hy: &[f64],
    transport: bool,
    u: &mut [f64],
    v: &mut [f64],
) {
    let (nx, ny) = (grid.nx, grid.ny);
    for j in 0..ny {
        for i in 0..=nx {
            let src = if bnd.periodic_x() && i == nx { 0 } else { i };
            let p = grid.idx(i as isize, j as isize);
            let t = q.x[q.xi(src, j)] / grid.dy;
            u[p] = if transport {
                t
            } else if hx[p] > 0.0 {
                t / hx[p]
            } else {
                0.0
            };
        }
    }
    for j in 0..=ny {
        for i in 0..nx {
            let src = if bnd.periodic_y() && j == ny { 0 } else { j };
            let p = grid.idx(i as isize, j as isize);
            let t = q.y[q.yi(i, src)] / grid.dx;
            v[p] = if transport {
                t
            } else if hy[p] > 0.0 {
                t / hy[p]
            } else {
                0.0
            };
        }
    }
}

/// The openings' discharges must balance in every connected body of water.
fn check_balance(
    net: &Net,
    q: &Discharges,
    list: &[super::Opening],
    faces: &[OpeningFaces],
    total_in: f64,
) -> Result<(), ModelError> {
    let regions = net.regions(&[]);
    let scale = list.iter().map(|o| o.discharge.abs()).sum::<f64>();
    for r in &regions {
        let net_in: f64 = -r.order.iter().map(|&k| net.outflow(q, k)).sum::<f64>();
        if net_in.abs() > 1e-9 * scale.max(f64::MIN_POSITIVE) {
            let names: Vec<String> = list
                .iter()
                .zip(faces)
                .filter(|(_, f)| {
                    f.faces
                        .iter()
                        .any(|&(face, x, _)| r.order.contains(&net.cell_of(face, x)))
                })
                .map(|(o, _)| format!("{} ({} m3/s)", o.name, crate::diagnostics::advice::sig(o.discharge, 4)))
                .collect();
            return Err(invalid(
                "flow.opening[].discharge",
                format!("a net inflow of {} m3/s", crate::diagnostics::advice::sig(net_in, 4)),
                format!(
                    "discharges that balance (inflow = outflow, {} m3/s in total) in each connected body of water; openings there: {}",
                    crate::diagnostics::advice::sig(total_in, 4),
                    names.join(", ")
                ),
            ));
        }
    }
    Ok(())
}

/// The filling field: per unit rate of rise of the level, every wet cell gains `dA` m3/s,
/// brought in through its body of water's openings (by `share`, or in proportion to their
/// cross-sections). Returns the discharges and the worst relative cell imbalance.
fn filling(
    grid: &Grid,
    mask: &Mask,
    net: &Net,
    list: &[super::Opening],
    faces: &[OpeningFaces],
) -> Result<(Discharges, f64), ModelError> {
    let da = grid.cell_area();
    let mut q = Discharges::zeros(grid.nx, grid.ny);
    let target: Vec<f64> = mask.as_slice().iter().map(|&w| if w { -da } else { 0.0 }).collect();
    for r in net.regions(&[]) {
        let area = r.order.len() as f64 * da;
        let mine: Vec<usize> = (0..list.len())
            .filter(|&k| {
                faces[k]
                    .faces
                    .iter()
                    .any(|&(f, x, _)| r.order.contains(&net.cell_of(f, x)))
            })
            .collect();
        if mine.is_empty() {
            let k = r.order[0];
            let (i, j) = (k % grid.nx, k / grid.nx);
            let (x, y) = grid.centre(i, j);
            return Err(invalid(
                "flow.tide.amplitude",
                "a tidal level",
                format!(
                    "water that reaches an opening: the water around cell ({i}, {j}) at ({x:.1}, {y:.1}) m is cut off from every opening, so it cannot fill and drain"
                ),
            ));
        }
        let given: f64 = mine.iter().filter_map(|&k| list[k].share).sum();
        let all_given = mine.iter().all(|&k| list[k].share.is_some());
        if all_given && (given - 1.0).abs() > 1e-6 {
            return Err(invalid(
                "flow.opening[].share",
                given,
                "shares that add up to 1 over the openings of one body of water",
            ));
        }
        if given > 1.0 + 1e-6 {
            return Err(invalid(
                "flow.opening[].share",
                given,
                "shares that add up to at most 1",
            ));
        }
        let rest_area: f64 = mine
            .iter()
            .filter(|&&k| list[k].share.is_none())
            .map(|&k| faces[k].area())
            .sum();
        for &k in &mine {
            let share = match list[k].share {
                Some(s) => s / if all_given { given } else { 1.0 },
                None => (1.0 - given) * faces[k].area() / rest_area,
            };
            faces[k].add_inflow(share * area, &mut q);
        }
    }
    net.openings_flow(&mut q, &target, "flow.tide")?;
    let total = mask.wet_count() as f64 * da;
    let worst = net.worst_imbalance(&q, &target) / total;
    Ok((q, worst))
}

/// One set of face arrays with what their speeds and Courant rate depend on.
struct Fields<'a> {
    u: &'a [f64],
    v: &'a [f64],
    fill: Option<&'a (Vec<f64>, Vec<f64>)>,
    hx: &'a [f64],
    hy: &'a [f64],
    transport: bool,
    amplitude: f64,
    rate_max: f64,
}

impl Fields<'_> {
    /// (smallest and largest cell speed, largest Courant rate, largest divergence) over the
    /// wet cells, at full strength (the filling field at its peak rate, depths at low water).
    fn rates(&self, grid: &Grid, mask: &Mask, cell_depth: &dyn Fn(usize, usize) -> f64) -> (f64, f64, f64, f64) {
        let s = grid.stride();
        let face = |p: usize, x: bool| {
            let (b, f) = if x {
                (self.u, self.fill.map(|f| &f.0))
            } else {
                (self.v, self.fill.map(|f| &f.1))
            };
            b[p].abs() + f.map_or(0.0, |f| self.rate_max * f[p].abs())
        };
        let speed = |p: usize, x: bool| {
            let h = if x { self.hx } else { self.hy };
            if self.transport {
                face(p, x) / (h[p] - self.amplitude).max(f64::MIN_POSITIVE)
            } else {
                face(p, x)
            }
        };
        let (mut smin, mut smax, mut crate_, mut div) = (f64::INFINITY, 0.0f64, 0.0f64, 0.0f64);
        for j in 0..grid.ny {
            for i in 0..grid.nx {
                if !mask.is_wet(i, j) {
                    continue;
                }
                let p = grid.idx(i as isize, j as isize);
                let cu = 0.5 * (speed(p, true) + speed(p + 1, true));
                let cv = 0.5 * (speed(p, false) + speed(p + s, false));
                let sp = cu.hypot(cv);
                smin = smin.min(sp);
                smax = smax.max(sp);
                // Courant rate: outgoing transport over the water column at low water.
                let rate =
                    face(p, true).max(face(p + 1, true)) / grid.dx + face(p, false).max(face(p + s, false)) / grid.dy;
                let h = if self.transport {
                    (cell_depth(i, j) - self.amplitude).max(f64::MIN_POSITIVE)
                } else {
                    1.0
                };
                crate_ = crate_.max(rate / h);
                let d = (self.u[p + 1] - self.u[p]) / grid.dx + (self.v[p + s] - self.v[p]) / grid.dy;
                div = div.max(d.abs() / if self.transport { cell_depth(i, j) } else { 1.0 });
            }
        }
        (smin, smax, crate_, div)
    }
}
