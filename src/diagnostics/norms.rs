//! Error norms of a field against a reference over water cells, each normalised by the same
//! norm of the reference: `l1 = sum|c - r| / sum|r|`, `l2 = sqrt(sum (c - r)^2 / sum r^2)`,
//! `linf = max|c - r| / max|r|` (cell areas are equal on a uniform grid, so they cancel).

use ndarray::{ArrayView2, Zip};

/// Normalised error norms and extremes of a field against a reference.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ErrorNorms {
    /// Relative L1 error.
    pub l1: f64,
    /// Relative L2 error.
    pub l2: f64,
    /// Relative maximum error.
    pub linf: f64,
    /// Largest value of the field over the largest of the reference.
    pub peak_ratio: f64,
    /// Smallest value of the field (an undershoot when negative for a non-negative reference).
    pub min: f64,
    /// Largest value of the field.
    pub max: f64,
}

/// Norms of `field` against `reference` (interior arrays of one shape, (y, x) order) over
/// cells where `wet` is true (`None`: all). A zero reference norm gives an infinite relative
/// error unless the field matches it exactly.
///
/// # Panics
/// If the shapes differ (as ndarray's own element-wise operations do).
pub fn error_norms(field: ArrayView2<f64>, reference: ArrayView2<f64>, wet: Option<ArrayView2<bool>>) -> ErrorNorms {
    let (mut e1, mut r1, mut e2, mut r2, mut einf, mut rinf) = (0.0, 0.0, 0.0, 0.0, 0.0f64, 0.0f64);
    let (mut lo, mut hi, mut rhi) = (f64::INFINITY, f64::NEG_INFINITY, f64::NEG_INFINITY);
    let pairs = Zip::indexed(&field).and(&reference);
    pairs.for_each(|(j, i), &c, &r| {
        if wet.as_ref().is_some_and(|w| !w[[j, i]]) {
            return;
        }
        let d = c - r;
        e1 += d.abs();
        r1 += r.abs();
        e2 += d * d;
        r2 += r * r;
        einf = einf.max(d.abs());
        rinf = rinf.max(r.abs());
        lo = lo.min(c);
        hi = hi.max(c);
        rhi = rhi.max(r);
    });
    let rel = |e: f64, r: f64| {
        if r > 0.0 {
            e / r
        } else if e == 0.0 {
            0.0
        } else {
            f64::INFINITY
        }
    };
    ErrorNorms {
        l1: rel(e1, r1),
        l2: rel(e2, r2).sqrt(),
        linf: rel(einf, rinf),
        peak_ratio: if rhi != 0.0 { hi / rhi } else { f64::NAN },
        min: lo,
        max: hi,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn norms_by_hand() {
        // A 2 x 2 field in (y, x) order.
        let r = ndarray::array![[1.0, 2.0], [0.0, 1.0]];
        let c = ndarray::array![[1.5, 1.0], [0.5, 1.0]];
        let n = error_norms(c.view(), r.view(), None);
        assert_eq!(n.l1, 2.0 / 4.0);
        assert!((n.l2 - (1.5f64 / 6.0).sqrt()).abs() < 1e-15);
        assert_eq!(n.linf, 0.5);
        assert_eq!(n.peak_ratio, 0.75);
        assert_eq!((n.min, n.max), (0.5, 1.5));
        let wet = ndarray::array![[true, false], [true, true]];
        assert_eq!(error_norms(c.view(), r.view(), Some(wet.view())).l1, 1.0 / 2.0);
        assert_eq!(error_norms(r.view(), r.view(), None).l1, 0.0);
    }
}
