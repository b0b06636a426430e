//! The request body deadline: a body that has not arrived completely
//! within the listener's body timeout, counted from the request's headers,
//! is cut off and the request answered `408` (RFC 9457 problem details,
//! `urn:hodos:problem:body-timeout`) with `Connection: close`.
//!
//! A client that sends headers and then stalls its body would otherwise
//! hold a connection, a request slot and a file descriptor for as long as
//! it likes. The deadline wraps the body (no buffering here: the handlers'
//! extractors read it as before, under their own size limits); when it
//! fires the extractor sees a body error, and the middleware replaces
//! whatever the handler made of that error with the 408.

use super::problem::ApiError;
use axum::body::{Body, Bytes};
use axum::extract::{Request, State};
use axum::http::{header, HeaderValue};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use http_body::{Frame, SizeHint};
use std::future::Future;
use std::pin::Pin;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::task::{Context, Poll};
use std::time::Duration;

/// Middleware state: the listener's body timeout.
#[derive(Debug, Clone, Copy)]
pub struct BodyTimeout(pub Duration);

/// `axum::middleware::from_fn_with_state(BodyTimeout(..), body_deadline)`.
pub async fn body_deadline(State(limit): State<BodyTimeout>, req: Request, next: Next) -> Response {
    let expired = Arc::new(AtomicBool::new(false));
    let (parts, body) = req.into_parts();
    let body = Body::new(Deadline {
        inner: body,
        sleep: Box::pin(tokio::time::sleep(limit.0)),
        expired: expired.clone(),
    });
    let resp = next.run(Request::from_parts(parts, body)).await;
    if !expired.load(Ordering::Acquire) {
        return resp;
    }
    let mut resp = ApiError::BodyTimeout {
        limit_ms: limit.0.as_millis() as u64,
    }
    .into_response();
    // The rest of the body may still be on its way: the connection cannot
    // carry another request.
    resp.headers_mut()
        .insert(header::CONNECTION, HeaderValue::from_static("close"));
    resp
}

/// A body that fails once its deadline passes while it still waits for data.
struct Deadline {
    inner: Body,
    sleep: Pin<Box<tokio::time::Sleep>>,
    /// Set when the deadline cut the body off, so the middleware answers 408.
    expired: Arc<AtomicBool>,
}

impl http_body::Body for Deadline {
    type Data = Bytes;
    type Error = axum::Error;

    fn poll_frame(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
    ) -> Poll<Option<Result<Frame<Bytes>, axum::Error>>> {
        let this = &mut *self;
        match Pin::new(&mut this.inner).poll_frame(cx) {
            Poll::Ready(frame) => Poll::Ready(frame),
            Poll::Pending => match this.sleep.as_mut().poll(cx) {
                Poll::Ready(()) => {
                    this.expired.store(true, Ordering::Release);
                    Poll::Ready(Some(Err(axum::Error::new("request body timed out"))))
                }
                Poll::Pending => Poll::Pending,
            },
        }
    }

    fn is_end_stream(&self) -> bool {
        self.inner.is_end_stream()
    }

    fn size_hint(&self) -> SizeHint {
        self.inner.size_hint()
    }
}
