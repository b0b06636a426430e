//! Driving a router in-process: one request through `oneshot`, the answer
//! as status, the headers tests look at, and the body text.

use axum::body::Body;
use axum::http::{Request, StatusCode};
use axum::Router;
use http_body_util::BodyExt;
use serde_json::Value;
use tower::ServiceExt;

/// What a test reads of a response.
pub struct Resp {
    pub status: StatusCode,
    /// `Content-Type`, or empty.
    pub content_type: String,
    /// `Allow` (sent with 405 answers).
    pub allow: Option<String>,
    pub text: String,
}

impl Resp {
    pub fn json(&self) -> Value {
        serde_json::from_str(&self.text).unwrap_or_else(|e| panic!("not JSON ({e}): {}", self.text))
    }
}

/// Sends one request; `ct` and `token` (bearer) only when given.
pub async fn send(
    app: &Router,
    method: &str,
    uri: &str,
    ct: Option<&str>,
    body: Vec<u8>,
    token: Option<&str>,
) -> Resp {
    let mut b = Request::builder().method(method).uri(uri);
    if let Some(ct) = ct {
        b = b.header("content-type", ct);
    }
    if let Some(t) = token {
        b = b.header("authorization", format!("Bearer {t}"));
    }
    let resp = app
        .clone()
        .oneshot(b.body(Body::from(body)).unwrap())
        .await
        .unwrap();
    let header = |name: &str| {
        resp.headers()
            .get(name)
            .map(|v| v.to_str().unwrap().to_string())
    };
    let (content_type, allow) = (header("content-type").unwrap_or_default(), header("allow"));
    let status = resp.status();
    let bytes = resp.into_body().collect().await.unwrap().to_bytes();
    Resp {
        status,
        content_type,
        allow,
        text: String::from_utf8_lossy(&bytes).into_owned(),
    }
}
