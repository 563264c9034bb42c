//! Copies into memory that bypass the caches (non-temporal stores), for results too large to
//! stay cached: an ordinary store first reads the destination's cache line from memory (write
//! allocate), so streaming a result out saves a third of the memory traffic of writing it
//! (common practice, e.g. the x86 `MOVNTPD` instruction's documented use). Elsewhere than
//! x86-64 these are ordinary copies.

/// `dst = src` (equal lengths) by non-temporal stores where the target has them. Call
/// [`fence`] before other threads read `dst`.
#[inline]
pub(crate) fn stream_copy(dst: &mut [f64], src: &[f64]) {
    assert_eq!(dst.len(), src.len(), "stream_copy lengths");
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_loadu_pd, _mm_stream_pd};
        // Ordinary stores up to the first 16-byte boundary (f64 slices are 8-byte aligned).
        let head = usize::from(!(dst.as_ptr() as usize).is_multiple_of(16)).min(dst.len());
        dst[..head].copy_from_slice(&src[..head]);
        let (d, s) = (&mut dst[head..], &src[head..]);
        let pairs = d.len() / 2;
        let (dp, sp) = (d.as_mut_ptr(), s.as_ptr());
        for k in 0..pairs {
            // SAFETY: SSE2 is part of x86-64; entries 2k and 2k + 1 lie inside both slices,
            // and `dp + 2k` is 16-byte aligned (`dp` is, after the head).
            unsafe { _mm_stream_pd(dp.add(2 * k), _mm_loadu_pd(sp.add(2 * k))) };
        }
        d[2 * pairs..].copy_from_slice(&s[2 * pairs..]);
    }
    #[cfg(not(target_arch = "x86_64"))]
    dst.copy_from_slice(src);
}

/// Orders the calling thread's earlier [`stream_copy`] stores before its later stores (a store
/// fence), so that a thread that synchronises with it afterwards sees them.
#[inline]
pub(crate) fn fence() {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: SSE is part of x86-64.
    unsafe {
        std::arch::x86_64::_mm_sfence()
    };
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every length and both alignments of the destination copy exactly.
    #[test]
    fn copies_every_length_and_alignment() {
        let src: Vec<f64> = (0..67).map(|k| k as f64 * 1.5 - 7.0).collect();
        for offset in 0..2 {
            for len in 0..64 {
                let mut dst = vec![f64::NAN; len + offset + 1];
                stream_copy(&mut dst[offset..offset + len], &src[3..3 + len]);
                fence();
                assert_eq!(&dst[offset..offset + len], &src[3..3 + len]);
                assert!(dst[offset + len].is_nan(), "nothing written past the end");
                assert!(dst[..offset].iter().all(|v| v.is_nan()), "nothing written before");
            }
        }
    }
}
