//! What the kernels ask of the memory system: cache-line prefetches ahead of a stream or
//! a random probe, huge pages under tables that are probed at random, and streaming
//! stores for output that is written once. All are hints: they change speed, never a
//! result.

/// Hints the cache to fetch the line holding `items[i]` (nothing when `i` is out of range).
#[inline(always)]
pub fn prefetch<T>(items: &[T], i: usize) {
    #[cfg(target_arch = "x86_64")]
    if i < items.len() {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        // SAFETY: a prefetch only hints the cache and never faults; the address is inside
        // `items` (checked above).
        unsafe { _mm_prefetch::<_MM_HINT_T0>(items.as_ptr().add(i).cast::<i8>()) }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (items, i);
}

/// Hints the cache to fetch every line `items` touches.
#[inline(always)]
pub fn prefetch_all<T>(items: &[T]) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        const LINE: usize = 64;
        let start = items.as_ptr() as usize;
        let end = start + std::mem::size_of_val(items);
        let mut line = start & !(LINE - 1);
        while line < end {
            // SAFETY: a prefetch only hints the cache and never faults, whatever the
            // address; every line here holds a byte of `items`.
            unsafe { _mm_prefetch::<_MM_HINT_T0>(line as *const i8) }
            line += LINE;
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = items;
}

/// An empty vector with room for `n` items whose allocation the kernel is asked to back
/// with transparent huge pages (Linux, 2 MiB pages), before any page is touched: a table
/// of tens of MiB probed at random then costs a few TLB entries instead of thousands.
pub fn huge_vec<T>(n: usize) -> Vec<T> {
    let v = Vec::with_capacity(n);
    advise_huge(&v);
    v
}

/// Asks the kernel to back the whole 2 MiB pages inside `v`'s allocation (its capacity)
/// with transparent huge pages (Linux); call it before the pages are first touched.
pub fn advise_huge<T>(v: &Vec<T>) {
    #[cfg(target_os = "linux")]
    {
        const HUGE: usize = 2 << 20;
        let start = v.as_ptr() as usize;
        let end = start + v.capacity() * std::mem::size_of::<T>();
        let (lo, hi) = (start.next_multiple_of(HUGE), end / HUGE * HUGE);
        if hi > lo {
            // SAFETY: the range lies inside `v`'s own allocation, and MADV_HUGEPAGE only
            // advises how to back it; it never changes contents or validity. A refusal
            // (THP disabled) is harmless, so the result is ignored.
            unsafe {
                libc::madvise(lo as *mut libc::c_void, hi - lo, libc::MADV_HUGEPAGE);
            }
        }
    }
    #[cfg(not(target_os = "linux"))]
    let _ = v;
}

/// Appends `bytes` to `out`, storing the whole 64-byte memory lines among them with
/// streaming stores: output far larger than the caches then is not read from memory
/// before it is overwritten, as a plain store's line fill would. The partial lines at
/// either end get plain stores. Ends with a store fence, so the bytes are ordered before
/// whatever hands `out` on.
#[inline]
pub fn extend_streaming(out: &mut Vec<u8>, bytes: &[u8]) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{__m128i, _mm_loadu_si128, _mm_sfence, _mm_stream_si128};
        out.reserve(bytes.len());
        let at = out.len();
        let spare = &mut out.spare_capacity_mut()[..bytes.len()];
        let head = (spare.as_ptr() as usize).wrapping_neg() % 64;
        let head = head.min(bytes.len());
        let lines = (bytes.len() - head) / 64;
        let (first, rest) = spare.split_at_mut(head);
        let (mid, last) = rest.split_at_mut(lines * 64);
        let plain = |dst: &mut [std::mem::MaybeUninit<u8>], src: &[u8]| {
            for (d, &s) in dst.iter_mut().zip(src) {
                d.write(s);
            }
        };
        plain(first, &bytes[..head]);
        for (l, src) in bytes[head..head + lines * 64].chunks_exact(64).enumerate() {
            for q in 0..4 {
                // SAFETY: SSE2 is part of x86_64. The source is 16 bytes inside `src`;
                // the destination is 16 bytes inside `mid`, a run of whole lines that
                // starts on a 64-byte boundary, so it is 16-byte aligned as the streaming
                // store needs.
                unsafe {
                    let v = _mm_loadu_si128(src.as_ptr().add(16 * q).cast::<__m128i>());
                    _mm_stream_si128(mid.as_mut_ptr().add(64 * l + 16 * q).cast(), v);
                }
            }
        }
        plain(last, &bytes[head + lines * 64..]);
        // SAFETY: SSE2 is part of x86_64; every byte of `spare` was written above.
        unsafe {
            _mm_sfence();
            out.set_len(at + bytes.len());
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    out.extend_from_slice(bytes);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streaming_appends_equal_plain_appends() {
        // Every start offset within a line and lengths around whole lines.
        let src: Vec<u8> = (0..300u32).map(|i| (i * 7 + 1) as u8).collect();
        for lead in 0..70 {
            for len in [0, 1, 15, 63, 64, 65, 127, 128, 129, 200, 300] {
                let mut a = vec![9u8; lead];
                let mut b = a.clone();
                extend_streaming(&mut a, &src[..len]);
                b.extend_from_slice(&src[..len]);
                assert_eq!(a, b, "lead {lead}, len {len}");
            }
        }
    }

    #[test]
    fn a_huge_vector_is_an_ordinary_empty_vector() {
        let mut v: Vec<u64> = huge_vec(1 << 20);
        assert!(v.is_empty() && v.capacity() >= 1 << 20);
        v.resize(1 << 20, 7);
        assert!(v.iter().all(|&x| x == 7));
        prefetch(&v, 5);
        prefetch(&v, 1 << 30);
    }
}
