//! Flushing of a basin that starts with tracer and has no sources: the e-folding time of the
//! mass remaining (the time to fall to 1/e of the start, interpolated in log mass between
//! logged rows; common practice, definitions as in Monsen, Cloern, Lucas & Monismith 2002,
//! Limnol. Oceanogr. 47, 1545), the least-squares exponential rate with its fit, and, with a
//! tide, the tidal-prism estimate `V T / ((1 - b) P)` (return-flow factor b; Dyer 1997,
//! Estuaries: A Physical Introduction, from memory).

/// Flushing figures of a run.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Flushing {
    /// Time for the mass remaining to fall to 1/e of the start, s (`None` if not reached).
    pub e_folding_time: Option<f64>,
    /// Rate k of the least-squares fit `ln(m/m0) = -k t` through the origin, 1/s.
    pub fitted_rate: f64,
    /// Coefficient of determination of that fit (1 for an exact exponential).
    pub fit_r2: f64,
    /// Tidal-prism estimate `V T / ((1 - b) P)`, s (with a tidal amplitude).
    pub prism_estimate: Option<f64>,
    /// The return-flow factor b used in it.
    pub return_flow: Option<f64>,
    /// In words: what the figures mean and why the two estimates differ.
    pub note: String,
}

/// The flushing figures from `(time, mass)` samples starting at t = 0 with the initial mass, or
/// `None` with fewer than two samples or no initial mass. `prism` is `(volume, period, prism,
/// return_flow)` when the basin has a tide.
pub fn flushing(samples: &[(f64, f64)], prism: Option<(f64, f64, f64, f64)>) -> Option<Flushing> {
    let &(t0, m0) = samples.first()?;
    if samples.len() < 2 || !(m0 > 0.0) || !m0.is_finite() {
        return None;
    }
    let target = m0 / std::f64::consts::E;
    let mut e_folding = None;
    for w in samples.windows(2) {
        let ((ta, ma), (tb, mb)) = (w[0], w[1]);
        if ma > target && mb <= target && ma > 0.0 && mb > 0.0 {
            // Linear in log mass between the two rows (exact for an exponential decline).
            let (la, lb, lt) = (ma.ln(), mb.ln(), target.ln());
            e_folding = Some(ta + (tb - ta) * (la - lt) / (la - lb) - t0);
            break;
        }
    }
    // Least squares through the origin: y = ln(m/m0) = -k (t - t0).
    let pts: Vec<(f64, f64)> = samples
        .iter()
        .filter(|&&(_, m)| m > 0.0 && m.is_finite())
        .map(|&(t, m)| (t - t0, (m / m0).ln()))
        .collect();
    let (sxx, sxy) = pts.iter().fold((0.0, 0.0), |(a, b), &(x, y)| (a + x * x, b + x * y));
    let k = if sxx > 0.0 { -sxy / sxx } else { 0.0 };
    let mean = pts.iter().map(|p| p.1).sum::<f64>() / pts.len() as f64;
    let (ss_res, ss_tot) = pts.iter().fold((0.0, 0.0), |(r, t), &(x, y)| {
        (r + (y + k * x).powi(2), t + (y - mean).powi(2))
    });
    let fit_r2 = if ss_tot > 0.0 { 1.0 - ss_res / ss_tot } else { 1.0 };
    let prism_estimate = prism.map(|(v, period, p, b)| v * period / ((1.0 - b) * p));
    let sig = |x: f64| crate::diagnostics::advice::sig(x, 3);
    let mut note = match e_folding {
        Some(t) => format!(
            "the mass remaining fell to 1/e of the start after {} s (interpolated in log mass between logged rows); an exponential fit gives a rate of {} 1/s (1/rate = {} s, R^2 = {})",
            sig(t),
            sig(k),
            if k > 0.0 { sig(1.0 / k) } else { "-".into() },
            sig(fit_r2)
        ),
        None => format!(
            "the mass remaining did not fall to 1/e of the start within the run; an exponential fit gives a rate of {} 1/s (1/rate = {} s, R^2 = {}): run longer to measure the e-folding time",
            sig(k),
            if k > 0.0 { sig(1.0 / k) } else { "-".into() },
            sig(fit_r2)
        ),
    };
    if let (Some(est), Some((_, _, _, b))) = (prism_estimate, prism) {
        note.push_str(&format!(
            "; the tidal-prism estimate V T / ((1 - b) P) with b = {b} is {} s: it assumes every flood brings in only new water that mixes through the whole basin, so it is shorter than the simulated time where mixing is incomplete or ebb water returns on the flood",
            sig(est)
        ));
    }
    Some(Flushing {
        e_folding_time: e_folding,
        fitted_rate: k,
        fit_r2,
        prism_estimate,
        return_flow: prism.map(|p| p.3),
        note,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_exact_exponential_gives_its_time_constant() {
        // m = m0 exp(-t / 1000): e-folding 1000 s exactly, rate 1e-3, R^2 = 1 (worked by hand).
        let s: Vec<(f64, f64)> = (0..20)
            .map(|k| (k as f64 * 150.0, 5.0 * (-(k as f64) * 0.15).exp()))
            .collect();
        let f = flushing(&s, Some((1e6, 44712.0, 2e5, 0.25))).unwrap();
        assert!((f.e_folding_time.unwrap() - 1000.0).abs() < 1e-9);
        assert!((f.fitted_rate - 1e-3).abs() < 1e-15);
        assert!((f.fit_r2 - 1.0).abs() < 1e-12);
        // V T / ((1 - b) P) = 1e6 * 44712 / (0.75 * 2e5) = 298080 s.
        assert!((f.prism_estimate.unwrap() - 298080.0).abs() < 1e-6);
        let short = flushing(&s[..5], None).unwrap();
        assert_eq!(short.e_folding_time, None);
        assert!(short.note.contains("did not fall"));
        assert!(flushing(&s[..1], None).is_none());
    }
}
