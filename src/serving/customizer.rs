//! The background customizer: one OS thread that runs every metric
//! customization the service starts (live blends, historical buckets,
//! artifact reloads), one at a time, below the request workers' CPU
//! priority.
//!
//! Why a thread of its own: a customization of a large region is hundreds
//! of milliseconds of CPU (two threads for part of it). Run on tokio's
//! blocking pool at normal priority, a busy live feed plus table uploads
//! kept both cores of a small machine busy and queries queued behind them.
//! Here jobs run one after another (bounded memory: one customization's
//! scratch at a time) on a thread whose priority is lowered once, at start;
//! the threads a customization spawns inherit it (Linux scheduling policy
//! and nice value are per thread and inherited by threads it creates).
//!
//! The service runs two of these: one for customizations, one for the
//! lighter update work (parsing uploads, blending and saving the live
//! layer), so an upload does not wait behind a customization.
//!
//! Jobs are closures; [`Customizer::run`] awaits the result, and
//! [`Customizer::spawn`] fires and forgets. A job that panics is reported
//! as `None` to its waiter and the thread goes on.

use crate::settings::CustomizePriority;
use std::panic::AssertUnwindSafe;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{mpsc, Arc};

type Job = Box<dyn FnOnce() + Send>;

/// A cheap `Clone` handle to the customization thread; the thread ends when
/// the last handle is dropped.
#[derive(Clone)]
pub struct Customizer {
    tx: mpsc::Sender<Job>,
    /// Jobs queued or running (for tests and status).
    pending: Arc<AtomicUsize>,
    /// Whether the requested priority could be applied.
    applied: Arc<std::sync::atomic::AtomicBool>,
}

impl std::fmt::Debug for Customizer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Customizer")
            .field("pending", &self.pending())
            .finish()
    }
}

impl Customizer {
    /// Starts the thread `hodos-customize` at `priority`.
    pub fn start(priority: CustomizePriority) -> Customizer {
        Self::start_named("hodos-customize", priority)
    }

    /// Starts a thread of that name at `priority`.
    pub fn start_named(name: &str, priority: CustomizePriority) -> Customizer {
        let (tx, rx) = mpsc::channel::<Job>();
        let pending = Arc::new(AtomicUsize::new(0));
        let applied = Arc::new(std::sync::atomic::AtomicBool::new(false));
        let (p2, a2) = (pending.clone(), applied.clone());
        let (ready_tx, ready_rx) = mpsc::channel::<()>();
        std::thread::Builder::new()
            .name(name.into())
            .spawn(move || {
                a2.store(crate::os::lower_thread_priority(priority), Ordering::SeqCst);
                let _ = ready_tx.send(());
                while let Ok(job) = rx.recv() {
                    // A panicking job drops its result sender: its waiter
                    // sees `None`, and the thread serves the next job.
                    let _ = std::panic::catch_unwind(AssertUnwindSafe(job));
                    p2.fetch_sub(1, Ordering::SeqCst);
                }
            })
            .expect("spawn the customization thread");
        let _ = ready_rx.recv();
        Customizer {
            tx,
            pending,
            applied,
        }
    }

    /// Jobs queued or running.
    pub fn pending(&self) -> usize {
        self.pending.load(Ordering::SeqCst)
    }

    /// Whether the configured priority is in effect (false where the OS
    /// refused or does not support it; jobs then run at normal priority).
    pub fn priority_applied(&self) -> bool {
        self.applied.load(Ordering::SeqCst)
    }

    /// Queues `f` and waits for its result; `None` if it panicked.
    pub async fn run<R: Send + 'static>(
        &self,
        f: impl FnOnce() -> R + Send + 'static,
    ) -> Option<R> {
        let (tx, rx) = tokio::sync::oneshot::channel();
        self.spawn(move || {
            let _ = tx.send(f());
        });
        rx.await.ok()
    }

    /// Queues `f` without waiting for it.
    pub fn spawn(&self, f: impl FnOnce() + Send + 'static) {
        self.pending.fetch_add(1, Ordering::SeqCst);
        if self.tx.send(Box::new(f)).is_err() {
            // The thread is gone (only if it could not be spawned).
            self.pending.fetch_sub(1, Ordering::SeqCst);
        }
    }
}

/// Runs `f` on a new thread named `name` at `priority` and waits for its
/// result; `None` if the thread could not start or `f` panicked. For a job
/// that waits on I/O for as long as a client takes (an upload parsed as it
/// arrives): it must not hold a shared job thread meanwhile.
pub async fn run_on_own_thread<R: Send + 'static>(
    name: &str,
    priority: CustomizePriority,
    f: impl FnOnce() -> R + Send + 'static,
) -> Option<R> {
    let (tx, rx) = tokio::sync::oneshot::channel();
    std::thread::Builder::new()
        .name(name.into())
        .spawn(move || {
            crate::os::lower_thread_priority(priority);
            let _ = tx.send(f());
        })
        .ok()?;
    rx.await.ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test]
    async fn runs_jobs_in_order_and_survives_a_panic() {
        let c = Customizer::start(CustomizePriority::Idle);
        assert!(c.priority_applied() || !cfg!(target_os = "linux"));
        let log = Arc::new(std::sync::Mutex::new(Vec::new()));
        for i in 0..5 {
            let log = log.clone();
            c.spawn(move || log.lock().unwrap().push(i));
        }
        let boom: Option<u32> = c.run(|| panic!("job fails")).await;
        let own: Option<u32> =
            run_on_own_thread("t", CustomizePriority::Low, || panic!("job fails")).await;
        assert_eq!(own, None);
        assert_eq!(
            run_on_own_thread("t", CustomizePriority::Low, || 8).await,
            Some(8)
        );
        assert_eq!(boom, None);
        assert_eq!(c.run(|| 7).await, Some(7));
        assert_eq!(*log.lock().unwrap(), vec![0, 1, 2, 3, 4]);
        // The count drops just after a job hands over its result.
        for _ in 0..1000 {
            if c.pending() == 0 {
                break;
            }
            std::thread::sleep(std::time::Duration::from_millis(1));
        }
        assert_eq!(c.pending(), 0);
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn idle_priority_is_set_on_the_thread() {
        let c = Customizer::start(CustomizePriority::Idle);
        let rt = tokio::runtime::Builder::new_current_thread()
            .build()
            .unwrap();
        let policy = rt.block_on(c.run(crate::os::thread_policy));
        assert_eq!(policy, Some(libc::SCHED_IDLE));
    }
}
