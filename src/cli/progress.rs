//! Progress on stderr: [`Bars`], the engine's build phases as bars (or
//! spinners when a phase has no known size), and the spinner and counting
//! bar of a trip replay.

use hodos::engine::build::Progress;
use indicatif::{ProgressBar, ProgressStyle};
use std::time::{Duration, Instant};

const TICK: Duration = Duration::from_millis(120);

/// Progress bars on stderr.
pub struct Bars {
    bar: Option<ProgressBar>,
    started: Instant,
}

/// Bars for one build.
pub fn bars() -> Bars {
    Bars {
        bar: None,
        started: Instant::now(),
    }
}

impl Progress for Bars {
    fn start(&mut self, phase: &str, total: Option<u64>) {
        let bar = match total {
            Some(t) => ProgressBar::new(t).with_style(
                ProgressStyle::with_template("{msg:32} [{bar:30}] {pos}/{len} {elapsed}")
                    .expect("valid template")
                    .progress_chars("=> "),
            ),
            None => spinner_bar(),
        };
        bar.set_message(phase.to_string());
        bar.enable_steady_tick(TICK);
        self.bar = Some(bar);
        self.started = Instant::now();
    }
    fn advance(&mut self, done: u64) {
        if let Some(b) = &self.bar {
            b.set_position(done);
        }
    }
    fn finish(&mut self) {
        if let Some(b) = self.bar.take() {
            b.finish_with_message(format!(
                "{} ({:.2} s)",
                b.message(),
                self.started.elapsed().as_secs_f64()
            ));
        }
    }
}

fn spinner_bar() -> ProgressBar {
    ProgressBar::new_spinner().with_style(
        ProgressStyle::with_template("{msg:32} {spinner} {elapsed}").expect("valid template"),
    )
}

/// A ticking spinner saying `msg`.
pub fn spinner(msg: &'static str) -> ProgressBar {
    let s = spinner_bar();
    s.set_message(msg);
    s.enable_steady_tick(TICK);
    s
}

/// A bar counting `len` items, with the time left.
pub fn counter(len: usize, msg: &'static str) -> ProgressBar {
    let bar = ProgressBar::new(len as u64).with_style(
        ProgressStyle::with_template("{msg:32} [{bar:30}] {pos}/{len} {elapsed} (eta {eta})")
            .expect("valid template")
            .progress_chars("=> "),
    );
    bar.set_message(msg);
    bar
}
