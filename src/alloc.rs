//! The process's allocator: the system allocator, with large blocks placed where the
//! kernels want them. A block of at least [`LINE_FROM`] bytes starts on a 64-byte cache
//! line, so a row of 16 `f32`s, or any 64-byte vector load at a multiple of 64 bytes into
//! the block, never straddles two lines (glibc's malloc puts the blocks it maps 16 bytes
//! past a page boundary, which splits every such load in two).
//!
//! Invariant: the alignment a block gets depends only on its layout (size and asked-for
//! alignment), so `dealloc` and `realloc` recompute the layout `alloc` used.

use std::alloc::{GlobalAlloc, Layout, System};

/// Blocks of this many bytes or more start on a cache line.
pub const LINE_FROM: usize = 4 << 10;

/// The system allocator with the placement rule above.
pub struct Placed;

/// The layout a block of `layout` is given.
fn placed(layout: Layout) -> Layout {
    if layout.size() < LINE_FROM || layout.align() >= 64 {
        return layout;
    }
    // Fails only for a size within 64 bytes of isize::MAX, which no allocation reaches;
    // such a layout keeps its own alignment.
    Layout::from_size_align(layout.size(), 64).unwrap_or(layout)
}

// SAFETY: every method forwards to `System` with the layout `placed` gives, which is a
// valid layout of at least the asked-for size and alignment; `dealloc` and `realloc`
// recompute the same layout from the caller's (module invariant).
unsafe impl GlobalAlloc for Placed {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: forwarded (see the impl's comment).
        unsafe { System.alloc(placed(layout)) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        // SAFETY: forwarded.
        unsafe { System.alloc_zeroed(placed(layout)) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` came from `alloc` with `placed(layout)`.
        unsafe { System.dealloc(ptr, placed(layout)) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let old = placed(layout);
        let Ok(asked) = Layout::from_size_align(new_size, layout.align()) else {
            return std::ptr::null_mut();
        };
        let new = placed(asked);
        if new.align() == old.align() {
            // SAFETY: `ptr` holds a block of `old`; the system allocator keeps its
            // alignment, which is the one `placed` gives the new size.
            return unsafe { System.realloc(ptr, old, new_size) };
        }
        // The block changes placement: a new block, then the bytes both hold.
        // SAFETY: `new` is a valid non-zero layout; the copy stays within both blocks.
        unsafe {
            let to = System.alloc(new);
            if !to.is_null() {
                std::ptr::copy_nonoverlapping(ptr, to, layout.size().min(new_size));
                System.dealloc(ptr, old);
            }
            to
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn large_blocks_start_on_a_line() {
        for bytes in [LINE_FROM, 1 << 20, 64 << 20] {
            let v: Vec<u8> = Vec::with_capacity(bytes);
            assert_eq!(v.as_ptr() as usize % 64, 0, "{bytes} bytes");
        }
        let zeroed = vec![0u64; 1 << 20];
        assert_eq!(zeroed.as_ptr() as usize % 64, 0);
        assert!(zeroed.iter().all(|&v| v == 0));
        // Growth from below the line size to far above it keeps every value.
        let mut grown: Vec<f32> = Vec::new();
        for i in 0..(1 << 20) {
            grown.push(i as f32);
            if grown.len() * 4 >= LINE_FROM {
                assert_eq!(grown.as_ptr() as usize % 64, 0);
            }
        }
        assert!(grown.iter().enumerate().all(|(i, &v)| v == i as f32));
    }
}
