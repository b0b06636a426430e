//! Per-thread query scratch, keyed by the region it is sized for: a small
//! list, oldest evicted first, so a worker thread reuses its search
//! buffers across requests instead of allocating them per query.

use std::cell::RefCell;
use std::thread::LocalKey;

/// Up to `cap` scratch values, each keyed by a region's address.
#[derive(Debug)]
pub(super) struct ScratchCache<T> {
    /// How many regions' scratch one thread keeps (a bound on memory).
    cap: usize,
    entries: Vec<(usize, T)>,
}

impl<T> ScratchCache<T> {
    pub(super) const fn new(cap: usize) -> Self {
        ScratchCache {
            cap,
            entries: Vec::new(),
        }
    }

    /// The entry for `key` that passes `fits`, else a new one from `make`
    /// (evicting the oldest when full).
    fn entry(&mut self, key: usize, fits: impl Fn(&T) -> bool, make: impl FnOnce() -> T) -> &mut T {
        let pos = match self.entries.iter().position(|(k, v)| *k == key && fits(v)) {
            Some(p) => p,
            None => {
                if self.entries.len() >= self.cap {
                    self.entries.remove(0);
                }
                self.entries.push((key, make()));
                self.entries.len() - 1
            }
        };
        &mut self.entries[pos].1
    }
}

/// Runs `f` with this thread's entry of `cache` for `key` (see
/// [`ScratchCache::entry`]).
pub(super) fn with_scratch<T: 'static, R>(
    cache: &'static LocalKey<RefCell<ScratchCache<T>>>,
    key: usize,
    fits: impl Fn(&T) -> bool,
    make: impl FnOnce() -> T,
    f: impl FnOnce(&mut T) -> R,
) -> R {
    cache.with(|c| f(c.borrow_mut().entry(key, fits, make)))
}

#[cfg(test)]
mod tests {
    use super::*;

    thread_local! {
        static TEST: RefCell<ScratchCache<u32>> = const { RefCell::new(ScratchCache::new(2)) };
    }

    #[test]
    fn reuses_by_key_and_evicts_the_oldest() {
        let made = std::cell::Cell::new(0u32);
        let get = |key: usize| {
            let make = || {
                made.set(made.get() + 1);
                made.get()
            };
            with_scratch(&TEST, key, |_| true, make, |v| *v)
        };
        assert_eq!(get(1), 1);
        assert_eq!(get(1), 1, "reused, not made again");
        assert_eq!(get(2), 2);
        assert_eq!(get(3), 3, "cap 2: key 1 evicted");
        assert_eq!(get(1), 4, "key 1 was evicted");
        assert_eq!(get(3), 3);
        // An entry that does not fit is replaced.
        let v = with_scratch(&TEST, 3, |v| *v != 3, || 99, |v| *v);
        assert_eq!(v, 99);
    }
}
