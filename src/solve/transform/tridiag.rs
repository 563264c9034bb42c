//! The elimination along y ([`Tridiag`]): the y systems left after one or two steps of cyclic
//! reduction, one per x mode, factored once per operator and solved block by block, the
//! blocks linked by a short sweep.

use super::SyncPtr;

/// Relative distance from the limit at which a pivot of the y recurrence counts as settled.
const SETTLED: f64 = 4e-15;

/// Columns per piece of the sweeps along y inside a block, so that the rows' pieces and the
/// per-mode sums of a sweep stay in L1 whatever `nx` (4 KiB per row piece).
const COLUMNS: usize = 512;

/// The y systems left after one or two steps of cyclic reduction, one per x mode, factored.
///
/// Row `j` of the transformed operator reads `-cy u_{j-1} + tau_j u_j - cy u_{j+1} = f_j` with
/// `tau_j = a + y_j` (`a = m + lx_k`, `y_j` as in [`XLines`](super::xlines::XLines)). The first step eliminates the
/// even rows (`u_e = (f_e + cy u_{e-1} + cy u_{e+1}) / tau_e`) and multiplies by the interior
/// `tau`, which leaves on the odd rows `i = 0 .. n1` (row `j = 2 i + 1`) the tridiagonal
/// system `-c1 u_{i-1} + delta_i u_i - c1 u_{i+1} = F_i` with `c1 = cy^2`,
/// `delta = D = tau^2 - 2 c1` inside, and end rows `delta_0`, `delta_{n1-1}` adjusted for the
/// end `tau`s; once reduced, this is the system solved. The second step (twice reduced)
/// eliminates its even rows `i` again: the inside ones
/// (`D u_i = F_i + c1 (u_{i-1} + u_{i+1})`, solved along x after the transform) and the end
/// rows among them in the transformed space (`u_i = (F_i + c1 u_{i+-1}) / delta_i`). Multiplied
/// by `D`, the odd rows `i = 2 k + 1` (field row `4 k + 3`) then read
/// `-c u_{k-1} + (D^2 - 2 c) u_k - c u_{k+1} = D F_i + c1 (F_{i-1} + F_{i+1})` with `c = c1^2`,
/// and their end rows absorb the end rows eliminated in the transformed space. This is solved
/// by Gaussian elimination without pivoting (the Thomas algorithm; the Schur complement of a
/// diagonally dominant matrix is one too) with pivots `p_0`, `p_k = d_k - c^2 / p_{k-1}`, which
/// converge geometrically to the larger root of `p^2 - d p + c^2 = 0` inside; the reciprocal
/// pivots are stored only until every mode has settled to [`SETTLED`], so the table is a few
/// dozen rows unless `cy / m` is very large.
#[derive(Debug, Clone)]
pub(super) struct Tridiag {
    /// Cyclic reduction steps: 1, or 2 when the round-off allows (see [`MAX_SPREAD`](super::MAX_SPREAD)).
    pub(super) levels: usize,
    /// Rows of the solved system: the once-reduced one (field rows `2 k + 1`) or the
    /// twice-reduced one (field rows `4 k + 3`).
    pub(super) n: usize,
    /// Rows of the once-reduced system (the odd rows of the field).
    pub(super) n1: usize,
    /// The solved system's off-diagonal coupling: `cy^2` once reduced, `cy^4` twice.
    c: f64,
    /// The once-reduced system's coupling `cy^2`.
    pub(super) c1: f64,
    /// Reciprocal pivots of rows `0 .. rows` (then constant up to row `n - 2`), `nx` each.
    inv: Vec<f64>,
    pub(super) rows: usize,
    /// Reciprocal pivots of the last row.
    last: Vec<f64>,
    /// Scratch of [`Self::factor`]: the pivots less `c` of the row being factored.
    r: Vec<f64>,
    /// Per mode, the once-reduced row 0 (field row 1), which the second step eliminates in
    /// the transformed space: `c1 D / delta_0` (its weight in the first kept row's
    /// right-hand side) and `1 / delta_0`.
    pub(super) south: [Vec<f64>; 2],
    /// The same for the once-reduced last row when the second step eliminates it (`n1` odd).
    pub(super) north: [Vec<f64>; 2],
}

impl Tridiag {
    /// The reduced systems of a field `ny >= 8` rows high.
    pub(super) fn new(nx: usize, ny: usize) -> Self {
        let n1 = ny / 2;
        let v = || vec![0.0; nx];
        Self {
            levels: 1,
            n: n1,
            n1,
            c: 0.0,
            c1: 0.0,
            // Zeroed memory is mapped lazily, so rows never reached cost nothing.
            inv: vec![0.0; nx * (n1 - 1)],
            rows: 1,
            last: v(),
            r: v(),
            south: [v(), v()],
            north: [v(), v()],
        }
    }

    /// Whether the second step eliminates the once-reduced last row in the transformed space
    /// (else it is the last kept row).
    pub(super) fn north_spectral(&self) -> bool {
        self.n1 % 2 == 1
    }

    /// Factors the once-reduced system (`levels = 1`) or the twice-reduced one (`levels = 2`)
    /// for identity weight `m`, x eigenvalues `lam` (times `cx`), coupling `cy`, and the extra
    /// weights `gs`, `gn` of the south and north end rows, on a field `ny` rows high.
    ///
    /// The pivots are carried as `p_k = c + r_k`, with `r_k = rho + c r_{k-1} / p_{k-1}` inside
    /// and the end rows' `d - c` written as sums of positive terms. Once reduced: `c = c1`,
    /// `rho = rho1 = D - 2 c1 = a (a + 4 cy)`, and the end rows have `delta - c1 = r1` with
    /// `r1 = (a^3 + 5 a^2 cy + 5 a c1 + g (a^2 + 4 a cy + 2 c1)) / tau_end` beside an eliminated
    /// end row and `a^2 + 3 a cy + g (a + 2 cy)` at a kept one (`g` the end's extra weight).
    /// Twice reduced: `c = c1^2`, `rho = rho2 = D^2 - 4 c1^2 = rho1 (rho1 + 4 c1)`; an end row
    /// that absorbs a once-reduced end row has `d - c = (c1 rho1 (D + c1) + r1 (rho2 + 2 c)) /
    /// (c1 + r1)`, and the last kept row when it is the once-reduced last row, `c1 rho1 + D r1`.
    /// So nothing cancels even when `cy / m` is huge and mode 0 between closed ends is nearly
    /// singular.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn factor(&mut self, m: f64, lam: &[f64], cy: f64, gs: f64, gn: f64, ny: usize, levels: usize) {
        let n1 = self.n1;
        let c1 = cy * cy;
        let twice = levels == 2;
        let (n, c) = if twice { (n1 / 2, c1 * c1) } else { (n1, c1) };
        (self.levels, self.n, self.c, self.c1) = (levels, n, c, c1);
        let nx = lam.len();
        // delta - c1 of a once-reduced row next to an eliminated end row with extra weight g.
        let beside_end = |a: f64, g: f64| {
            let poly = a * a * a + 5.0 * a * a * cy + 5.0 * a * c1 + g * (a * a + 4.0 * a * cy + 2.0 * c1);
            poly / (a + cy + g)
        };
        let north_r1 = |a: f64| {
            if ny.is_multiple_of(2) {
                a * a + 3.0 * a * cy + gn * (a + 2.0 * cy)
            } else {
                beside_end(a, gn)
            }
        };
        // (rho1, D, rho2) of a mode.
        let parts = |a: f64| {
            let rho1 = a * (a + 4.0 * cy);
            (rho1, rho1 + 2.0 * c1, rho1 * (rho1 + 4.0 * c1))
        };
        // d - c of a twice-reduced end row that absorbs a once-reduced end row with r1.
        let absorbs = |a: f64, r1: f64| {
            let (rho1, d, rho2) = parts(a);
            (c1 * rho1 * (d + c1) + r1 * (rho2 + 2.0 * c)) / (c1 + r1)
        };
        let north_spectral = twice && self.north_spectral();
        // The solved system's first row's r, interior rho and last row's d - c of a mode.
        let first = |a: f64| {
            if twice {
                absorbs(a, beside_end(a, gs))
            } else {
                beside_end(a, gs)
            }
        };
        let rho = |a: f64| if twice { parts(a).2 } else { parts(a).0 };
        let last = |a: f64| match (twice, north_spectral) {
            (false, _) => north_r1(a),
            (true, true) => absorbs(a, north_r1(a)),
            (true, false) => {
                let (rho1, d, _) = parts(a);
                c1 * rho1 + d * north_r1(a)
            }
        };
        if twice {
            for (k, &l) in lam.iter().enumerate() {
                let a = m + l;
                let (_, d, _) = parts(a);
                let (rs, rn) = (beside_end(a, gs), north_r1(a));
                self.south[0][k] = c1 * d / (c1 + rs);
                self.south[1][k] = 1.0 / (c1 + rs);
                if north_spectral {
                    self.north[0][k] = c1 * d / (c1 + rn);
                    self.north[1][k] = 1.0 / (c1 + rn);
                }
            }
        }
        let r = &mut self.r;
        let (row0, rest) = self.inv.split_at_mut(nx);
        for ((p, rk), &l) in row0.iter_mut().zip(r.iter_mut()).zip(lam) {
            *rk = first(m + l);
            *p = 1.0 / (c + *rk);
        }
        self.rows = 1;
        // Rows 1 ..= n - 2 are interior; stop once every mode's pivot has settled at the
        // larger root of p^2 - d p + c^2, that is p = c + (rho + sqrt(rho^2 + 4 rho c)) / 2.
        let mut prev: &[f64] = row0;
        for (i, row) in rest.chunks_exact_mut(nx).enumerate().take(n.saturating_sub(2)) {
            let mut settled = true;
            for (((p, &q), rk), &l) in row.iter_mut().zip(prev).zip(r.iter_mut()).zip(lam) {
                let rho = rho(m + l);
                *rk = rho + c * *rk * q;
                let piv = c + *rk;
                *p = 1.0 / piv;
                let lim = c + 0.5 * (rho + (rho * (rho + 4.0 * c)).sqrt());
                settled &= (piv - lim).abs() <= SETTLED * lim || *p == q;
            }
            self.rows = i + 2;
            prev = row;
            if settled {
                break;
            }
        }
        // `r` now belongs to the last stored row, which stands for row n - 2.
        let b0 = (n - 2).min(self.rows - 1) * nx;
        let before = &self.inv[b0..b0 + nx];
        for (((p, &q), &rk), &l) in self.last.iter_mut().zip(before).zip(self.r.iter()).zip(lam) {
            *p = 1.0 / (last(m + l) + c * rk * q);
        }
    }

    /// Field rows per solved row: 2 once reduced, 4 twice; solved row `k` is field row
    /// `stride k + stride - 1`.
    pub(super) fn stride(&self) -> usize {
        2 * self.levels
    }

    /// Reciprocal pivots of row `i < n - 1` (all `nx` modes).
    #[inline]
    fn row(&self, i: usize) -> &[f64] {
        let nx = self.last.len();
        let r = i.min(self.rows - 1);
        &self.inv[r * nx..(r + 1) * nx]
    }

    /// Reciprocal pivots of row `i` (the last row's own when `i = n - 1`).
    #[inline]
    fn pivots(&self, i: usize) -> &[f64] {
        if i + 1 == self.n {
            &self.last
        } else {
            self.row(i)
        }
    }

    /// Forward elimination within one block of solved rows, in place on `rows` (field rows from row
    /// `stride i0` on, so rows `stride - 1, 2 stride - 1, ...` of `rows` are solved rows `i0 ..`;
    /// see [`Self::stride`]), as if the row before the block were zero, with the right-hand side
    /// scaled by `s`: `h_i = (s f_i + c h_{i-1}) / p_i`. The true forward values are `g_i = h_i +
    /// E_i G` with `G` the block below's last `g`, `E_i = e_{i0} ... e_i` and `e_i = c / p_i` (the
    /// partition method: blocks eliminate independently and are linked by a short sweep,
    /// [`Self::link`]). For the back substitution `u_i = g_i + e_i u_{i+1}` it sums, for all modes,
    /// `H = sum_i P_i h_i`, `K = sum_i P_i P_{i+1}` and `P = P_{i1}` with `P_{i0} = 1`, `P_{i+1} =
    /// P_i e_i`, so that the block's first `u` is `H + K G + P u_{i1}`. `zero` is a row of zeros
    /// (the forward value before the block).
    pub(super) fn eliminate_block(&self, rows: &mut [f64], i0: usize, s: f64, sums: [&mut [f64]; 3], zero: &[f64]) {
        let (nx, c, st) = (self.last.len(), self.c, self.stride());
        let [sh, sk, sp] = sums;
        sh.fill(0.0);
        sk.fill(0.0);
        sp.fill(1.0);
        for k0 in (0..nx).step_by(COLUMNS) {
            let k = k0..(k0 + COLUMNS).min(nx);
            let (sh, sk, sp) = (&mut sh[k.clone()], &mut sk[k.clone()], &mut sp[k.clone()]);
            let mut prev: Option<&[f64]> = None;
            for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st) {
                let (g, piv) = (&mut row[k.clone()], &self.pivots(i0 + t / st)[k.clone()]);
                // The row before the block counts as zero.
                let q = prev.unwrap_or(&zero[..g.len()]);
                eliminate_row(g, q, piv, [&mut *sh, &mut *sk, &mut *sp], s, c);
                prev = Some(g);
            }
        }
    }

    /// Links the blocks of modes `k0 .. k0 + w` after [`Self::eliminate_block`]: up the
    /// blocks, each block's incoming `G` (the block below's last `g`: `G_0 = 0`,
    /// `G_{B+1} = h_last + P_B G_B`) into `incoming`; then down the blocks, each block's first
    /// `u` (`H + K G + P u` of the block above's first row) into `firsts`, which held `H`.
    ///
    /// `ends[b]` is one past block `b`'s last reduced row.
    ///
    /// # Safety
    /// `x` must point to `nx * ny` values and `firsts`, `cross`, `prods`, `incoming` to `nx`
    /// times the block count, `k0 + w <= nx`, and no other thread may access columns
    /// `k0 .. k0 + w` of any of them meanwhile.
    #[allow(clippy::too_many_arguments)]
    pub(super) unsafe fn link(
        &self,
        x: SyncPtr,
        (k0, w): (usize, usize),
        ends: &[usize],
        firsts: SyncPtr,
        cross: SyncPtr,
        prods: SyncPtr,
        incoming: SyncPtr,
    ) {
        let (nx, st) = (self.last.len(), self.stride());
        // SAFETY: row j's part lies inside its array and belongs to this caller alone; the
        // parts borrowed at once are different rows or different arrays.
        let part = |p: SyncPtr, j: usize| unsafe { std::slice::from_raw_parts_mut(p.ptr().add(j * nx + k0), w) };
        let blocks = ends.len();
        part(incoming, 0).fill(0.0);
        for (blk, &end) in ends.iter().enumerate().take(blocks.saturating_sub(1)) {
            let last = end - 1;
            let (h, p, g, next) = (
                &*part(x, st * last + st - 1),
                &*part(prods, blk),
                &*part(incoming, blk),
                part(incoming, blk + 1),
            );
            for (((o, &h), &p), &g) in next.iter_mut().zip(h).zip(p).zip(g) {
                *o = h + p * g;
            }
        }
        for blk in (0..blocks).rev() {
            let (u, k, g, p) = (
                part(firsts, blk),
                &*part(cross, blk),
                &*part(incoming, blk),
                &*part(prods, blk),
            );
            if blk + 1 < blocks {
                let up = &*part(firsts, blk + 1);
                for ((((u, &k), &g), &p), &a) in u.iter_mut().zip(k).zip(g).zip(p).zip(up) {
                    *u += k * g;
                    *u += p * a;
                }
            } else {
                // Nothing above the top block.
                for ((u, &k), &g) in u.iter_mut().zip(k).zip(g) {
                    *u += k * g;
                }
            }
        }
    }

    /// Finishes the reduced rows among `rows` (as in [`Self::eliminate_block`], first reduced
    /// row `i0`): `g_i = h_i + E_i G` with `incoming` the block's `G`, then the back
    /// substitution `u_i = g_i + (c / p_i) u_{i+1}` from the top row down, with `above` the
    /// value `u` of the reduced row after them (`None` at the top of the field). `e` is
    /// scratch.
    pub(super) fn back_block(
        &self,
        rows: &mut [f64],
        i0: usize,
        incoming: &[f64],
        above: Option<&[f64]>,
        e: &mut [f64],
    ) {
        let (nx, c, st) = (self.last.len(), self.c, self.stride());
        for k0 in (0..nx).step_by(COLUMNS) {
            let k = k0..(k0 + COLUMNS).min(nx);
            if i0 > 0 {
                let (e, incoming) = (&mut e[k.clone()], &incoming[k.clone()]);
                e.fill(1.0);
                for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st) {
                    let piv = &self.pivots(i0 + t / st)[k.clone()];
                    for (((v, f), &p), &a) in row[k.clone()].iter_mut().zip(e.iter_mut()).zip(piv).zip(incoming) {
                        *f *= c * p;
                        *v += *f * a;
                    }
                }
            }
            let mut next: Option<&[f64]> = above.map(|a| &a[k.clone()]);
            for (t, row) in rows.chunks_exact_mut(nx).enumerate().skip(st - 1).step_by(st).rev() {
                let u = &mut row[k.clone()];
                if let Some(q) = next {
                    for ((v, &q), &p) in u.iter_mut().zip(q).zip(&self.pivots(i0 + t / st)[k.clone()]) {
                        *v += c * p * q;
                    }
                }
                next = Some(u);
            }
        }
    }
}

/// One row of [`Tridiag::eliminate_block`]: `g = (s g + c q) piv` and the sums
/// `H += P g`, `K += P P'`, `P = P'` with `P' = P c piv`. A function of its own, so the
/// compiler knows the slices apart and vectorises the loop.
#[inline]
fn eliminate_row(g: &mut [f64], q: &[f64], piv: &[f64], sums: [&mut [f64]; 3], s: f64, c: f64) {
    let w = g.len();
    let [sh, sk, sp] = sums;
    let (q, piv, sh, sk, sp) = (&q[..w], &piv[..w], &mut sh[..w], &mut sk[..w], &mut sp[..w]);
    for j in 0..w {
        let v = (s * g[j] + c * q[j]) * piv[j];
        g[j] = v;
        let f = sp[j];
        let next = f * (c * piv[j]);
        sh[j] += f * v;
        sk[j] += f * next;
        sp[j] = next;
    }
}
