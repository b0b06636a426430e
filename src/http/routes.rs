//! The route table: every path the public and admin routers serve, once.
//!
//! Each [`Route`] names its template, whether it answers trips (then it
//! sits behind admission control and its answer counters are pre-registered
//! at zero), and its [`Operation`]s: method, handler binding and OpenAPI
//! operation object. From this table alone
//!
//! - [`super::app`] and [`super::admin_app`] build their routers
//!   ([`Route::method_router`] binds each handler under its table method);
//! - the latency middleware picks its `route` label ([`label`]), and
//!   [`answer_paths`] gives the answer routes for metric pre-registration;
//! - [`super::openapi::document`] builds its `paths` from [`PUBLIC`],
//!   [`super::openapi::admin_document`] from [`ADMIN`] (once, when the
//!   state is made; the handlers serve that copy).
//!
//! The table's types and the answer routes' templates are `table`'s, so
//! the handlers and the documents this table binds never name it back.
//!
//! `tests/service/routes.rs` checks the three against one another from outside:
//! the served document, the router's answers and `Allow` headers, and the
//! scraped metric labels.

pub use super::table::{Operation, Route, Verb, ETA, MATRIX, ROUTE};
use super::{admin, dashboard, handlers, openapi, trips};
use axum::routing::on;

/// The public router's routes.
pub static PUBLIC: &[Route] = &[
    Route {
        path: ETA,
        answers: true,
        ops: &[
            Operation {
                verb: Verb::Get,
                handler: |f| on(f, handlers::eta_get),
                doc: openapi::eta_get,
            },
            Operation {
                verb: Verb::Post,
                handler: |f| on(f, handlers::eta_post),
                doc: openapi::eta_post,
            },
        ],
    },
    Route {
        path: MATRIX,
        answers: true,
        ops: &[Operation {
            verb: Verb::Post,
            handler: |f| on(f, handlers::matrix),
            doc: openapi::matrix,
        }],
    },
    Route {
        path: ROUTE,
        answers: true,
        ops: &[Operation {
            verb: Verb::Post,
            handler: |f| on(f, handlers::route),
            doc: openapi::route,
        }],
    },
    Route {
        path: "/healthz",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, handlers::healthz),
            doc: openapi::healthz,
        }],
    },
    Route {
        path: "/readyz",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, handlers::readyz),
            doc: openapi::readyz,
        }],
    },
    Route {
        path: "/metrics",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, handlers::metrics_text),
            doc: openapi::metrics,
        }],
    },
    Route {
        path: "/dashboard",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, dashboard::page),
            doc: openapi::dashboard,
        }],
    },
    Route {
        path: "/dashboard/data",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, dashboard::data),
            doc: openapi::dashboard_data,
        }],
    },
    Route {
        path: "/dashboard/uplot.js",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, dashboard::uplot_js),
            doc: openapi::dashboard_uplot_js,
        }],
    },
    Route {
        path: "/dashboard/uplot.css",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, dashboard::uplot_css),
            doc: openapi::dashboard_uplot_css,
        }],
    },
    Route {
        path: "/openapi.json",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, handlers::openapi),
            doc: openapi::openapi,
        }],
    },
];

/// The admin router's routes (all behind the bearer token).
pub static ADMIN: &[Route] = &[
    Route {
        path: "/admin/openapi.json",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, admin::openapi_document),
            doc: openapi::admin_openapi,
        }],
    },
    Route {
        path: "/admin/status",
        answers: false,
        ops: &[Operation {
            verb: Verb::Get,
            handler: |f| on(f, admin::status),
            doc: openapi::admin_status,
        }],
    },
    Route {
        path: "/admin/trips",
        answers: false,
        ops: &[Operation {
            verb: Verb::Post,
            handler: |f| on(f, trips::post_trips),
            doc: openapi::admin_post_trips,
        }],
    },
    Route {
        path: "/admin/regions/{region}/historical",
        answers: false,
        ops: &[Operation {
            verb: Verb::Put,
            handler: |f| on(f, admin::put_historical),
            doc: openapi::admin_put_historical,
        }],
    },
    Route {
        path: "/admin/regions/{region}/live",
        answers: false,
        ops: &[Operation {
            verb: Verb::Post,
            handler: |f| on(f, admin::post_live),
            doc: openapi::admin_post_live,
        }],
    },
    Route {
        path: "/admin/regions/{region}/model",
        answers: false,
        ops: &[Operation {
            verb: Verb::Put,
            handler: |f| on(f, admin::put_model),
            doc: openapi::admin_put_model,
        }],
    },
    Route {
        path: "/admin/regions/{region}/reload",
        answers: false,
        ops: &[Operation {
            verb: Verb::Post,
            handler: |f| on(f, admin::reload),
            doc: openapi::admin_reload,
        }],
    },
];

/// The latency label of a matched public template: the table's own
/// `&'static str` (no allocation per request), `other` for a template the
/// table does not hold (none, while the router is built from it).
pub fn label(matched: &str) -> &'static str {
    PUBLIC
        .iter()
        .map(|r| r.path)
        .find(|p| *p == matched)
        .unwrap_or("other")
}

/// Templates of the public routes that answer trips.
pub fn answer_paths() -> Vec<&'static str> {
    PUBLIC
        .iter()
        .filter(|r| r.answers)
        .map(|r| r.path)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 9110 §4.1: a method is one token; one operation per method and
    /// one entry per template, or axum would panic on the overlap.
    #[test]
    fn one_entry_per_template_and_method() {
        for table in [PUBLIC, ADMIN] {
            for (i, r) in table.iter().enumerate() {
                assert!(r.path.starts_with('/'), "{}", r.path);
                assert!(
                    table[..i].iter().all(|o| o.path != r.path),
                    "{} twice",
                    r.path
                );
                for (j, op) in r.ops.iter().enumerate() {
                    assert!(
                        r.ops[..j].iter().all(|o| o.verb != op.verb),
                        "{} {} twice",
                        op.verb.as_str(),
                        r.path
                    );
                }
            }
        }
        assert_eq!(label("/v1/eta"), "/v1/eta");
        assert_eq!(label("/v1/nope"), "other");
        assert_eq!(answer_paths(), [ETA, MATRIX, ROUTE]);
    }
}
