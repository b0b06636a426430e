//! Freeing superseded data off the request path.
//!
//! A snapshot (with its profile metrics) that has just been replaced is usually still
//! held by a request or two, and whoever drops the last `Arc` frees it. For
//! a customized metric that is tens of megabytes returned to the kernel
//! (`munmap`, page by page), several milliseconds of work; if a request
//! worker does it, every request queued behind that worker waits, and a
//! reload storm turns into a p99 spike three times a second.
//!
//! So the update paths never let go of the last reference themselves: they
//! [`retire`](RetireBin::retire) it here, and a sweep on a background thread
//! (see [`crate::customizer`]) drops whatever no request holds any more.
//! Nothing is freed early: an item leaves the bin only when the bin's
//! reference is the only one left.
//!
//! [`trim_heap`] gives freed heap memory back to the kernel after a large
//! upload, whose many small allocations glibc would otherwise keep.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex};

pub use crate::os::trim_heap;

/// Something superseded whose memory should be freed in the background.
pub trait Retiree: Send + Sync {
    /// Whether anything besides the bin still holds it (or the large data
    /// inside it).
    fn in_use(&self) -> bool;
}

impl<T: Send + Sync> Retiree for Arc<T> {
    fn in_use(&self) -> bool {
        Arc::strong_count(self) > 1
    }
}

/// Retired items waiting for their last users to finish.
#[derive(Default)]
pub struct RetireBin {
    items: Mutex<Vec<Box<dyn Retiree>>>,
    /// Items ever retired (tests check that replacements go through here).
    total: AtomicU64,
}

impl std::fmt::Debug for RetireBin {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RetireBin")
            .field("items", &self.len())
            .finish()
    }
}

impl RetireBin {
    /// Keeps `item` until no one else holds it. The lock is held only to
    /// push or to partition the list, never while anything is freed.
    pub fn retire(&self, item: impl Retiree + 'static) {
        self.lock().push(Box::new(item));
        self.total.fetch_add(1, Ordering::Relaxed);
    }

    /// Items retired since start.
    pub fn total(&self) -> u64 {
        self.total.load(Ordering::Relaxed)
    }

    /// Items waiting.
    pub fn len(&self) -> usize {
        self.lock().len()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Takes out the items nobody else holds; the caller drops them (on the
    /// thread where freeing is harmless).
    #[must_use = "dropping the result is what frees the memory"]
    pub fn sweep(&self) -> Vec<Box<dyn Retiree>> {
        let mut items = self.lock();
        let (free, keep): (Vec<_>, Vec<_>) = items.drain(..).partition(|i| !i.in_use());
        *items = keep;
        free
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Vec<Box<dyn Retiree>>> {
        // A panic while pushing or partitioning leaves a valid Vec.
        self.items.lock().unwrap_or_else(|p| p.into_inner())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Counts drops and records the thread that dropped it.
    struct Tracked(Arc<Mutex<Vec<std::thread::ThreadId>>>);

    impl Drop for Tracked {
        fn drop(&mut self) {
            self.0.lock().unwrap().push(std::thread::current().id());
        }
    }

    #[test]
    fn frees_only_once_unused_and_where_the_sweep_result_is_dropped() {
        let drops = Arc::new(Mutex::new(Vec::new()));
        let bin = RetireBin::default();
        let item = Arc::new(Tracked(drops.clone()));
        let user = item.clone(); // a request still holding it
        bin.retire(item);
        assert_eq!(bin.sweep().len(), 0, "still held: nothing leaves the bin");
        assert_eq!(bin.len(), 1);
        // The request finishes: its drop is not the last one.
        drop(user);
        assert!(
            drops.lock().unwrap().is_empty(),
            "the request did not free it"
        );
        let freed = bin.sweep();
        assert_eq!(freed.len(), 1);
        assert!(bin.is_empty());
        assert_eq!(bin.total(), 1);
        let sweeper = std::thread::spawn(move || {
            drop(freed);
            std::thread::current().id()
        })
        .join()
        .unwrap();
        assert_eq!(
            *drops.lock().unwrap(),
            vec![sweeper],
            "freed by the sweeping thread"
        );
    }
}
