//! Slow and idle callers hold no place (issue 11): a steady ETA run with
//! stalled bodies (headers and one byte of body, then nothing) and idle
//! sockets held open throughout, between two runs at the same rate without
//! them; counts in `goals`. The server the suite starts is configured with
//! room for them (`server::MAX_CONNECTIONS`).

use crate::goals::{IDLE_SOCKETS, STALLED_BODIES};
use crate::suite::ctx::{Ctx, System};
use crate::suite::records::{Beside, HeldRuns};

impl Ctx {
    /// Without the sockets, with them, without them again, at `rate`.
    pub(crate) async fn held_sockets(&mut self, rate: f64) -> HeldRuns {
        let w = self.w.eta.clone();
        let (len, c, d) = (self.s.steady, self.s.connections, self.s.drain);
        let before = self
            .drive("held-eta-without", System::Hodos, &w, rate, len, c, d)
            .await;
        self.runs.push(before.clone());
        self.beside = Beside::Sockets {
            stalled: STALLED_BODIES,
            idle: IDLE_SOCKETS,
        };
        let held = self
            .drive("held-eta-with-sockets", System::Hodos, &w, rate, len, c, d)
            .await;
        self.beside = Beside::Nothing;
        self.runs.push(held.clone());
        let after = self
            .drive("held-eta-without-again", System::Hodos, &w, rate, len, c, d)
            .await;
        self.runs.push(after.clone());
        HeldRuns {
            before,
            held,
            after,
        }
    }
}
