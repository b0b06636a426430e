//! Load the graph answers in time is never shed (issue 11): single ETAs at
//! 90% of the measured ETA capacity, and at 50% of it while a child process
//! of this tool burns one core throughout the run (a noisy neighbour). The
//! shares and the neighbour's threads are in `goals`.

use crate::goals::{NEIGHBOUR_SHARE_OF_CAPACITY, NEIGHBOUR_THREADS, NO_SHED_SHARE_OF_CAPACITY};
use crate::suite::ctx::Ctx;
use crate::suite::records::{Beside, NoShed};

impl Ctx {
    /// The two no-shed runs (none without an ETA capacity).
    pub(crate) async fn no_shed_runs(&mut self, eta_cap: Option<f64>) -> NoShed {
        let mut got = NoShed {
            at90: None,
            neighbour: None,
        };
        let Some(cap) = eta_cap else { return got };
        let len = self.s.steady;
        let at90 = self
            .drive_eta("noshed-eta-90pct", cap * NO_SHED_SHARE_OF_CAPACITY, len)
            .await;
        self.runs.push(at90.clone());
        got.at90 = Some(at90);
        self.beside = Beside::Neighbour {
            threads: NEIGHBOUR_THREADS,
        };
        let nb = self
            .drive_eta("neighbour-eta-half", cap * NEIGHBOUR_SHARE_OF_CAPACITY, len)
            .await;
        self.beside = Beside::Nothing;
        self.runs.push(nb.clone());
        got.neighbour = Some(nb);
        got
    }
}
