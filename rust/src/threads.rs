//! Thread pools: one cached rayon pool per requested size, chosen by `set_threads`
//! or the `CHIRPSIFT_THREADS` environment variable.
//!
//! Every kernel runs inside `install`, so the thread count is a process-wide
//! setting that never depends on rayon's global pool (which cannot be resized and
//! does not survive `fork`). Work is split per template or per channel and reduced
//! in a fixed order, so results do not depend on the thread count.

use crate::error::{Error, Result};
use rayon::{ThreadPool, ThreadPoolBuilder};
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock};

struct Pools {
    current: usize,
    by_size: HashMap<usize, Arc<ThreadPool>>,
}

fn pools() -> &'static Mutex<Pools> {
    static POOLS: OnceLock<Mutex<Pools>> = OnceLock::new();
    POOLS.get_or_init(|| {
        Mutex::new(Pools {
            current: default_threads(),
            by_size: HashMap::new(),
        })
    })
}

fn default_threads() -> usize {
    std::env::var("CHIRPSIFT_THREADS")
        .ok()
        .and_then(|s| s.trim().parse::<usize>().ok())
        .filter(|&n| n > 0)
        .unwrap_or_else(|| {
            std::thread::available_parallelism()
                .map(|n| n.get())
                .unwrap_or(1)
        })
}

/// Largest thread count [`set_threads`] accepts.
pub const MAX_THREADS: usize = 4096;

/// Set the number of worker threads used by every kernel from now on.
///
/// # Errors
/// Names `n` unless `1 <= n <= MAX_THREADS`.
pub fn set_threads(n: usize) -> Result<()> {
    if n == 0 || n > MAX_THREADS {
        return Err(Error::invalid(
            "n",
            format!("thread count must be in 1..={MAX_THREADS}, got {n}"),
        ));
    }
    pools().lock().unwrap_or_else(|e| e.into_inner()).current = n;
    Ok(())
}

/// The number of worker threads kernels use.
pub fn get_threads() -> usize {
    pools().lock().unwrap_or_else(|e| e.into_inner()).current
}

fn current_pool() -> Arc<ThreadPool> {
    let mut guard = pools().lock().unwrap_or_else(|e| e.into_inner());
    let n = guard.current;
    guard
        .by_size
        .entry(n)
        .or_insert_with(|| {
            Arc::new(
                ThreadPoolBuilder::new()
                    .num_threads(n)
                    .thread_name(|i| format!("chirpsift-{i}"))
                    .build()
                    .expect("building a rayon thread pool"),
            )
        })
        .clone()
}

/// Run `f` inside the pool sized by the current thread setting.
pub fn install<R: Send>(f: impl FnOnce() -> R + Send) -> R {
    current_pool().install(f)
}
