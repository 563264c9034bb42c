//! Distributions over the finished members: quantiles, min, max, mean of each receptor
//! quantity, and the worst case (which member gives the highest peak, the earliest arrival and
//! the longest time above the threshold).
//!
//! Quantiles are Hyndman & Fan (1996) definition 7, the default of R's `quantile` and of
//! numpy's `percentile`: for sorted values `x[0..n]` and probability `p`, `h = (n - 1) p` and
//! `Q(p) = x[floor h] + (h - floor h) (x[floor h + 1] - x[floor h])`.

use super::MemberOutcome;

/// The quantile of probability `p` (0..=1) of `sorted` (ascending, finite), Hyndman & Fan
/// (1996) definition 7 (linear interpolation between order statistics); `None` when empty.
pub fn quantile(sorted: &[f64], p: f64) -> Option<f64> {
    let n = sorted.len();
    if n == 0 || !(0.0..=1.0).contains(&p) {
        return None;
    }
    let h = (n - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// A receptor quantity gathered over the members.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Quantity {
    /// Largest concentration at the receptor.
    Peak,
    /// Time of the peak, s.
    PeakTime,
    /// First time at or above the threshold, s (members that never reach it are counted apart).
    Arrival,
    /// Time at or above the threshold, s.
    TimeAbove,
}

impl Quantity {
    /// Every quantity, in table order.
    pub const ALL: [Quantity; 4] = [
        Quantity::Peak,
        Quantity::PeakTime,
        Quantity::Arrival,
        Quantity::TimeAbove,
    ];

    /// Name in files and tables.
    pub fn key(self) -> &'static str {
        match self {
            Quantity::Peak => "peak",
            Quantity::PeakTime => "peak_time",
            Quantity::Arrival => "arrival",
            Quantity::TimeAbove => "time_above",
        }
    }

    /// Name in words.
    pub fn words(self) -> &'static str {
        match self {
            Quantity::Peak => "peak concentration",
            Quantity::PeakTime => "time of the peak",
            Quantity::Arrival => "arrival (first time at or above the threshold)",
            Quantity::TimeAbove => "time at or above the threshold",
        }
    }

    /// Whether the quantity is a time in seconds.
    pub fn is_time(self) -> bool {
        !matches!(self, Quantity::Peak)
    }
}

/// Summary statistics of the values present.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Distribution {
    /// Values.
    pub n: usize,
    /// 5 % quantile.
    pub p5: f64,
    /// Median.
    pub p50: f64,
    /// 95 % quantile.
    pub p95: f64,
    /// Smallest.
    pub min: f64,
    /// Largest.
    pub max: f64,
    /// Arithmetic mean.
    pub mean: f64,
}

impl Distribution {
    /// The statistics of the finite values in `values`; `None` when there are none.
    pub fn of(values: &[f64]) -> Option<Self> {
        let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
        if v.is_empty() {
            return None;
        }
        v.sort_by(f64::total_cmp);
        let q = |p| quantile(&v, p).unwrap_or(f64::NAN);
        Some(Self {
            n: v.len(),
            p5: q(0.05),
            p50: q(0.5),
            p95: q(0.95),
            min: v[0],
            max: v[v.len() - 1],
            mean: crate::field::sum_compensated(&v) / v.len() as f64,
        })
    }
}

/// The member giving the worst value of a quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct WorstCase {
    /// Member index.
    pub member: usize,
    /// Its axis values, in axis order.
    pub values: Vec<String>,
    /// The value.
    pub value: f64,
}

/// One receptor quantity over the finished members.
#[derive(Debug, Clone, PartialEq)]
pub struct QuantityGather {
    /// Which quantity.
    pub quantity: Quantity,
    /// Per finished member (in member order): its index and value (`None`: no value, e.g.
    /// never arrived, or the receptor has no threshold).
    pub values: Vec<(usize, Option<f64>)>,
    /// Statistics of the values present.
    pub dist: Option<Distribution>,
    /// Members without a value (arrival: never reached the threshold).
    pub missing: usize,
    /// The worst member: highest peak, earliest arrival, longest time above; none for the
    /// time of the peak.
    pub worst: Option<WorstCase>,
}

/// One receptor over the finished members.
#[derive(Debug, Clone, PartialEq)]
pub struct ReceptorGather {
    /// Name.
    pub name: String,
    /// Position, m.
    pub at: (f64, f64),
    /// Threshold of the first member that has the receptor (members may differ when an axis
    /// changes it).
    pub threshold: Option<f64>,
    /// Finished members that have this receptor.
    pub members: usize,
    /// Members whose peak reached the threshold (peak at or above it).
    pub reached: usize,
    /// Peak, time of peak, arrival, time above, in [`Quantity::ALL`] order.
    pub quantities: Vec<QuantityGather>,
}

impl ReceptorGather {
    /// The gathered quantity `q`.
    pub fn get(&self, q: Quantity) -> &QuantityGather {
        &self.quantities[Quantity::ALL.iter().position(|&x| x == q).unwrap_or(0)]
    }
}

/// The worst of `values` (member index, value) for `q`; ties go to the lowest index.
fn worst(q: Quantity, values: &[(usize, Option<f64>)], members: &[&MemberOutcome]) -> Option<WorstCase> {
    let better = |a: f64, b: f64| match q {
        Quantity::Peak | Quantity::TimeAbove => a > b,
        Quantity::Arrival => a < b,
        Quantity::PeakTime => false,
    };
    if q == Quantity::PeakTime {
        return None;
    }
    let mut best: Option<(usize, f64)> = None;
    for &(i, v) in values {
        let Some(v) = v.filter(|v| v.is_finite()) else {
            continue;
        };
        if best.is_none_or(|(_, b)| better(v, b)) {
            best = Some((i, v));
        }
    }
    let (i, value) = best?;
    let values = members.iter().find(|m| m.index == i).map(|m| m.values.clone())?;
    Some(WorstCase {
        member: i,
        values,
        value,
    })
}

/// Per receptor (by name, in the order of first appearance) the distribution of every
/// quantity over `finished`.
pub fn gather_receptors(finished: &[&MemberOutcome]) -> Vec<ReceptorGather> {
    let mut names: Vec<(String, (f64, f64), Option<f64>)> = Vec::new();
    for m in finished {
        for r in &m.receptors {
            if !names.iter().any(|(n, _, _)| n == &r.name) {
                names.push((r.name.clone(), r.at, r.threshold));
            }
        }
    }
    names
        .into_iter()
        .map(|(name, at, threshold)| {
            let rows: Vec<(usize, &crate::run::receptors::ReceptorStats)> = finished
                .iter()
                .filter_map(|m| m.receptors.iter().find(|r| r.name == name).map(|r| (m.index, r)))
                .collect();
            let reached = rows
                .iter()
                .filter(|(_, r)| r.threshold.is_some_and(|t| r.peak >= t))
                .count();
            let quantities = Quantity::ALL
                .iter()
                .map(|&q| {
                    let values: Vec<(usize, Option<f64>)> = rows
                        .iter()
                        .map(|(i, r)| {
                            let v = match q {
                                Quantity::Peak => Some(r.peak),
                                Quantity::PeakTime => Some(r.peak_time),
                                Quantity::Arrival => r.arrival_time,
                                Quantity::TimeAbove => r.time_above_threshold,
                            };
                            (*i, v)
                        })
                        .collect();
                    let present: Vec<f64> = values.iter().filter_map(|v| v.1).collect();
                    QuantityGather {
                        quantity: q,
                        dist: Distribution::of(&present),
                        missing: values.len() - present.len(),
                        worst: worst(q, &values, finished),
                        values,
                    }
                })
                .collect();
            ReceptorGather {
                name,
                at,
                threshold,
                members: rows.len(),
                reached,
                quantities,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hyndman & Fan (1996) type 7 by hand: x = [1, 2, 4, 8, 16] (n = 5).
    // p = 0.05: h = 4 * 0.05 = 0.2 -> 1 + 0.2 * (2 - 1) = 1.2
    // p = 0.5:  h = 2 -> x[2] = 4
    // p = 0.95: h = 3.8 -> 8 + 0.8 * (16 - 8) = 14.4
    #[test]
    fn type_7_quantiles_by_hand() {
        let x = [1.0, 2.0, 4.0, 8.0, 16.0];
        assert!((quantile(&x, 0.05).unwrap() - 1.2).abs() < 1e-12);
        assert_eq!(quantile(&x, 0.5), Some(4.0));
        assert!((quantile(&x, 0.95).unwrap() - 14.4).abs() < 1e-12);
        assert_eq!(quantile(&x, 0.0), Some(1.0));
        assert_eq!(quantile(&x, 1.0), Some(16.0));
        assert_eq!(quantile(&[], 0.5), None);
        assert_eq!(quantile(&[3.0], 0.95), Some(3.0));
    }

    // Even count, by hand: x = 10, 20, 30, 40 (n = 4); median h = 1.5 -> 25;
    // p = 0.05: h = 0.15 -> 10 + 0.15 * 10 = 11.5; p = 0.95: h = 2.85 -> 30 + 0.85 * 10 = 38.5.
    // The same values as numpy.percentile([10, 20, 30, 40], [5, 50, 95]) (from memory).
    #[test]
    fn distribution_of_unsorted_values_with_nan() {
        let d = Distribution::of(&[40.0, f64::NAN, 10.0, 30.0, 20.0]).unwrap();
        assert_eq!(d.n, 4);
        assert!((d.p5 - 11.5).abs() < 1e-12);
        assert_eq!(d.p50, 25.0);
        assert!((d.p95 - 38.5).abs() < 1e-12);
        assert_eq!((d.min, d.max, d.mean), (10.0, 40.0, 25.0));
        assert!(Distribution::of(&[f64::NAN]).is_none());
    }
}
