//! Cell fields on the padded grid and accurate sums (Neumaier compensated summation).

use crate::grid::{Grid, Mask};

/// Running sum with Neumaier's compensation (an improved Kahan sum): the error stays at a few
/// ulps of the result whatever the number of terms.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Neumaier {
    sum: f64,
    comp: f64,
}

impl Neumaier {
    /// Adds one term.
    #[inline]
    pub fn add(&mut self, x: f64) {
        let t = self.sum + x;
        if self.sum.abs() >= x.abs() {
            self.comp += (self.sum - t) + x;
        } else {
            self.comp += (x - t) + self.sum;
        }
        self.sum = t;
    }

    /// The compensated total.
    #[inline]
    pub fn value(&self) -> f64 {
        self.sum + self.comp
    }
}

/// Compensated sum of a slice.
pub fn sum_compensated(xs: &[f64]) -> f64 {
    let mut acc = Neumaier::default();
    for &x in xs {
        acc.add(x);
    }
    acc.value()
}

/// Compensated sum of the interior cells of a padded field (land cells hold zero).
pub fn interior_sum(grid: &Grid, padded: &[f64]) -> f64 {
    let mut acc = Neumaier::default();
    for j in 0..grid.ny {
        let s = grid.idx(0, j as isize);
        acc.add(sum_compensated(&padded[s..s + grid.nx]));
    }
    acc.value()
}

/// Smallest and largest value over the water cells of a padded field.
pub fn wet_min_max(grid: &Grid, mask: &Mask, padded: &[f64]) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for j in 0..grid.ny {
        let s = grid.idx(0, j as isize);
        for (i, &c) in padded[s..s + grid.nx].iter().enumerate() {
            if mask.is_wet(i, j) {
                lo = lo.min(c);
                hi = hi.max(c);
            }
        }
    }
    (lo, hi)
}

/// A vector of `len` copies of `value` whose memory the kernel is asked to back with
/// transparent huge pages (Linux `madvise(MADV_HUGEPAGE)`, before the first touch; a hint,
/// ignored where unsupported or for vectors under 2 MiB). Large fields are streamed row by row
/// or read across rows: with 4 KiB pages nearly every row change costs a TLB miss.
pub fn huge_filled(len: usize, value: f64) -> Vec<f64> {
    let mut v = vec![0.0; len];
    #[cfg(target_os = "linux")]
    {
        const HUGE: usize = 2 << 20;
        let start = v.as_ptr() as usize;
        let end = start + len * std::mem::size_of::<f64>();
        let (a, e) = (start.next_multiple_of(HUGE), end / HUGE * HUGE);
        if e > a {
            // SAFETY: [a, e) lies inside the allocation of `v`, which outlives the call;
            // MADV_HUGEPAGE changes no contents, only how pages are backed.
            unsafe { libc::madvise(a as *mut libc::c_void, e - a, libc::MADV_HUGEPAGE) };
        }
    }
    if value != 0.0 || value.is_sign_negative() {
        v.fill(value);
    }
    v
}

/// Fills the interior of a zeroed padded field from a function of the cell centre; land cells
/// stay zero.
pub fn fill_from(grid: &Grid, mask: &Mask, f: impl Fn(f64, f64) -> f64) -> Vec<f64> {
    let mut c = vec![0.0; grid.padded_len()];
    for j in 0..grid.ny {
        for i in 0..grid.nx {
            if mask.is_wet(i, j) {
                let (x, y) = grid.centre(i, j);
                c[grid.idx(i as isize, j as isize)] = f(x, y);
            }
        }
    }
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neumaier_recovers_what_naive_summation_loses() {
        // 1 + 1e100 + 1 - 1e100 = 2 exactly; a naive sum gives 0.
        let xs = [1.0, 1e100, 1.0, -1e100];
        assert_eq!(sum_compensated(&xs), 2.0);
        assert_eq!(xs.iter().sum::<f64>(), 0.0);
    }

    #[test]
    fn interior_sum_ignores_the_halo() {
        let g = Grid::new(3, 2, 1.0, 1.0, 0.0, 0.0).unwrap();
        let mut c = vec![100.0; g.padded_len()];
        for j in 0..2 {
            for i in 0..3 {
                c[g.idx(i, j)] = 1.0;
            }
        }
        assert_eq!(interior_sum(&g, &c), 6.0);
        let m = Mask::all_water(&g);
        assert_eq!(wet_min_max(&g, &m, &c), (1.0, 1.0));
    }
}
