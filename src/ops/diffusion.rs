//! Diffusive face fluxes (5-point central, constant anisotropic K) and the explicit limit.
//!
//! The flux through a face between cells L and R a distance `h` apart is `-K (c_R - c_L)/h`
//! (positive towards R); a face that touches land or a wall carries none.

/// Diffusive flux `-coef (r - l)` where `coef = K/h` for the face.
#[inline(always)]
pub fn flux(coef: f64, l: f64, r: f64) -> f64 {
    -coef * (r - l)
}

/// The diffusion rate `Kx/dx^2 + Ky/dy^2`, 1/s; the diffusion number is this times dt.
pub fn rate(kx: f64, ky: f64, dx: f64, dy: f64) -> f64 {
    kx / (dx * dx) + ky / (dy * dy)
}

/// Largest explicit step for diffusion alone: `(Kx/dx^2 + Ky/dy^2) dt <= 1/2` (von Neumann
/// analysis of forward Euler with the 5-point stencil; common practice). Infinite without
/// diffusion.
pub fn stable_dt(kx: f64, ky: f64, dx: f64, dy: f64) -> f64 {
    let r = rate(kx, ky, dx, dy);
    if r > 0.0 {
        0.5 / r
    } else {
        f64::INFINITY
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limit_matches_von_neumann() {
        // 1D (ky = 0): K dt/dx^2 <= 1/2.
        assert_eq!(stable_dt(2.0, 0.0, 1.0, 1.0), 0.25);
        // Isotropic 2D on a square grid: 4 K dt/h^2 <= 1... i.e. K dt/h^2 <= 1/4.
        assert_eq!(stable_dt(1.0, 1.0, 1.0, 1.0), 0.25);
        assert_eq!(stable_dt(0.0, 0.0, 1.0, 1.0), f64::INFINITY);
        assert_eq!(flux(2.0, 1.0, 3.0), -4.0);
    }
}
