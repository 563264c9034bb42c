//! Grid-convergence index and Richardson extrapolation from three grids, following the
//! procedure of Celik, Ghia, Roache, Freitas, Coleman & Raad (2008), "Procedure for estimation
//! and reporting of uncertainty due to discretization in CFD applications", J. Fluids Eng. 130,
//! 078001.
//!
//! Grid 1 is the finest, grid 3 the coarsest. With representative cell sizes h1 < h2 < h3
//! (`h = (1/N)^(1/dims)` from cell counts, or given spacings), `r21 = h2/h1`, `r32 = h3/h2`,
//! `eps21 = f2 - f1`, `eps32 = f3 - f2` and `s = sign(eps32/eps21)`, the apparent order p solves
//! `p = |ln|eps32/eps21| + q(p)| / ln r21` with `q(p) = ln((r21^p - s)/(r32^p - s))` (fixed-point
//! iteration from q = 0). Then `phi_ext21 = (r21^p f1 - f2)/(r21^p - 1)`,
//! `e_a21 = |(f1 - f2)/f1|`, `e_ext21 = |(phi_ext21 - f1)/phi_ext21|` and
//! `GCI_fine21 = Fs e_a21/(r21^p - 1)` with the safety factor Fs = 1.25.
//!
//! Every case the formulas cannot cover (equal values, divergence, an iteration that does not
//! settle, a zero value in a relative error) is returned as a [`Convergence`] with words and
//! `None` in the affected numbers, never as a silent NaN.

/// Knobs of the procedure.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GciParams {
    /// Safety factor Fs on the GCI (1.25 for three or more grids; Celik et al. 2008).
    pub safety: f64,
    /// The fixed-point iteration for p stops when successive values differ by less than this.
    pub tolerance: f64,
    /// Cap on fixed-point iterations.
    pub max_iterations: usize,
}

impl Default for GciParams {
    fn default() -> Self {
        Self {
            safety: 1.25,
            tolerance: 1e-12,
            max_iterations: 500,
        }
    }
}

/// How the three values behave under refinement.
#[derive(Debug, Clone, PartialEq)]
pub enum Convergence {
    /// 0 < eps21/eps32 < 1: the changes shrink without changing sign.
    Monotonic,
    /// -1 < eps21/eps32 < 0: the changes shrink and alternate in sign (Celik et al. 2008 flag
    /// this case; the procedure still applies with s = -1).
    Oscillatory,
    /// |eps21/eps32| >= 1: the change between the two finest grids is not smaller than the one
    /// between the two coarsest; p and the GCI are not meaningful.
    Divergent,
    /// The procedure cannot be applied; the reason in words.
    Degenerate(String),
}

impl Convergence {
    /// A short word for tables: `monotonic`, `oscillatory`, `divergent`, `degenerate`.
    pub fn word(&self) -> &'static str {
        match self {
            Convergence::Monotonic => "monotonic",
            Convergence::Oscillatory => "oscillatory",
            Convergence::Divergent => "divergent",
            Convergence::Degenerate(_) => "degenerate",
        }
    }

    /// The explanation for the user (empty for monotonic convergence).
    pub fn explain(&self) -> String {
        match self {
            Convergence::Monotonic => String::new(),
            Convergence::Oscillatory => {
                "oscillatory convergence: the value alternates about its limit as the grid is refined; the extrapolated value and GCI assume one-signed errors and are rough here".into()
            }
            Convergence::Divergent => "divergent: the change between the two finest grids is not smaller than between the two coarsest; refine further before trusting any value".into(),
            Convergence::Degenerate(s) => s.clone(),
        }
    }
}

/// The result of the three-grid procedure.
#[derive(Debug, Clone, PartialEq)]
pub struct Gci {
    /// The values, finest first.
    pub f: [f64; 3],
    /// The representative cell sizes, finest first.
    pub h: [f64; 3],
    /// h2/h1.
    pub r21: f64,
    /// h3/h2.
    pub r32: f64,
    /// The behaviour under refinement.
    pub convergence: Convergence,
    /// Apparent order p.
    pub p: Option<f64>,
    /// Richardson-extrapolated value phi_ext21.
    pub extrapolated: Option<f64>,
    /// Approximate relative error e_a21 = |(f1 - f2)/f1|.
    pub e_a21: Option<f64>,
    /// Extrapolated relative error e_ext21 = |(phi_ext21 - f1)/phi_ext21|.
    pub e_ext21: Option<f64>,
    /// Fine-grid convergence index GCI_fine21 = Fs e_a21/(r21^p - 1), as a fraction.
    pub gci_fine21: Option<f64>,
}

/// Representative cell size of a grid of `cells` cells in `dims` dimensions: `(1/N)^(1/dims)`
/// (Celik et al. 2008, eq. 1, for a domain of unit size).
pub fn spacing_from_cells(cells: f64, dims: u32) -> f64 {
    (1.0 / cells).powf(1.0 / f64::from(dims.max(1)))
}

/// Why `(f, h)` cannot enter the procedure, if they cannot.
fn check_inputs(f: &[f64; 3], h: &[f64; 3]) -> Option<String> {
    if f.iter().chain(h).any(|v| !v.is_finite()) {
        return Some("every value and spacing must be a finite number".into());
    }
    if h.iter().any(|&v| v <= 0.0) {
        return Some("every spacing (or cell count) must be positive".into());
    }
    if !(h[0] < h[1] && h[1] < h[2]) {
        return Some("the grids must be given finest first with strictly growing spacing (falling cell counts)".into());
    }
    None
}

/// Runs the procedure on values `f` (finest first) with cell sizes `h` (finest first).
pub fn gci(f: [f64; 3], h: [f64; 3], params: &GciParams) -> Gci {
    let r21 = h[1] / h[0];
    let r32 = h[2] / h[1];
    let mut out = Gci {
        f,
        h,
        r21,
        r32,
        convergence: Convergence::Monotonic,
        p: None,
        extrapolated: None,
        e_a21: None,
        e_ext21: None,
        gci_fine21: None,
    };
    if let Some(why) = check_inputs(&f, &h) {
        out.convergence = Convergence::Degenerate(why);
        return out;
    }
    let eps21 = f[1] - f[0];
    let eps32 = f[2] - f[1];
    out.e_a21 = (f[0] != 0.0).then(|| ((f[0] - f[1]) / f[0]).abs());
    let scale = f.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if eps21.abs().max(eps32.abs()) <= 1e-12 * scale {
        out.convergence =
            Convergence::Degenerate("the values differ only at round-off: no grid dependence to resolve".into());
        return out;
    }
    if eps21 == 0.0 {
        out.convergence = Convergence::Degenerate(if eps32 == 0.0 {
            "the three values are equal: no grid dependence to the digits given".into()
        } else {
            "the two finest values are equal but the coarsest differs: the order cannot be estimated (an accidental crossing is likely); use another grid triplet".into()
        });
        return out;
    }
    if eps32 == 0.0 {
        out.convergence = Convergence::Degenerate(
            "the two coarsest values are equal but the finest differs: the order cannot be estimated".into(),
        );
        return out;
    }
    let ratio = eps21 / eps32;
    let s = ratio.signum();
    out.convergence = if ratio.abs() >= 1.0 {
        Convergence::Divergent
    } else if s < 0.0 {
        Convergence::Oscillatory
    } else {
        Convergence::Monotonic
    };
    if out.convergence == Convergence::Divergent {
        return out;
    }
    let ln_ratio = (eps32 / eps21).abs().ln();
    let ln_r21 = r21.ln();
    let q = |p: f64| ((r21.powf(p) - s) / (r32.powf(p) - s)).ln();
    let mut p = (ln_ratio / ln_r21).abs();
    let mut settled = false;
    for _ in 0..params.max_iterations {
        let next = ((ln_ratio + q(p)) / ln_r21).abs();
        if !next.is_finite() {
            break;
        }
        let change = (next - p).abs();
        p = next;
        if change <= params.tolerance * p.max(1.0) {
            settled = true;
            break;
        }
    }
    if !settled || !(p > 0.0) {
        out.convergence = Convergence::Degenerate(format!(
            "the fixed-point iteration for the order p did not settle (last value {p:.4}); the grids may be far from the asymptotic range"
        ));
        return out;
    }
    out.p = Some(p);
    let rp = r21.powf(p);
    let ext = (rp * f[0] - f[1]) / (rp - 1.0);
    if ext.is_finite() {
        out.extrapolated = Some(ext);
        out.e_ext21 = (ext != 0.0).then(|| ((ext - f[0]) / ext).abs());
    }
    out.gci_fine21 = out.e_a21.map(|ea| params.safety * ea / (rp - 1.0));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn celik_table_1_first_column() {
        // Celik et al. (2008), Table 1, phi = dimensionless reattachment length, column 1:
        // N = 18000, 8000, 4500 (2D); phi = 6.063, 5.972, 5.863; published p = 1.53,
        // phi_ext21 = 6.1685, e_a21 = 1.5%, e_ext21 = 1.7%, GCI_fine21 = 2.2%.
        let h = [18000.0, 8000.0, 4500.0].map(|n| spacing_from_cells(n, 2));
        let g = gci([6.063, 5.972, 5.863], h, &GciParams::default());
        assert_eq!(g.convergence, Convergence::Monotonic);
        assert!((g.p.unwrap() - 1.53).abs() < 0.01, "{g:?}");
        assert!((g.extrapolated.unwrap() - 6.1685).abs() < 5e-4, "{g:?}");
        assert!((g.e_a21.unwrap() - 0.015).abs() < 5e-4, "{g:?}");
        assert!((g.e_ext21.unwrap() - 0.017).abs() < 5e-4, "{g:?}");
        assert!((g.gci_fine21.unwrap() - 0.022).abs() < 5e-4, "{g:?}");
    }

    #[test]
    fn exact_power_law_recovers_its_order_and_limit() {
        // f = 2 + 3 h^2 on non-uniform refinement: p = 2 and the limit 2 exactly.
        let h = [0.1, 0.17, 0.3];
        let f = h.map(|x| 2.0 + 3.0 * x * x);
        let g = gci(f, h, &GciParams::default());
        assert!((g.p.unwrap() - 2.0).abs() < 1e-9, "{g:?}");
        assert!((g.extrapolated.unwrap() - 2.0).abs() < 1e-9, "{g:?}");
    }

    #[test]
    fn oscillating_divergent_and_degenerate_cases_are_named() {
        let h = [1.0, 2.0, 4.0];
        // f = 1 + (-1)^k 0.5^k...: changes alternate and shrink.
        let g = gci([1.0 + 0.25, 1.0 - 0.5, 1.0 + 1.0], h, &GciParams::default());
        assert_eq!(g.convergence, Convergence::Oscillatory);
        assert!((g.p.unwrap() - 1.0).abs() < 1e-9, "{g:?}");
        // Celik's extrapolation formula assumes errors of one sign; with s = -1 it is still
        // applied (as the procedure prescribes) but is not the alternating series' limit.
        assert!(g.extrapolated.is_some() && g.gci_fine21.is_some());
        let d = gci([1.0, 2.0, 2.5], h, &GciParams::default());
        assert_eq!(d.convergence, Convergence::Divergent);
        assert!(d.p.is_none() && d.gci_fine21.is_none());
        let e = gci([3.0, 3.0, 3.0], h, &GciParams::default());
        assert!(matches!(e.convergence, Convergence::Degenerate(_)));
        assert!(!e.convergence.explain().is_empty());
        let bad = gci([1.0, 2.0, 3.0], [2.0, 1.0, 4.0], &GciParams::default());
        assert!(matches!(bad.convergence, Convergence::Degenerate(_)));
        let nan = gci([f64::NAN, 2.0, 3.0], h, &GciParams::default());
        assert!(matches!(nan.convergence, Convergence::Degenerate(_)));
    }
}
