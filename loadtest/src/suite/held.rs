//! Slow and idle callers hold no place (issue 11): a steady ETA run with
//! stalled bodies (headers and one byte of body, then nothing) and idle
//! sockets held open throughout, between two runs at the same rate without
//! them; counts in `goals`. The server the suite starts is configured with
//! room for them (`server::MAX_CONNECTIONS`).

use crate::goals::{IDLE_SOCKETS, STALLED_BODIES};
use crate::suite::ctx::Ctx;
use crate::suite::records::{Beside, HeldRuns};

impl Ctx {
    /// Without the sockets, with them, without them again, at `rate`.
    pub(crate) async fn held_sockets(&mut self, rate: f64) -> HeldRuns {
        let len = self.s.steady;
        let before = self.drive_eta("held-eta-without", rate, len).await;
        self.runs.push(before.clone());
        self.beside = Beside::Sockets {
            stalled: STALLED_BODIES,
            idle: IDLE_SOCKETS,
        };
        let held = self.drive_eta("held-eta-with-sockets", rate, len).await;
        self.beside = Beside::Nothing;
        self.runs.push(held.clone());
        let after = self.drive_eta("held-eta-without-again", rate, len).await;
        self.runs.push(after.clone());
        HeldRuns {
            before,
            held,
            after,
        }
    }
}
