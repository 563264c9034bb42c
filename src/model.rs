//! The validated model: grid and mask, depth, diffusivity, decay, flow, boundaries and sources,
//! ready for a stepper. Built once from a [`ModelSpec`]; every user value is checked here and
//! bad ones come back as a [`ModelError`] naming the quantity.

use crate::error::{non_negative, positive, ModelError};
use crate::flow::{Flow, FlowSpec};
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
    /// Water depth h, m (uniform).
    pub depth: f64,
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
    /// Water depth, m.
    pub depth: f64,
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
        positive("grid.depth", spec.depth)?;
        non_negative("tracer.diffusivity[0]", spec.kx)?;
        non_negative("tracer.diffusivity[1]", spec.ky)?;
        non_negative("tracer.decay_rate", spec.decay_rate)?;
        spec.boundaries.validate()?;
        let flow = Flow::new(spec.flow, &grid, &mask, &spec.boundaries)?;
        let sources = spec
            .sources
            .iter()
            .enumerate()
            .map(|(k, s)| Source::new(s, &format!("source[{k}]"), &grid, &mask))
            .collect::<Result<Vec<_>, _>>()?;
        let wet = padded_wet(&grid, &mask, &spec.boundaries);
        Ok(Self {
            grid,
            mask,
            wet,
            depth: spec.depth,
            kx: spec.kx,
            ky: spec.ky,
            decay_rate: spec.decay_rate,
            flow,
            boundaries: spec.boundaries,
            sources,
        })
    }

    /// Whether any cell is land (selects the masked kernels).
    pub fn has_land(&self) -> bool {
        self.mask.has_land()
    }

    /// Volume of one cell, h dA, m3.
    pub fn cell_volume(&self) -> f64 {
        self.depth * self.grid.cell_area()
    }

    /// Mass in a padded field: sum(c) h dA, compensated.
    pub fn mass(&self, c: &[f64]) -> f64 {
        crate::field::interior_sum(&self.grid, c) * self.cell_volume()
    }

    /// Diffusion rate Kx/dx^2 + Ky/dy^2, 1/s.
    pub fn diffusion_rate(&self) -> f64 {
        diffusion::rate(self.kx, self.ky, self.grid.dx, self.grid.dy)
    }

    /// A zeroed padded field.
    pub fn zero_field(&self) -> Vec<f64> {
        vec![0.0; self.grid.padded_len()]
    }

    /// A padded field from a function of the cell centre (zero on land).
    pub fn field_from(&self, f: impl Fn(f64, f64) -> f64) -> Vec<f64> {
        crate::field::fill_from(&self.grid, &self.mask, f)
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
