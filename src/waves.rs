//! Work on whole surveys or pairs, side by side but never more at once than the pool has threads.
//!
//! A plain `par_iter` over surveys lets rayon start another survey whenever a thread waits inside
//! one (the per-survey steps are parallel too), so a 12-survey job could hold the scratch arrays of
//! many surveys at once: at 4096² each takes hundreds of MB. Mapping with one worker per thread
//! (`rayon::current_num_threads()` items at most in flight) bounds that memory by the thread count, not the number of
//! surveys. Results come back in item order, so the output does not depend on the thread count.
//! (The module keeps its name from its first form, which ran the items in waves of one per thread.)

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

/// Grids above this many cells (2048²) are large: an item of work on them holds hundreds of MB of
/// scratch (at 4096², about 300 MB for a pair's landforms), so [`items_in_flight`] allows at most
/// [`LARGE_GRID_ITEMS`] of them at once, whatever the number of cores.
pub const LARGE_GRID_CELLS: usize = 2048 * 2048;

/// Most items in flight on large grids: two keeps two cores busy and twelve 4096² surveys under
/// 1 GiB (see the README's "Performance").
pub const LARGE_GRID_ITEMS: usize = 2;

/// How many items on grids of `cells` cells may be in flight: one per thread, and no more than
/// [`LARGE_GRID_ITEMS`] when the grids are large.
pub fn items_in_flight(cells: usize) -> usize {
    if cells > LARGE_GRID_CELLS {
        LARGE_GRID_ITEMS
    } else {
        usize::MAX
    }
}

/// `f(i)` for every `i` in `0..n`, at most one item per pool thread at a time; results in order.
///
/// One worker per thread takes the next item as soon as it is done with one (no wave waits for
/// its slowest item), so items of unequal cost still keep every thread busy.
pub fn map_in_waves<T: Send>(n: usize, f: impl Fn(usize) -> T + Sync) -> Vec<T> {
    map_at_most(n, usize::MAX, f)
}

/// [`map_in_waves`] with no more than `most` items in flight (and never more than threads); the
/// items still use every thread inside (their own steps are parallel).
pub fn map_at_most<T: Send>(n: usize, most: usize, f: impl Fn(usize) -> T + Sync) -> Vec<T> {
    let workers = rayon::current_num_threads().max(1).min(most.max(1)).min(n);
    let next = AtomicUsize::new(0);
    let slots: Vec<Mutex<Option<T>>> = (0..n).map(|_| Mutex::new(None)).collect();
    rayon::scope(|s| {
        for _ in 0..workers {
            s.spawn(|_| loop {
                let i = next.fetch_add(1, Ordering::Relaxed);
                if i >= n {
                    break;
                }
                let value = f(i);
                *slots[i].lock().unwrap_or_else(|p| p.into_inner()) = Some(value);
            });
        }
    });
    slots
        .into_iter()
        .map(|m| {
            m.into_inner()
                .unwrap_or_else(|p| p.into_inner())
                .expect("every item was mapped")
        })
        .collect()
}

/// `f(item)` for every item of `items`, as [`map_in_waves`]; results in order.
pub fn map_mut_in_waves<I: Send, T: Send>(
    items: &mut [I],
    f: impl Fn(&mut I) -> T + Sync,
) -> Vec<T> {
    let cells: Vec<Mutex<&mut I>> = items.iter_mut().map(Mutex::new).collect();
    map_in_waves(cells.len(), |i| {
        let mut item = cells[i].lock().unwrap_or_else(|p| p.into_inner());
        f(&mut item)
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use rayon::prelude::*;

    #[test]
    fn waves_keep_order_and_bound_the_items_in_flight() {
        // Check: analytic — results in item order, and never more items in flight than the
        // pool's two threads, even when each item runs nested parallel work.
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap();
        let (live, most) = (AtomicUsize::new(0), AtomicUsize::new(0));
        let out = pool.install(|| {
            map_in_waves(9, |i| {
                let now = live.fetch_add(1, Ordering::SeqCst) + 1;
                most.fetch_max(now, Ordering::SeqCst);
                // Nested parallel work, where a plain par_iter would steal further items.
                let s: usize = (0..20_000usize).into_par_iter().map(|k| k % 7).sum();
                live.fetch_sub(1, Ordering::SeqCst);
                (i * 10, s)
            })
        });
        let sum: usize = (0..20_000usize).map(|k| k % 7).sum();
        assert_eq!(out, (0..9).map(|i| (i * 10, sum)).collect::<Vec<_>>());
        // Capped at one item in flight on the same two threads.
        let (live, most_capped) = (AtomicUsize::new(0), AtomicUsize::new(0));
        let capped = pool.install(|| {
            map_at_most(9, 1, |i| {
                let now = live.fetch_add(1, Ordering::SeqCst) + 1;
                most_capped.fetch_max(now, Ordering::SeqCst);
                let s: usize = (0..20_000usize).into_par_iter().map(|k| k % 7).sum();
                live.fetch_sub(1, Ordering::SeqCst);
                (i * 10, s)
            })
        });
        assert_eq!(capped, out);
        assert_eq!(most_capped.load(Ordering::SeqCst), 1);
        assert_eq!(items_in_flight(4096 * 4096), LARGE_GRID_ITEMS);
        assert_eq!(items_in_flight(1024 * 1024), usize::MAX);
        assert!(
            most.load(Ordering::SeqCst) <= 2,
            "{} in flight",
            most.load(Ordering::SeqCst)
        );
        let mut items: Vec<usize> = (0..5).collect();
        let doubled = pool.install(|| {
            map_mut_in_waves(&mut items, |x| {
                *x += 1;
                *x * 2
            })
        });
        assert_eq!(items, vec![1, 2, 3, 4, 5]);
        assert_eq!(doubled, vec![2, 4, 6, 8, 10]);
    }
}
