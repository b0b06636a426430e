//! Admission control for answer requests: how many are in flight, and
//! whether one more may do graph work.
//!
//! A request enters when its headers have been read, before its body is
//! read or parsed, and leaves when its response is built. Above the limit a
//! request is still validated (bad input still gets its 4xx), then answered
//! at once from the heuristic tier with reason `overloaded`: under overload
//! the server spends its CPU on cheap answers instead of a growing queue of
//! graph searches, and no caller is refused.
//!
//! This is separate from the graph permits in [`crate::answer`]: a single
//! ETA holds a permit only for its ~40 µs search, so permits run out only
//! for long work (matrices); the in-flight count sees every request that is
//! waiting for a CPU.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;

/// Counts answer requests in flight against a limit.
#[derive(Debug)]
pub struct Admission {
    in_flight: AtomicUsize,
    limit: usize,
}

/// One request's place; leaving is its drop.
#[derive(Debug)]
pub struct Ticket {
    admission: Arc<Admission>,
    admitted: bool,
}

impl Admission {
    pub fn new(limit: usize) -> Arc<Admission> {
        Arc::new(Admission {
            in_flight: AtomicUsize::new(0),
            limit,
        })
    }

    /// Enters one request; it may do graph work if at most `limit`
    /// requests (itself included) are in flight.
    pub fn enter(self: &Arc<Self>) -> Ticket {
        let n = self.in_flight.fetch_add(1, Ordering::AcqRel) + 1;
        Ticket {
            admission: self.clone(),
            admitted: n <= self.limit,
        }
    }

    /// Requests in flight now.
    pub fn in_flight(&self) -> usize {
        self.in_flight.load(Ordering::Acquire)
    }
}

impl Ticket {
    pub fn admitted(&self) -> bool {
        self.admitted
    }
}

impl Drop for Ticket {
    fn drop(&mut self) {
        self.admission.in_flight.fetch_sub(1, Ordering::AcqRel);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn admits_up_to_the_limit_and_frees_on_drop() {
        let a = Admission::new(2);
        let t1 = a.enter();
        let t2 = a.enter();
        let t3 = a.enter();
        assert!(t1.admitted() && t2.admitted());
        assert!(
            !t3.admitted(),
            "the third of three over a limit of 2 is shed"
        );
        assert_eq!(a.in_flight(), 3);
        drop(t1);
        drop(t3);
        let t4 = a.enter();
        assert!(t4.admitted());
        drop((t2, t4));
        assert_eq!(a.in_flight(), 0);
        let none = Admission::new(0);
        assert!(!none.enter().admitted(), "limit 0 sheds everything");
    }
}
