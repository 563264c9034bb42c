//! Colour ramps and value normalisation for concentration maps.
//!
//! Both ramps are tinct's own design: a handful of control points chosen in
//! CIELAB (CIE 1976 L*a*b*, D65 white), interpolated piecewise-linearly in
//! that space and converted to 8-bit sRGB (IEC 61966-2-1 matrix and transfer
//! function). Working in CIELAB keeps lightness — the cue readers rely on to
//! order values — under direct control.
//!
//! - [`Ramp::Sequential`] ("ink to cream"): deep ink blue, slate blue,
//!   sea-glass green, dune sand, pale cream; L* rises linearly from 15 to 95.
//! - [`Ramp::Diverging`] for signed errors: deep indigo through a light warm
//!   grey at the centre to deep brick; L* is symmetric about 0.5 (32 at the
//!   ends, 96 at the centre).

/// Colour used for land (dry) cells: a neutral mid-light grey, distinct in
/// lightness from the cream top of the sequential ramp.
pub const LAND_RGB: [u8; 3] = [150, 150, 150];

/// Colour flagging NaN inputs: a saturated magenta that appears on neither ramp.
pub const NAN_RGB: [u8; 3] = [230, 0, 190];

/// Which colour ramp to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ramp {
    /// Lightness increases monotonically from dark (low) to light (high).
    Sequential,
    /// Two hues with a light neutral centre, lightness symmetric about 0.5.
    Diverging,
}

/// How values are mapped onto the ramp.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColourScale {
    /// Linear between `lo` and `hi`.
    Linear,
    /// Logarithmic between `lo` and `hi` (`lo` must be positive).
    Log,
}

/// Control points of the sequential ramp as CIELAB (L*, a*, b*). The ramp
/// parameter of each point is `(L* - 15) / 80`, so L* is linear in `t`.
const SEQUENTIAL_LAB: [[f64; 3]; 5] = [
    [15.0, 9.0, -30.0],   // ink blue
    [37.0, -10.0, -24.0], // slate blue
    [58.0, -27.0, 2.0],   // sea-glass green
    [78.0, -3.0, 30.0],   // dune sand
    [95.0, -1.0, 11.0],   // pale cream
];

/// Control points of the diverging ramp as (t, L*, a*, b*).
const DIVERGING_LAB: [[f64; 4]; 5] = [
    [0.0, 32.0, 22.0, -48.0], // deep indigo
    [0.25, 64.0, 4.0, -28.0], // hazy blue
    [0.5, 96.0, 1.0, 3.0],    // light warm grey
    [0.75, 64.0, 30.0, 30.0], // terracotta
    [1.0, 32.0, 36.0, 28.0],  // deep brick
];

/// Interpolated CIELAB colour of `ramp` at `t` in [0, 1] (not clamped to
/// the sRGB gamut yet).
fn ramp_lab(ramp: Ramp, t: f64) -> [f64; 3] {
    let t = t.clamp(0.0, 1.0);
    match ramp {
        Ramp::Sequential => {
            let pos = |p: &[f64; 3]| (p[0] - 15.0) / 80.0;
            interpolate(&SEQUENTIAL_LAB, t, pos, |p| *p)
        }
        Ramp::Diverging => interpolate(&DIVERGING_LAB, t, |p| p[0], |p| [p[1], p[2], p[3]]),
    }
}

/// Piecewise-linear interpolation through control points ordered by `pos`.
fn interpolate<P>(points: &[P], t: f64, pos: impl Fn(&P) -> f64, lab: impl Fn(&P) -> [f64; 3]) -> [f64; 3] {
    for w in points.windows(2) {
        let (t0, t1) = (pos(&w[0]), pos(&w[1]));
        if t <= t1 {
            let s = if t1 > t0 { (t - t0) / (t1 - t0) } else { 0.0 };
            let (a, b) = (lab(&w[0]), lab(&w[1]));
            return [
                a[0] + s * (b[0] - a[0]),
                a[1] + s * (b[1] - a[1]),
                a[2] + s * (b[2] - a[2]),
            ];
        }
    }
    lab(&points[points.len() - 1])
}

/// D65 reference white in CIE XYZ (Y = 1).
const WHITE_D65: [f64; 3] = [0.950_47, 1.0, 1.088_83];

/// CIELAB (D65) to linear-light sRGB, unclamped.
fn lab_to_linear_srgb(lab: [f64; 3]) -> [f64; 3] {
    // Inverse of the CIELAB companding function f(t).
    const DELTA: f64 = 6.0 / 29.0;
    let finv = |f: f64| {
        if f > DELTA {
            f * f * f
        } else {
            3.0 * DELTA * DELTA * (f - 4.0 / 29.0)
        }
    };
    let fy = (lab[0] + 16.0) / 116.0;
    let fx = fy + lab[1] / 500.0;
    let fz = fy - lab[2] / 200.0;
    let x = WHITE_D65[0] * finv(fx);
    let y = WHITE_D65[1] * finv(fy);
    let z = WHITE_D65[2] * finv(fz);
    // XYZ -> linear sRGB (IEC 61966-2-1).
    [
        3.240_454_2 * x - 1.537_138_5 * y - 0.498_531_4 * z,
        -0.969_266_0 * x + 1.876_010_8 * y + 0.041_556_0 * z,
        0.055_643_4 * x - 0.204_025_9 * y + 1.057_225_2 * z,
    ]
}

/// sRGB transfer function (IEC 61966-2-1): linear light to encoded [0, 1].
fn srgb_encode(c: f64) -> f64 {
    let c = c.clamp(0.0, 1.0);
    if c <= 0.003_130_8 {
        12.92 * c
    } else {
        1.055 * c.powf(1.0 / 2.4) - 0.055
    }
}

/// Inverse sRGB transfer function: encoded [0, 1] to linear light.
fn srgb_decode(c: f64) -> f64 {
    if c <= 0.040_45 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

/// CIELAB lightness L* of an 8-bit sRGB colour (D65).
pub fn srgb_lightness(rgb: [u8; 3]) -> f64 {
    let lin = rgb.map(|c| srgb_decode(f64::from(c) / 255.0));
    // Relative luminance Y (Rec. 709 primaries, as in sRGB).
    let y = 0.212_672_9 * lin[0] + 0.715_152_2 * lin[1] + 0.072_175_0 * lin[2];
    const EPS: f64 = 216.0 / 24389.0;
    const KAPPA: f64 = 24389.0 / 27.0;
    if y > EPS {
        116.0 * y.cbrt() - 16.0
    } else {
        KAPPA * y
    }
}

/// Colour of `ramp` at position `t` (clamped to [0, 1]); NaN gives [`NAN_RGB`].
pub fn ramp_rgb(ramp: Ramp, t: f64) -> [u8; 3] {
    if t.is_nan() {
        return NAN_RGB;
    }
    let lin = lab_to_linear_srgb(ramp_lab(ramp, t));
    lin.map(|c| (srgb_encode(c) * 255.0).round() as u8)
}

/// Maps `value` to a ramp position in [0, 1].
///
/// - Linear: `(value - lo) / (hi - lo)`, clamped.
/// - Log: `ln(value / lo) / ln(hi / lo)`, clamped; values `<= lo` (including
///   zero and negatives) map to 0. If `lo <= 0` (invalid for a log scale) it
///   is replaced by `hi * 1e-4`; if `hi <= 0` as well, every value maps to 0.
/// - Degenerate range (`hi <= lo`): values above `lo` map to 1, below to 0,
///   equal to 0.5.
/// - NaN values (or NaN bounds) give NaN, which [`ramp_rgb`] flags.
pub fn normalise(value: f64, lo: f64, hi: f64, scale: ColourScale) -> f64 {
    if value.is_nan() || lo.is_nan() || hi.is_nan() {
        return f64::NAN;
    }
    match scale {
        ColourScale::Linear => {
            if hi > lo {
                let t = (value - lo) / (hi - lo);
                if t.is_nan() {
                    // inf - inf: both bounds infinite.
                    0.5
                } else {
                    t.clamp(0.0, 1.0)
                }
            } else {
                degenerate(value, lo)
            }
        }
        ColourScale::Log => {
            let lo = if lo > 0.0 { lo } else { hi * 1e-4 };
            if hi <= 0.0 || lo <= 0.0 {
                return 0.0;
            }
            if value <= lo {
                return if hi <= lo { degenerate(value, lo) } else { 0.0 };
            }
            if hi <= lo {
                return degenerate(value, lo);
            }
            let t = (value / lo).ln() / (hi / lo).ln();
            if t.is_nan() {
                0.5
            } else {
                t.clamp(0.0, 1.0)
            }
        }
    }
}

fn degenerate(value: f64, lo: f64) -> f64 {
    if value > lo {
        1.0
    } else if value < lo {
        0.0
    } else {
        0.5
    }
}

/// A 1024-entry lookup table of a ramp, for hot rendering loops.
pub(crate) struct RampLut {
    table: Vec<[u8; 3]>,
}

impl RampLut {
    const N: usize = 1024;

    /// Tabulates `ramp` at 1024 evenly spaced positions.
    pub(crate) fn new(ramp: Ramp) -> Self {
        let table = (0..Self::N)
            .map(|i| ramp_rgb(ramp, i as f64 / (Self::N - 1) as f64))
            .collect();
        RampLut { table }
    }

    /// Colour at `t` (clamped); NaN gives [`NAN_RGB`].
    #[inline]
    pub(crate) fn get(&self, t: f64) -> [u8; 3] {
        if t.is_nan() {
            return NAN_RGB;
        }
        let i = (t.clamp(0.0, 1.0) * (Self::N - 1) as f64).round() as usize;
        self.table[i.min(Self::N - 1)]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn samples(n: usize) -> impl Iterator<Item = f64> {
        (0..=n).map(move |i| i as f64 / n as f64)
    }

    #[test]
    fn sequential_lightness_strictly_increasing_from_15_to_95() {
        let ls: Vec<f64> = samples(64)
            .map(|t| srgb_lightness(ramp_rgb(Ramp::Sequential, t)))
            .collect();
        for w in ls.windows(2) {
            assert!(w[1] > w[0], "lightness not increasing: {ls:?}");
        }
        assert!((ls[0] - 15.0).abs() < 2.0, "start L* = {}", ls[0]);
        assert!((ls[64] - 95.0).abs() < 2.0, "end L* = {}", ls[64]);
    }

    #[test]
    fn ramps_stay_inside_srgb_gamut() {
        // Clamping would distort lightness; the design must not need it.
        for ramp in [Ramp::Sequential, Ramp::Diverging] {
            for t in samples(200) {
                let lin = lab_to_linear_srgb(ramp_lab(ramp, t));
                for c in lin {
                    assert!((-2e-3..=1.002).contains(&c), "{ramp:?} t={t} lin={lin:?}");
                }
            }
        }
    }

    #[test]
    fn diverging_symmetric_in_lightness_and_lightest_at_centre() {
        let centre = srgb_lightness(ramp_rgb(Ramp::Diverging, 0.5));
        for t in samples(50) {
            let a = srgb_lightness(ramp_rgb(Ramp::Diverging, t));
            let b = srgb_lightness(ramp_rgb(Ramp::Diverging, 1.0 - t));
            assert!((a - b).abs() < 0.8, "t={t}: L*={a} vs {b}");
            if (t - 0.5).abs() > 1e-9 {
                assert!(a < centre, "t={t}: L*={a} not below centre {centre}");
            }
        }
        // The two halves use different hues.
        let lo = ramp_rgb(Ramp::Diverging, 0.0);
        let hi = ramp_rgb(Ramp::Diverging, 1.0);
        assert!(lo[2] > lo[0] && hi[0] > hi[2], "{lo:?} {hi:?}");
    }

    #[test]
    fn nan_is_flagged_and_t_is_clamped() {
        assert_eq!(ramp_rgb(Ramp::Sequential, f64::NAN), NAN_RGB);
        assert_eq!(ramp_rgb(Ramp::Sequential, -3.0), ramp_rgb(Ramp::Sequential, 0.0));
        assert_eq!(ramp_rgb(Ramp::Diverging, 7.0), ramp_rgb(Ramp::Diverging, 1.0));
        assert_ne!(ramp_rgb(Ramp::Sequential, 0.0), ramp_rgb(Ramp::Sequential, 1.0));
    }

    #[test]
    fn land_grey_is_neutral_and_not_on_the_ramp_ends() {
        assert!(LAND_RGB[0] == LAND_RGB[1] && LAND_RGB[1] == LAND_RGB[2]);
        assert_ne!(LAND_RGB, ramp_rgb(Ramp::Sequential, 1.0));
        assert_ne!(LAND_RGB, ramp_rgb(Ramp::Sequential, 0.0));
    }

    #[test]
    fn diverging_neutral_is_near_white_and_far_from_land_grey() {
        // Maps say "near-white at the centre, land mid-grey": the two must differ clearly.
        // A CIELAB lightness difference of 20 is far above the just-noticeable difference of
        // about 1 (CIE 1976 L*, common practice for "clearly different").
        let centre = srgb_lightness(ramp_rgb(Ramp::Diverging, 0.5));
        let land = srgb_lightness(LAND_RGB);
        assert!(centre > 90.0, "centre L* = {centre}");
        assert!(centre - land > 20.0, "centre L* {centre} vs land L* {land}");
        // Land also differs from every diverging colour of similar lightness by hue: the
        // ramp's colours within 10 L* of land are clearly tinted (a channel spread above 30).
        for t in samples(100) {
            let c = ramp_rgb(Ramp::Diverging, t);
            if (srgb_lightness(c) - land).abs() < 10.0 {
                let spread = c.iter().max().unwrap() - c.iter().min().unwrap();
                assert!(spread > 30, "t={t}: {c:?} close to land {LAND_RGB:?}");
            }
        }
    }

    #[test]
    fn normalise_linear() {
        assert_eq!(normalise(5.0, 0.0, 10.0, ColourScale::Linear), 0.5);
        assert_eq!(normalise(-1.0, 0.0, 10.0, ColourScale::Linear), 0.0);
        assert_eq!(normalise(11.0, 0.0, 10.0, ColourScale::Linear), 1.0);
        assert_eq!(normalise(3.0, 3.0, 3.0, ColourScale::Linear), 0.5);
        assert_eq!(normalise(4.0, 3.0, 3.0, ColourScale::Linear), 1.0);
        assert!(normalise(f64::NAN, 0.0, 1.0, ColourScale::Linear).is_nan());
    }

    #[test]
    fn normalise_log_maps_decades_evenly() {
        // Range 1e-3 .. 1e1 spans four decades.
        for (k, v) in [1e-3, 1e-2, 1e-1, 1.0, 10.0].iter().enumerate() {
            let t = normalise(*v, 1e-3, 10.0, ColourScale::Log);
            assert!((t - k as f64 / 4.0).abs() < 1e-12, "v={v} t={t}");
        }
        assert_eq!(normalise(0.0, 1e-3, 10.0, ColourScale::Log), 0.0);
        assert_eq!(normalise(-5.0, 1e-3, 10.0, ColourScale::Log), 0.0);
        assert_eq!(normalise(1e3, 1e-3, 10.0, ColourScale::Log), 1.0);
        // Invalid lo falls back to hi * 1e-4.
        let t = normalise(1e-2, 0.0, 100.0, ColourScale::Log);
        assert!((t - 0.0).abs() < 1e-12, "t={t}");
        let t = normalise(1.0, -1.0, 100.0, ColourScale::Log);
        assert!((t - 0.5).abs() < 1e-12, "t={t}");
        assert_eq!(normalise(1.0, 0.0, 0.0, ColourScale::Log), 0.0);
    }

    #[test]
    fn lut_matches_direct_evaluation() {
        let lut = RampLut::new(Ramp::Sequential);
        assert_eq!(lut.get(0.0), ramp_rgb(Ramp::Sequential, 0.0));
        assert_eq!(lut.get(1.0), ramp_rgb(Ramp::Sequential, 1.0));
        assert_eq!(lut.get(2.0), ramp_rgb(Ramp::Sequential, 1.0));
        assert_eq!(lut.get(f64::NAN), NAN_RGB);
    }
}
