//! Tests of the transform solver: the transform against a reference DCT/DST, solves of
//! closed and fixed rectangles against the operator, streaming, block heights, the choice of
//! reduction steps and the operators it refuses.

use super::*;

/// Forward transforms of one and of two lines equal the DCT-II and DST-II of the `rustdct`
/// crate (a general-purpose reference implementation), for even and odd lengths, and the
/// inverse returns `N` times the line.
#[test]
fn axis_matches_rustdct_and_inverts() {
    let mut planner = FftPlanner::new();
    let mut reference = rustdct::DctPlanner::new();
    for n in [1usize, 2, 3, 8, 17, 64, 100] {
        for ends in [Ends::Closed, Ends::Fixed] {
            let ax = Axis::new(&mut planner, ends, n, 1.0);
            let mut z = vec![Complex::new(0.0, 0.0); n];
            let mut s = vec![Complex::new(0.0, 0.0); ax.scratch_len];
            let a0: Vec<f64> = (0..n).map(|i| ((i * 13 + 5) % 9) as f64 - 3.5).collect();
            let b0: Vec<f64> = (0..n).map(|i| ((i * 7 + 2) % 11) as f64 * 0.3).collect();
            let t = reference.plan_dct2(n);
            let want = |v: &[f64]| {
                let mut w = v.to_vec();
                match ends {
                    Ends::Closed => t.process_dct2(&mut w),
                    Ends::Fixed => t.process_dst2(&mut w),
                }
                // The DST's index k is the DCT ordering's N - 1 - k here.
                if ends == Ends::Fixed {
                    w.reverse();
                }
                w
            };
            let (wa, wb) = (want(&a0), want(&b0));
            let (mut a, mut b) = (a0.clone(), b0.clone());
            ax.forward(&mut a, Some(&mut b), &mut z, &mut s);
            let mut one = a0.clone();
            ax.forward(&mut one, None, &mut z, &mut s);
            for k in 0..n {
                for (got, w) in [(a[k], wa[k]), (b[k], wb[k]), (one[k], wa[k])] {
                    assert!(
                        (got - w).abs() <= 1e-12 * (1.0 + w.abs()),
                        "{ends:?} n {n} k {k}: {got} vs {w}"
                    );
                }
            }
            ax.inverse(&mut a, Some(&mut b), &mut z, &mut s);
            ax.inverse(&mut one, None, &mut z, &mut s);
            for i in 0..n {
                let nn = n as f64;
                assert!((a[i] / nn - a0[i]).abs() < 1e-12, "{ends:?} n {n} inverse a");
                assert!((b[i] / nn - b0[i]).abs() < 1e-12, "{ends:?} n {n} inverse b");
                assert!((one[i] / nn - a0[i]).abs() < 1e-12, "{ends:?} n {n} inverse one");
            }
        }
    }
}
use crate::grid::{Grid, Mask};
use crate::solve::Sides;

/// The solution satisfies `A x = b` to round-off for closed and fixed x sides, every
/// combination of closed and fixed y ends, squares, odd rectangles and a tall grid, and
/// couplings from moderate (the pivot table settles within the grid) to huge (it never
/// settles); the eigenpairs are those of the module doc and the elimination is exact
/// Gaussian elimination, so an error in either would leave a residual of order one.
#[test]
fn solves_closed_and_fixed_rectangles() {
    for (nx, ny) in [(16, 16), (37, 23), (12, 300)] {
        let grid = Grid::new(nx, ny, 2.0, 3.0, 0.0, 0.0).unwrap();
        let mask = Mask::all_water(&grid);
        for fx in [false, true] {
            for (fs, fn_) in [(false, false), (true, false), (false, true), (true, true)] {
                for (kx, ky) in [(25.0, 7.0), (3e6, 8e6)] {
                    let mut sides = Sides::closed();
                    let fixed = crate::solve::SideCoupling::Dirichlet;
                    if fx {
                        sides.west = fixed;
                        sides.east = fixed;
                    }
                    if fs {
                        sides.south = fixed;
                    }
                    if fn_ {
                        sides.north = fixed;
                    }
                    let a = Stencil5::diffusion(&grid, &mask, sides, kx, ky).unwrap();
                    let mut t = Transform::new(&a).expect("qualifies");
                    for levels in [1, 2] {
                        assert!(t.refresh_levels(&a, Some(levels)));
                        // Field rows per solved row.
                        let st = 2 * levels;
                        if kx < 100.0 && ny > 100 {
                            assert!(t.y.rows < ny / (2 * st), "pivots settle: {} rows", t.y.rows);
                        }
                        if kx > 100.0 && !fx {
                            // Mode 0 between closed x ends has pivots creeping by m per row.
                            assert_eq!(t.y.rows, ny / st - 1, "huge couplings never settle");
                        }
                        let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 37) % 11) as f64 - 4.0).collect();
                        let mut x = vec![0.0; nx * ny];
                        let (bb, rr) = t.solve(&a, &b, &mut x);
                        let bn = b.iter().map(|v| v * v).sum::<f64>().sqrt();
                        let rel = a.residual_sq(&b, &x).sqrt() / bn;
                        // The sums formed on the way equal the plain ones to round-off.
                        assert!((bb.sqrt() - bn).abs() <= 1e-12 * bn);
                        assert!(
                            (rr.sqrt() / bn - rel).abs() <= 1e-3 * rel + 1e-18,
                            "{} vs {rel:e}",
                            rr.sqrt() / bn
                        );
                        let case = format!("{nx}x{ny} fixed x {fx}, south {fs}, north {fn_}, k {kx:e}, {levels} steps");
                        // Normwise backward error (Higham 2002, Accuracy and Stability of
                        // Numerical Algorithms, eq. 1.2 and ch. 7): the residual against
                        // ||A|| ||x|| + ||b||, which is what round-off alone allows when the
                        // couplings dwarf the identity.
                        let c = a.compact.as_ref().unwrap().k;
                        let norm_a = c.m + 2.0 * (c.cx + c.gx) + 2.0 * (c.cy + c.gy);
                        let xn = x.iter().map(|v| v * v).sum::<f64>().sqrt();
                        let back = a.residual_sq(&b, &x).sqrt() / (norm_a * xn + bn);
                        // Twice reduced, round-off grows as the square of the spread of the
                        // x operator (see MAX_SPREAD); measured 3.3e-15 at spread 11 here.
                        let t0 = c.m + 2.0 * c.cy;
                        let spread = (t0 + 4.0 * c.cx) / t0;
                        let bound = if levels == 1 {
                            1e-15
                        } else {
                            (spread * spread * f64::EPSILON).max(1e-15)
                        };
                        assert!(back < bound, "{case}: backward error {back:e}");
                        if kx < 100.0 {
                            assert!(rel < 1e-13, "{case}: relative residual {rel:e}");
                        }
                    }
                }
            }
        }
    }
}

/// Short fields, where the cyclic reduction leaves two or three rows and the end rows are
/// eliminated or kept at each step (heights 8 to 17: every residue of `ny` modulo 4, the
/// shortest the solver takes; and the narrowest, 3 cells wide), solve to round-off with
/// every pair of y ends.
#[test]
fn solves_short_fields() {
    for (nx, ny) in (8..=17).map(|ny| (7, ny)).chain([(3, 8), (3, 13)]) {
        let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mask = Mask::all_water(&grid);
        for (fs, fn_) in [(false, false), (true, false), (false, true), (true, true)] {
            let mut sides = Sides::closed();
            let fixed = crate::solve::SideCoupling::Dirichlet;
            if fs {
                sides.south = fixed;
            }
            if fn_ {
                sides.north = fixed;
            }
            let a = Stencil5::diffusion(&grid, &mask, sides, 4.0, 11.0).unwrap();
            let mut t = Transform::new(&a).expect("qualifies");
            for levels in [1, 2] {
                assert!(t.refresh_levels(&a, Some(levels)));
                let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 17) % 7) as f64 - 2.5).collect();
                let mut x = vec![0.0; nx * ny];
                let (bb, rr) = t.solve(&a, &b, &mut x);
                let rel = a.residual_sq(&b, &x).sqrt() / bb.sqrt();
                assert!(
                    rel < 1e-14,
                    "ny {ny} south {fs} north {fn_}, {levels} steps: residual {rel:e}"
                );
                assert!((rr.sqrt() / bb.sqrt() - rel).abs() <= 1e-3 * rel + 1e-18);
            }
        }
    }
}

/// Streaming the results out of the stage gives exactly what ordinary stores give, over
/// repeated solves (the stage holds the previous block's rows meanwhile).
#[test]
fn streaming_matches_cached_stores() {
    // Both parities of height and width, both reduction levels, several blocks.
    for (nx, ny) in [(30, 72), (31, 77)] {
        let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mask = Mask::all_water(&grid);
        let mut sides = Sides::closed();
        sides.south = crate::solve::SideCoupling::Dirichlet;
        let a = Stencil5::diffusion(&grid, &mask, sides, 6.0, 9.0).unwrap();
        let mut t = Transform::new(&a).expect("qualifies");
        t.set_lines(8);
        for levels in [1, 2] {
            assert!(t.refresh_levels(&a, Some(levels)));
            // Repeated solves from the previous solution, as a run makes them.
            let mut b: Vec<f64> = (0..nx * ny).map(|k| ((k * 29) % 13) as f64 - 6.0).collect();
            let (mut x0, mut x1) = (vec![1.0; nx * ny], vec![-3.0; nx * ny]);
            for step in 0..4 {
                t.streaming = false;
                let r0 = t.solve(&a, &b, &mut x0);
                t.streaming = true;
                let r1 = t.solve(&a, &b, &mut x1);
                assert_eq!(r0, r1, "{nx} x {ny}, {levels} steps, solve {step}: sums");
                assert!(x0 == x1, "{nx} x {ny}, {levels} steps, solve {step}: solutions");
                b.copy_from_slice(&x0);
            }
        }
    }
}

/// The block-wise back substitution gives the same solution for any block height,
/// including a short last block and one block for the whole field.
#[test]
fn block_height_does_not_matter() {
    let (nx, ny) = (29, 41);
    let grid = Grid::new(nx, ny, 1.0, 1.0, 0.0, 0.0).unwrap();
    let mask = Mask::all_water(&grid);
    let mut sides = Sides::closed();
    sides.north = crate::solve::SideCoupling::Dirichlet;
    let a = Stencil5::diffusion(&grid, &mask, sides, 6.0, 9.0).unwrap();
    let b: Vec<f64> = (0..nx * ny).map(|k| ((k * 29) % 13) as f64 - 6.0).collect();
    let mut t = Transform::new(&a).expect("qualifies");
    for levels in [1, 2] {
        assert!(t.refresh_levels(&a, Some(levels)));
        let mut first: Option<Vec<f64>> = None;
        for lines in [42, 4, 8, 12, 16, 20, 36] {
            t.set_lines(lines);
            let mut x = vec![0.0; nx * ny];
            let (bb, rr) = t.solve(&a, &b, &mut x);
            let bn = bb.sqrt();
            let rel = a.residual_sq(&b, &x).sqrt() / bn;
            assert!(rel < 1e-13, "blocks of {lines} rows: residual {rel:e}");
            assert!((rr.sqrt() / bn - rel).abs() <= 1e-3 * rel + 1e-18);
            let one = first.get_or_insert_with(|| x.clone());
            let diff = x.iter().zip(one.iter()).map(|(p, q)| (p - q).abs()).fold(0.0, f64::max);
            assert!(diff < 1e-12, "blocks of {lines} rows: differs by {diff:e}");
        }
    }
}

/// Cells much wider than tall with a large time step spread the x operator's eigenvalues
/// widely: the solver then takes one reduction step, whose round-off grows only as the
/// spread, and two steps (whose round-off grows as its square) would leave a residual many
/// times larger; isotropic cells take two.
#[test]
fn chooses_the_reduction_steps_by_spread() {
    let b = |n: usize| (0..n).map(|k| ((k * 23) % 17) as f64 - 8.0).collect::<Vec<f64>>();
    let solve = |t: &mut Transform, a: &Stencil5| {
        let (nx, ny) = (a.nx, a.ny);
        let b = b(nx * ny);
        let mut x = vec![0.0; nx * ny];
        let (bb, _) = t.solve(a, &b, &mut x);
        a.residual_sq(&b, &x).sqrt() / bb.sqrt()
    };
    // Isotropic: spread (1 + 20 + 40) / 21 < 3.
    let grid = Grid::new(48, 40, 1.0, 1.0, 0.0, 0.0).unwrap();
    let a = Stencil5::diffusion(&grid, &Mask::all_water(&grid), Sides::closed(), 10.0, 10.0).unwrap();
    let mut t = Transform::new(&a).expect("qualifies");
    assert_eq!(t.y.levels, 2);
    assert!(solve(&mut t, &a) < 1e-14);
    // cx = 1000, cy = 10 / 9: spread about 1250.
    let grid = Grid::new(48, 40, 0.1, 3.0, 0.0, 0.0).unwrap();
    let a = Stencil5::diffusion(&grid, &Mask::all_water(&grid), Sides::closed(), 10.0, 10.0).unwrap();
    let mut t = Transform::new(&a).expect("qualifies");
    assert_eq!(t.y.levels, 1);
    let once = solve(&mut t, &a);
    assert!(t.refresh_levels(&a, Some(2)));
    let twice = solve(&mut t, &a);
    assert!(once < 1e-12 && twice > 10.0 * once, "once {once:e}, twice {twice:e}");
}

/// Land, periodic sides, a fixed value on one x side only and fields under 8 rows high are
/// refused (the multigrid path handles them).
#[test]
fn refuses_what_it_cannot_diagonalise() {
    let grid = Grid::new(12, 10, 1.0, 1.0, 0.0, 0.0).unwrap();
    let mask = Mask::all_water(&grid);
    let a = Stencil5::diffusion(&grid, &mask, Sides::closed(), 5.0, 5.0).unwrap();
    assert!(Transform::new(&a).is_some());
    let p = Stencil5::diffusion(&grid, &mask, Sides::periodic(), 5.0, 5.0).unwrap();
    assert!(Transform::new(&p).is_none());
    let mut one = Sides::closed();
    one.west = crate::solve::SideCoupling::Dirichlet;
    let o = Stencil5::diffusion(&grid, &mask, one, 5.0, 5.0).unwrap();
    assert!(Transform::new(&o).is_none());
    // One fixed y end is fine: the y direction is solved by elimination.
    let mut south = Sides::closed();
    south.south = crate::solve::SideCoupling::Dirichlet;
    let s = Stencil5::diffusion(&grid, &mask, south, 5.0, 5.0).unwrap();
    assert!(Transform::new(&s).is_some());
    let mask = Mask::all_water(&grid)
        .with_land(&grid, |x, y| (4.0..5.0).contains(&x) && (4.0..5.0).contains(&y))
        .unwrap();
    assert!(mask.has_land());
    let l = Stencil5::diffusion(&grid, &mask, Sides::closed(), 5.0, 5.0).unwrap();
    assert!(Transform::new(&l).is_none());
    let short = Grid::new(12, 7, 1.0, 1.0, 0.0, 0.0).unwrap();
    let a = Stencil5::diffusion(&short, &Mask::all_water(&short), Sides::closed(), 5.0, 5.0).unwrap();
    assert!(Transform::new(&a).is_none());
}
