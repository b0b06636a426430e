//! One measured run at a fixed rate: the engine's run wrapped in readings
//! of server, generator and machine CPU (and server memory) before and
//! after, its table row printed, and a run spoiled by other work redone.
//! What the scenario asked to run beside it (`Ctx::beside`: a noisy
//! neighbour, held sockets) starts after the quiet wait and stops with the
//! run; a neighbour's CPU is known load, not other work.

use crate::beside::{open_fds, HeldSockets, Neighbour};
use crate::engine;
use crate::model::{BesideReport, MachineUse, Plan, ServerUse, Summary};
use crate::noise::QUIET_CORES;
use crate::report;
use crate::server::{self, proc_stat, ProcStat};
use crate::suite::ctx::{Ctx, System};
use crate::suite::records::Beside;
use crate::suite::settings::Wire;
use crate::workload::Workload;
use std::time::{Duration, Instant};

/// `/proc` readings taken around a run.
struct Readings {
    /// The server's process (hodos runs with a known pid only).
    server: Option<ProcStat>,
    /// This process: the generator (and the server when in process).
    generator: Option<ProcStat>,
    /// Machine-wide (busy, stolen) CPU seconds.
    machine: Option<(f64, f64)>,
    /// The noisy neighbour's CPU seconds, when one runs.
    neighbour: Option<f64>,
}

impl Readings {
    fn now(server_pid: Option<u32>, neighbour: Option<&Neighbour>) -> Readings {
        Readings {
            server: server_pid.and_then(proc_stat),
            generator: proc_stat(std::process::id()),
            machine: server::machine_cpu(),
            neighbour: neighbour.and_then(|n| n.cpu_s()),
        }
    }
}

/// What runs beside one run while it lasts.
#[derive(Default)]
struct Alongside {
    neighbour: Option<Neighbour>,
    sockets: Option<HeldSockets>,
    report: Option<BesideReport>,
}

impl Ctx {
    /// One run at a fixed rate; prints its row.
    pub async fn drive(
        &mut self,
        scenario: &str,
        sys: System,
        w: &Workload,
        rate: f64,
        duration: Duration,
        wire: Wire,
    ) -> Summary {
        let Wire { connections, drain } = wire;
        let plan = Plan {
            scenario: scenario.to_string(),
            system: sys.name().to_string(),
            target: self.target(sys),
            workload: w.clone(),
            rate,
            duration,
            max_requests: self.s.max_requests,
            connections,
            request_timeout: self.s.request_timeout.max(drain),
            drain,
            realtime_pacer: self.s.realtime_pacer,
        };
        let mut attempt = 0;
        loop {
            let sum = self.drive_once(sys, &plan).await;
            let noisy = report::is_noisy(&sum);
            let row = report::table_row(&sum);
            if !noisy || attempt >= self.s.noise_retries || !self.s.retry_noisy {
                self.print(row);
                return sum;
            }
            // A run spoiled by other work says nothing about the server:
            // note it, wait for the machine to calm down, and run it again.
            self.print(format!("{row}  -> redone"));
            attempt += 1;
            server::wait_quiet(Duration::from_secs(30), QUIET_CORES).await;
        }
    }

    /// Single ETAs on hodos at `rate` for `duration`, with the ordinary
    /// connections and drain; prints its row.
    pub async fn drive_eta(&mut self, scenario: &str, rate: f64, duration: Duration) -> Summary {
        let (w, wire) = (self.w.eta.clone(), self.s.wire());
        self.drive(scenario, System::Hodos, &w, rate, duration, wire)
            .await
    }

    /// One measured run of `plan` on `sys` (no printing, no retry).
    async fn drive_once(&mut self, sys: System, plan: &Plan) -> Summary {
        let (duration, drain) = (plan.duration, plan.drain);
        if !self.s.quiet_per_run.is_zero() {
            // Other work on a shared machine spoils a run: give it a
            // moment to pass (bounded), and record what was left.
            server::wait_quiet(self.s.quiet_per_run, QUIET_CORES).await;
        }
        let spid = if sys == System::Hodos {
            self.server.pid
        } else {
            None
        };
        let mut along = self.alongside(sys, duration + drain).await;
        let before = Readings::now(spid, along.neighbour.as_ref());
        let la = server::loadavg_1m();
        let t0 = Instant::now();
        let out = engine::run(plan).await;
        let wall = t0.elapsed().as_secs_f64();
        let after = Readings::now(spid, along.neighbour.as_ref());
        let neighbour_cpu = match (before.neighbour, after.neighbour) {
            (Some(a), Some(b)) => b - a,
            _ => 0.0,
        };
        let mut sum = Summary::of(&out);
        if let Some(mut r) = along.report.take() {
            if let Some(h) = &along.sockets {
                (r.stalled_open_at_end, r.idle_open_at_end) = h.still_open();
            }
            if along.neighbour.is_some() {
                r.neighbour_cores = Some(neighbour_cpu / wall.max(1e-9));
            }
            sum.beside = Some(r);
        }
        if let Some(mut n) = along.neighbour.take() {
            n.stop();
        }
        drop(along);
        if let (Some(pid), Some(a), Some(b)) = (spid, before.server, after.server) {
            sum.server = Some(self.server_use(pid, &a, &b, sum.ok));
        }
        if let (Some(a), Some(b), Some(ma), Some(mb)) = (
            before.generator,
            after.generator,
            before.machine,
            after.machine,
        ) {
            let gen = b.cpu_s - a.cpu_s;
            let srv = match (&sum.server, self.server.in_process) {
                (Some(s), false) => s.cpu_s,
                _ => 0.0,
            };
            let busy = mb.0 - ma.0;
            sum.machine = Some(MachineUse {
                wall_s: wall,
                busy_cpu_s: busy,
                stolen_cpu_s: mb.1 - ma.1,
                generator_cpu_s: gen,
                server_cpu_s: srv,
                neighbour_cpu_s: neighbour_cpu,
                other_cpu_s: (busy - gen - srv - neighbour_cpu).max(0.0),
                loadavg_1m_before: la,
            });
        }
        sum
    }

    /// Starts what the scenario asked to run beside the next run (for at
    /// most `bound`): a noisy neighbour (given 300 ms to get going), or
    /// held sockets (the server's descriptors counted before and after
    /// they open). Nothing for the baseline.
    async fn alongside(&mut self, sys: System, bound: Duration) -> Alongside {
        let mut a = Alongside::default();
        match (self.beside, sys) {
            (_, System::Baseline) | (Beside::Nothing, _) => {}
            (Beside::Neighbour { threads }, System::Hodos) => {
                let exe = std::env::current_exe();
                let bound = bound + Duration::from_secs(5);
                match exe.and_then(|e| Neighbour::start(&e, threads, bound)) {
                    Ok(n) => {
                        a.report = Some(BesideReport {
                            neighbour_pid: Some(n.pid),
                            ..BesideReport::default()
                        });
                        a.neighbour = Some(n);
                        tokio::time::sleep(Duration::from_millis(300)).await;
                    }
                    Err(e) => eprintln!("warning: the noisy neighbour did not start: {e}"),
                }
            }
            (Beside::Sockets { stalled, idle }, System::Hodos) => {
                let pid = if self.server.in_process {
                    None
                } else {
                    self.server.pid
                };
                let fds_before = pid.and_then(open_fds);
                let h = HeldSockets::open(self.server.public, stalled, idle).await;
                // Let the server accept them all before the clock starts.
                tokio::time::sleep(Duration::from_millis(500)).await;
                let (so, io) = h.opened();
                a.report = Some(BesideReport {
                    stalled_asked: stalled,
                    stalled_opened: so,
                    idle_asked: idle,
                    idle_opened: io,
                    server_fds_before: fds_before,
                    server_fds_held: pid.and_then(open_fds),
                    ..BesideReport::default()
                });
                a.sockets = Some(h);
            }
        }
        a
    }

    /// The server's CPU and memory over a run, from `/proc` before and after.
    fn server_use(&self, pid: u32, a: &ProcStat, b: &ProcStat, answers: u64) -> ServerUse {
        let cpu = b.cpu_s - a.cpu_s;
        ServerUse {
            pid,
            in_process: self.server.in_process,
            cpu_s: cpu,
            cpu_ms_per_answer: 1000.0 * cpu / answers.max(1) as f64,
            rss_mb: b.rss_kb as f64 / 1024.0,
            hwm_mb: b.hwm_kb as f64 / 1024.0,
        }
    }
}
