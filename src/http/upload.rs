//! Admin uploads as streams: the request body handed to the parser thread
//! as a blocking [`std::io::Read`] while it arrives, under a byte limit.
//!
//! [`stream`] splits a body into a [`BodyReader`] (for the thread that
//! parses) and a pump future (for the handler) that moves the body's data
//! frames through a small bounded channel, so at most a few frames are in
//! memory at once and a parser that stops early stops the reading too. The
//! pump counts bytes: past the limit it stops and the reader fails, and
//! the handler answers 413 (after reading and dropping what the client is
//! still sending, up to the limit again). A body that ends early (the client went away,
//! the body deadline fired) is an error for the reader, never a short
//! batch that looks complete.

use axum::body::{Body, Bytes};
use std::io;
use std::pin::Pin;
use tokio::sync::mpsc;

/// Frames in flight between the pump and the reader.
const FRAMES_IN_FLIGHT: usize = 8;

enum Msg {
    Data(Bytes),
    /// The body ended normally.
    End,
    Failed(io::Error),
}

/// How the pump ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Pumped {
    /// The whole body was handed over.
    Complete,
    /// The parser stopped reading before the end (it found the upload
    /// malformed, or failed).
    Abandoned,
    /// The body passed the limit; the reader failed there.
    OverLimit,
    /// The body could not be read (client gone, deadline); the reader
    /// failed there.
    Failed,
}

/// The body as a blocking reader. For a thread outside the runtime: each
/// read may block until the client sends more.
pub struct BodyReader {
    rx: mpsc::Receiver<Msg>,
    cur: Bytes,
    done: bool,
}

impl io::Read for BodyReader {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        while self.cur.is_empty() {
            if self.done {
                return Ok(0);
            }
            match self.rx.blocking_recv() {
                Some(Msg::Data(b)) => self.cur = b,
                Some(Msg::End) => self.done = true,
                Some(Msg::Failed(e)) => return Err(e),
                None => {
                    return Err(io::Error::new(
                        io::ErrorKind::UnexpectedEof,
                        "the upload was cut off",
                    ))
                }
            }
        }
        let n = buf.len().min(self.cur.len());
        buf[..n].copy_from_slice(&self.cur[..n]);
        let _ = self.cur.split_to(n);
        Ok(n)
    }
}

/// Splits `body` into a reader and the pump that feeds it, stopping after
/// `limit` bytes. The pump must be polled (awaited) while the reader is
/// read.
pub fn stream(body: Body, limit: usize) -> (BodyReader, impl std::future::Future<Output = Pumped>) {
    let (tx, rx) = mpsc::channel(FRAMES_IN_FLIGHT);
    let reader = BodyReader {
        rx,
        cur: Bytes::new(),
        done: false,
    };
    (reader, pump(body, tx, limit))
}

async fn pump(mut body: Body, tx: mpsc::Sender<Msg>, limit: usize) -> Pumped {
    let mut total = 0usize;
    loop {
        let frame = std::future::poll_fn(|cx| http_body::Body::poll_frame(Pin::new(&mut body), cx));
        let msg = match frame.await {
            None => {
                let _ = tx.send(Msg::End).await;
                return Pumped::Complete;
            }
            Some(Err(e)) => {
                let _ = tx.send(Msg::Failed(io::Error::other(e.to_string()))).await;
                return Pumped::Failed;
            }
            Some(Ok(frame)) => match frame.into_data() {
                Ok(data) => {
                    total = total.saturating_add(data.len());
                    if total > limit {
                        let over = io::Error::other(format!("over the limit of {limit} bytes"));
                        let _ = tx.send(Msg::Failed(over)).await;
                        drain(body, limit).await;
                        return Pumped::OverLimit;
                    }
                    Msg::Data(data)
                }
                // Trailers: nothing to parse.
                Err(_) => continue,
            },
        };
        if tx.send(msg).await.is_err() {
            return Pumped::Abandoned;
        }
    }
}

/// Reads and drops up to `most` more bytes of a body refused for its
/// size, so the client, still sending, reads the 413 rather than a reset
/// connection (closing a socket with unread data resets it). A client that
/// sends far more gets the connection closed.
async fn drain(mut body: Body, most: usize) {
    let mut dropped = 0usize;
    while dropped <= most {
        let frame = std::future::poll_fn(|cx| http_body::Body::poll_frame(Pin::new(&mut body), cx));
        match frame.await {
            Some(Ok(f)) => dropped += f.data_ref().map_or(0, |d| d.len()),
            _ => return,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use http_body::Frame;
    use std::collections::VecDeque;
    use std::io::Read;
    use std::task::{Context, Poll};

    /// A body of the given data frames.
    struct Frames(VecDeque<Bytes>);

    impl http_body::Body for Frames {
        type Data = Bytes;
        type Error = std::io::Error;
        fn poll_frame(
            mut self: Pin<&mut Self>,
            _: &mut Context<'_>,
        ) -> Poll<Option<Result<Frame<Bytes>, std::io::Error>>> {
            Poll::Ready(self.0.pop_front().map(|b| Ok(Frame::data(b))))
        }
    }

    fn body(data: &[u8]) -> Body {
        Body::new(Frames(
            data.chunks(7_001).map(Bytes::copy_from_slice).collect(),
        ))
    }

    /// The reader yields the body byte for byte; past the limit it fails
    /// and the pump says why.
    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn body_through_the_reader_and_the_limit() {
        let data: Vec<u8> = (0..200_000u32).map(|i| (i % 251) as u8).collect();
        let (mut r, pump) = stream(body(&data), data.len());
        let read = tokio::task::spawn_blocking(move || {
            let mut out = Vec::new();
            r.read_to_end(&mut out).map(|_| out)
        });
        assert_eq!(pump.await, Pumped::Complete);
        assert_eq!(read.await.unwrap().unwrap(), data);

        let (mut r, pump) = stream(body(&data), data.len() - 1);
        let read = tokio::task::spawn_blocking(move || {
            let mut out = Vec::new();
            r.read_to_end(&mut out)
        });
        assert_eq!(pump.await, Pumped::OverLimit);
        assert!(read.await.unwrap().is_err());
    }

    /// A reader whose pump is gone before the end fails: a cut-off upload
    /// never looks complete.
    #[tokio::test(flavor = "multi_thread", worker_threads = 2)]
    async fn a_body_cut_off_is_an_error() {
        let (mut r, pump) = stream(body(b"[1,2,3]"), 100);
        drop(pump);
        let got = tokio::task::spawn_blocking(move || {
            let mut out = Vec::new();
            r.read_to_end(&mut out)
        })
        .await
        .unwrap();
        assert_eq!(got.unwrap_err().kind(), io::ErrorKind::UnexpectedEof);
    }
}
