//! The tridiagonal solves along x of the rows that the cyclic reduction eliminated
//! ([`XLines`]): the single-row x operators, factored for the Thomas algorithm, and the
//! solves of a block's even and twice-eliminated rows.

/// Which x operator a row uses ([`XLines`]): the interior rows', the south end row's, the
/// north end row's, and the two factors `T - sqrt2 cy` and `T + sqrt2 cy` of the operator
/// `T^2 - 2 cy^2` of the rows the second reduction eliminates.
pub(super) const INTERIOR: usize = 0;
pub(super) const SOUTH_END: usize = 1;
pub(super) const NORTH_END: usize = 2;
pub(super) const LOWER: usize = 3;
pub(super) const UPPER: usize = 4;
/// How many x operators [`XLines`] factors.
const KINDS: usize = 5;

/// The kind of x operator of row `j` of a field `ny` rows high.
pub(super) fn row_kind(j: usize, ny: usize) -> usize {
    match j {
        0 => SOUTH_END,
        j if j + 1 == ny => NORTH_END,
        _ => INTERIOR,
    }
}

/// Rows solved together by [`XLines::solve_rows`] (independent recurrences in flight).
pub(super) const GROUP: usize = 4;

/// The x operators of single rows, `T_j = (m + y_j) I + cx Lx` with `y_j` the y part of row
/// `j`'s diagonal (`2 cy` inside, `cy` plus `gy` at a fixed end row, `cy` at a closed one),
/// and the factors `T -+ sqrt2 cy I` of `T^2 - 2 cy^2 I` (`T` the interior one), factored for
/// the Thomas algorithm (diagonally dominant, so no pivoting). The cyclic reduction multiplies
/// the kept rows by the interior `T` (then by `T^2 - 2 cy^2`) and recovers the eliminated rows
/// by solves with their own operators.
#[derive(Debug, Clone)]
pub(super) struct XLines {
    cx: f64,
    /// `cx` times the extra end weight of `Lx` (`2 cx` at fixed ends, 0 at closed ones).
    ends: f64,
    /// The diagonal less that of `cx Lx` (`m + y_j`, or `m + (2 -+ sqrt2) cy`) of each kind.
    b: [f64; KINDS],
    /// Reciprocal pivots of each kind.
    q: [Vec<f64>; KINDS],
    /// `cx` times the reciprocal pivots.
    e: [Vec<f64>; KINDS],
    /// A row of zeros (the missing neighbour of an end row).
    pub(super) zero: Vec<f64>,
}

impl XLines {
    pub(super) fn new(n: usize) -> Self {
        let v = || vec![0.0; n];
        Self {
            cx: 0.0,
            ends: 0.0,
            b: [0.0; KINDS],
            q: std::array::from_fn(|_| v()),
            e: std::array::from_fn(|_| v()),
            zero: v(),
        }
    }

    /// Factors the three kinds for couplings `cx` (x) and `cy` (y), identity weight `m`, and
    /// the extra weights `gs`, `gn` of the south and north end rows.
    ///
    /// Pivots are carried as `p_i = cx + r_i` with `r_0 = b + ends`,
    /// `r_i = b + cx r_{i-1} / p_{i-1}`, and the last `b + ends + cx r / p` of the row before:
    /// positive terms only, as in [`Tridiag::factor`](super::tridiag::Tridiag::factor).
    pub(super) fn factor(&mut self, m: f64, cx: f64, cy: f64, fixed: bool, gs: f64, gn: f64) {
        self.cx = cx;
        self.ends = if fixed { 2.0 * cx } else { 0.0 };
        let r2 = std::f64::consts::SQRT_2;
        self.b = [
            m + 2.0 * cy,
            m + cy + gs,
            m + cy + gn,
            m + (2.0 - r2) * cy,
            m + (2.0 + r2) * cy,
        ];
        let n = self.zero.len();
        for k in 0..KINDS {
            let (b, q, e) = (self.b[k], &mut self.q[k], &mut self.e[k]);
            let mut r = b + self.ends;
            q[0] = 1.0 / (cx + r);
            for i in 1..n - 1 {
                r = b + cx * r * q[i - 1];
                q[i] = 1.0 / (cx + r);
            }
            q[n - 1] = 1.0 / (b + self.ends + cx * r * q[n - 2]);
            for (e, &q) in e.iter_mut().zip(q.iter()) {
                *e = cx * q;
            }
        }
    }

    /// `out = T f + cy (hs + hn)` with the interior `T`: the right-hand side of a kept row
    /// (`hs`, `hn` its eliminated neighbours' right-hand sides, brought to the interior
    /// operator).
    pub(super) fn kept_rhs(&self, out: &mut [f64], f: &[f64], hs: &[f64], hn: &[f64], cy: f64) {
        let n = self.zero.len();
        let (hs, hn) = (&hs[..n], &hn[..n]);
        self.apply_t(out, f, |i| cy * (hs[i] + hn[i]));
    }

    /// `out_i = (T f)_i + y(i)` with the interior `T`.
    #[inline(always)]
    fn apply_t(&self, out: &mut [f64], f: &[f64], y: impl Fn(usize) -> f64) {
        let n = self.zero.len();
        let (out, f) = (&mut out[..n], &f[..n]);
        let (cx, b) = (self.cx, self.b[INTERIOR]);
        let (d, dend) = (b + 2.0 * cx, b + cx + self.ends);
        out[0] = dend * f[0] - cx * f[1] + y(0);
        for i in 1..n - 1 {
            out[i] = d * f[i] - cx * (f[i - 1] + f[i + 1]) + y(i);
        }
        out[n - 1] = dend * f[n - 1] - cx * f[n - 2] + y(n - 1);
    }

    /// `out = D f + c (fs + fn) = T (T f) + c (fs + fn - 2 f)` with `D = T^2 - 2 c`, `c = cy^2`
    /// and the interior `T`: the right-hand side of a row the second reduction keeps (`f` its
    /// first-reduction right-hand side, `fs`, `fn` those of its eliminated neighbours). `t` is
    /// scratch.
    pub(super) fn reduced_rhs(&self, out: &mut [f64], f: &[f64], fs: &[f64], fn_: &[f64], c: f64, t: &mut [f64]) {
        let n = self.zero.len();
        self.apply_t(t, f, |_| 0.0);
        let (f, fs, fn_) = (&f[..n], &fs[..n], &fn_[..n]);
        self.apply_t(out, t, |i| c * (fs[i] + fn_[i] - 2.0 * f[i]));
    }

    /// Solves `T_kind out_r = f_r + cy (s_r + n_r)` for `R` rows at once (their recurrences
    /// interleave, so the latency of one hides behind the others).
    #[inline]
    pub(super) fn solve_rows<const R: usize>(
        &self,
        kind: usize,
        out: [&mut [f64]; R],
        f: [&[f64]; R],
        s: [&[f64]; R],
        nb: [&[f64]; R],
        cy: f64,
    ) {
        let n = self.zero.len();
        let (q, e) = (&self.q[kind][..n], &self.e[kind][..n]);
        let out = out.map(|o| &mut o[..n]);
        let (f, s, nb) = (f.map(|v| &v[..n]), s.map(|v| &v[..n]), nb.map(|v| &v[..n]));
        let mut g = [0.0; R];
        // g_i = q_i rhs_i + e_i g_{i-1}: one fused multiply-add on each recurrence, whose
        // latency the other rows' recurrences hide.
        for i in 0..n {
            let (qi, ei) = (q[i], e[i]);
            for r in 0..R {
                // SAFETY: every slice was cut to length n above and i < n.
                let v = unsafe {
                    let rhs = *f[r].get_unchecked(i) + cy * (*s[r].get_unchecked(i) + *nb[r].get_unchecked(i));
                    let v = ei.mul_add(g[r], rhs * qi);
                    *out[r].get_unchecked_mut(i) = v;
                    v
                };
                g[r] = v;
            }
        }
        for i in (0..n - 1).rev() {
            let ei = e[i];
            for r in 0..R {
                // SAFETY: as above.
                let v = unsafe {
                    let o = out[r].get_unchecked_mut(i);
                    *o = ei.mul_add(g[r], *o);
                    *o
                };
                g[r] = v;
            }
        }
    }

    /// `w = T_kind^-1 T f`: an eliminated end row's right-hand side brought to the interior
    /// operator (`t` is scratch).
    pub(super) fn end_rhs(&self, kind: usize, w: &mut [f64], f: &[f64], t: &mut [f64]) {
        let z = &self.zero;
        self.kept_rhs(t, f, z, z, 0.0);
        self.solve_rows::<1>(kind, [w], [&*t], [z], [z], 0.0);
    }
}

/// Solves `R` even rows of a block, `t, t + 2, ...` (local row numbers, from 2 on), of kind
/// `kind`, from the odd rows beside them (the row beyond the north end taken as zero).
#[allow(clippy::too_many_arguments)]
#[inline]
pub(super) fn solve_even<'b, const R: usize>(
    xl: &XLines,
    rows: &mut [f64],
    t: usize,
    kind: usize,
    nx: usize,
    brow: impl Fn(usize) -> &'b [f64],
    j0: usize,
    cy: f64,
) {
    let h = rows.len() / nx;
    assert!(t >= 1 && t + 2 * (R - 1) < h, "even rows inside the block");
    let p = rows.as_mut_ptr();
    let zero = &xl.zero[..];
    // SAFETY: the rows written (t + 2 r) and read (t + 2 r +- 1) are distinct rows inside
    // `rows`, which this call borrows mutably; the asserts above keep them in range.
    let row = |r: usize| -> &[f64] {
        if r < h {
            unsafe { std::slice::from_raw_parts(p.add(r * nx), nx) }
        } else {
            zero
        }
    };
    let out: [&mut [f64]; R] =
        std::array::from_fn(|r| unsafe { std::slice::from_raw_parts_mut(p.add((t + 2 * r) * nx), nx) });
    let f = std::array::from_fn(|r| brow(j0 + t + 2 * r));
    let s = std::array::from_fn(|r| row(t + 2 * r - 1));
    let n = std::array::from_fn(|r| row(t + 2 * r + 1));
    xl.solve_rows::<R>(kind, out, f, s, n, cy);
}

/// Solves `R` rows of a block that the second step eliminated, `t, t + 4, ...` (local row
/// numbers), from the rows two below and above them: `D u = F + c1 (u_s + u_n)` with `F` in
/// place, by the two factors of `D = T^2 - 2 c1` in turn (`w` holds at least `R` scratch
/// lines).
#[inline]
pub(super) fn solve_twice<const R: usize>(xl: &XLines, rows: &mut [f64], t: usize, nx: usize, c1: f64, w: &mut [f64]) {
    let h = rows.len() / nx;
    assert!(t >= 2 && t + 4 * (R - 1) + 2 < h, "rows inside the block");
    let p = rows.as_mut_ptr();
    // SAFETY: the rows written (t + 4 r) and read (t + 4 r, t + 4 r +- 2) are inside `rows`,
    // which this call borrows mutably; the ones read by the first solve are only read, and
    // each row the second writes is read by neither solve meanwhile.
    let row = |r: usize| -> &[f64] { unsafe { std::slice::from_raw_parts(p.add(r * nx), nx) } };
    let mut lines = w.chunks_exact_mut(nx);
    let mid: [&mut [f64]; R] = std::array::from_fn(|_| lines.next().expect("enough scratch lines"));
    let f = std::array::from_fn(|r| row(t + 4 * r));
    let s = std::array::from_fn(|r| row(t + 4 * r - 2));
    let n = std::array::from_fn(|r| row(t + 4 * r + 2));
    xl.solve_rows::<R>(LOWER, mid, f, s, n, c1);
    let mut lines = w.chunks_exact(nx);
    let mid: [&[f64]; R] = std::array::from_fn(|_| lines.next().expect("enough scratch lines"));
    let out: [&mut [f64]; R] =
        std::array::from_fn(|r| unsafe { std::slice::from_raw_parts_mut(p.add((t + 4 * r) * nx), nx) });
    let zeros = [&xl.zero[..]; R];
    xl.solve_rows::<R>(UPPER, out, mid, zeros, zeros, 0.0);
}
