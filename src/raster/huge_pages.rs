//! Transparent huge pages for large blocks of memory (Linux).
//!
//! A fresh plane-sized buffer comes from the kernel as untouched pages, and
//! the first write to each 4 KiB page is a page fault that maps and clears it:
//! a 4000×3000 plane takes about 12 000 of them, and `perf` puts these faults
//! at a third of a `resize` upscale's time. Asked before the first touch, the
//! kernel backs the block with 2 MiB pages instead (where transparent huge
//! pages are enabled in `madvise` or `always` mode, the usual default), 512
//! times fewer faults for the same clearing. Measured on single steps over
//! 4000×3000 RGB, 2 threads, median of 15 (`perf`-free runs of
//! `Pipeline::run`): `resize` bicubic 1000×750 → 4000×3000 about 60 → 35–45 ms.

use std::alloc::{GlobalAlloc, Layout, System};

/// Blocks of at least this many bytes are advised (two huge pages: a smaller
/// one could hold no aligned huge page after rounding inward).
const MIN_BYTES: usize = 4 << 20;

/// The huge page size the advice is aligned to: 2 MiB on x86-64 and on
/// aarch64 with 4 KiB pages; on other page sizes the range is still page
/// aligned, so the advice stays valid, merely covering a little less.
const HUGE_PAGE: usize = 2 << 20;

/// The process's allocator (set in `lib.rs`): the system allocator, with every
/// block of [`MIN_BYTES`] or more advised to be backed by huge pages as soon as
/// it is allocated, before the caller first touches it. That covers planes,
/// byte buffers of codecs and operators, and copies alike.
pub struct Advising;

// SAFETY: every method hands the request to `System` unchanged and returns its
// answer unchanged; the only addition, `advise`, reads and writes no memory
// (see `madvise_huge`), so `System`'s guarantees carry over as they are.
unsafe impl GlobalAlloc for Advising {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: the caller's contract for `alloc` is passed on as it is.
        let p = unsafe { System.alloc(layout) };
        advise(p, layout.size());
        p
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        // SAFETY: as for `alloc`.
        let p = unsafe { System.alloc_zeroed(layout) };
        advise(p, layout.size());
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: as for `alloc`.
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        // SAFETY: as for `alloc`.
        let p = unsafe { System.realloc(ptr, layout, new_size) };
        advise(p, new_size);
        p
    }
}

/// Asks the kernel to back the 2 MiB-aligned part of the block `at .. at +
/// bytes` with huge pages when its pages are first touched (on pages already
/// touched it only lets the kernel merge them later). Small blocks, a null
/// pointer (a failed allocation) and failure of the call change nothing.
fn advise(at: *mut u8, bytes: usize) {
    if bytes < MIN_BYTES || at.is_null() {
        return;
    }
    let start = at as usize;
    let (first, end) = (start.next_multiple_of(HUGE_PAGE), (start + bytes) / HUGE_PAGE * HUGE_PAGE);
    if first < end {
        madvise_huge(at.wrapping_add(first - start), end - first);
    }
}

#[cfg(target_os = "linux")]
fn madvise_huge(at: *mut u8, len: usize) {
    // SAFETY: `at .. at + len` lies inside a block just returned by the
    // system allocator (its range rounded inward to 2 MiB boundaries, so it is
    // page aligned as madvise requires). MADV_HUGEPAGE is advice about how
    // future page faults in the range are served: per madvise(2) it does not
    // change the contents, protection or validity of any mapping, so no memory
    // is read or written through the pointer and nothing Rust relies on
    // changes. The result is ignored: EINVAL (no transparent huge page support)
    // leaves the buffer as it was.
    unsafe {
        libc::madvise(at.cast::<libc::c_void>(), len, libc::MADV_HUGEPAGE);
    }
}

#[cfg(not(target_os = "linux"))]
fn madvise_huge(_at: *mut u8, _len: usize) {}

#[cfg(test)]
mod tests {
    #[test]
    fn advised_blocks_keep_their_contents() {
        // Small and large blocks, zeroed, grown and copied through the
        // advising allocator (the process's own): every sample as written.
        for len in [0, 1000, (4 << 20) / 4, 3_000_017] {
            let mut buf = vec![0.0f32; len];
            assert!(buf.iter().all(|&v| v == 0.0));
            buf.iter_mut().enumerate().for_each(|(i, v)| *v = i as f32);
            buf.extend((len..2 * len).map(|i| i as f32));
            let copy = buf.clone();
            super::advise(copy.as_ptr().cast_mut().cast(), len * 8);
            assert!(copy.iter().enumerate().all(|(i, &v)| v == i as f32));
        }
    }
}
