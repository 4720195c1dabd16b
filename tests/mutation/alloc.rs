//! A counting global allocator for the mutation tests: the peak of live heap bytes on the current
//! thread while one reader call runs, so a reader that allocates what a damaged header declares
//! (instead of what the file holds) is caught even when the operating system would grant it.
//!
//! Counters are per thread (`cargo test` runs tests side by side in one process); the readers
//! allocate and free on the calling thread, so the per-thread figure is the reader's own. Memory
//! freed on another thread than the one that allocated it only lowers that thread's count, which
//! can hide nothing here: the measured call frees everything it keeps before the peak is read.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

/// Counts bytes on top of the system allocator.
pub struct Counting;

thread_local! {
    static LIVE: Cell<isize> = const { Cell::new(0) };
    static PEAK: Cell<isize> = const { Cell::new(0) };
    static LARGEST: Cell<usize> = const { Cell::new(0) };
}

fn add(bytes: isize, request: usize) {
    // `try_with`: the allocator may run while a thread's locals are being torn down.
    let _ = LIVE.try_with(|live| {
        let now = live.get() + bytes;
        live.set(now);
        let _ = PEAK.try_with(|p| p.set(p.get().max(now)));
    });
    let _ = LARGEST.try_with(|l| l.set(l.get().max(request)));
}

// SAFETY: every method forwards to `System` with the caller's layout unchanged; the counters are
// plain thread-local cells that never allocate.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = System.alloc(layout);
        if !p.is_null() {
            add(layout.size() as isize, layout.size());
        }
        p
    }
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        let p = System.alloc_zeroed(layout);
        if !p.is_null() {
            add(layout.size() as isize, layout.size());
        }
        p
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout);
        add(-(layout.size() as isize), 0);
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = System.realloc(ptr, layout, new_size);
        if !p.is_null() {
            add(new_size as isize - layout.size() as isize, new_size);
        }
        p
    }
}

/// What one measured call allocated.
#[derive(Debug, Clone, Copy)]
pub struct Usage {
    /// Highest live heap during the call, above what was live when it started, in bytes.
    pub peak_bytes: usize,
    /// Largest single request (allocation or reallocation) during the call, in bytes.
    pub largest_request: usize,
}

/// Runs `f` and reports the heap it used on this thread.
pub fn measure<T>(f: impl FnOnce() -> T) -> (T, Usage) {
    let base = LIVE.with(Cell::get);
    PEAK.with(|p| p.set(base));
    LARGEST.with(|l| l.set(0));
    let out = f();
    let usage = Usage {
        peak_bytes: (PEAK.with(Cell::get) - base).max(0) as usize,
        largest_request: LARGEST.with(Cell::get),
    };
    (out, usage)
}
