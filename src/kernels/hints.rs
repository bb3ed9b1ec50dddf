//! What the kernels ask of the memory system: cache-line prefetches ahead of a stream or
//! a random probe, and huge pages under tables that are probed at random. Both are hints:
//! they change speed, never a result.

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
    #[cfg(target_os = "linux")]
    {
        const HUGE: usize = 2 << 20;
        let start = v.as_ptr() as usize;
        let end = start + n * std::mem::size_of::<T>();
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
    v
}

#[cfg(test)]
mod tests {
    use super::*;

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
