//! The validated model: grid and mask, depth, diffusivity, decay, flow, boundaries and sources,
//! ready for a stepper. Built once from a [`ModelSpec`]; every user value is checked here and
//! bad ones come back as a [`ModelError`] naming the quantity.

use crate::depth::{Depth, DepthField};
use crate::error::{non_negative, ModelError};
use crate::flow::{FaceDepth, Flow, FlowSpec};
use crate::grid::{Grid, Mask, HALO};
use crate::ops::boundary::{Boundaries, SideKind};
use crate::ops::diffusion;
use crate::ops::sources::{Source, SourceSpec};

/// Everything that describes the physics of a run.
#[derive(Debug, Clone)]
pub struct ModelSpec {
    /// The grid.
    pub grid: Grid,
    /// Water/land mask; `None` for all water.
    pub mask: Option<Mask>,
    /// Still-water depth h, m: uniform or per cell.
    pub depth: Depth,
    /// Diffusivity along x, m2/s.
    pub kx: f64,
    /// Diffusivity along y, m2/s.
    pub ky: f64,
    /// First-order decay rate lambda, 1/s.
    pub decay_rate: f64,
    /// The velocity field.
    pub flow: FlowSpec,
    /// Side conditions.
    pub boundaries: Boundaries,
    /// Releases.
    pub sources: Vec<SourceSpec>,
}

/// A model ready to run.
#[derive(Debug, Clone)]
pub struct Model {
    /// The grid.
    pub grid: Grid,
    /// Water/land mask.
    pub mask: Mask,
    /// 1 for water, 0 for land, padded; the halo is 0 beyond walls, wraps for periodic pairs and
    /// is 1 beyond open or fixed sides.
    pub wet: Vec<u8>,
    /// Water depth, m: the uniform depth, or the mean still-water depth of a depth field.
    pub depth: f64,
    /// Per-cell and per-face still-water depths, when the depth varies in space or with a
    /// tidal level (the kernels then carry `h` explicitly; `None`: uniform and steady).
    pub depth_field: Option<DepthField>,
    /// Diffusivity along x, m2/s.
    pub kx: f64,
    /// Diffusivity along y, m2/s.
    pub ky: f64,
    /// Decay rate, 1/s.
    pub decay_rate: f64,
    /// Face velocities.
    pub flow: Flow,
    /// Side conditions.
    pub boundaries: Boundaries,
    /// Resolved sources.
    pub sources: Vec<Source>,
    diffusion_rate: f64,
}

impl Model {
    /// Validates `spec` and resolves it on the grid.
    pub fn new(spec: ModelSpec) -> Result<Self, ModelError> {
        let grid = spec.grid;
        let mask = match spec.mask {
            Some(m) => {
                if m.as_slice().len() != grid.cells() {
                    return Err(crate::error::invalid(
                        "grid.land (cells)",
                        m.as_slice().len(),
                        format!("nx * ny = {}", grid.cells()),
                    ));
                }
                m
            }
            None => Mask::all_water(&grid),
        };
        non_negative("tracer.diffusivity[0]", spec.kx)?;
        non_negative("tracer.diffusivity[1]", spec.ky)?;
        non_negative("tracer.decay_rate", spec.decay_rate)?;
        spec.boundaries.validate()?;
        spec.flow.validate()?;
        let amplitude = spec.flow.amplitude();
        let (depth, depth_field) = match spec.depth.uniform().filter(|_| amplitude == 0.0) {
            Some(h) => (crate::error::positive("grid.depth", h)?, None),
            None => {
                let f = DepthField::new(&spec.depth, &grid, &mask, &spec.boundaries, -amplitude)?;
                let mean = f.volume(&grid, &mask) / (mask.wet_count() as f64 * grid.cell_area());
                (mean, Some(f))
            }
        };
        let faces = match &depth_field {
            Some(f) => FaceDepth::Field(f),
            None => FaceDepth::Uniform(depth),
        };
        let flow = Flow::with_depth(spec.flow, &grid, &mask, &spec.boundaries, faces)?;
        let sources = spec
            .sources
            .iter()
            .enumerate()
            .map(|(k, s)| Source::new(s, &format!("source[{k}]"), &grid, &mask))
            .collect::<Result<Vec<_>, _>>()?;
        let wet = padded_wet(&grid, &mask, &spec.boundaries);
        let diffusion_rate = match &depth_field {
            None => diffusion::rate(spec.kx, spec.ky, grid.dx, grid.dy),
            Some(f) => depth_diffusion_rate(&grid, &mask, f, (spec.kx, spec.ky), -amplitude),
        };
        Ok(Self {
            grid,
            mask,
            wet,
            depth,
            depth_field,
            kx: spec.kx,
            ky: spec.ky,
            decay_rate: spec.decay_rate,
            flow,
            boundaries: spec.boundaries,
            sources,
            diffusion_rate,
        })
    }

    /// Whether any cell is land (selects the masked kernels).
    pub fn has_land(&self) -> bool {
        self.mask.has_land()
    }

    /// Volume of one cell, h dA, m3 (with a depth field: the shallowest cell at low water).
    pub fn cell_volume(&self) -> f64 {
        match &self.depth_field {
            None => self.depth * self.grid.cell_area(),
            Some(f) => (f.range.0 - self.flow.spec().amplitude()) * self.grid.cell_area(),
        }
    }

    /// What a sum of transported values is multiplied by to give mass: `h dA` for a uniform
    /// depth (the kernels sum `c`), `dA` with a depth field (they sum `c h`).
    pub fn mass_factor(&self) -> f64 {
        match &self.depth_field {
            None => self.depth * self.grid.cell_area(),
            Some(_) => self.grid.cell_area(),
        }
    }

    /// What a side flux sum (per unit face length) is multiplied by besides length and time:
    /// the depth for a uniform depth (fluxes are per unit depth), 1 with a depth field (they
    /// are transports already).
    pub fn flux_depth(&self) -> f64 {
        match &self.depth_field {
            None => self.depth,
            Some(_) => 1.0,
        }
    }

    /// Mass in a padded field at time `t`: sum(c h) dA, compensated.
    pub fn mass(&self, c: &[f64], t: f64) -> f64 {
        match &self.depth_field {
            None => crate::field::interior_sum(&self.grid, c) * self.cell_volume(),
            Some(f) => {
                let eta = self.flow.level(t);
                let g = &self.grid;
                let mut acc = crate::field::Neumaier::default();
                for j in 0..g.ny {
                    let q = g.idx(0, j as isize);
                    let row: f64 = c[q..q + g.nx]
                        .iter()
                        .zip(&f.cell[q..q + g.nx])
                        .map(|(c, h)| c * (h + eta))
                        .fold(crate::field::Neumaier::default(), |mut a, x| {
                            a.add(x);
                            a
                        })
                        .value();
                    acc.add(row);
                }
                acc.value() * g.cell_area()
            }
        }
    }

    /// Face velocities (m/s, padded) at full strength for reports and regime maps: the base
    /// field, plus the filling field at the tide's peak rate, over the face depth at low water.
    pub fn face_velocities(&self) -> (Vec<f64>, Vec<f64>) {
        let f = &self.flow;
        let Some(d) = &self.depth_field else {
            return (f.u.clone(), f.v.clone());
        };
        let amp = f.spec().amplitude();
        let rate = f.spec().tide.map_or(0.0, |t| t.peak_rate());
        let (mut fu, mut fv) = (vec![0.0; f.u.len()], vec![0.0; f.v.len()]);
        f.fill_into(&mut fu, &mut fv);
        // The filling adds to the base's magnitude: the peak of either direction.
        let at = |q: f64, fq: f64, h: f64| {
            let peak = q + rate * fq.abs() * if q < 0.0 { -1.0 } else { 1.0 };
            if h - amp > 0.0 {
                peak / (h - amp)
            } else {
                0.0
            }
        };
        let u = (0..fu.len()).map(|k| at(f.u[k], fu[k], d.fx[k])).collect();
        let v = (0..fv.len()).map(|k| at(f.v[k], fv[k], d.fy[k])).collect();
        (u, v)
    }

    /// Adds `mass` released by `source` at time `t` to the padded field `c`.
    pub fn deposit(&self, source: &Source, c: &mut [f64], mass: f64, t: f64) {
        match &self.depth_field {
            None => source.deposit(c, mass, 1.0 / self.cell_volume()),
            Some(f) => {
                let (eta, da) = (self.flow.level(t), self.grid.cell_area());
                source.deposit_with(c, mass, |p| 1.0 / ((f.cell[p] + eta) * da));
            }
        }
    }

    /// Depth of cell (i, j) at time `t`, m.
    pub fn depth_at(&self, i: usize, j: usize, t: f64) -> f64 {
        match &self.depth_field {
            None => self.depth,
            Some(f) => f.cell[self.grid.idx(i as isize, j as isize)] + self.flow.level(t),
        }
    }

    /// Diffusion rate Kx/dx^2 + Ky/dy^2, 1/s; with a depth field the largest over cells of
    /// `(Kx (h_w + h_e)/(2 dx^2) + Ky (h_s + h_n)/(2 dy^2)) / h` at low water, so that the
    /// explicit limit `rate dt <= 1/2` keeps every cell's own coefficient positive.
    pub fn diffusion_rate(&self) -> f64 {
        self.diffusion_rate
    }

    /// A zeroed interior field of shape (ny, nx).
    pub fn zero_field(&self) -> ndarray::Array2<f64> {
        ndarray::Array2::zeros(self.grid.shape())
    }

    /// An interior field of shape (ny, nx) ((y, x) order, row 0 south) from a function of
    /// the cell centre (zero on land).
    pub fn field_from(&self, f: impl Fn(f64, f64) -> f64) -> ndarray::Array2<f64> {
        ndarray::Array2::from_shape_fn(self.grid.shape(), |(j, i)| {
            if self.mask.is_wet(i, j) {
                let (x, y) = self.grid.centre(i, j);
                f(x, y)
            } else {
                0.0
            }
        })
    }
}

/// The padded wet flags with the halo set per side.
fn padded_wet(grid: &Grid, mask: &Mask, b: &Boundaries) -> Vec<u8> {
    let (nx, ny) = (grid.nx as isize, grid.ny as isize);
    let mut wet = vec![0u8; grid.padded_len()];
    let halo = HALO as isize;
    let side_wet = |k: SideKind| u8::from(k != SideKind::Wall);
    for j in -halo..ny + halo {
        for i in -halo..nx + halo {
            let inside_x = (0..nx).contains(&i);
            let inside_y = (0..ny).contains(&j);
            let v = match (inside_x, inside_y) {
                (true, true) => u8::from(mask.is_wet(i as usize, j as usize)),
                (false, true) => {
                    let side = if i < 0 { b.west } else { b.east };
                    if side == SideKind::Periodic {
                        u8::from(mask.is_wet(i.rem_euclid(nx) as usize, j as usize))
                    } else {
                        side_wet(side)
                    }
                }
                (true, false) => {
                    let side = if j < 0 { b.south } else { b.north };
                    if side == SideKind::Periodic {
                        u8::from(mask.is_wet(i as usize, j.rem_euclid(ny) as usize))
                    } else {
                        side_wet(side)
                    }
                }
                (false, false) => 0,
            };
            wet[grid.idx(i, j)] = v;
        }
    }
    wet
}

/// The diffusion rate of a depth field: face depths over the cell depth, at the level `eta`.
fn depth_diffusion_rate(grid: &Grid, mask: &Mask, f: &DepthField, (kx, ky): (f64, f64), eta: f64) -> f64 {
    let s = grid.stride();
    let mut worst = 0.0f64;
    for j in 0..grid.ny {
        for i in 0..grid.nx {
            if !mask.is_wet(i, j) {
                continue;
            }
            let p = grid.idx(i as isize, j as isize);
            let h = f.cell[p] + eta;
            let rx = kx * (f.fx[p] + f.fx[p + 1] + 2.0 * eta) / (2.0 * grid.dx * grid.dx);
            let ry = ky * (f.fy[p] + f.fy[p + s] + 2.0 * eta) / (2.0 * grid.dy * grid.dy);
            worst = worst.max((rx + ry) / h);
        }
    }
    worst
}
