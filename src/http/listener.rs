//! One listener's accept loop and the limits on each of its connections.
//!
//! - At most [`ConnLimits::max_connections`] connections at once: the loop
//!   takes a slot before it accepts, so beyond the cap new connections wait
//!   in the kernel's accept backlog instead of taking file descriptors.
//! - An accept error (`EMFILE` when descriptors run out, and the like)
//!   never ends the loop: it backs off briefly and logs at most one line
//!   per [`LOG_EVERY`] with the count of errors since the last line.
//! - Per connection, a watchdog closes it when no request is in progress
//!   and either the next request's headers have been arriving for longer
//!   than the header timeout (counted from their first byte), or nothing
//!   has been read or written for the idle timeout (keep-alive idle, or a
//!   connection opened and never used). A request in progress is never cut
//!   by the watchdog; its body has its own deadline (`body_deadline`).
//! - On shutdown the loop stops accepting, asks every connection to close
//!   after its current request, and returns once all have.

use axum::Router;
use hyper_util::rt::TokioIo;
use std::io;
use std::pin::Pin;
use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::Arc;
use std::task::{Context, Poll};
use std::time::{Duration, Instant};
use tokio::io::{AsyncRead, AsyncWrite, ReadBuf};
use tokio::net::{TcpListener, TcpStream};
use tokio::sync::{watch, Semaphore};
use tower::ServiceExt;

/// Pause after an accept error, so a loop out of descriptors does not spin.
const BACKOFF: Duration = Duration::from_millis(50);
/// At most one log line per this interval about accept errors.
const LOG_EVERY: Duration = Duration::from_secs(10);

/// The limits of one listener.
#[derive(Debug, Clone, Copy)]
pub struct ConnLimits {
    /// Time to receive a request's complete headers, from their first byte.
    pub header_timeout: Duration,
    /// Time a connection may sit with no request in progress and no bytes
    /// read or written.
    pub idle_timeout: Duration,
    /// Connections held at once.
    pub max_connections: usize,
}

pub use hodos_serving::os::nofile_soft_limit;

/// Serves `router` on `listener` until `stop` turns true, then waits for
/// the open connections to finish their current request and close.
pub async fn run(
    name: &'static str,
    listener: TcpListener,
    router: Router,
    limits: ConnLimits,
    mut stop: watch::Receiver<bool>,
) {
    let max = limits.max_connections.clamp(1, Semaphore::MAX_PERMITS);
    let slots = Arc::new(Semaphore::new(max));
    let mut errors = AcceptErrors::default();
    loop {
        let slot = tokio::select! {
            s = slots.clone().acquire_owned() => s.expect("the semaphore is never closed"),
            _ = stop.wait_for(|v| *v) => break,
        };
        let accepted = tokio::select! {
            a = listener.accept() => a,
            _ = stop.wait_for(|v| *v) => break,
        };
        match accepted {
            Ok((stream, _)) => {
                let _ = stream.set_nodelay(true);
                let (router, stop) = (router.clone(), stop.clone());
                tokio::spawn(async move {
                    connection(stream, router, limits, stop).await;
                    drop(slot);
                });
            }
            Err(e) => {
                drop(slot);
                errors.note(name, &e);
                if is_resource_error(&e) {
                    tokio::select! {
                        _ = tokio::time::sleep(BACKOFF) => {}
                        _ = stop.wait_for(|v| *v) => break,
                    }
                }
            }
        }
    }
    drop(listener);
    // Every slot back: every connection has closed.
    let _ = slots.acquire_many(max as u32).await;
}

/// Out of descriptors or memory: waiting helps; other errors (a client
/// that reset before we accepted) concern one connection only.
fn is_resource_error(e: &io::Error) -> bool {
    matches!(
        e.raw_os_error(),
        Some(libc::EMFILE | libc::ENFILE | libc::ENOBUFS | libc::ENOMEM)
    )
}

/// Rate-limited logging of accept errors.
#[derive(Default)]
struct AcceptErrors {
    last_line: Option<Instant>,
    /// Errors since the last line (the line reports them).
    since: u64,
}

impl AcceptErrors {
    fn note(&mut self, name: &str, e: &io::Error) {
        self.since += 1;
        if self.last_line.is_some_and(|t| t.elapsed() < LOG_EVERY) {
            return;
        }
        tracing::warn!(
            listener = name,
            error = %e,
            errors = self.since,
            "accept failed; backing off (one line per {}s at most)",
            LOG_EVERY.as_secs()
        );
        self.last_line = Some(Instant::now());
        self.since = 0;
    }
}

/// What the watchdog knows of one connection. Times are milliseconds since
/// `start`.
struct Activity {
    start: Instant,
    /// Requests whose response has not been produced yet.
    in_flight: AtomicUsize,
    /// When the connection last became free of requests (accept, or the
    /// end of a response).
    free_since: AtomicU64,
    /// First byte read while free (the next request's headers), or
    /// `u64::MAX` if none yet.
    first_byte: AtomicU64,
    /// Last successful read or write.
    last_io: AtomicU64,
    /// Wakes the watchdog when its deadline may have moved earlier (the
    /// first byte of the next request's headers).
    changed: tokio::sync::Notify,
}

impl Activity {
    fn now(&self) -> u64 {
        self.start.elapsed().as_millis() as u64
    }

    /// When the watchdog should close the connection, if nothing changes;
    /// `None` while a request is in progress.
    fn deadline(&self, limits: &ConnLimits) -> Option<u64> {
        if self.in_flight.load(Ordering::Acquire) > 0 {
            return None;
        }
        let idle = self
            .free_since
            .load(Ordering::Acquire)
            .max(self.last_io.load(Ordering::Acquire))
            + limits.idle_timeout.as_millis() as u64;
        let first = self.first_byte.load(Ordering::Acquire);
        Some(if first == u64::MAX {
            idle
        } else {
            idle.min(first + limits.header_timeout.as_millis() as u64)
        })
    }
}

/// Ends a request's share of [`Activity`] when its response is produced
/// (or the request is dropped).
struct InFlight(Arc<Activity>);

impl Drop for InFlight {
    fn drop(&mut self) {
        let a = &self.0;
        a.first_byte.store(u64::MAX, Ordering::Release);
        a.free_since.store(a.now(), Ordering::Release);
        a.in_flight.fetch_sub(1, Ordering::AcqRel);
    }
}

async fn connection(
    stream: TcpStream,
    router: Router,
    limits: ConnLimits,
    mut stop: watch::Receiver<bool>,
) {
    let activity = Arc::new(Activity {
        start: Instant::now(),
        in_flight: AtomicUsize::new(0),
        free_since: AtomicU64::new(0),
        first_byte: AtomicU64::new(u64::MAX),
        last_io: AtomicU64::new(0),
        changed: tokio::sync::Notify::new(),
    });
    let io = Tracked {
        inner: stream,
        activity: activity.clone(),
    };
    let act = activity.clone();
    let service = hyper::service::service_fn(move |req: hyper::Request<hyper::body::Incoming>| {
        act.in_flight.fetch_add(1, Ordering::AcqRel);
        let guard = InFlight(act.clone());
        let router = router.clone();
        async move {
            let resp = router.oneshot(req.map(axum::body::Body::new)).await;
            drop(guard);
            resp
        }
    });
    let mut builder = hyper::server::conn::http1::Builder::new();
    // Header and idle limits are the watchdog's: hyper's own header timer
    // would also run on an idle keep-alive connection.
    builder.header_read_timeout(None).keep_alive(true);
    let conn = builder.serve_connection(TokioIo::new(io), service);
    tokio::pin!(conn);
    let mut closing = false;
    loop {
        tokio::select! {
            _ = conn.as_mut() => return,
            _ = watchdog(&activity, &limits) => return,
            _ = stop.wait_for(|v| *v), if !closing => {
                conn.as_mut().graceful_shutdown();
                closing = true;
            }
        }
    }
}

/// Resolves when the connection has passed its header or idle deadline.
async fn watchdog(activity: &Activity, limits: &ConnLimits) {
    // While a request is in progress, look again this often.
    let recheck = limits.header_timeout.min(limits.idle_timeout);
    loop {
        let now = activity.now();
        let wait = match activity.deadline(limits) {
            Some(d) if d <= now => return,
            Some(d) => Duration::from_millis(d - now),
            None => recheck,
        };
        tokio::select! {
            _ = tokio::time::sleep(wait) => {}
            _ = activity.changed.notified() => {}
        }
    }
}

/// The connection's socket, recording reads and writes in [`Activity`].
struct Tracked {
    inner: TcpStream,
    activity: Arc<Activity>,
}

impl AsyncRead for Tracked {
    fn poll_read(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        buf: &mut ReadBuf<'_>,
    ) -> Poll<io::Result<()>> {
        let before = buf.filled().len();
        let r = Pin::new(&mut self.inner).poll_read(cx, buf);
        if matches!(r, Poll::Ready(Ok(()))) && buf.filled().len() > before {
            let a = &self.activity;
            let now = a.now();
            a.last_io.store(now, Ordering::Release);
            if a.in_flight.load(Ordering::Acquire) == 0
                && a.first_byte
                    .compare_exchange(u64::MAX, now, Ordering::AcqRel, Ordering::Acquire)
                    .is_ok()
            {
                a.changed.notify_one();
            }
        }
        r
    }
}

impl AsyncWrite for Tracked {
    fn poll_write(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        buf: &[u8],
    ) -> Poll<io::Result<usize>> {
        let r = Pin::new(&mut self.inner).poll_write(cx, buf);
        if matches!(r, Poll::Ready(Ok(n)) if n > 0) {
            let a = &self.activity;
            a.last_io.store(a.now(), Ordering::Release);
        }
        r
    }

    fn poll_write_vectored(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        bufs: &[io::IoSlice<'_>],
    ) -> Poll<io::Result<usize>> {
        let r = Pin::new(&mut self.inner).poll_write_vectored(cx, bufs);
        if matches!(r, Poll::Ready(Ok(n)) if n > 0) {
            let a = &self.activity;
            a.last_io.store(a.now(), Ordering::Release);
        }
        r
    }

    fn is_write_vectored(&self) -> bool {
        self.inner.is_write_vectored()
    }

    fn poll_flush(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<io::Result<()>> {
        Pin::new(&mut self.inner).poll_flush(cx)
    }

    fn poll_shutdown(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<io::Result<()>> {
        Pin::new(&mut self.inner).poll_shutdown(cx)
    }
}
