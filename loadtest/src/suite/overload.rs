//! Overload: single ETAs (the goal) and 1×50 matrices (graph work
//! dominates there, so shedding has room to work), each at multiples of
//! hodos' capacity (in `goals`); the baseline at the same ETA rates shows
//! what the machine itself allows.

use crate::goals::OVERLOAD_MULTIPLES;
use crate::suite::ctx::{Ctx, System};
use crate::suite::pools::Workset;
use crate::suite::records::{Capacity, Overload};
use crate::suite::settings::Wire;
use crate::workload::Workload;
use std::time::Duration;

impl Ctx {
    /// Every overload run of the suite (ETA and 1×50 matrices).
    pub(crate) async fn overloads(&mut self, sets: &[Workset], caps: &[Capacity]) -> Vec<Overload> {
        let mut overloads = Vec::new();
        for (name, idx) in [("eta", 0usize), ("matrix1x50", 1)] {
            let Some(c) = caps[idx].hodos else { continue };
            let w = sets[idx].w.clone();
            for k in OVERLOAD_MULTIPLES {
                overloads.push(self.overload(name, &w, c * k, k).await);
            }
        }
        overloads
    }

    /// `name` at `rate` (`k` × its capacity) on hodos, and on the baseline
    /// for single ETAs.
    async fn overload(&mut self, name: &str, w: &Workload, rate: f64, k: f64) -> Overload {
        let s = self.s.clone();
        // Give the backlog time to drain: answers are awaited for up to
        // (k + 1) × the run length after the last send.
        let drain = Duration::from_secs_f64(s.overload.as_secs_f64() * (k + 1.0)).max(s.drain);
        let run = format!("overload-{name}-{k:.0}x");
        let with_baseline = self.baseline.is_some() && name == "eta";
        let systems: &[System] = if with_baseline {
            &[System::Hodos, System::Baseline]
        } else {
            &[System::Hodos]
        };
        let mut got = Vec::new();
        for &sys in systems {
            let sum = self
                .drive(
                    &run,
                    sys,
                    w,
                    rate,
                    s.overload,
                    Wire {
                        connections: s.overload_connections,
                        drain,
                    },
                )
                .await;
            self.runs.push(sum.clone());
            tokio::time::sleep(Duration::from_secs(2)).await;
            got.push(sum);
        }
        let mut got = got.into_iter();
        let (sum, base) = (got.next().expect("hodos ran"), got.next());
        Overload {
            workload: name.to_string(),
            k,
            hodos: sum,
            baseline: base,
        }
    }
}
