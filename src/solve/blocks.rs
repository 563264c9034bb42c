//! Row-block partitioning shared by the solver kernels: work is split into blocks of
//! contiguous rows, run in parallel with rayon when there is more than one block, and
//! reductions sum per-block partials in block order (deterministic for a given block size).

use rayon::prelude::*;

/// Most blocks a level is split into; partial sums live in a stack array of this size.
pub(crate) const MAX_BLOCKS: usize = 64;

/// Fewest cells per block: below this a level runs on one thread (rayon's overhead of a few
/// microseconds per call would exceed the work).
const MIN_CELLS_PER_BLOCK: usize = 16 * 1024;

/// Rows per block for an `nx` by `ny` level: a few blocks per thread for balance.
pub(crate) fn rows_per_block(nx: usize, ny: usize) -> usize {
    let threads = rayon::current_num_threads().max(1);
    let by_threads = ny.div_ceil((4 * threads).min(MAX_BLOCKS));
    let by_size = MIN_CELLS_PER_BLOCK.div_ceil(nx.max(1));
    by_threads.max(by_size).max(ny.div_ceil(MAX_BLOCKS)).clamp(1, ny.max(1))
}

/// Runs `f(first_row, rows)` on every block of `out` (rows of `nx` values, `rpb` per block).
#[inline]
pub(crate) fn for_rows<F>(out: &mut [f64], nx: usize, rpb: usize, f: F)
where
    F: Fn(usize, &mut [f64]) + Sync + Send,
{
    let chunk = rpb * nx;
    if out.len() <= chunk {
        f(0, out);
    } else {
        out.par_chunks_mut(chunk).enumerate().for_each(|(b, c)| f(b * rpb, c));
    }
}

/// Like [`for_rows`], returning the sum of the values `f` returns, in block order.
#[inline]
pub(crate) fn sum_rows_mut<F>(out: &mut [f64], nx: usize, rpb: usize, f: F) -> f64
where
    F: Fn(usize, &mut [f64]) -> f64 + Sync + Send,
{
    let chunk = rpb * nx;
    if out.len() <= chunk {
        return f(0, out);
    }
    let nb = out.len().div_ceil(chunk);
    let mut partial = [0.0f64; MAX_BLOCKS];
    out.par_chunks_mut(chunk)
        .zip(partial[..nb].par_iter_mut())
        .enumerate()
        .for_each(|(b, (c, p))| *p = f(b * rpb, c));
    partial[..nb].iter().sum()
}

/// Sum over row blocks of `f(first_row, end_row)` (read-only work), in block order.
#[inline]
pub(crate) fn sum_rows<F>(ny: usize, rpb: usize, f: F) -> f64
where
    F: Fn(usize, usize) -> f64 + Sync + Send,
{
    if ny <= rpb {
        return f(0, ny);
    }
    let nb = ny.div_ceil(rpb);
    let mut partial = [0.0f64; MAX_BLOCKS];
    partial[..nb]
        .par_iter_mut()
        .enumerate()
        .for_each(|(b, p)| *p = f(b * rpb, ((b + 1) * rpb).min(ny)));
    partial[..nb].iter().sum()
}

/// Lanes of the partial sums in [`dot_lanes`]: one AVX-512 register of `f64`.
pub(crate) const LANES: usize = 8;

/// `a . b` with `LANES` interleaved partial sums (so the loop vectorises without reordering
/// by the compiler), added in a fixed order: deterministic for given inputs.
#[inline(always)]
pub(crate) fn dot_lanes(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; LANES];
    let (ca, cb) = (a.chunks_exact(LANES), b.chunks_exact(LANES));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for l in 0..LANES {
            acc[l] += x[l] * y[l];
        }
    }
    let mut s = 0.0;
    for v in acc {
        s += v;
    }
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

/// Rows ahead of the current one that the row-streaming kernels prefetch: their first loads
/// of each row otherwise wait on memory latency (the hardware prefetchers stop at page
/// boundaries; measured on the 1024^2 benchmark).
pub(crate) const PREFETCH_ROWS: isize = 2;

/// Bytes per cache line assumed by [`prefetch_part`].
const LINE: usize = 64;

/// Software prefetch into L1 of part `part` of `parts` equal pieces of `v` (a hint only: no
/// effect on results; a no-op on targets other than x86-64).
#[inline(always)]
pub(crate) fn prefetch_part<T>(v: &[T], part: usize, parts: usize) {
    let bytes = std::mem::size_of_val(v);
    let piece = bytes.div_ceil(parts.max(1)).div_ceil(LINE) * LINE;
    let (start, end) = ((part * piece).min(bytes), ((part + 1) * piece).min(bytes));
    prefetch_lines::<T, L1>(v, start, end);
}

/// Software prefetch into L2 of every cache line `v` spans, the line of its last value
/// included when `v` does not start on a line boundary (a hint only, as [`prefetch_part`]).
#[inline(always)]
pub(crate) fn prefetch_l2<T>(v: &[T]) {
    let bytes = std::mem::size_of_val(v);
    prefetch_lines::<T, L2>(v, 0, bytes);
    if bytes > 0 {
        prefetch_lines::<T, L2>(v, bytes - 1, bytes);
    }
}

/// Prefetch hint into L1.
#[cfg(target_arch = "x86_64")]
const L1: i32 = std::arch::x86_64::_MM_HINT_T0;
/// Prefetch hint into L2.
#[cfg(target_arch = "x86_64")]
const L2: i32 = std::arch::x86_64::_MM_HINT_T1;
#[cfg(not(target_arch = "x86_64"))]
const L1: i32 = 0;
#[cfg(not(target_arch = "x86_64"))]
const L2: i32 = 0;

/// Prefetches with hint `HINT` the lines at byte offsets `start, start + LINE, ..` below `end`
/// of `v` (`end <= ` its size in bytes).
#[inline(always)]
fn prefetch_lines<T, const HINT: i32>(v: &[T], start: usize, end: usize) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::_mm_prefetch;
        let p = v.as_ptr().cast::<i8>();
        let mut o = start;
        while o < end {
            // SAFETY: o < end <= the size of `v` in bytes, so the address is inside `v`; a
            // prefetch never faults and reads or writes nothing.
            unsafe { _mm_prefetch::<HINT>(p.add(o)) };
            o += LINE;
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        let _ = (v, start, end);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Prefetching any part of any slice (empty, shorter than a line, odd lengths, more parts
    /// than lines) stays inside the slice and changes nothing.
    #[test]
    fn prefetch_parts_cover_any_slice() {
        let v: Vec<f64> = (0..1000).map(f64::from).collect();
        for len in [0, 1, 7, 8, 9, 100, 1000] {
            for parts in [1, 2, 3, 4, 200] {
                for part in 0..parts + 1 {
                    prefetch_part(&v[..len], part, parts);
                    prefetch_part(&v[1..1 + len.min(999)], part, parts);
                }
            }
        }
        prefetch_part::<u8>(&[], 0, 0);
        assert!(v.iter().enumerate().all(|(i, &x)| x == i as f64));
    }
}
