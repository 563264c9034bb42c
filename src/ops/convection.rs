//! Convective face values and fluxes: one kernel for every limiter.
//!
//! For a face between the cell behind it (L, lower index) and the cell ahead (R), with
//! face-normal velocity w (positive towards R), the upwind cell C, the cell U upwind of C and the
//! downwind cell D are chosen by the sign of w; the face value is Sweby's (1984)
//! `c_C + 0.5 psi(r) (c_D - c_C)` (see [`crate::ops::limiter`]) and the flux is `w c_f`.

use crate::ops::limiter::LimiterKernel;

/// Face value from the four cells along the face normal: `ll`, `l` behind the face and `r`,
/// `rr` ahead of it. `uu_open` multiplies the upwind difference (0 when the far upwind cell is
/// land, which makes the face first-order there; 1 otherwise). Branch-free so that loops over a
/// row vectorise.
#[inline(always)]
pub fn face_value<K: LimiterKernel>(w: f64, ll: f64, l: f64, r: f64, rr: f64, uu_open: f64) -> f64 {
    let pos = w >= 0.0;
    let up = pick(pos, l, r);
    let far = pick(pos, ll, rr);
    let down = pick(pos, r, l);
    let a = (up - far) * uu_open;
    let b = down - up;
    up + K::increment(a, b)
}

/// `if cond { a } else { b }` on values already loaded, written with bit masks so the
/// compiler blends registers instead of turning the choice into a gathered load.
#[inline(always)]
pub fn pick(cond: bool, a: f64, b: f64) -> f64 {
    let m = 0u64.wrapping_sub(u64::from(cond));
    f64::from_bits((a.to_bits() & m) | (b.to_bits() & !m))
}

/// Convective flux `w c_f` through a face (per unit face length and depth).
#[inline(always)]
pub fn flux<K: LimiterKernel>(w: f64, ll: f64, l: f64, r: f64, rr: f64, uu_open: f64) -> f64 {
    w * face_value::<K>(w, ll, l, r, rr, uu_open)
}

/// Total face flux (convection and diffusion) along +x or +y: `w` the face velocity, `d` the
/// physical diffusive conductance K/h of the face (0 across closed faces), `s` the share of
/// central diffusion to include (1 for the full operator, 0 for convection alone).
///
/// Limiter schemes: `w c_f + s (-d (r - l))`. Peclet-switched schemes, in Patankar's (1980)
/// coefficient form: `J = w l + (d A(|w|/d) + max(-w, 0)) (l - r)`, from which the central
/// diffusion `(1 - s) d (l - r)` is removed when only convection is asked for.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
pub fn face_flux<K: LimiterKernel>(w: f64, ll: f64, l: f64, r: f64, rr: f64, uu_open: f64, d: f64, s: f64) -> f64 {
    if K::PECLET {
        let a = K::weight(w / d);
        w * l + (d * a + (-w).max(0.0)) * (l - r) - (1.0 - s) * d * (l - r)
    } else {
        flux::<K>(w, ll, l, r, rr, uu_open) - s * d * (r - l)
    }
}

/// The largest per-cell sum of Courant rates `max(|u_w|, |u_e|)/dx + max(|v_s|, |v_n|)/dy`, 1/s,
/// over interior cells of padded face arrays `u` (west faces) and `v` (south faces).
pub fn max_courant_rate(grid: &crate::grid::Grid, u: &[f64], v: &[f64]) -> f64 {
    let s = grid.stride();
    let mut worst = 0.0f64;
    for j in 0..grid.ny {
        let p0 = grid.idx(0, j as isize);
        for p in p0..p0 + grid.nx {
            let cx = u[p].abs().max(u[p + 1].abs()) / grid.dx;
            let cy = v[p].abs().max(v[p + s].abs()) / grid.dy;
            worst = worst.max(cx + cy);
        }
    }
    worst
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ops::limiter::{Central, Quick, Upwind, VanLeer};

    #[test]
    fn peclet_switched_face_fluxes_reduce_to_the_classic_limits() {
        use crate::ops::limiter::{Hybrid, PowerLaw};
        let (l, r) = (3.0, 1.0);
        // No flow: pure central diffusion, -d (r - l).
        assert_eq!(face_flux::<Hybrid>(0.0, 0.0, l, r, 0.0, 1.0, 2.0, 1.0), 4.0);
        assert_eq!(face_flux::<PowerLaw>(0.0, 0.0, l, r, 0.0, 1.0, 2.0, 1.0), 4.0);
        // Hybrid below P = 2 is central convection plus diffusion: w (l + r)/2 + d (l - r).
        let (w, d) = (1.0, 1.0);
        assert!((face_flux::<Hybrid>(w, 0.0, l, r, 0.0, 1.0, d, 1.0) - (w * 2.0 + d * 2.0)).abs() < 1e-15);
        // Above P = 2, upwind with the diffusion dropped, whichever the direction.
        assert_eq!(face_flux::<Hybrid>(5.0, 0.0, l, r, 0.0, 1.0, 1.0, 1.0), 5.0 * l);
        assert_eq!(face_flux::<Hybrid>(-5.0, 0.0, l, r, 0.0, 1.0, 1.0, 1.0), -5.0 * r);
        // Without diffusivity both are upwind; no NaN when w and d are both zero.
        assert_eq!(face_flux::<PowerLaw>(2.0, 0.0, l, r, 0.0, 1.0, 0.0, 1.0), 2.0 * l);
        assert_eq!(face_flux::<PowerLaw>(0.0, 0.0, l, r, 0.0, 1.0, 0.0, 1.0), 0.0);
        // Convection alone (s = 0) is the full flux minus central diffusion.
        let full = face_flux::<PowerLaw>(1.5, 0.0, l, r, 0.0, 1.0, 0.7, 1.0);
        let conv = face_flux::<PowerLaw>(1.5, 0.0, l, r, 0.0, 1.0, 0.7, 0.0);
        assert!((full - conv - 0.7 * (l - r)).abs() < 1e-15);
    }

    #[test]
    fn upwind_takes_the_upwind_cell() {
        assert_eq!(face_value::<Upwind>(1.0, 9.0, 2.0, 5.0, 9.0, 1.0), 2.0);
        assert_eq!(face_value::<Upwind>(-1.0, 9.0, 2.0, 5.0, 9.0, 1.0), 5.0);
    }

    #[test]
    fn central_is_the_mean_and_quick_is_leonards_quadratic() {
        assert_eq!(face_value::<Central>(1.0, 0.0, 2.0, 4.0, 0.0, 1.0), 3.0);
        // QUICK (Leonard 1979): c_f = 6/8 c_C + 3/8 c_D - 1/8 c_U.
        let (u, c, d) = (1.0, 2.0, 4.0);
        let want = 0.75 * c + 0.375 * d - 0.125 * u;
        assert!((face_value::<Quick>(1.0, u, c, d, 0.0, 1.0) - want).abs() < 1e-15);
        assert!((face_value::<Quick>(-1.0, 0.0, d, c, u, 1.0) - want).abs() < 1e-15);
    }

    #[test]
    fn van_leer_is_exact_on_linear_data_and_first_order_at_extrema() {
        // Linear data: r = 1, psi = 1, face value is the midpoint.
        assert!((face_value::<VanLeer>(1.0, 1.0, 2.0, 3.0, 4.0, 1.0) - 2.5).abs() < 1e-15);
        // Local maximum at the upwind cell: r < 0, psi = 0, upwind value.
        assert_eq!(face_value::<VanLeer>(1.0, 1.0, 3.0, 2.0, 0.0, 1.0), 3.0);
        // Far upwind cell closed: first order.
        assert_eq!(face_value::<VanLeer>(1.0, 1.0, 2.0, 3.0, 4.0, 0.0), 2.0);
    }
}
