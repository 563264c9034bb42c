//! Potential flow on the wet cells: discharges through openings spread into the basin, and the
//! projection of a divergent field onto a divergence-free one around land.
//!
//! Both solve `div(h grad phi) = s` with the 5-point operator of [`crate::solve::Stencil5`] and
//! multigrid-preconditioned conjugate gradients. The face discharge (m3/s, positive along +x or
//! +y) between cells P and N is `T (phi_P - phi_N)`, `T = h_f dy/dx` on x-faces and
//! `h_f dx/dy` on y-faces. A solve leaves a residual at the solver tolerance; a last pass over
//! a spanning tree of each wet region moves that residual along tree faces to the region's root
//! (an open side face where there is one), so every cell's balance holds to round-off
//! whatever the tolerance.

use crate::error::ModelError;
use crate::grid::{Grid, Mask};
use crate::ops::boundary::{Boundaries, Side};
use crate::solve::{Solver, SolverParams, Stencil5};
use std::collections::VecDeque;

/// Relative residual the potential solve aims at.
const TARGET: f64 = 1e-12;

/// Relative residual of a stalled potential solve that is still kept (the spanning-tree pass
/// then balances every cell exactly; the field differs from the exact potential flow by about
/// this fraction).
const ACCEPT: f64 = 1e-8;

/// Discharges through every face, m3/s, positive along +x / +y. x-face (i, j) for i in
/// 0..=nx is the west face of cell (i, j); y-face (i, j) for j in 0..=ny the south face. With
/// periodic sides the last face of a line is the first (only index 0 is used).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Discharges {
    pub nx: usize,
    pub ny: usize,
    pub x: Vec<f64>,
    pub y: Vec<f64>,
}

impl Discharges {
    pub fn zeros(nx: usize, ny: usize) -> Self {
        Self {
            nx,
            ny,
            x: vec![0.0; (nx + 1) * ny],
            y: vec![0.0; nx * (ny + 1)],
        }
    }

    #[inline]
    pub fn xi(&self, i: usize, j: usize) -> usize {
        j * (self.nx + 1) + i
    }

    #[inline]
    pub fn yi(&self, i: usize, j: usize) -> usize {
        j * self.nx + i
    }
}

/// A cell's link to one neighbour: the neighbour's cell index, whether the face is along x,
/// the face index, and +1 when the face's positive direction points out of the cell.
#[derive(Debug, Clone, Copy)]
struct Link {
    nb: usize,
    along_x: bool,
    face: usize,
    out: f64,
}

/// The wet-cell graph of a grid: neighbours with wrap for periodic pairs, face conductances.
pub(crate) struct Net<'a> {
    grid: &'a Grid,
    mask: &'a Mask,
    px: bool,
    py: bool,
    /// Conductance `h_f dy/dx` per x-face and `h_f dx/dy` per y-face (layout of [`Discharges`]).
    tx: Vec<f64>,
    ty: Vec<f64>,
}

impl<'a> Net<'a> {
    /// The graph with face depths `hx`, `hy` (padded layout of [`Grid::idx`]).
    pub fn new(grid: &'a Grid, mask: &'a Mask, b: &Boundaries, hx: &[f64], hy: &[f64]) -> Self {
        let (nx, ny) = (grid.nx, grid.ny);
        let z = Discharges::zeros(nx, ny);
        let mut tx = z.x;
        let mut ty = z.y;
        for j in 0..ny {
            for i in 0..=nx {
                tx[j * (nx + 1) + i] = hx[grid.idx(i as isize, j as isize)] * grid.dy / grid.dx;
            }
        }
        for j in 0..=ny {
            for i in 0..nx {
                ty[j * nx + i] = hy[grid.idx(i as isize, j as isize)] * grid.dx / grid.dy;
            }
        }
        Self {
            grid,
            mask,
            px: b.periodic_x(),
            py: b.periodic_y(),
            tx,
            ty,
        }
    }

    fn wet(&self, k: usize) -> bool {
        self.mask.as_slice()[k]
    }

    /// The wet neighbours of wet cell `k` (up to four).
    fn links(&self, k: usize) -> impl Iterator<Item = Link> + '_ {
        let (nx, ny) = (self.grid.nx, self.grid.ny);
        let (i, j) = (k % nx, k / nx);
        let xi = |i: usize, j: usize| j * (nx + 1) + i;
        let yi = |i: usize, j: usize| j * nx + i;
        let mut out = [None; 4];
        if i > 0 {
            out[0] = Some(Link {
                nb: k - 1,
                along_x: true,
                face: xi(i, j),
                out: -1.0,
            });
        } else if self.px && nx > 1 {
            out[0] = Some(Link {
                nb: k + nx - 1,
                along_x: true,
                face: xi(0, j),
                out: -1.0,
            });
        }
        if i + 1 < nx {
            out[1] = Some(Link {
                nb: k + 1,
                along_x: true,
                face: xi(i + 1, j),
                out: 1.0,
            });
        } else if self.px && nx > 1 {
            out[1] = Some(Link {
                nb: k + 1 - nx,
                along_x: true,
                face: xi(0, j),
                out: 1.0,
            });
        }
        if j > 0 {
            out[2] = Some(Link {
                nb: k - nx,
                along_x: false,
                face: yi(i, j),
                out: -1.0,
            });
        } else if self.py && ny > 1 {
            out[2] = Some(Link {
                nb: k + nx * (ny - 1),
                along_x: false,
                face: yi(i, 0),
                out: -1.0,
            });
        }
        if j + 1 < ny {
            out[3] = Some(Link {
                nb: k + nx,
                along_x: false,
                face: yi(i, j + 1),
                out: 1.0,
            });
        } else if self.py && ny > 1 {
            out[3] = Some(Link {
                nb: k - nx * (ny - 1),
                along_x: false,
                face: yi(i, 0),
                out: 1.0,
            });
        }
        out.into_iter().flatten().filter(move |l| self.wet(l.nb))
    }

    /// Faces of wet cell `k` on non-periodic sides listed in `open` (side, along x, face index,
    /// outward sign).
    fn side_faces(&self, k: usize, open: [bool; 4]) -> impl Iterator<Item = (Side, bool, usize, f64)> + '_ {
        let (nx, ny) = (self.grid.nx, self.grid.ny);
        let (i, j) = (k % nx, k / nx);
        let mut out = [None; 4];
        if i == 0 && !self.px && open[0] {
            out[0] = Some((Side::West, true, j * (nx + 1), -1.0));
        }
        if i + 1 == nx && !self.px && open[1] {
            out[1] = Some((Side::East, true, j * (nx + 1) + nx, 1.0));
        }
        if j == 0 && !self.py && open[2] {
            out[2] = Some((Side::South, false, i, -1.0));
        }
        if j + 1 == ny && !self.py && open[3] {
            out[3] = Some((Side::North, false, ny * nx + i, 1.0));
        }
        out.into_iter().flatten()
    }

    fn cond(&self, along_x: bool, face: usize) -> f64 {
        if along_x {
            self.tx[face]
        } else {
            self.ty[face]
        }
    }

    /// The cell beside side face `face` (an x-face when `along_x`).
    pub fn cell_of(&self, face: usize, along_x: bool) -> usize {
        let (nx, ny) = (self.grid.nx, self.grid.ny);
        if along_x {
            let (i, j) = (face % (nx + 1), face / (nx + 1));
            j * nx + i.min(nx - 1)
        } else {
            let (i, j) = (face % nx, face / nx);
            j.min(ny - 1) * nx + i
        }
    }

    /// Net discharge out of cell `k`.
    pub fn outflow(&self, q: &Discharges, k: usize) -> f64 {
        let (nx, ny) = (self.grid.nx, self.grid.ny);
        let (i, j) = (k % nx, k / nx);
        let e = if self.px && i + 1 == nx {
            q.xi(0, j)
        } else {
            q.xi(i + 1, j)
        };
        let n = if self.py && j + 1 == ny {
            q.yi(i, 0)
        } else {
            q.yi(i, j + 1)
        };
        (q.x[e] - q.x[q.xi(i, j)]) + (q.y[n] - q.y[q.yi(i, j)])
    }

    /// Connected wet regions: a label per cell (`usize::MAX` on land) and the cells of each
    /// region in breadth-first order from its first cell, with each cell's parent link.
    pub fn regions(&self, roots_first: &[usize]) -> Vec<Region> {
        let n = self.grid.cells();
        let mut label = vec![usize::MAX; n];
        let mut regions = Vec::new();
        let starts = roots_first.iter().copied().chain(0..n);
        for s in starts {
            if !self.wet(s) || label[s] != usize::MAX {
                continue;
            }
            let id = regions.len();
            let mut order = vec![s];
            let mut parent = vec![None];
            label[s] = id;
            let mut queue = VecDeque::from([0usize]);
            while let Some(pos) = queue.pop_front() {
                let k = order[pos];
                for l in self.links(k) {
                    if label[l.nb] == usize::MAX {
                        label[l.nb] = id;
                        order.push(l.nb);
                        // The link seen from the child: the same face, outward sign flipped.
                        parent.push(Some(Link {
                            nb: k,
                            along_x: l.along_x,
                            face: l.face,
                            out: -l.out,
                        }));
                        queue.push_back(order.len() - 1);
                    }
                }
            }
            regions.push(Region { order, parent });
        }
        regions
    }

    /// Solves `sum_faces T (phi_P - phi_N) [+ T_b phi_P on `open` sides] = rhs_P` for phi; one
    /// cell of every region without an open side face is pinned to 0 (the rhs must then sum to
    /// zero over the region, which the caller ensures).
    fn solve(&self, rhs: &[f64], open: [bool; 4], regions: &[Region], what: &str) -> Result<Vec<f64>, ModelError> {
        let (nx, ny) = (self.grid.nx, self.grid.ny);
        let n = nx * ny;
        let mut diag = vec![1.0; n];
        let (mut aw, mut ae, mut as_, mut an) = (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        let mut pinned = vec![false; n];
        for r in regions {
            let root = r.order[0];
            if self.side_faces(root, open).next().is_none() {
                pinned[root] = true;
            }
        }
        for k in 0..n {
            if !self.wet(k) {
                continue;
            }
            let mut d = 0.0;
            for l in self.links(k) {
                let t = self.cond(l.along_x, l.face);
                d += t;
                if pinned[k] || pinned[l.nb] {
                    continue;
                }
                let slot = match (l.along_x, l.out > 0.0) {
                    (true, false) => &mut aw,
                    (true, true) => &mut ae,
                    (false, false) => &mut as_,
                    (false, true) => &mut an,
                };
                slot[k] = t;
            }
            for (_, along_x, face, _) in self.side_faces(k, open) {
                d += 2.0 * self.cond(along_x, face);
            }
            diag[k] = if pinned[k] { 1.0 } else { d.max(f64::MIN_POSITIVE) };
        }
        let b: Vec<f64> = (0..n)
            .map(|k| if pinned[k] || !self.wet(k) { 0.0 } else { rhs[k] })
            .collect();
        let land: Vec<bool> = self.mask.as_slice().iter().map(|w| !w).collect();
        let fail = |e: crate::solve::SolveError| {
            crate::error::invalid(what, "the potential-flow solve", format!("solvable ({e})"))
        };
        let a = Stencil5::new(nx, ny, self.px, self.py, diag, aw, ae, as_, an, Some(land)).map_err(fail)?;
        let params = SolverParams {
            rtol: TARGET,
            max_iter: 1000,
            ..SolverParams::default()
        };
        let mut solver = Solver::new(&a, params).map_err(fail)?;
        let mut x = vec![0.0; n];
        if b.iter().any(|&v| v != 0.0) {
            match solver.solve(&a, &b, &mut x) {
                Ok(_) => {}
                // On large grids round-off can stall the iteration a little above the target;
                // `settle` removes what is left exactly, so a near-solution is kept.
                Err(crate::solve::SolveError::NotConverged { relative_residual, .. }) if relative_residual < ACCEPT => {
                }
                Err(e) => return Err(fail(e)),
            }
        }
        Ok(x)
    }

    /// Adds the discharges of potential `phi` (outward `T (phi_P - phi_N)`, and
    /// `T_b phi_P` through open side faces), times `sign`, to `q`.
    fn add_potential(&self, phi: &[f64], open: [bool; 4], sign: f64, q: &mut Discharges) {
        let n = self.grid.cells();
        for k in 0..n {
            if !self.wet(k) {
                continue;
            }
            for l in self.links(k) {
                // Each face once: from the cell behind it (outward sign +1).
                if l.out > 0.0 {
                    let d = sign * self.cond(l.along_x, l.face) * (phi[k] - phi[l.nb]);
                    *face_mut(q, l.along_x, l.face) += d;
                }
            }
            for (_, along_x, face, out) in self.side_faces(k, open) {
                let d = sign * 2.0 * self.cond(along_x, face) * phi[k] * out;
                *face_mut(q, along_x, face) += d;
            }
        }
    }

    /// Moves every cell's imbalance `outflow - target` along the regions' trees to their roots,
    /// and from a root through one of its open side faces when it has one.
    pub fn settle(&self, q: &mut Discharges, target: &[f64], regions: &[Region], open: [bool; 4]) {
        for r in regions {
            for pos in (1..r.order.len()).rev() {
                let k = r.order[pos];
                let l = r.parent[pos].expect("every non-root cell has a parent");
                let e = self.outflow(q, k) - target[k];
                // Lower this cell's outflow by e through the face to its parent.
                *face_mut(q, l.along_x, l.face) -= l.out * e;
            }
            let root = r.order[0];
            if let Some((_, along_x, face, out)) = self.side_faces(root, open).next() {
                let e = self.outflow(q, root) - target[root];
                *face_mut(q, along_x, face) -= out * e;
            }
        }
    }

    /// Largest `|outflow - target|` over wet cells.
    pub fn worst_imbalance(&self, q: &Discharges, target: &[f64]) -> f64 {
        (0..self.grid.cells())
            .filter(|&k| self.wet(k))
            .map(|k| (self.outflow(q, k) - target[k]).abs())
            .fold(0.0, f64::max)
    }

    /// Potential flow whose boundary discharges are `q` on entry (side faces only: positive
    /// into the basin through west/south faces along the axis) and whose cells meet `target`
    /// (net outflow per cell, m3/s). Every region's targets and boundary discharges must
    /// balance.
    pub fn openings_flow(&self, q: &mut Discharges, target: &[f64], what: &str) -> Result<(), ModelError> {
        let regions = self.regions(&[]);
        let closed = [false; 4];
        let rhs: Vec<f64> = (0..self.grid.cells())
            .map(|k| {
                if self.wet(k) {
                    target[k] - self.outflow(q, k)
                } else {
                    0.0
                }
            })
            .collect();
        let phi = self.solve(&rhs, closed, &regions, what)?;
        self.add_potential(&phi, closed, 1.0, q);
        self.settle(q, target, &regions, closed);
        Ok(())
    }

    /// Removes the divergence of `q` by `q - T grad phi` with phi = 0 beyond the `open` sides
    /// (flow may leave or enter there) and no flux through land and walls.
    pub fn project(&self, q: &mut Discharges, open: [bool; 4], what: &str) -> Result<(), ModelError> {
        let n = self.grid.cells();
        // Roots beside an open side where possible, so the last residual leaves the domain.
        let roots: Vec<usize> = (0..n)
            .filter(|&k| self.wet(k) && self.side_faces(k, open).next().is_some())
            .collect();
        let regions = self.regions(&roots);
        let div: Vec<f64> = (0..n)
            .map(|k| if self.wet(k) { self.outflow(q, k) } else { 0.0 })
            .collect();
        let phi = self.solve(&div, open, &regions, what)?;
        self.add_potential(&phi, open, -1.0, q);
        self.settle(q, &vec![0.0; n], &regions, open);
        Ok(())
    }
}

/// A connected wet region: cells in breadth-first order from its root, with each cell's link
/// to its parent (`None` for the root).
pub(crate) struct Region {
    pub order: Vec<usize>,
    parent: Vec<Option<Link>>,
}

fn face_mut(q: &mut Discharges, along_x: bool, face: usize) -> &mut f64 {
    if along_x {
        &mut q.x[face]
    } else {
        &mut q.y[face]
    }
}
