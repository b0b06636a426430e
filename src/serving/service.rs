//! The service: every configured region opened (a read side for answers,
//! an updater for writes), and every background task it needs started and
//! stopped in one place: each region's live loop (with its watched
//! folder) and the admission probe. `hodos serve`, `hodos demo`, the
//! load tool and the tests all start this; the HTTP layer is handed what
//! it routes ([`Service::catalog`] for answers, [`Service::regions`] for
//! the admin API) and starts nothing itself.
//!
//! **Architecture Invariant:** answers see only the [`Catalog`] (region
//! readers); writes go through [`RegionUpdater`]s, which only this type
//! and the admin calls hold.

use crate::answer::Catalog;
use crate::settings::{RegionConfig, ServingSettings};
use crate::snapshot::{LiveLoop, RegionUpdater, UpdateSettings};
use std::future::Future;
use std::sync::Arc;
use std::time::Duration;
use tokio::sync::watch;
use tokio::task::JoinHandle;

/// Every region and the shared limits, for the life of the process.
#[derive(Debug)]
pub struct Service {
    /// What answers read: the regions' read sides and the shared limits.
    pub catalog: Arc<Catalog>,
    /// The regions' write sides, in the catalog's order.
    pub regions: Vec<Arc<RegionUpdater>>,
}

impl Service {
    /// Every region created, none loaded: each reports `loading` until
    /// [`Self::load_regions`] has loaded it, so a server can listen (and
    /// answer its probes) while regions load. Starts the customizer and
    /// update threads.
    pub fn new(settings: ServingSettings, regions: &[RegionConfig]) -> Service {
        let update = UpdateSettings::from_settings(&settings);
        let regions: Vec<Arc<RegionUpdater>> = regions
            .iter()
            .map(|r| RegionUpdater::new(r.clone(), update.clone()))
            .collect();
        let readers = regions.iter().map(|r| r.reader().clone()).collect();
        Service {
            catalog: Arc::new(Catalog::new(settings, readers)),
            regions,
        }
    }

    /// [`Self::new`], then every region loaded.
    pub async fn open(settings: ServingSettings, regions: &[RegionConfig]) -> Service {
        let s = Self::new(settings, regions);
        s.load_regions().await;
        s
    }

    /// Loads every region that has not been loaded, one after another.
    pub async fn load_regions(&self) {
        for r in &self.regions {
            if !r.loaded() {
                r.load_first().await;
            }
        }
    }

    /// The region named `name`'s updater.
    pub fn region(&self, name: &str) -> Option<&Arc<RegionUpdater>> {
        self.regions.iter().find(|r| r.name == name)
    }

    /// Regions that are loaded but serve no graph, with why.
    pub fn degraded(&self) -> Vec<(String, String)> {
        self.regions
            .iter()
            .filter(|r| r.loaded() && r.snapshot().is_none())
            .map(|r| {
                (
                    r.name.clone(),
                    r.status().degraded_reason.unwrap_or_default(),
                )
            })
            .collect()
    }

    /// Starts the background tasks (on the current tokio runtime): the
    /// admission probe and each region's live loop. They run until
    /// [`Tasks::stop`].
    pub fn start(&self) -> Tasks {
        let (tx, rx) = watch::channel(false);
        let stop = move || {
            let mut rx = rx.clone();
            async move {
                let _ = rx.wait_for(|v| *v).await;
            }
        };
        let mut handles = Vec::new();
        // Run-queue lag probe for admission by deadline (see `admission`).
        handles.push(tokio::spawn(
            self.catalog.admission.clone().run_probe(stop()),
        ));
        for r in &self.regions {
            handles.push(tokio::spawn(LiveLoop::new(r.clone()).run(stop())));
        }
        Tasks { stop: tx, handles }
    }
}

/// The service's running background tasks.
#[derive(Debug)]
pub struct Tasks {
    stop: watch::Sender<bool>,
    handles: Vec<JoinHandle<()>>,
}

impl Tasks {
    /// Tells every task to stop and waits for them, at most `within`;
    /// whether they all ended in time.
    pub async fn stop(self, within: Duration) -> bool {
        let _ = self.stop.send(true);
        tokio::time::timeout(within, async {
            for h in self.handles {
                let _ = h.await;
            }
        })
        .await
        .is_ok()
    }

    /// A future that resolves once [`Self::stop`] has been called (for
    /// tasks of a layer above that stop with the service).
    pub fn stopped(&self) -> impl Future<Output = ()> + Send + 'static {
        let mut rx = self.stop.subscribe();
        async move {
            let _ = rx.wait_for(|v| *v).await;
        }
    }
}
