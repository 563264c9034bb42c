//! Flux limiters psi(r) for the upwind-biased face value of Sweby (1984), and their
//! monomorphised kernels.
//!
//! The face value is `c_f = c_C + 0.5 psi(r) (c_D - c_C)` with `r = (c_C - c_U) / (c_D - c_C)`,
//! C the upwind cell, U the one upwind of it, D the downwind cell (DESIGN §2). A limiter is
//! chosen once per step: [`Limiter`] is matched once and selects a zero-sized kernel type
//! implementing [`LimiterKernel`], so the per-face code is specialised and never re-matched.

use std::fmt;
use std::str::FromStr;

/// Guard added to the denominator of r (with its sign) against 0/0.
pub const R_GUARD: f64 = 1e-30;

/// A convection scheme, expressed as a flux limiter in Sweby's form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Limiter {
    /// First-order upwind: psi = 0. Bounded, strongly diffusive.
    Upwind,
    /// Central differencing: psi = 1. Second order, unbounded (oscillates above cell Peclet 2).
    Central,
    /// QUICK, Leonard (1979): psi = (3 + r)/4, quadratic upwind. Unbounded.
    Quick,
    /// Minmod, Roe (1986): psi = max(0, min(r, 1)).
    Minmod,
    /// van Leer (1974): psi = (r + |r|)/(1 + |r|).
    VanLeer,
    /// van Albada et al. (1982): psi = (r^2 + r)/(r^2 + 1), clamped to 0 for r <= 0.
    VanAlbada,
    /// Monotonised central, van Leer (1977): psi = max(0, min(2r, (1 + r)/2, 2)).
    Mc,
    /// Superbee, Roe (1985): psi = max(0, min(2r, 1), min(r, 2)).
    Superbee,
    /// Koren (1993), the limited kappa = 1/3 scheme: psi = max(0, min(2r, (2 + r)/3, 2)).
    Koren,
    /// Hybrid, Spalding (1972): switched by the face cell Peclet number P = |u| h / K; central
    /// for |P| < 2, upwind with the diffusion dropped above (A(P) = max(0, 1 - |P|/2) in
    /// Patankar's coefficient form).
    Hybrid,
    /// Power law, Patankar (1980): A(P) = max(0, (1 - 0.1 |P|)^5), a close fit to the exact
    /// exponential scheme of the 1D steady face problem.
    PowerLaw,
}

impl Limiter {
    /// Every scheme in Sweby's flux-limiter form (psi of r), in the order of DESIGN §2: the
    /// first nine of [`Limiter::EVERY`].
    pub const ALL: [Limiter; 9] = {
        let mut all = [Limiter::Upwind; 9];
        let mut k = 0;
        while k < 9 {
            all[k] = Self::EVERY[k];
            k += 1;
        }
        all
    };

    /// The schemes switched by the local cell Peclet number (coefficient form).
    pub const PECLET_SWITCHED: [Limiter; 2] = [Limiter::Hybrid, Limiter::PowerLaw];

    /// Every convection scheme: the limiters, then the Peclet-switched schemes.
    pub const EVERY: [Limiter; 11] = [
        Limiter::Upwind,
        Limiter::Central,
        Limiter::Quick,
        Limiter::Minmod,
        Limiter::VanLeer,
        Limiter::VanAlbada,
        Limiter::Mc,
        Limiter::Superbee,
        Limiter::Koren,
        Limiter::Hybrid,
        Limiter::PowerLaw,
    ];

    /// Whether the scheme is switched by the cell Peclet number instead of a limiter of r.
    pub fn is_peclet_switched(self) -> bool {
        matches!(self, Limiter::Hybrid | Limiter::PowerLaw)
    }

    /// Patankar's A(|P|) of a Peclet-switched scheme (the weight of the diffusive conductance
    /// in the neighbour coefficient); 1 for the other schemes.
    pub fn peclet_weight(self, pe: f64) -> f64 {
        match self {
            Limiter::Hybrid => Hybrid::weight(pe),
            Limiter::PowerLaw => PowerLaw::weight(pe),
            _ => 1.0,
        }
    }

    /// The scenario-file name.
    pub fn name(self) -> &'static str {
        match self {
            Limiter::Upwind => "upwind",
            Limiter::Central => "central",
            Limiter::Quick => "quick",
            Limiter::Minmod => "minmod",
            Limiter::VanLeer => "van_leer",
            Limiter::VanAlbada => "van_albada",
            Limiter::Mc => "mc",
            Limiter::Superbee => "superbee",
            Limiter::Koren => "koren",
            Limiter::Hybrid => "hybrid",
            Limiter::PowerLaw => "power_law",
        }
    }

    /// The allowed names, comma separated, for error messages.
    pub fn allowed() -> String {
        Self::EVERY.iter().map(|l| l.name()).collect::<Vec<_>>().join(", ")
    }

    /// Whether psi lies in Sweby's TVD region (bounded results); false for central and QUICK.
    pub fn is_bounded(self) -> bool {
        !matches!(self, Limiter::Central | Limiter::Quick)
    }

    /// `sup psi(r)/r` over r > 0 for the bounded limiters (`None` for central and QUICK): 0 for
    /// upwind and the Peclet-switched schemes (positive coefficients), 1 for minmod,
    /// `(1 + sqrt 2)/2` for van Albada (at r = sqrt 2 - 1), 2 for van Leer, MC, superbee and
    /// Koren (as r -> 0).
    pub fn slope_bound(self) -> Option<f64> {
        match self {
            Limiter::Upwind | Limiter::Hybrid | Limiter::PowerLaw => Some(0.0),
            Limiter::Minmod => Some(1.0),
            Limiter::VanAlbada => Some(0.5 * (1.0 + std::f64::consts::SQRT_2)),
            Limiter::VanLeer | Limiter::Mc | Limiter::Superbee | Limiter::Koren => Some(2.0),
            Limiter::Central | Limiter::Quick => None,
        }
    }

    /// The largest Courant-number sum at which one forward-Euler stage with this limiter makes
    /// no new extrema: `C (1 + sup psi(r)/r / 2) <= 1`. Derivation (Harten 1983, in Sweby's
    /// 1984 face-value form): for u > 0 the update is `c_i - A (c_i - c_{i-1})` with
    /// `A = C (1 + psi(r_i)/(2 r_i) - psi(r_{i-1})/2)`; `0 <= psi <= 2` keeps `A >= 0` and the
    /// bound keeps `A <= 1`, so the new value is a convex combination of old ones. Each stage of
    /// the SSP Runge–Kutta schemes used has coefficient 1, so the bound holds for 1 to 3 stages.
    /// 1 for upwind, 2/3 for minmod, 0.624 for van Albada, 1/2 for van Leer, MC, superbee and
    /// Koren; `None` for the unbounded schemes.
    pub fn tvd_courant(self) -> Option<f64> {
        self.slope_bound().map(|s| 1.0 / (1.0 + 0.5 * s))
    }

    /// psi(r), for tests and diagnostics (the time loop uses the monomorphised kernels). The
    /// Peclet-switched schemes have no psi(r); their value here is that of their high-Peclet
    /// limit, upwind (0).
    pub fn psi(self, r: f64) -> f64 {
        match self {
            Limiter::Upwind => Upwind::psi(r),
            Limiter::Central => Central::psi(r),
            Limiter::Quick => Quick::psi(r),
            Limiter::Minmod => Minmod::psi(r),
            Limiter::VanLeer => VanLeer::psi(r),
            Limiter::VanAlbada => VanAlbada::psi(r),
            Limiter::Mc => Mc::psi(r),
            Limiter::Superbee => Superbee::psi(r),
            Limiter::Koren => Koren::psi(r),
            Limiter::Hybrid | Limiter::PowerLaw => 0.0,
        }
    }
}

impl fmt::Display for Limiter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Error for an unknown limiter name; lists the allowed ones.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown convection scheme '{0}': allowed are {allowed}", allowed = Limiter::allowed())]
pub struct UnknownLimiter(pub String);

impl FromStr for Limiter {
    type Err = UnknownLimiter;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Self::EVERY
            .iter()
            .copied()
            .find(|l| l.name() == s)
            .ok_or_else(|| UnknownLimiter(s.to_string()))
    }
}

/// A limiter specialised at compile time: the half-increment `0.5 psi(r) b` from the upwind
/// difference `a = c_C - c_U` and the downwind difference `b = c_D - c_C`; or, for the
/// Peclet-switched schemes (`PECLET = true`), Patankar's weight A(|P|).
pub trait LimiterKernel: Send + Sync {
    /// Whether the face flux comes from Patankar's coefficient form with [`Self::weight`]
    /// instead of a limited face value.
    const PECLET: bool = false;

    /// psi(r).
    fn psi(r: f64) -> f64;

    /// A(|P|) for the Peclet-switched schemes (1, i.e. central diffusion, for the others).
    #[inline(always)]
    fn weight(_pe: f64) -> f64 {
        1.0
    }

    /// `0.5 psi(r) b` with `r = a / (b + copysign(R_GUARD, b))`.
    #[inline(always)]
    fn increment(a: f64, b: f64) -> f64 {
        let r = a / (b + R_GUARD.copysign(b));
        0.5 * Self::psi(r) * b
    }
}

/// Kernel type of [`Limiter::Upwind`].
pub struct Upwind;
/// Kernel type of [`Limiter::Central`].
pub struct Central;
/// Kernel type of [`Limiter::Quick`].
pub struct Quick;
/// Kernel type of [`Limiter::Minmod`].
pub struct Minmod;
/// Kernel type of [`Limiter::VanLeer`].
pub struct VanLeer;
/// Kernel type of [`Limiter::VanAlbada`].
pub struct VanAlbada;
/// Kernel type of [`Limiter::Mc`].
pub struct Mc;
/// Kernel type of [`Limiter::Superbee`].
pub struct Superbee;
/// Kernel type of [`Limiter::Koren`].
pub struct Koren;
/// Kernel type of [`Limiter::Hybrid`].
pub struct Hybrid;
/// Kernel type of [`Limiter::PowerLaw`].
pub struct PowerLaw;

impl LimiterKernel for Hybrid {
    const PECLET: bool = true;
    #[inline(always)]
    fn psi(_r: f64) -> f64 {
        0.0
    }
    /// Spalding (1972) in Patankar's (1980) form: max(0, 1 - |P|/2) (NaN maps to 0).
    #[inline(always)]
    fn weight(pe: f64) -> f64 {
        (1.0 - 0.5 * pe.abs()).max(0.0)
    }
}

impl LimiterKernel for PowerLaw {
    const PECLET: bool = true;
    #[inline(always)]
    fn psi(_r: f64) -> f64 {
        0.0
    }
    /// Patankar (1980), eq. 5.43: max(0, (1 - 0.1 |P|)^5) (NaN maps to 0).
    #[inline(always)]
    fn weight(pe: f64) -> f64 {
        let t = (1.0 - 0.1 * pe.abs()).max(0.0);
        let t2 = t * t;
        t2 * t2 * t
    }
}

impl LimiterKernel for Upwind {
    #[inline(always)]
    fn psi(_r: f64) -> f64 {
        0.0
    }
    #[inline(always)]
    fn increment(_a: f64, _b: f64) -> f64 {
        0.0
    }
}

impl LimiterKernel for Central {
    #[inline(always)]
    fn psi(_r: f64) -> f64 {
        1.0
    }
    #[inline(always)]
    fn increment(_a: f64, b: f64) -> f64 {
        0.5 * b
    }
}

impl LimiterKernel for Quick {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        (3.0 + r) * 0.25
    }
    /// QUICK needs no ratio: `0.5 (3 + r)/4 b = (3 b + a)/8`.
    #[inline(always)]
    fn increment(a: f64, b: f64) -> f64 {
        (3.0 * b + a) * 0.125
    }
}

impl LimiterKernel for Minmod {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        r.min(1.0).max(0.0)
    }
}

impl LimiterKernel for VanLeer {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        (r + r.abs()) / (1.0 + r.abs())
    }
    /// One division instead of two: with r = a/b, `0.5 psi(r) b = 0.5 (a|b| + |a|b)/(|a| + |b|)`
    /// (equal in exact arithmetic; the guard moves to the denominator).
    #[inline(always)]
    fn increment(a: f64, b: f64) -> f64 {
        0.5 * (a * b.abs() + a.abs() * b) / (a.abs() + b.abs() + R_GUARD)
    }
}

impl LimiterKernel for VanAlbada {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        let p = (r * r + r) / (r * r + 1.0);
        if r > 0.0 {
            p
        } else {
            0.0
        }
    }
}

impl LimiterKernel for Mc {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        (2.0 * r).min(0.5 * (1.0 + r)).min(2.0).max(0.0)
    }
}

impl LimiterKernel for Superbee {
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        (2.0 * r).min(1.0).max(r.min(2.0)).max(0.0)
    }
}

impl LimiterKernel for Koren {
    /// Koren (1993) writes the limiter on the inverse ratio as
    /// max(0, min(2r', (1 + 2r')/3, 2)) multiplying the upwind difference; in Sweby's form
    /// (psi multiplies the downwind difference, r = 1/r') it is r phi(1/r) as below.
    #[inline(always)]
    fn psi(r: f64) -> f64 {
        (2.0 * r).min((2.0 + r) / 3.0).min(2.0).max(0.0)
    }
}

/// Runs `$body` with the type alias `$k` bound to the kernel type of `$lim`: the single place
/// where a [`Limiter`] value is turned into code.
#[macro_export]
macro_rules! with_limiter {
    ($lim:expr, $k:ident => $body:expr) => {{
        use $crate::ops::limiter as lk;
        match $lim {
            lk::Limiter::Upwind => {
                type $k = lk::Upwind;
                $body
            }
            lk::Limiter::Central => {
                type $k = lk::Central;
                $body
            }
            lk::Limiter::Quick => {
                type $k = lk::Quick;
                $body
            }
            lk::Limiter::Minmod => {
                type $k = lk::Minmod;
                $body
            }
            lk::Limiter::VanLeer => {
                type $k = lk::VanLeer;
                $body
            }
            lk::Limiter::VanAlbada => {
                type $k = lk::VanAlbada;
                $body
            }
            lk::Limiter::Mc => {
                type $k = lk::Mc;
                $body
            }
            lk::Limiter::Superbee => {
                type $k = lk::Superbee;
                $body
            }
            lk::Limiter::Koren => {
                type $k = lk::Koren;
                $body
            }
            lk::Limiter::Hybrid => {
                type $k = lk::Hybrid;
                $body
            }
            lk::Limiter::PowerLaw => {
                type $k = lk::PowerLaw;
                $body
            }
        }
    }};
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-14 * b.abs().max(1.0)
    }

    /// psi at r = 0.5, 1, 2, 3, 10, from each limiter's published formula:
    /// minmod and superbee Roe (1985, 1986), van Leer (1974), van Albada, van Leer & Roberts
    /// (1982), MC van Leer (1977), Koren (1993, converted to Sweby's r), QUICK Leonard (1979)
    /// (3 + r)/4. Values worked by hand from those formulas.
    /// The slope bounds are the suprema of psi(r)/r (sampled densely over r > 0; the formulas'
    /// own values, common practice) and psi stays within [0, 2] (Sweby 1984).
    #[test]
    fn slope_bounds_are_the_suprema_of_psi_over_r() {
        for l in Limiter::ALL {
            let Some(s) = l.slope_bound() else {
                assert!(!l.is_bounded());
                continue;
            };
            let mut sup = 0.0f64;
            for k in 0..=200_000 {
                let r = 10f64.powf(-8.0 + 16.0 * k as f64 / 200_000.0);
                let p = l.psi(r);
                assert!((0.0..=2.0 + 1e-12).contains(&p), "{l:?}: psi({r}) = {p}");
                sup = sup.max(p / r);
            }
            assert!(sup <= s * (1.0 + 1e-12), "{l:?}: sup {sup} above {s}");
            assert!(sup >= s * (1.0 - 1e-6), "{l:?}: sup {sup} below {s}");
        }
        assert_eq!(Limiter::VanLeer.tvd_courant(), Some(0.5));
        assert_eq!(Limiter::Minmod.tvd_courant(), Some(2.0 / 3.0));
        assert!((Limiter::VanAlbada.tvd_courant().unwrap() - 0.6237).abs() < 1e-4);
        assert_eq!(Limiter::Central.tvd_courant(), None);
    }

    #[test]
    fn published_values() {
        let rs = [0.5, 1.0, 2.0, 3.0, 10.0];
        let table: [(Limiter, [f64; 5]); 9] = [
            (Limiter::Upwind, [0.0; 5]),
            (Limiter::Central, [1.0; 5]),
            (Limiter::Quick, [0.875, 1.0, 1.25, 1.5, 3.25]),
            (Limiter::Minmod, [0.5, 1.0, 1.0, 1.0, 1.0]),
            (Limiter::Superbee, [1.0, 1.0, 2.0, 2.0, 2.0]),
            (Limiter::VanLeer, [2.0 / 3.0, 1.0, 4.0 / 3.0, 1.5, 20.0 / 11.0]),
            (Limiter::VanAlbada, [0.6, 1.0, 1.2, 1.2, 110.0 / 101.0]),
            (Limiter::Mc, [0.75, 1.0, 1.5, 2.0, 2.0]),
            (Limiter::Koren, [2.5 / 3.0, 1.0, 4.0 / 3.0, 5.0 / 3.0, 2.0]),
        ];
        for (lim, want) in table {
            for (r, w) in rs.iter().zip(want) {
                assert!(close(lim.psi(*r), w), "{lim} psi({r}) = {} want {w}", lim.psi(*r));
            }
        }
    }

    /// Sweby (1984): a second-order TVD limiter has 0 <= psi <= min(2r, 2), psi = 0 for r <= 0
    /// and psi(1) = 1. Dense sweep over r in [-10, 100].
    #[test]
    fn bounded_limiters_lie_in_sweby_tvd_region() {
        for lim in Limiter::ALL {
            let mut inside = true;
            for k in 0..=110_000 {
                let r = -10.0 + k as f64 * 1e-3;
                let p = lim.psi(r);
                let ok = if r <= 0.0 {
                    p == 0.0
                } else {
                    p >= 0.0 && p <= (2.0 * r).min(2.0) + 1e-15
                };
                inside &= ok;
            }
            assert_eq!(inside, lim.is_bounded(), "{lim}: TVD region membership vs is_bounded()");
            if lim != Limiter::Upwind {
                assert!(close(lim.psi(1.0), 1.0), "{lim}: psi(1) = 1 (second order)");
            }
        }
        assert!(!Limiter::Central.is_bounded() && !Limiter::Quick.is_bounded());
    }

    /// Symmetry psi(r)/r = psi(1/r) (Sweby 1984) holds for minmod, van Leer, van Albada, MC and
    /// superbee; not for Koren or QUICK, which are upwind-biased by design.
    #[test]
    fn symmetric_limiters_are_symmetric() {
        for lim in [
            Limiter::Minmod,
            Limiter::VanLeer,
            Limiter::VanAlbada,
            Limiter::Mc,
            Limiter::Superbee,
        ] {
            for k in 1..2000 {
                let r = k as f64 * 0.01;
                assert!(close(lim.psi(r) / r, lim.psi(1.0 / r)), "{lim} at r = {r}");
            }
        }
        assert!(!close(Limiter::Koren.psi(0.5) / 0.5, Limiter::Koren.psi(2.0)));
    }

    #[test]
    fn increment_guards_zero_over_zero() {
        fn inc(lim: Limiter, a: f64, b: f64) -> f64 {
            crate::with_limiter!(lim, K => K::increment(a, b))
        }
        for lim in Limiter::ALL {
            assert_eq!(inc(lim, 0.0, 0.0), 0.0, "{lim}");
            assert!(inc(lim, 1.0, 0.0).is_finite(), "{lim}");
            assert!(inc(lim, 1e-300, -1e-300).is_finite(), "{lim}");
            // The kernel increment equals 0.5 psi(r) b away from the guard.
            let (a, b) = (0.3, 0.7);
            assert!(close(inc(lim, a, b), 0.5 * lim.psi(a / b) * b), "{lim}");
        }
    }

    /// Patankar (1980), Numerical Heat Transfer and Fluid Flow, Table 5.2: A(|P|) of the power
    /// law is max(0, (1 - 0.1|P|)^5); of the hybrid scheme max(0, 1 - 0.5|P|) (Spalding 1972).
    /// Values worked by hand from the formulas: (1 - 0.1)^5 = 0.59049, (1 - 0.5)^5 = 0.03125.
    #[test]
    fn peclet_weights_follow_patankar() {
        let pl = [(0.0, 1.0), (1.0, 0.59049), (5.0, 0.03125), (10.0, 0.0), (20.0, 0.0)];
        for (pe, want) in pl {
            assert!(close(Limiter::PowerLaw.peclet_weight(pe), want), "power law A({pe})");
            assert!(close(Limiter::PowerLaw.peclet_weight(-pe), want));
        }
        // Hybrid: central weight 1 - |P|/2 below |P| = 2, zero (upwind, no diffusion) above.
        assert!(close(Limiter::Hybrid.peclet_weight(1.0), 0.5));
        assert!(Limiter::Hybrid.peclet_weight(1.99) > 0.0);
        assert_eq!(Limiter::Hybrid.peclet_weight(2.0), 0.0);
        assert_eq!(Limiter::Hybrid.peclet_weight(2.01), 0.0);
        assert_eq!(Limiter::Hybrid.peclet_weight(f64::INFINITY), 0.0);
        assert_eq!(Limiter::PowerLaw.peclet_weight(f64::NAN), 0.0);
        assert_eq!(Limiter::VanLeer.peclet_weight(5.0), 1.0);
        assert!(Limiter::Hybrid.is_peclet_switched() && !Limiter::Superbee.is_peclet_switched());
    }

    #[test]
    fn names_round_trip_and_unknown_names_list_the_allowed() {
        for lim in Limiter::EVERY {
            assert_eq!(lim.name().parse::<Limiter>().unwrap(), lim);
        }
        let e = "vanleer".parse::<Limiter>().unwrap_err().to_string();
        assert!(
            e.contains("van_leer") && e.contains("superbee") && e.contains("power_law"),
            "{e}"
        );
    }
}
