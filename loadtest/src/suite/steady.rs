//! Steady runs: each workload at half its measured hodos capacity (the
//! share is in `goals`), and the baseline at the same single-ETA rate.

use crate::goals::STEADY_SHARE_OF_CAPACITY;
use crate::model::Summary;
use crate::suite::ctx::{Ctx, System};
use crate::suite::pools::Workset;
use crate::suite::records::Capacity;

impl Ctx {
    /// One steady run per workload with a capacity; returns the single-ETA
    /// run (the one held against a goal).
    pub(crate) async fn steady_runs(
        &mut self,
        sets: &[Workset],
        caps: &[Capacity],
    ) -> Option<Summary> {
        let s = self.s.clone();
        let mut steady_eta: Option<Summary> = None;
        for (set, cap) in sets.iter().zip(caps) {
            let Some(c) = cap.hodos else { continue };
            let rate = c * STEADY_SHARE_OF_CAPACITY;
            let sum = self
                .drive(
                    &format!("steady-{}-half", set.name),
                    System::Hodos,
                    &set.w,
                    rate,
                    s.steady,
                    s.wire(),
                )
                .await;
            if set.name == "eta" {
                steady_eta = Some(sum.clone());
                if self.baseline.is_some() {
                    let b = self
                        .drive(
                            "steady-eta-half",
                            System::Baseline,
                            &set.w,
                            rate,
                            s.steady,
                            s.wire(),
                        )
                        .await;
                    self.runs.push(b);
                }
            }
            self.runs.push(sum);
        }
        steady_eta
    }
}
