//! The types of the route table ([`Route`], [`Operation`], [`Verb`]) and
//! the templates of the answer routes, which their handlers label their
//! metrics with. A leaf: the table itself (`routes`) binds handlers and
//! document functions, and none of those names the table back.

use super::AppState;
use axum::routing::{MethodFilter, MethodRouter};
use serde_json::Value;

/// An HTTP method a route serves (RFC 9110 §9.3).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verb {
    Get,
    Post,
    Put,
}

impl Verb {
    /// The method token (`GET`).
    pub fn as_str(self) -> &'static str {
        match self {
            Verb::Get => "GET",
            Verb::Post => "POST",
            Verb::Put => "PUT",
        }
    }

    /// The key of the operation in an OpenAPI Path Item (`get`).
    pub fn openapi_key(self) -> &'static str {
        match self {
            Verb::Get => "get",
            Verb::Post => "post",
            Verb::Put => "put",
        }
    }

    fn filter(self) -> MethodFilter {
        match self {
            Verb::Get => MethodFilter::GET,
            Verb::Post => MethodFilter::POST,
            Verb::Put => MethodFilter::PUT,
        }
    }
}

/// One method of one route.
pub struct Operation {
    pub verb: Verb,
    /// Binds the handler under the method filter it is given (always the
    /// filter of [`Operation::verb`]), so the router cannot serve a handler
    /// under a method the table and the document do not name.
    pub handler: fn(MethodFilter) -> MethodRouter<AppState>,
    /// The OpenAPI 3.1 Operation Object.
    pub doc: fn() -> Value,
}

/// One path template.
pub struct Route {
    /// The axum path template, also the OpenAPI path and the metric label
    /// (`{region}` is the same syntax in both).
    pub path: &'static str,
    /// Answers trips: behind admission control, and its answer and fallback
    /// counters are pre-registered.
    pub answers: bool,
    pub ops: &'static [Operation],
}

impl Route {
    /// Every operation bound under its own method.
    pub fn method_router(&self) -> MethodRouter<AppState> {
        self.ops.iter().fold(MethodRouter::new(), |m, op| {
            m.merge((op.handler)(op.verb.filter()))
        })
    }
}

/// `GET`/`POST /v1/eta`.
pub const ETA: &str = "/v1/eta";
/// `POST /v1/eta/matrix`.
pub const MATRIX: &str = "/v1/eta/matrix";
/// `POST /v1/route`.
pub const ROUTE: &str = "/v1/route";
