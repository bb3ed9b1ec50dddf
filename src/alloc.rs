//! The process's allocator: the C allocator, with large blocks placed where the kernels
//! want them. A block of at least [`LINE_FROM`] bytes starts on a 64-byte cache line, so a
//! row of 16 `f32`s, or any 64-byte vector load at a multiple of 64 bytes into the block,
//! never straddles two lines (glibc's malloc puts the blocks it maps 16 bytes past a page
//! boundary, which splits every such load in two).
//!
//! A large block is a C block [`SLACK`] bytes longer, the line-aligned block inside it,
//! and the C block's address stored in the 8 bytes before it. So large blocks keep what
//! the C allocator gives plain ones: `calloc`'s untouched zero pages, and `realloc`'s
//! growth in place or by remapping pages (an over-aligned request to the system allocator
//! would zero every page up front and copy on every resize).
//!
//! Elsewhere than on Unix the system allocator is used as it is.
//!
//! Invariant: how a block is placed depends only on its layout (size and asked-for
//! alignment), so `dealloc` and `realloc` recompute what `alloc` did.

use std::alloc::{GlobalAlloc, Layout, System};

/// Blocks of this many bytes or more start on a cache line.
pub const LINE_FROM: usize = 4 << 10;

/// Extra bytes of a large block's C block: room to reach the next line past the stored
/// address from any 8-byte-aligned start.
const SLACK: usize = 64 + 8;

/// The system allocator with the placement rule above.
pub struct Placed;

/// Whether a block of `layout` is placed on a line inside a longer C block.
fn large(layout: Layout) -> bool {
    cfg!(unix) && layout.size() >= LINE_FROM && layout.align() <= 64
}

/// The line-aligned block inside the C block `raw` (null stays null), with `raw` stored
/// before it.
///
/// # Safety
/// `raw` must be null or a C block of at least `size + SLACK` bytes.
#[cfg(unix)]
unsafe fn inside(raw: *mut u8) -> *mut u8 {
    if raw.is_null() {
        return raw;
    }
    let at = (raw as usize + 8).next_multiple_of(64) - raw as usize;
    // SAFETY: `at` ≤ 8 + 63 < SLACK, so the block and the 8 bytes before it lie within
    // the C block (caller), and `at − 8` is 8-aligned past an 8-aligned `raw`.
    unsafe {
        let p = raw.add(at);
        p.sub(8).cast::<usize>().write(raw as usize);
        p
    }
}

/// The C block a large block lies in.
///
/// # Safety
/// `p` must be a live large block from [`inside`].
#[cfg(unix)]
unsafe fn outer(p: *mut u8) -> *mut u8 {
    // SAFETY: `inside` stored the address there.
    unsafe { p.sub(8).cast::<usize>().read() as *mut u8 }
}

// SAFETY: a large block lies inside a C block of `size + SLACK` bytes, on a 64-byte
// boundary, which meets every alignment `large` admits, and is freed through the address
// stored before it; any other block is the system allocator's with the caller's layout.
// `dealloc` and `realloc` recompute the choice from the caller's layout (the invariant).
unsafe impl GlobalAlloc for Placed {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        #[cfg(unix)]
        if large(layout) {
            // SAFETY: a C block of the size `inside` needs.
            return unsafe { inside(libc::malloc(layout.size() + SLACK).cast()) };
        }
        // SAFETY: forwarded (see the impl's comment).
        unsafe { System.alloc(layout) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        #[cfg(unix)]
        if large(layout) {
            // SAFETY: as in `alloc`; calloc zeroes the whole C block.
            return unsafe { inside(libc::calloc(1, layout.size() + SLACK).cast()) };
        }
        // SAFETY: forwarded.
        unsafe { System.alloc_zeroed(layout) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        #[cfg(unix)]
        if large(layout) {
            // SAFETY: `ptr` is a large block (the invariant).
            return unsafe { libc::free(outer(ptr).cast()) };
        }
        // SAFETY: `ptr` came from `alloc` with `layout`.
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let Ok(asked) = Layout::from_size_align(new_size, layout.align()) else {
            return std::ptr::null_mut();
        };
        #[cfg(unix)]
        if large(layout) && large(asked) {
            // SAFETY: `ptr` is a large block (the invariant). The C realloc keeps the C
            // block's first bytes, which hold the data at the old offset `at`; when the
            // new C block puts the line elsewhere, the data moves there within it (both
            // ranges lie in the new C block, since `at`, `to − raw` < SLACK).
            unsafe {
                let old_raw = outer(ptr);
                let at = ptr as usize - old_raw as usize;
                let raw = libc::realloc(old_raw.cast(), new_size + SLACK).cast::<u8>();
                if raw.is_null() {
                    return raw;
                }
                let keep = layout.size().min(new_size);
                let to = (raw as usize + 8).next_multiple_of(64) - raw as usize;
                if to != at {
                    std::ptr::copy(raw.add(at), raw.add(to), keep);
                }
                return inside(raw);
            }
        }
        if !large(layout) && !large(asked) {
            // SAFETY: `ptr` is the system allocator's block of `layout`.
            return unsafe { System.realloc(ptr, layout, new_size) };
        }
        // The block changes placement: a new block, then the bytes both hold.
        // SAFETY: `asked` is a valid non-zero layout; the copy stays within both blocks,
        // and `ptr` is freed the way `layout` placed it.
        unsafe {
            let to = self.alloc(asked);
            if !to.is_null() {
                std::ptr::copy_nonoverlapping(ptr, to, layout.size().min(new_size));
                self.dealloc(ptr, layout);
            }
            to
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    #[cfg(unix)]
    fn large_blocks_start_on_a_line() {
        for bytes in [LINE_FROM, 1 << 20, 64 << 20] {
            let v: Vec<u8> = Vec::with_capacity(bytes);
            assert_eq!(v.as_ptr() as usize % 64, 0, "{bytes} bytes");
        }
        let zeroed = vec![0u64; 1 << 20];
        assert_eq!(zeroed.as_ptr() as usize % 64, 0);
        assert!(zeroed.iter().all(|&v| v == 0));
        // Growth from below the line size to far above it, then shrinking back below it,
        // keeps every value, and the line while the block is large.
        let mut grown: Vec<f32> = Vec::new();
        for i in 0..(1 << 22) {
            grown.push(i as f32);
            if grown.capacity() * 4 >= LINE_FROM {
                assert_eq!(grown.as_ptr() as usize % 64, 0);
            }
        }
        assert!(grown.iter().enumerate().all(|(i, &v)| v == i as f32));
        for keep in [5000, 100] {
            grown.truncate(keep);
            grown.shrink_to_fit();
            assert!(grown.iter().enumerate().all(|(i, &v)| v == i as f32));
        }
    }
}
