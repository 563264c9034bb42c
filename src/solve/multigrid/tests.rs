//! Tests of the multigrid hierarchy: the Galerkin product against a dense one, the fused
//! sweeps against the stored passes, the symmetry of the V-cycle and the compact diagonal table.

use super::*;

fn dense_of(a: &Stencil5) -> Vec<Vec<f64>> {
    let n = a.cells();
    (0..n)
        .map(|c| {
            let mut e = vec![0.0; n];
            e[c] = 1.0;
            let mut y = vec![0.0; n];
            a.apply(&e, &mut y).unwrap();
            y
        })
        .collect() // column c of A
}

fn test_op(nx: usize, ny: usize, px: bool, py: bool, symmetric: bool) -> Stencil5 {
    let n = nx * ny;
    let mut land = vec![false; n];
    for k in [nx + 1, nx + 2, 2 * nx + 2, n - 1] {
        land[k] = true;
    }
    let mut c = [vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]];
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if land[k] {
                c[0][k] = 1.0;
                continue;
            }
            let iw = if i > 0 { i - 1 } else { nx - 1 };
            let ie = if i + 1 < nx { i + 1 } else { 0 };
            let js = if j > 0 { j - 1 } else { ny - 1 };
            let jn = if j + 1 < ny { j + 1 } else { 0 };
            let f = |a: usize, b: usize| 0.5 + ((a * 7 + b * 3) % 5) as f64 * 0.25;
            let (kw, ke, ks, kn) = (j * nx + iw, j * nx + ie, js * nx + i, jn * nx + i);
            let open = |nb: usize, edge: bool, p: bool| !land[nb] && (!edge || p);
            let skew = if symmetric { 0.0 } else { 0.3 };
            c[1][k] = if open(kw, i == 0, px) {
                f(k.min(kw), k.max(kw)) + skew
            } else {
                0.0
            };
            c[2][k] = if open(ke, i + 1 == nx, px) {
                f(k.min(ke), k.max(ke))
            } else {
                0.0
            };
            c[3][k] = if open(ks, j == 0, py) {
                f(k.min(ks), k.max(ks))
            } else {
                0.0
            };
            c[4][k] = if open(kn, j + 1 == ny, py) {
                f(k.min(kn), k.max(kn)) + skew
            } else {
                0.0
            };
            c[0][k] = 1.0 + c[1][k] + c[2][k] + c[3][k] + c[4][k];
        }
    }
    let [d, w, e, s, nn] = c;
    Stencil5::new(nx, ny, px, py, d, w, e, s, nn, Some(land)).unwrap()
}

/// The coarse operator equals P^T A P formed densely (Galerkin; common practice), for odd
/// and even sizes, periodic or not, with land.
#[test]
fn galerkin_matches_dense_product() {
    for (nx, ny, px, py) in [(7, 6, false, false), (7, 5, true, true), (6, 9, true, false)] {
        for symmetric in [true, false] {
            let a = test_op(nx, ny, px, py, symmetric);
            let params = MultigridParams {
                coarse_max: 4,
                coarse_coupling_scale: Some(1.0),
                ..Default::default()
            };
            let mg = Multigrid::new(&a, params).unwrap();
            let ac = mg.coarse_operator(1).unwrap();
            let (ncx, sx, sy) = (ac.nx(), mg.levels[0].sx, mg.levels[0].sy);
            let agg = |k: usize| ((k / nx) >> sy) * ncx + ((k % nx) >> sx);
            let cols = dense_of(&a);
            let mut pap = vec![vec![0.0; ac.cells()]; ac.cells()];
            for (c, col) in cols.iter().enumerate() {
                for (r, &v) in col.iter().enumerate() {
                    if !a.land()[r] && !a.land()[c] {
                        pap[agg(r)][agg(c)] += v;
                    }
                }
            }
            let ccols = dense_of(ac);
            for (cc, col) in ccols.iter().enumerate() {
                for (rc, &v) in col.iter().enumerate() {
                    let expect = if ac.land()[rc] && rc == cc { 1.0 } else { pap[rc][cc] };
                    assert!((v - expect).abs() < 1e-12, "{nx}x{ny} ({rc},{cc}): {v} vs {expect}");
                }
            }
        }
    }
}

/// The fused matrix-free sweeps compute the same V-cycle as the stored-coefficient passes
/// (red from zero, black, residual, restriction; prolongation, black, red), to round-off,
/// with land, every side kind and even and odd sizes (odd periodic sizes fall back).
#[test]
fn fused_vcycle_matches_stored_path() {
    use crate::grid::{Grid, Mask};
    use crate::solve::{SideCoupling, Sides};
    let sides = [
        Sides::closed(),
        Sides::periodic(),
        Sides::uniform(SideCoupling::Dirichlet),
        Sides {
            west: SideCoupling::Dirichlet,
            east: SideCoupling::Closed,
            south: SideCoupling::Periodic,
            north: SideCoupling::Periodic,
        },
    ];
    let mut fused_seen = 0;
    for (nx, ny) in [(64, 48), (45, 38), (33, 31)] {
        let grid = Grid::new(nx, ny, 1.0, 1.5, 0.0, 0.0).unwrap();
        let mut wet = vec![true; nx * ny];
        for j in ny / 3..ny / 2 {
            for i in nx / 4..nx / 3 {
                wet[j * nx + i] = false;
            }
        }
        for mask in [Mask::all_water(&grid), Mask::from_wet(&grid, wet.clone()).unwrap()] {
            for (s, sweeps) in sides.into_iter().flat_map(|s| (1..=3).map(move |k| (s, k))) {
                let a = Stencil5::diffusion(&grid, &mask, s, 20.0, 7.0).unwrap();
                assert!(a.is_matrix_free());
                let params = MultigridParams {
                    coarse_max: 16,
                    pre_sweeps: sweeps,
                    post_sweeps: sweeps,
                    ..Default::default()
                };
                let mut fast = Multigrid::new(&a, params).unwrap();
                let mut slow = Multigrid::new(&a, params).unwrap();
                slow.matrix_free = false;
                slow.update(&a).unwrap();
                assert!(slow.levels.iter().all(|l| !l.fused));
                fused_seen += usize::from(fast.levels[0].fused);
                let n = a.cells();
                let r: Vec<f64> = (0..n).map(|k| ((k * 37 % 11) as f64 - 5.0) + 0.01 * k as f64).collect();
                let (mut z1, mut z2) = (vec![0.0; n], vec![0.0; n]);
                let d = fast.vcycle(&a, &r, &mut z1);
                slow.vcycle(&a, &r, &mut z2);
                let scale = z2.iter().fold(0.0f64, |m, v| m.max(v.abs()));
                for k in 0..n {
                    assert!(
                        (z1[k] - z2[k]).abs() <= 1e-12 * scale,
                        "{nx}x{ny} {s:?} {sweeps} sweeps cell {k}: {} vs {}",
                        z1[k],
                        z2[k]
                    );
                }
                if let Some(d) = d {
                    let e: f64 = r.iter().zip(&z2).map(|(a, b)| a * b).sum();
                    assert!((d - e).abs() <= 1e-12 * e.abs().max(1.0), "{d} vs {e}");
                }
            }
        }
    }
    assert!(fused_seen >= 24, "fused sweeps used on {fused_seen} cases only");
}

/// With equal pre- and post-sweeps the V-cycle is a symmetric operator (needed by
/// preconditioned CG; common practice): (M u, v) = (u, M v), also with odd periodic sizes.
#[test]
fn vcycle_is_symmetric() {
    for (nx, ny, px, py) in [(16, 12, false, false), (15, 13, true, true), (9, 20, true, false)] {
        let a = test_op(nx, ny, px, py, true);
        assert!(a.is_symmetric());
        let mut mg = Multigrid::new(
            &a,
            MultigridParams {
                coarse_max: 8,
                ..Default::default()
            },
        )
        .unwrap();
        let n = a.cells();
        let u: Vec<f64> = (0..n)
            .map(|k| ((k * 37 % 11) as f64 - 5.0) * if a.land()[k] { 0.0 } else { 1.0 })
            .collect();
        let v: Vec<f64> = (0..n)
            .map(|k| ((k * 13 % 7) as f64 - 3.0) * if a.land()[k] { 0.0 } else { 1.0 })
            .collect();
        let (mut mu, mut mv) = (vec![0.0; n], vec![0.0; n]);
        mg.apply(&a, &u, &mut mu).unwrap();
        mg.apply(&a, &v, &mut mv).unwrap();
        let d1: f64 = mu.iter().zip(&v).map(|(a, b)| a * b).sum();
        let d2: f64 = u.iter().zip(&mv).map(|(a, b)| a * b).sum();
        assert!((d1 - d2).abs() < 1e-12 * d1.abs().max(1.0), "{nx}x{ny}: {d1} vs {d2}");
        let d3: f64 = mu.iter().zip(&u).map(|(a, b)| a * b).sum();
        assert!(d3 > 0.0);
    }
}

/// On the fine level the fused sweeps' reciprocal-diagonal table equals the stored
/// `1 / diag` bit for bit, with land and every side kind.
#[test]
fn inverse_diagonal_table_matches_stored() {
    use crate::grid::{Grid, Mask};
    use crate::solve::{SideCoupling, Sides};
    let (nx, ny) = (40, 30);
    let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
    let mut wet = vec![true; nx * ny];
    for j in ny / 3..ny / 2 {
        wet[j * nx + nx / 2] = false;
    }
    for mask in [Mask::all_water(&grid), Mask::from_wet(&grid, wet.clone()).unwrap()] {
        for s in [
            Sides::closed(),
            Sides::periodic(),
            Sides::uniform(SideCoupling::Dirichlet),
        ] {
            let a = Stencil5::diffusion(&grid, &mask, s, 9.0, 4.0).unwrap();
            let c = a.compact.as_ref().unwrap();
            let mg = Multigrid::new(&a, MultigridParams::default()).unwrap();
            for k in 0..a.cells() {
                assert_eq!(c.inv[usize::from(c.flags[k])].to_bits(), mg.levels[0].inv[k].to_bits());
            }
        }
    }
}
