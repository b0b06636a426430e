//! RFC 9457 problem details: every error response of the HTTP API.
//!
//! [`ApiError`] is the handlers' error type. Its `IntoResponse` writes
//! `application/problem+json` with `type`, `title`, `status`, `detail` and,
//! for validation failures, the `field` and `rule` that failed. It never
//! carries internal error text: anything unexpected becomes a generic 500
//! and the cause is logged by the tracing middleware, not returned.

use super::dto::TableReportDto;
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

/// Media type of problem details (RFC 9457 §3).
pub const PROBLEM_JSON: &str = "application/problem+json";

/// An error answer.
#[derive(Debug, Clone, PartialEq)]
pub enum ApiError {
    /// The body is not JSON, or a query string is malformed.
    Malformed(String),
    /// A field breaks a rule: `field` names it (`from.lat`), `rule` says what
    /// it must be (`must be within -90..90`).
    Invalid { field: String, rule: String },
    /// The body is larger than the configured limit; `setting` names it
    /// (`server.max_body_bytes`, `admin.max_live_batch_bytes`, ...).
    TooLarge { limit: usize, setting: &'static str },
    /// The request body did not arrive completely within the body timeout
    /// (`server.body_timeout_ms`); the connection is closed after this answer.
    BodyTimeout { limit_ms: u64 },
    /// The request asks for more than a configured limit allows.
    OverLimit { field: String, rule: String },
    /// Wrong or missing bearer token (admin API).
    Unauthorized,
    /// No such resource (e.g. an unknown region in the admin API).
    NotFound(String),
    /// The region exists but has no graph loaded (its artifact failed to
    /// load); the text names why. 409: the region's state, not the request,
    /// is at fault, and a reload can fix it.
    NoGraph(String),
    /// The region's graph was replaced while an upload arrived; nothing of
    /// it was applied (409: sending it again applies it).
    GraphReplaced(String),
    /// An admin reload could not load the artifact; the text names why
    /// (admin-only, so the operator sees the cause).
    ReloadFailed(String),
    /// The uploaded table was refused; `detail` summarises, `report` is the
    /// validation report (absent from the body when the table was refused
    /// before rows were read, e.g. for its header).
    Rejected {
        detail: String,
        report: Option<Box<TableReportDto>>,
    },
    /// Content type the endpoint does not take.
    UnsupportedMediaType(String),
    /// Something failed inside hodos; no detail leaves the process.
    Internal,
}

#[derive(Serialize)]
struct Problem<'a> {
    #[serde(rename = "type")]
    kind: &'a str,
    title: &'a str,
    status: u16,
    detail: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    field: Option<&'a str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    rule: Option<&'a str>,
    /// The validation report of a rejected table; absent otherwise, and
    /// absent when the table was refused before rows were read (the schema
    /// says object: no `null`).
    #[serde(skip_serializing_if = "Option::is_none")]
    report: Option<&'a TableReportDto>,
}

impl ApiError {
    pub fn invalid(field: impl Into<String>, rule: impl Into<String>) -> Self {
        ApiError::Invalid {
            field: field.into(),
            rule: rule.into(),
        }
    }

    pub fn status(&self) -> StatusCode {
        match self {
            ApiError::Malformed(_) => StatusCode::BAD_REQUEST,
            ApiError::Invalid { .. } | ApiError::OverLimit { .. } | ApiError::Rejected { .. } => {
                StatusCode::UNPROCESSABLE_ENTITY
            }
            ApiError::TooLarge { .. } => StatusCode::PAYLOAD_TOO_LARGE,
            ApiError::BodyTimeout { .. } => StatusCode::REQUEST_TIMEOUT,
            ApiError::Unauthorized => StatusCode::UNAUTHORIZED,
            ApiError::NotFound(_) => StatusCode::NOT_FOUND,
            ApiError::NoGraph(_) | ApiError::GraphReplaced(_) => StatusCode::CONFLICT,
            ApiError::ReloadFailed(_) => StatusCode::INTERNAL_SERVER_ERROR,
            ApiError::UnsupportedMediaType(_) => StatusCode::UNSUPPORTED_MEDIA_TYPE,
            ApiError::Internal => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// Problem type URI (a URN: these types are documented in openapi.json).
    pub fn type_uri(&self) -> &'static str {
        match self {
            ApiError::Malformed(_) => "urn:hodos:problem:malformed-request",
            ApiError::Invalid { .. } => "urn:hodos:problem:invalid-field",
            ApiError::TooLarge { .. } => "urn:hodos:problem:body-too-large",
            ApiError::BodyTimeout { .. } => "urn:hodos:problem:body-timeout",
            ApiError::OverLimit { .. } => "urn:hodos:problem:over-limit",
            ApiError::Unauthorized => "urn:hodos:problem:unauthorized",
            ApiError::NotFound(_) => "urn:hodos:problem:not-found",
            ApiError::NoGraph(_) => "urn:hodos:problem:region-without-graph",
            ApiError::GraphReplaced(_) => "urn:hodos:problem:graph-replaced",
            ApiError::ReloadFailed(_) => "urn:hodos:problem:reload-failed",
            ApiError::Rejected { .. } => "urn:hodos:problem:table-rejected",
            ApiError::UnsupportedMediaType(_) => "urn:hodos:problem:unsupported-media-type",
            ApiError::Internal => "urn:hodos:problem:internal",
        }
    }

    fn title(&self) -> &'static str {
        match self {
            ApiError::Malformed(_) => "Malformed request",
            ApiError::Invalid { .. } => "Invalid field",
            ApiError::TooLarge { .. } => "Request body too large",
            ApiError::BodyTimeout { .. } => "Request body too slow",
            ApiError::OverLimit { .. } => "Request over a configured limit",
            ApiError::Unauthorized => "Missing or wrong bearer token",
            ApiError::NotFound(_) => "Not found",
            ApiError::NoGraph(_) => "Region has no graph loaded",
            ApiError::GraphReplaced(_) => "Graph replaced during the upload",
            ApiError::ReloadFailed(_) => "Reload failed",
            ApiError::Rejected { .. } => "Table rejected",
            ApiError::UnsupportedMediaType(_) => "Unsupported media type",
            ApiError::Internal => "Internal error",
        }
    }

    pub fn detail(&self) -> String {
        match self {
            ApiError::Malformed(m) => m.clone(),
            ApiError::Invalid { field, rule } | ApiError::OverLimit { field, rule } => {
                format!("{field} {rule}")
            }
            ApiError::TooLarge { limit, setting } => {
                format!("the request body is over the limit of {limit} bytes (`{setting}`)")
            }
            ApiError::BodyTimeout { limit_ms } => {
                format!("the request body did not arrive within {limit_ms} ms")
            }
            ApiError::Unauthorized => {
                "send `Authorization: Bearer <token>` with the admin token".into()
            }
            ApiError::NotFound(m) | ApiError::ReloadFailed(m) | ApiError::GraphReplaced(m) => {
                m.clone()
            }
            ApiError::NoGraph(m) => format!("region has no graph loaded: {m}"),
            ApiError::Rejected { detail, .. } => detail.clone(),
            ApiError::UnsupportedMediaType(m) => m.clone(),
            ApiError::Internal => "the request could not be completed; it has been logged".into(),
        }
    }
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        let (field, rule) = match &self {
            ApiError::Invalid { field, rule } | ApiError::OverLimit { field, rule } => {
                (Some(field.as_str()), Some(rule.as_str()))
            }
            _ => (None, None),
        };
        let report = match &self {
            ApiError::Rejected { report, .. } => report.as_deref(),
            _ => None,
        };
        let status = self.status();
        let body = Problem {
            kind: self.type_uri(),
            title: self.title(),
            status: status.as_u16(),
            detail: self.detail(),
            field,
            rule,
            report,
        };
        let bytes = serde_json::to_vec(&body).unwrap_or_else(|_| b"{}".to_vec());
        let mut resp = (status, bytes).into_response();
        resp.headers_mut().insert(
            header::CONTENT_TYPE,
            header::HeaderValue::from_static(PROBLEM_JSON),
        );
        if status == StatusCode::UNAUTHORIZED {
            resp.headers_mut().insert(
                header::WWW_AUTHENTICATE,
                header::HeaderValue::from_static("Bearer"),
            );
        }
        resp
    }
}

/// Gives a bodiless 405 from the router an RFC 9457 body; the router's
/// `Allow` header (RFC 9110 §15.5.6) is kept and lists the methods the
/// resource takes (axum adds it as the response leaves the route, after
/// this layer, so the detail points at it rather than copying it). Other
/// responses pass through untouched.
pub async fn method_not_allowed(resp: Response) -> Response {
    if resp.status() != StatusCode::METHOD_NOT_ALLOWED {
        return resp;
    }
    let (mut parts, _) = resp.into_parts();
    let body = Problem {
        kind: "urn:hodos:problem:method-not-allowed",
        title: "Method not allowed",
        status: StatusCode::METHOD_NOT_ALLOWED.as_u16(),
        detail: "this resource does not take that method; the Allow header lists the ones it takes"
            .into(),
        field: None,
        rule: None,
        report: None,
    };
    let bytes = serde_json::to_vec(&body).unwrap_or_else(|_| b"{}".to_vec());
    parts.headers.insert(
        header::CONTENT_TYPE,
        header::HeaderValue::from_static(PROBLEM_JSON),
    );
    parts.headers.remove(header::CONTENT_LENGTH);
    Response::from_parts(parts, axum::body::Body::from(bytes))
}
