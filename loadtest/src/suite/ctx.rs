//! The running state of a suite (or of a single scenario command): the
//! server under test and the baseline, the request pools, the settings,
//! and everything collected so far (runs, capacity searches, memory
//! readings, admin reports, goals, the printed table). Scenarios are
//! methods on `Ctx`, each in its own module of `suite`.

use crate::admin::{Feed, StreamReport};
use crate::baseline::Baseline;
use crate::model::Summary;
use crate::report;
use crate::server::ServerInfo;
use crate::suite::pools::{Drawn, Workloads};
use crate::suite::records::{Beside, Goal, LiveBatch, Memory, Probe, SuiteOutcome};
use crate::suite::settings::Settings;
use crate::workload::EdgeRef;
use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

/// Which server a run targets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum System {
    Hodos,
    Baseline,
}

impl System {
    pub(crate) fn name(self) -> &'static str {
        match self {
            System::Hodos => "hodos",
            System::Baseline => "baseline",
        }
    }
}

/// Running state of a suite (or of a single scenario command).
pub struct Ctx {
    pub server: ServerInfo,
    pub baseline: Option<Baseline>,
    pub w: Workloads,
    pub edges: Arc<Vec<EdgeRef>>,
    /// Bounding box of the served graph (for server configurations).
    pub lo: hodos::engine::geo::LatLon,
    pub hi: hodos::engine::geo::LatLon,
    pub s: Settings,
    pub out: PathBuf,
    pub runs: Vec<Summary>,
    pub probes: Vec<Probe>,
    pub memory: Vec<Memory>,
    pub admin: Vec<(String, StreamReport)>,
    pub goals: Vec<Goal>,
    pub table: Vec<String>,
    pub outcome: Option<SuiteOutcome>,
    /// What the next runs have beside them.
    pub beside: Beside,
    /// The live batch of the memory phase, once measured.
    pub live_batch: Option<LiveBatch>,
}

impl Ctx {
    /// A fresh state: nothing run, nothing collected yet.
    pub fn new(
        server: ServerInfo,
        baseline: Option<Baseline>,
        d: Drawn,
        s: Settings,
        out: PathBuf,
    ) -> Ctx {
        Ctx {
            server,
            baseline,
            w: d.w,
            edges: d.edges,
            lo: d.lo,
            hi: d.hi,
            s,
            out,
            runs: Vec::new(),
            probes: Vec::new(),
            memory: Vec::new(),
            admin: Vec::new(),
            goals: Vec::new(),
            table: Vec::new(),
            outcome: None,
            beside: Beside::Nothing,
            live_batch: None,
        }
    }

    /// What was drawn from the artifact, again (for a fresh server).
    pub fn drawn(&self) -> Drawn {
        Drawn {
            w: self.w.clone(),
            edges: self.edges.clone(),
            lo: self.lo,
            hi: self.hi,
            nodes: 0,
        }
    }

    pub(crate) fn target(&self, sys: System) -> SocketAddr {
        match sys {
            System::Hodos => self.server.public,
            System::Baseline => self
                .baseline
                .as_ref()
                .map(|b| b.addr)
                .unwrap_or(self.server.public),
        }
    }

    /// Prints a line and keeps it for `table.txt`.
    pub(crate) fn print(&mut self, line: String) {
        println!("{line}");
        self.table.push(line);
    }

    /// Prints the table header.
    pub fn header(&mut self) {
        self.print(report::table_header());
    }

    /// Admin traffic for this server (none without an admin listener and
    /// token): observations stamped `observed_ago` in the past.
    pub(crate) fn feed(&self, observed_ago: Duration, seed: u64) -> Option<Feed> {
        Some(Feed {
            admin: self.server.admin?,
            token: self.server.token.clone()?,
            region: self.server.region.clone(),
            edges: self.edges.clone(),
            live_batch: self.s.live_batch,
            observed_ago,
            seed,
        })
    }
}
