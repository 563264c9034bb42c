//! Grid against particles at each receptor: peaks, times and arrival side by side with the
//! particle uncertainty, a verdict, and one sentence saying which to trust and why.
//!
//! The rules (common practice for comparing a Monte Carlo estimate with a deterministic one):
//! - no particle ever entered the receptor's cell: if the grid's peak is below three times
//!   the value one particle gives there, both say little reaches it; otherwise the grid shows
//!   tracer where no particle went, which numerical diffusion does ahead of a plume;
//! - fewer than [`MIN_COUNT`] particles in the cell at the particle peak: the particle value is
//!   too noisy to judge (relative error above 20%), raise N;
//! - else the peaks agree when they differ by at most [`AGREE_SIGMAS`] standard errors; a grid
//!   peak lower by more is the mark of numerical diffusion (it flattens peaks), a higher one of
//!   numerical diffusion spreading mass towards a receptor at a plume's edge, or of an
//!   unbounded scheme's overshoot.
//!
//! The particle peak is the largest of a noisy series, which sits above the true peak by up
//! to one or two standard errors; the sentence gives the numbers so the reader can judge.

use super::march::ParticleReceptor;
use crate::run::receptors::ReceptorStats;

/// Fewest particles in the receptor's cell at the peak for a judgement (20% error).
pub const MIN_COUNT: u32 = 25;

/// Standard errors within which the two peaks agree.
pub const AGREE_SIGMAS: f64 = 3.0;

/// The verdict at one receptor.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Within the particle uncertainty.
    Agree,
    /// The grid peak is lower: likely numerical diffusion.
    GridLower,
    /// The grid peak is higher.
    GridHigher,
    /// Too few particles to judge.
    Noisy,
    /// Neither method brings a resolvable amount.
    NotReached,
}

impl Verdict {
    /// The verdict's name as in `comparison.csv` and `summary.json`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Agree => "agree",
            Verdict::GridLower => "grid_lower",
            Verdict::GridHigher => "grid_higher",
            Verdict::Noisy => "noisy",
            Verdict::NotReached => "not_reached",
        }
    }
}

/// One receptor's comparison.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ReceptorComparison {
    /// Receptor name.
    pub name: String,
    /// Grid peak.
    pub grid_peak: f64,
    /// When, s.
    pub grid_peak_time: f64,
    /// Grid arrival (threshold first reached), s.
    pub grid_arrival: Option<f64>,
    /// Particle peak (cell value).
    pub particle_peak: f64,
    /// Its standard error.
    pub particle_std_error: f64,
    /// Particles in the cell at the particle peak.
    pub particle_count: u32,
    /// When, s.
    pub particle_peak_time: f64,
    /// Particle arrival, s.
    pub particle_arrival: Option<f64>,
    /// Largest kernel value.
    pub kernel_peak: f64,
    /// The value one particle gives in the receptor's cell.
    pub one_particle: f64,
    /// `(grid - particle) / particle`, when the particle peak is positive.
    pub relative_difference: Option<f64>,
    /// Verdict.
    pub verdict: Verdict,
    /// The sentence for the report.
    pub sentence: String,
}

/// Compares the grid statistics `g` with the particle statistics `p` of the same receptor;
/// `one_particle` is the concentration one particle gives in its cell, `count` the particles
/// of the run (for the advice on N), `units` the concentration units.
pub fn compare(
    g: &ReceptorStats,
    p: &ParticleReceptor,
    one_particle: f64,
    count: usize,
    units: &str,
) -> ReceptorComparison {
    let (gp, pp, se, n) = (g.peak.max(0.0), p.peak.max(0.0), p.at_peak.std_error, p.at_peak.count);
    let rel = (pp > 0.0).then(|| (gp - pp) / pp);
    let num = |v: f64| format!("{v:.3e}");
    let (verdict, sentence) = if n == 0 {
        if gp < 3.0 * one_particle {
            (
                Verdict::NotReached,
                format!(
                    "neither method brings a resolvable amount here: the grid peak {} {units} is below three particles' worth ({} {units} each with {count} particles)",
                    num(gp),
                    num(one_particle)
                ),
            )
        } else {
            (
                Verdict::GridHigher,
                format!(
                    "the grid shows a peak of {} {units} where no particle arrived (one particle would read {} {units}): likely numerical diffusion carrying mass ahead of the plume; raise N to confirm",
                    num(gp),
                    num(one_particle)
                ),
            )
        }
    } else if n < MIN_COUNT {
        let wanted = (count as f64 * 100.0 / n as f64).ceil();
        (
            Verdict::Noisy,
            format!(
                "the particle result is noisy: {n} particles were in the receptor's cell at its peak ({} ± {:.0}%); raise N to about {wanted:.0} for ±10% (the grid peak is {} {units})",
                num(pp),
                100.0 * se / pp.max(f64::MIN_POSITIVE),
                num(gp)
            ),
        )
    } else if (gp - pp).abs() <= AGREE_SIGMAS * se {
        (
            Verdict::Agree,
            format!(
                "grid and particles agree within the particle uncertainty: peak {} against {} ± {} {units} (one standard error, {n} particles)",
                num(gp),
                num(pp),
                num(se)
            ),
        )
    } else if gp < pp {
        (
            Verdict::GridLower,
            format!(
                "the grid result is {:.0}% lower than the particles' ({} against {} ± {} {units}), more than three standard errors: likely numerical diffusion of the grid scheme flattening the peak; trust the particle value, or refine the grid or choose a less diffusive limiter (tinct check)",
                100.0 * (pp - gp) / pp,
                num(gp),
                num(pp),
                num(se)
            ),
        )
    } else {
        (
            Verdict::GridHigher,
            format!(
                "the grid result is {:.0}% higher than the particles' ({} against {} ± {} {units}), more than three standard errors: numerical diffusion spreads mass towards a receptor at a plume's edge (or an unbounded scheme overshoots); trust the particle value",
                100.0 * (gp - pp) / pp,
                num(gp),
                num(pp),
                num(se)
            ),
        )
    };
    ReceptorComparison {
        name: g.name.clone(),
        grid_peak: gp,
        grid_peak_time: g.peak_time,
        grid_arrival: g.arrival_time,
        particle_peak: pp,
        particle_std_error: se,
        particle_count: n,
        particle_peak_time: p.peak_time,
        particle_arrival: p.arrival_time,
        kernel_peak: p.kernel_peak.max(0.0),
        one_particle,
        relative_difference: rel,
        verdict,
        sentence,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::particles::march::Sample;

    fn grid(peak: f64) -> ReceptorStats {
        ReceptorStats {
            name: "beach".into(),
            at: (0.0, 0.0),
            threshold: None,
            peak,
            peak_time: 10.0,
            arrival_time: None,
            time_above_threshold: None,
        }
    }

    fn particles(peak: f64, se: f64, count: u32) -> ParticleReceptor {
        ParticleReceptor {
            name: "beach".into(),
            at: (0.0, 0.0),
            threshold: None,
            samples: vec![],
            peak,
            peak_time: 12.0,
            at_peak: Sample {
                value: peak,
                std_error: se,
                count,
                kernel: peak,
                kernel_error: se,
            },
            kernel_peak: peak,
            arrival_time: None,
            time_above_threshold: None,
        }
    }

    #[test]
    fn each_verdict_follows_its_rule() {
        let v = |g: f64, p: f64, se: f64, n: u32| compare(&grid(g), &particles(p, se, n), 0.01, 1000, "kg/m3").verdict;
        assert_eq!(v(1.0, 1.05, 0.02, 2500), Verdict::Agree);
        assert_eq!(v(0.8, 1.0, 0.02, 2500), Verdict::GridLower);
        assert_eq!(v(1.2, 1.0, 0.02, 2500), Verdict::GridHigher);
        assert_eq!(v(1.0, 1.0, 0.3, 10), Verdict::Noisy);
        assert_eq!(v(0.02, 0.0, 0.0, 0), Verdict::NotReached);
        assert_eq!(v(0.5, 0.0, 0.0, 0), Verdict::GridHigher);
    }

    #[test]
    fn verdict_names_are_the_serialised_ones() {
        for v in [
            Verdict::Agree,
            Verdict::GridLower,
            Verdict::GridHigher,
            Verdict::Noisy,
            Verdict::NotReached,
        ] {
            assert_eq!(serde_json::to_value(v).unwrap(), v.as_str());
        }
    }

    #[test]
    fn the_noisy_advice_asks_for_enough_particles_for_ten_percent() {
        let c = compare(&grid(1.0), &particles(1.0, 0.3, 10), 0.1, 1000, "kg/m3");
        // 100 particles in the cell give 10% (1 / sqrt(100)): ten times the 10 seen.
        assert!(c.sentence.contains("10000"), "{}", c.sentence);
    }
}
