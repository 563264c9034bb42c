//! The members of a sweep: the Cartesian product of the axes (last axis fastest), or a Latin
//! hypercube sample (McKay, Beckman & Conover 1979, Technometrics 21, 239): per axis a seeded
//! random permutation of the N strata of [0, 1) and one uniform point inside each stratum, mapped
//! onto the axis (linearly, or in the logarithm when `log = true`); a list-valued axis takes the
//! list entry that covers the stratum. Random numbers: `Xoshiro256PlusPlus::seed_from_u64(seed)`,
//! axis after axis (the permutation, then the N points), so a seed gives the same members on any
//! machine.

use super::spec::number_text;
use super::{Axis, AxisValues, Member};
use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// Largest number of members a sweep may have.
pub const MAX_MEMBERS: usize = 100_000;

/// The members of `axes`: the product, or `samples` Latin hypercube points drawn with `seed`.
/// The error says what is allowed (too many members).
pub fn members(axes: &[Axis], samples: Option<usize>, seed: u64) -> Result<Vec<Member>, String> {
    let columns: Vec<Vec<String>> = match samples {
        Some(n) => latin_hypercube(axes, n, seed),
        None => {
            let lists: Vec<Vec<String>> = axes.iter().map(product_values).collect();
            let total = lists.iter().try_fold(1usize, |acc, l| acc.checked_mul(l.len()));
            match total {
                Some(t) if t <= MAX_MEMBERS => product(&lists),
                _ => {
                    let sizes: Vec<String> = lists.iter().map(|l| l.len().to_string()).collect();
                    return Err(format!(
                        "the product of the axes ({}) has more than {MAX_MEMBERS} members; use fewer values or samples = N (a Latin hypercube)",
                        sizes.join(" x ")
                    ));
                }
            }
        }
    };
    let n = columns.first().map_or(0, Vec::len);
    Ok((0..n)
        .map(|i| Member {
            index: i,
            values: columns.iter().map(|c| c[i].clone()).collect(),
        })
        .collect())
}

/// The values of an axis in a product: the list, or `count` evenly spaced values (ends exact).
pub fn product_values(a: &Axis) -> Vec<String> {
    match &a.values {
        AxisValues::List(v) => v.clone(),
        AxisValues::Range { from, to, count, log } => {
            let n = count.unwrap_or(1);
            (0..n)
                .map(|k| {
                    let f = if n == 1 { 0.0 } else { k as f64 / (n - 1) as f64 };
                    let x = if k == 0 {
                        *from
                    } else if k + 1 == n {
                        *to
                    } else {
                        along(*from, *to, *log, f)
                    };
                    number_text(x)
                })
                .collect()
        }
    }
}

/// The point at fraction `f` of the way from `from` to `to`, in the logarithm when `log`.
fn along(from: f64, to: f64, log: bool, f: f64) -> f64 {
    if log {
        (from.ln() + f * (to.ln() - from.ln())).exp()
    } else {
        from + f * (to - from)
    }
}

/// Per-axis value columns of the Cartesian product, last axis fastest.
fn product(lists: &[Vec<String>]) -> Vec<Vec<String>> {
    let total: usize = lists.iter().map(Vec::len).product();
    let mut columns = vec![Vec::with_capacity(total); lists.len()];
    for i in 0..total {
        let mut rest = i;
        for (a, l) in lists.iter().enumerate().rev() {
            columns[a].push(l[rest % l.len()].clone());
            rest /= l.len();
        }
    }
    columns
}

/// The strata and unit-interval points of a Latin hypercube: per axis, `n` pairs (stratum,
/// point in [0, 1)) with every stratum `k` (the interval [k/n, (k+1)/n)) used once.
pub fn lhs_unit(axes: usize, n: usize, seed: u64) -> Vec<Vec<(usize, f64)>> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    (0..axes)
        .map(|_| {
            // Fisher-Yates shuffle of the strata.
            let mut strata: Vec<usize> = (0..n).collect();
            for i in (1..n).rev() {
                let j = rng.random_range(0..=i);
                strata.swap(i, j);
            }
            strata
                .into_iter()
                .map(|k| {
                    let u: f64 = rng.random();
                    // (k + u)/n < (k + 1)/n: rounding up to the next stratum is clamped back.
                    let p = ((k as f64 + u) / n as f64).min(((k + 1) as f64 / n as f64).next_down());
                    (k, p.max(k as f64 / n as f64))
                })
                .collect()
        })
        .collect()
}

/// Value columns of a Latin hypercube of `n` members.
fn latin_hypercube(axes: &[Axis], n: usize, seed: u64) -> Vec<Vec<String>> {
    let unit = lhs_unit(axes.len(), n, seed);
    axes.iter()
        .zip(unit)
        .map(|(a, col)| {
            col.into_iter()
                .map(|(k, p)| match &a.values {
                    AxisValues::List(v) => v[k * v.len() / n].clone(),
                    AxisValues::Range { from, to, log, .. } => number_text(along(*from, *to, *log, p)),
                })
                .collect()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn list(key: &str, v: &[&str]) -> Axis {
        Axis {
            key: key.into(),
            values: AxisValues::List(v.iter().map(|s| s.to_string()).collect()),
        }
    }

    fn range(key: &str, from: f64, to: f64, count: Option<usize>, log: bool) -> Axis {
        Axis {
            key: key.into(),
            values: AxisValues::Range { from, to, count, log },
        }
    }

    // Common practice: the product enumerates like nested loops, the last axis innermost.
    #[test]
    fn product_counts_and_order() {
        let axes = [list("a", &["1", "2"]), range("b", 0.0, 1.0, Some(3), false)];
        let m = members(&axes, None, 0).unwrap();
        assert_eq!(m.len(), 6);
        let rows: Vec<Vec<&str>> = m
            .iter()
            .map(|m| m.values.iter().map(String::as_str).collect())
            .collect();
        assert_eq!(
            rows,
            [
                ["1", "0"],
                ["1", "0.5"],
                ["1", "1"],
                ["2", "0"],
                ["2", "0.5"],
                ["2", "1"]
            ]
        );
        assert!(m.iter().enumerate().all(|(i, m)| m.index == i));
    }

    // Log spacing by hand: 0.1 to 10 in 3 values is 0.1, 1, 10 (the middle one to round-off).
    #[test]
    fn log_range_values() {
        let v = product_values(&range("k", 0.1, 10.0, Some(3), true));
        assert_eq!(v[0], "0.1");
        assert_eq!(v[2], "10");
        let mid: f64 = v[1].parse().unwrap();
        assert!((mid - 1.0).abs() < 1e-15, "{mid}");
        assert_eq!(product_values(&range("k", 2.0, 5.0, Some(1), false)), ["2"]);
    }

    #[test]
    fn too_many_members_refused() {
        let big = range("a", 0.0, 1.0, Some(1000), false);
        let err = members(&[big.clone(), big], None, 0).unwrap_err();
        assert!(err.contains("1000 x 1000"), "{err}");
    }

    // McKay, Beckman & Conover (1979): each of the N equal-probability strata of every axis
    // holds exactly one of the N samples.
    #[test]
    fn lhs_one_sample_per_stratum() {
        for &(n, seed) in &[(1, 0), (7, 1), (50, 42), (333, 9)] {
            let unit = lhs_unit(3, n, seed);
            for col in &unit {
                let mut seen = vec![0; n];
                for &(k, p) in col {
                    let s = (p * n as f64).floor() as usize;
                    assert_eq!(s, k, "point {p} outside its stratum {k} of {n}");
                    seen[s] += 1;
                }
                assert!(seen.iter().all(|&c| c == 1), "n {n}: {seen:?}");
            }
        }
        // On the axis too: a linear range from 10 to 20 with 8 samples puts one in each 1.25 wide
        // interval.
        let m = members(&[range("x", 10.0, 20.0, None, false)], Some(8), 3).unwrap();
        let mut seen = [0; 8];
        for mm in &m {
            let x: f64 = mm.values[0].parse().unwrap();
            seen[((x - 10.0) / 1.25).floor() as usize] += 1;
        }
        assert_eq!(seen, [1; 8]);
        // Log: strata equal in the logarithm, 1 to 1000 in 3 samples gives one per decade.
        let m = members(&[range("k", 1.0, 1000.0, None, true)], Some(3), 5).unwrap();
        let mut dec: Vec<usize> = m
            .iter()
            .map(|m| m.values[0].parse::<f64>().unwrap().log10().floor() as usize)
            .collect();
        dec.sort();
        assert_eq!(dec, [0, 1, 2]);
    }

    #[test]
    fn lhs_reproducible_and_seeded() {
        let axes = [range("a", 0.0, 1.0, None, false), list("b", &["x", "y", "z", "w"])];
        let a = members(&axes, Some(12), 7).unwrap();
        assert_eq!(a, members(&axes, Some(12), 7).unwrap());
        assert_ne!(a, members(&axes, Some(12), 8).unwrap());
        assert_eq!(a.len(), 12);
        // A 4-entry list over 12 strata: each entry covers 3 strata, so each appears 3 times.
        for e in ["x", "y", "z", "w"] {
            assert_eq!(a.iter().filter(|m| m.values[1] == e).count(), 3, "{e}");
        }
    }
}
