//! Reusable per-job scratch buffers for rayon's `map_init` / `for_each_init`.
//!
//! rayon calls the init closure once per split job, not once per thread, and with
//! work stealing a call can split many times. Large buffers (a segment-length FFT
//! buffer is several MiB) would then be allocated and page-faulted again and again;
//! a pool hands finished jobs' buffers to the next job instead.

use std::ops::{Deref, DerefMut};
use std::sync::Mutex;

/// Buffers made by `make`, recycled between jobs of one parallel call.
pub struct Pool<T, F: Fn() -> T> {
    free: Mutex<Vec<T>>,
    make: F,
}

impl<T, F: Fn() -> T> Pool<T, F> {
    pub fn new(make: F) -> Self {
        Self::with_items(make, Vec::new())
    }

    /// A pool that hands out `items` before making new buffers.
    pub fn with_items(make: F, items: Vec<T>) -> Self {
        Pool {
            free: Mutex::new(items),
            make,
        }
    }

    /// The buffers returned to the pool (all of them, once no lease is out).
    pub fn into_items(self) -> Vec<T> {
        self.free.into_inner().unwrap_or_else(|e| e.into_inner())
    }

    /// A buffer for one job; it returns to the pool when the job drops it.
    pub fn take(&self) -> Lease<'_, T, F> {
        let item = self
            .free
            .lock()
            .unwrap_or_else(|e| e.into_inner())
            .pop()
            .unwrap_or_else(|| (self.make)());
        Lease {
            pool: self,
            item: Some(item),
        }
    }
}

/// Items kept from one call to the next, at most [`KEPT`], the oldest evicted
/// first: a segment-length buffer made afresh each call has its pages faulted in and
/// zeroed again, as much as a third of a transform.
pub struct Kept<T>(Mutex<Vec<T>>);

/// Items a [`Kept`] list holds at most: two, since a segment's spectrum chain and its
/// data transform run side by side.
pub const KEPT: usize = 2;

impl<T> Kept<T> {
    pub const fn new() -> Self {
        Kept(Mutex::new(Vec::new()))
    }

    /// The first kept item that `fits`, no longer kept.
    pub fn take(&self, fits: impl Fn(&T) -> bool) -> Option<T> {
        let mut kept = self.0.lock().unwrap_or_else(|e| e.into_inner());
        kept.iter().position(fits).map(|i| kept.remove(i))
    }

    /// Keep `item`, evicting the oldest kept one beyond [`KEPT`].
    pub fn give_back(&self, item: T) {
        let mut kept = self.0.lock().unwrap_or_else(|e| e.into_inner());
        if kept.len() >= KEPT {
            kept.remove(0);
        }
        kept.push(item);
    }

    /// How many kept items `fit`, and how many are kept in all.
    pub fn count(&self, fits: impl Fn(&T) -> bool) -> (usize, usize) {
        let kept = self.0.lock().unwrap_or_else(|e| e.into_inner());
        (kept.iter().filter(|t| fits(t)).count(), kept.len())
    }
}

/// A buffer on loan from a [`Pool`].
pub struct Lease<'a, T, F: Fn() -> T> {
    pool: &'a Pool<T, F>,
    item: Option<T>,
}

impl<T, F: Fn() -> T> Deref for Lease<'_, T, F> {
    type Target = T;
    fn deref(&self) -> &T {
        self.item.as_ref().expect("present until drop")
    }
}

impl<T, F: Fn() -> T> DerefMut for Lease<'_, T, F> {
    fn deref_mut(&mut self) -> &mut T {
        self.item.as_mut().expect("present until drop")
    }
}

impl<T, F: Fn() -> T> Drop for Lease<'_, T, F> {
    fn drop(&mut self) {
        if let Some(item) = self.item.take() {
            self.pool
                .free
                .lock()
                .unwrap_or_else(|e| e.into_inner())
                .push(item);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rayon::prelude::*;
    use std::sync::atomic::{AtomicUsize, Ordering};

    #[test]
    fn kept_items_are_found_and_the_oldest_evicted() {
        let kept = Kept::new();
        for v in [1, 2, 3] {
            kept.give_back(v);
        }
        assert_eq!(kept.count(|_| true), (KEPT, KEPT));
        assert_eq!(kept.take(|&v| v == 1), None); // evicted first
        assert_eq!(kept.take(|&v| v == 2), Some(2));
        assert_eq!(kept.count(|&v| v == 3), (1, 1));
    }

    #[test]
    fn buffers_are_reused_across_jobs() {
        let made = AtomicUsize::new(0);
        let pool = Pool::new(|| {
            made.fetch_add(1, Ordering::SeqCst);
            vec![0u8; 16]
        });
        let sum: usize = (0..10_000usize)
            .into_par_iter()
            .map_init(|| pool.take(), |buf, i| buf.len() + i % 2)
            .sum();
        assert_eq!(sum, 10_000 * 16 + 5_000);
        // At most one live buffer per worker thread at any time.
        assert!(made.load(Ordering::SeqCst) <= rayon::current_num_threads());
    }
}
