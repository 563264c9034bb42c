//! The cosine (or sine) transform along x ([`Axis`]): two real lines per complex FFT, forward
//! and inverse, with the eigenvalues of the x operator.

use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// How one axis ends, as the transform sees it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Ends {
    /// Both ends closed (zero flux): DCT-II.
    Closed,
    /// Both ends at fixed values (Dirichlet at the end faces): DST-II.
    Fixed,
}

/// The cosine (or sine) transform of one axis, two real lines per complex FFT.
///
/// The DCT-II `X_k = sum_n x_n cos(pi k (2n + 1) / 2N)` is computed by Makhoul's (1980, IEEE
/// Trans. ASSP 28, 27-34) reordering `v = (x_0, x_2, ..., x_3, x_1)`, one complex FFT of
/// length `N`, and the twiddle `X_k = Re(exp(-i pi k / 2N) V_k)`; the inverse runs the same
/// steps backwards (`V_k = exp(i pi k / 2N) (X_k - i X_{N-k})`). Two real lines share one
/// FFT as its real and imaginary parts (their spectra are separated by the conjugate
/// symmetry of real sequences). The DST-II is the DCT-II of `(-1)^n x_n` read backwards, so
/// a fixed-ends axis flips the sign of odd entries and keeps the DCT ordering, with
/// eigenvalues `2 + 2 cos(pi m / N)` at DCT index `m` (that is, `2 - 2 cos(pi (k + 1) / N)`
/// at DST index `k = N - 1 - m`).
#[derive(Clone)]
pub(super) struct Axis {
    n: usize,
    fixed: bool,
    fwd: Arc<dyn Fft<f64>>,
    inv: Arc<dyn Fft<f64>>,
    /// `exp(-i pi k / 2N)`.
    w: Vec<Complex<f64>>,
    /// `c lambda` at each DCT index (coupling times eigenvalue).
    pub(super) lam: Vec<f64>,
    /// Complex scratch the FFTs ask for.
    pub(super) scratch_len: usize,
}

impl std::fmt::Debug for Axis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Axis")
            .field("n", &self.n)
            .field("fixed", &self.fixed)
            .finish()
    }
}

impl Axis {
    pub(super) fn new(planner: &mut FftPlanner<f64>, ends: Ends, n: usize, c: f64) -> Self {
        let fwd = planner.plan_fft_forward(n);
        let inv = planner.plan_fft_inverse(n);
        let scratch_len = fwd.get_inplace_scratch_len().max(inv.get_inplace_scratch_len());
        let w = (0..n)
            .map(|k| Complex::from_polar(1.0, -std::f64::consts::PI * k as f64 / (2 * n) as f64))
            .collect();
        let mut a = Self {
            n,
            fixed: ends == Ends::Fixed,
            fwd,
            inv,
            w,
            lam: vec![0.0; n],
            scratch_len,
        };
        a.set_coupling(c);
        a
    }

    pub(super) fn ends(&self) -> Ends {
        if self.fixed {
            Ends::Fixed
        } else {
            Ends::Closed
        }
    }

    pub(super) fn set_coupling(&mut self, c: f64) {
        let n = self.n as f64;
        let sign = if self.fixed { -1.0 } else { 1.0 };
        for (m, l) in self.lam.iter_mut().enumerate() {
            *l = c * (2.0 - sign * 2.0 * (std::f64::consts::PI * m as f64 / n).cos());
        }
    }

    /// Reorders lines `a` and `b` (`b` absent: zeros) into `z` as real and imaginary parts,
    /// flipping odd entries on a fixed-ends axis.
    #[inline]
    fn load(&self, a: &[f64], b: Option<&[f64]>, z: &mut [Complex<f64>]) {
        let n = self.n;
        let odd = if self.fixed { -1.0 } else { 1.0 };
        let (a, z) = (&a[..n], &mut z[..n]);
        let (h, t) = (n.div_ceil(2), n / 2);
        let (front, back) = z.split_at_mut(h);
        match b {
            Some(b) => {
                let b = &b[..n];
                for (p, zp) in front.iter_mut().enumerate() {
                    *zp = Complex::new(a[2 * p], b[2 * p]);
                }
                for (q, zq) in back.iter_mut().enumerate() {
                    // back[q] = z[h + q] holds x[2p + 1] with p = n - 1 - h - q.
                    let p = t - 1 - q;
                    *zq = Complex::new(odd * a[2 * p + 1], odd * b[2 * p + 1]);
                }
            }
            None => {
                for (p, zp) in front.iter_mut().enumerate() {
                    *zp = Complex::new(a[2 * p], 0.0);
                }
                for (q, zq) in back.iter_mut().enumerate() {
                    let p = t - 1 - q;
                    *zq = Complex::new(odd * a[2 * p + 1], 0.0);
                }
            }
        }
    }

    /// Forward transform of `a` and `b` (`b` absent: one line) in place.
    pub(super) fn forward(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        self.load(a, b.as_deref(), z);
        self.transform_unpack(a, b, z, s);
    }

    /// Forward transform of `src_a` and `src_b` into `a` and `b`.
    #[inline]
    pub(super) fn forward_from(
        &self,
        src_a: &[f64],
        src_b: Option<&[f64]>,
        a: &mut [f64],
        b: Option<&mut [f64]>,
        z: &mut [Complex<f64>],
        s: &mut [Complex<f64>],
    ) {
        self.load(src_a, src_b, z);
        self.transform_unpack(a, b, z, s);
    }

    /// The FFT of the loaded `z`, unpacked into the two lines' transforms.
    #[inline]
    fn transform_unpack(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        let n = self.n;
        self.fwd.process_with_scratch(&mut z[..n], s);
        let (a, w, z) = (&mut a[..n], &self.w[..n], &z[..n]);
        match b {
            Some(b) => {
                let b = &mut b[..n];
                // Spectra of the real and imaginary parts: (z_k + conj z_{n-k}) / 2 and
                // (z_k - conj z_{n-k}) / 2i; z_0 pairs with itself.
                a[0] = z[0].re;
                b[0] = z[0].im;
                for k in 1..n {
                    let (zk, zc) = (z[k], z[n - k]);
                    let (sr, si) = (0.5 * (zk.re + zc.re), 0.5 * (zk.im - zc.im));
                    let (dr, di) = (0.5 * (zk.im + zc.im), 0.5 * (zc.re - zk.re));
                    let wk = w[k];
                    a[k] = wk.re * sr - wk.im * si;
                    b[k] = wk.re * dr - wk.im * di;
                }
            }
            None => {
                for k in 0..n {
                    a[k] = w[k].re * z[k].re - w[k].im * z[k].im;
                }
            }
        }
    }

    /// Inverse of [`Self::forward`] times `N`, in place.
    #[inline]
    pub(super) fn inverse(&self, a: &mut [f64], b: Option<&mut [f64]>, z: &mut [Complex<f64>], s: &mut [Complex<f64>]) {
        let n = self.n;
        let (z, w) = (&mut z[..n], &self.w[..n]);
        {
            // V_k = conj(w_k) (X_k - i X_{n-k}), X_n taken as 0.
            let a = &a[..n];
            let spec =
                |xk: f64, xb: f64, wk: Complex<f64>| Complex::new(wk.re * xk - wk.im * xb, -wk.re * xb - wk.im * xk);
            match b.as_deref() {
                Some(b) => {
                    let b = &b[..n];
                    z[0] = Complex::new(a[0], b[0]);
                    for k in 1..n {
                        let (va, vb) = (spec(a[k], a[n - k], w[k]), spec(b[k], b[n - k], w[k]));
                        // va + i vb
                        z[k] = Complex::new(va.re - vb.im, va.im + vb.re);
                    }
                }
                None => {
                    z[0] = Complex::new(a[0], 0.0);
                    for k in 1..n {
                        z[k] = spec(a[k], a[n - k], w[k]);
                    }
                }
            }
        }
        self.inv.process_with_scratch(z, s);
        let odd = if self.fixed { -1.0 } else { 1.0 };
        let (h, t) = (n.div_ceil(2), n / 2);
        let (front, back) = z.split_at(h);
        // Undo the reordering of `load`: the real parts are line `a`, the imaginary ones `b`.
        let unload = |out: &mut [f64], part: fn(&Complex<f64>) -> f64| {
            let out = &mut out[..n];
            for (p, zp) in front.iter().enumerate() {
                out[2 * p] = part(zp);
            }
            for (q, zq) in back.iter().enumerate() {
                out[2 * (t - 1 - q) + 1] = odd * part(zq);
            }
        };
        unload(a, |c| c.re);
        if let Some(b) = b {
            unload(b, |c| c.im);
        }
    }
}
