//! The matrix-free fused sweeps of a level with a constant-coupling (compact) operator: the
//! pre-smoothing, residual and restriction in one pass, and the prolongation and
//! post-smoothing in another, row by row through small ring buffers with software prefetch.

use super::Level;
use crate::solve::blocks::{dot_lanes, prefetch_part, MAX_BLOCKS, PREFETCH_ROWS};
use crate::solve::compact::{self, Compact, Consts};
use rayon::prelude::*;

/// Ring rows per block of the fused sweeps with `sweeps` pre- and post-sweeps: three rows for
/// each stage of the up sweep but the last (which writes the result), or for each half-sweep
/// of the down sweep plus one residual row.
pub(super) fn ring_rows(sweeps: usize) -> usize {
    (3 * (4 * sweeps - 2)).max(6 * sweeps + 1)
}

/// Most pre- (and post-) sweeps the fused sweeps run; more use the stored passes.
pub(super) const MAX_FUSED_SWEEPS: usize = 3;

/// Pieces each prefetched row is issued in, one before each of the first pipeline stages.
const PREFETCH_PARTS: usize = 4;

/// Row `t` of a level with `ny` rows, wrapped when periodic in y, `None` outside otherwise.
#[inline(always)]
fn wrap_row(t: isize, ny: usize, py: bool) -> Option<usize> {
    if t >= 0 && (t as usize) < ny {
        Some(t as usize)
    } else if py {
        Some(t.rem_euclid(ny as isize) as usize)
    } else {
        None
    }
}

/// Ring slot of row `t` (three slots per stage).
#[inline(always)]
fn slot(t: isize) -> usize {
    t.rem_euclid(3) as usize
}

/// The data of a fused sweep over one level.
struct Fused<'a> {
    k: &'a Consts,
    rows: &'a [u8],
    flags: &'a [u8],
    inv: &'a [f64; compact::FLAG_VALUES],
    nx: usize,
    ny: usize,
    py: bool,
}

impl Fused<'_> {
    /// The grid row of pipeline row `t` (`None` outside a non-periodic grid).
    #[inline(always)]
    fn row(&self, t: isize) -> Option<usize> {
        wrap_row(t, self.ny, self.py)
    }

    /// Prefetches part `part` of `parts` of row `t` of `v` (and of the flags when `flags`), if
    /// the row exists.
    #[inline(always)]
    fn prefetch(&self, t: isize, v: &[f64], flags: bool, part: usize, parts: usize) {
        if let Some(j) = self.row(t) {
            let nx = self.nx;
            prefetch_part(&v[j * nx..(j + 1) * nx], part, parts);
            if flags {
                prefetch_part(&self.flags[j * nx..(j + 1) * nx], part, parts);
            }
        }
    }

    /// Stage R: the red half-sweep from zero on grid row `j` (right-hand side row `b`) into
    /// `out` (zeros outside the grid).
    #[inline(always)]
    fn red0(&self, j: Option<usize>, b: &[f64], out: &mut [f64]) {
        let nx = self.nx;
        match j {
            Some(j) => {
                let c = j * nx..(j + 1) * nx;
                compact::first_colour_row(self.rows[j], &self.flags[c], self.inv, b, out, j % 2);
            }
            None => out.fill(0.0),
        }
    }

    /// A colour half-sweep on grid row `j` (colour 0 red, 1 black; right-hand side row `b`)
    /// from the rows `xs`, `x`, `xn` (zeros outside the grid).
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn relax(&self, j: Option<usize>, colour: usize, b: &[f64], xs: &[f64], x: &[f64], xn: &[f64], out: &mut [f64]) {
        let nx = self.nx;
        match j {
            Some(j) => {
                let c = j * nx..(j + 1) * nx;
                compact::relax_row(
                    self.k,
                    self.rows[j],
                    &self.flags[c],
                    self.inv,
                    b,
                    xs,
                    x,
                    xn,
                    out,
                    (j + colour) % 2,
                );
            }
            None => out.fill(0.0),
        }
    }
}

/// Ring slot `s` of a stage's three rows.
#[inline(always)]
fn ring_row(ring: &[f64], s: usize, nx: usize) -> &[f64] {
    &ring[s * nx..(s + 1) * nx]
}

/// Row `j` of `v` (`nx` values; empty for `None`).
#[inline(always)]
fn vrow(v: &[f64], j: Option<usize>, nx: usize) -> &[f64] {
    match j {
        Some(j) => &v[j * nx..(j + 1) * nx],
        None => &[],
    }
}

impl Level {
    /// Fused pre-smoothing, residual and restriction (one read of `b`, no fine vector
    /// written): from a zero guess, the red then black half-sweep, then `bc = R (b - A x)`,
    /// row by row through ring buffers; each block recomputes the two rows beyond its ends.
    /// Rows two ahead are prefetched in two parts.
    pub(super) fn down_fused(&mut self, fine: Option<&Compact>, finest: bool, b: &[f64], bc: &mut [f64], ncx: usize) {
        let Level {
            nx,
            ny,
            compact,
            cb,
            ring,
            sweeps,
            ..
        } = self;
        let (nx, ny, cb, sweeps) = (*nx, *ny, *cb, *sweeps);
        let comp = if finest { fine } else { compact.as_ref() };
        let Some(comp) = comp else { return };
        let py = comp_periodic_y(comp, nx, ny);
        let f = Fused {
            k: &comp.k,
            rows: &comp.rows,
            flags: &comp.flags,
            inv: &comp.inv,
            nx,
            ny,
            py,
        };
        let ks = 2 * sweeps as isize;
        let ring_len = ring_rows(sweeps) * nx;
        let work = |blk: usize, out: &mut [f64], ring: &mut [f64]| {
            out.fill(0.0);
            let (a, e) = (
                (2 * blk * cb) as isize,
                ((2 * (blk * cb + out.len() / ncx)).min(ny)) as isize,
            );
            // Stage k < ks: the k-th half-sweep (red from zero, then black, red, ...) of row
            // t - k into ring k; stage ks: residual and restriction of row t - ks.
            let (rings, rest) = ring.split_at_mut(3 * nx * ks as usize);
            let res = &mut rest[..nx];
            let parts = (ks as usize + 1).min(PREFETCH_PARTS);
            for t in a - ks..e + ks {
                let pf = t + PREFETCH_ROWS;
                f.prefetch(pf, b, true, 0, parts);
                let jt = f.row(t);
                f.red0(jt, vrow(b, jt, nx), &mut rings[slot(t) * nx..(slot(t) + 1) * nx]);
                for k in 1..ks {
                    if (k as usize) < parts {
                        f.prefetch(pf, b, true, k as usize, parts);
                    }
                    let u = t - k;
                    if u >= a - ks + k {
                        let ju = f.row(u);
                        let (prev, cur) = rings.split_at_mut(3 * nx * k as usize);
                        let src = &prev[3 * nx * (k as usize - 1)..];
                        f.relax(
                            ju,
                            (k % 2) as usize,
                            vrow(b, ju, nx),
                            ring_row(src, slot(u - 1), nx),
                            ring_row(src, slot(u), nx),
                            ring_row(src, slot(u + 1), nx),
                            &mut cur[slot(u) * nx..(slot(u) + 1) * nx],
                        );
                    }
                }
                if (ks as usize) < parts {
                    f.prefetch(pf, b, true, ks as usize, parts);
                }
                let v = t - ks;
                if v >= a {
                    let j = v as usize;
                    let c = j * nx..(j + 1) * nx;
                    let src = &rings[3 * nx * (ks as usize - 1)..];
                    compact::residual_row(
                        f.k,
                        f.rows[j],
                        &f.flags[c.clone()],
                        ring_row(src, slot(v - 1), nx),
                        ring_row(src, slot(v), nx),
                        ring_row(src, slot(v + 1), nx),
                        &b[c.clone()],
                        res,
                    );
                    let o = &mut out[(j / 2 - blk * cb) * ncx..][..ncx];
                    restrict_pairs(res, o);
                }
            }
        };
        let chunk = cb * ncx;
        if bc.len() <= chunk {
            work(0, bc, &mut ring[..ring_len]);
        } else {
            bc.par_chunks_mut(chunk)
                .zip(ring.par_chunks_mut(ring_len))
                .enumerate()
                .for_each(|(blk, (o, rg))| work(blk, o, rg));
        }
    }

    /// Fused prolongation and post-smoothing, writing `x` once: recomputes the pre-smoothed
    /// rows from `b` (all half-sweeps but the last, black one, whose values the first
    /// post-smoothing half-sweep overwrites without reading), adds `P xc`, then the black and
    /// red half-sweeps. Returns `b . x`. Rows two ahead are prefetched in parts, one per stage.
    pub(super) fn up_fused(
        &mut self,
        fine: Option<&Compact>,
        finest: bool,
        b: &[f64],
        xc: &[f64],
        x: &mut [f64],
        ncx: usize,
    ) -> f64 {
        let Level {
            nx,
            ny,
            compact,
            cb,
            ring,
            sweeps,
            ..
        } = self;
        let (nx, ny, cb, sweeps) = (*nx, *ny, *cb, *sweeps);
        let comp = if finest { fine } else { compact.as_ref() };
        let Some(comp) = comp else { return 0.0 };
        let py = comp_periodic_y(comp, nx, ny);
        let f = Fused {
            k: &comp.k,
            rows: &comp.rows,
            flags: &comp.flags,
            inv: &comp.inv,
            nx,
            ny,
            py,
        };
        let rows = 2 * cb;
        let last = 4 * sweeps as isize - 2;
        let pre = 2 * sweeps as isize - 1;
        let ring_len = ring_rows(sweeps) * nx;
        let work = |blk: usize, out: &mut [f64], ring: &mut [f64]| -> f64 {
            let (a, e) = ((blk * rows) as isize, (blk * rows + out.len() / nx) as isize);
            // Stage k < pre: the pre-smoothing half-sweeps recomputed (red from zero, black,
            // red, ...) but the last (black) one, `P xc` added after them; stages pre..=last:
            // the post-smoothing half-sweeps (black, red, ...), the last one written to `out`.
            // The skipped black half-sweep would be overwritten by the first post-smoothing
            // one, which reads only red cells, so the result is the same bit for bit.
            let rings = &mut ring[..3 * nx * last as usize];
            let parts = (last as usize + 1).min(PREFETCH_PARTS);
            let mut dot = 0.0;
            for t in a - last..e + last {
                let pf = t + PREFETCH_ROWS;
                f.prefetch(pf, b, true, 0, parts);
                let jt = f.row(t);
                let r0 = &mut rings[slot(t) * nx..(slot(t) + 1) * nx];
                f.red0(jt, vrow(b, jt, nx), r0);
                if let (Some(j), 1) = (jt, pre) {
                    prolong_pairs(&xc[(j / 2) * ncx..(j / 2 + 1) * ncx], r0);
                }
                for k in 1..=last {
                    if (k as usize) < parts {
                        f.prefetch(pf, b, true, k as usize, parts);
                    }
                    let u = t - k;
                    if u < a - last + k {
                        continue;
                    }
                    let colour = if k < pre { k % 2 } else { (k - pre + 1) % 2 } as usize;
                    let ju = f.row(u);
                    let (prev, cur) = rings.split_at_mut(3 * nx * k as usize);
                    let src = &prev[3 * nx * (k as usize - 1)..];
                    let (xs, xm, xn) = (
                        ring_row(src, slot(u - 1), nx),
                        ring_row(src, slot(u), nx),
                        ring_row(src, slot(u + 1), nx),
                    );
                    if k == last {
                        let o = &mut out[(u - a) as usize * nx..][..nx];
                        f.relax(ju, colour, vrow(b, ju, nx), xs, xm, xn, o);
                        if let Some(j) = ju {
                            dot += dot_lanes(&b[j * nx..(j + 1) * nx], o);
                        }
                    } else {
                        let dst = &mut cur[slot(u) * nx..(slot(u) + 1) * nx];
                        f.relax(ju, colour, vrow(b, ju, nx), xs, xm, xn, dst);
                        if let (Some(j), true) = (ju, k == pre - 1) {
                            prolong_pairs(&xc[(j / 2) * ncx..(j / 2 + 1) * ncx], dst);
                        }
                    }
                }
            }
            dot
        };
        let chunk = rows * nx;
        if x.len() <= chunk {
            return work(0, x, &mut ring[..ring_len]);
        }
        let nb = x.len().div_ceil(chunk);
        let mut partial = [0.0f64; MAX_BLOCKS];
        x.par_chunks_mut(chunk)
            .zip(ring.par_chunks_mut(ring_len))
            .zip(partial[..nb].par_iter_mut())
            .enumerate()
            .for_each(|(blk, ((o, rg), p))| *p = work(blk, o, rg));
        partial[..nb].iter().sum()
    }
}
/// Whether the compact operator couples across the south/north sides (periodic in y).
fn comp_periodic_y(c: &Compact, nx: usize, ny: usize) -> bool {
    (0..nx).any(|i| c.flags[i] & compact::S != 0 || c.flags[(ny - 1) * nx + i] & compact::N != 0)
}

/// `out[i / 2] += res[i]`.
#[inline(always)]
fn restrict_pairs(res: &[f64], out: &mut [f64]) {
    let n = res.len();
    let h = n / 2;
    let (pairs, out_h) = (&res[..2 * h], &mut out[..h]);
    for (o, p) in out_h.iter_mut().zip(pairs.chunks_exact(2)) {
        *o += p[0] + p[1];
    }
    if n % 2 == 1 {
        out[h] += res[n - 1];
    }
}

/// `z[i] += xc[i / 2]`.
#[inline(always)]
fn prolong_pairs(xc: &[f64], z: &mut [f64]) {
    let n = z.len();
    let h = n / 2;
    for (p, &c) in z[..2 * h].chunks_exact_mut(2).zip(&xc[..h]) {
        p[0] += c;
        p[1] += c;
    }
    if n % 2 == 1 {
        z[n - 1] += xc[h];
    }
}
