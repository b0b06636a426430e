//! The OpenAPI 3.1 description of the public and admin APIs, served at
//! `/openapi.json`. Written by hand next to the DTOs it describes; the test
//! suite checks it with an external validator and that every route the
//! routers serve appears here.

use serde_json::{json, Value};

fn problem_response(desc: &str) -> Value {
    json!({
        "description": desc,
        "content": {"application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}
    })
}

fn json_response(desc: &str, schema: &str) -> Value {
    json!({
        "description": desc,
        "content": {"application/json": {"schema": {"$ref": format!("#/components/schemas/{schema}")}}}
    })
}

/// The whole document.
pub fn document() -> Value {
    let errors = |extra: &[(&str, &str)]| {
        let mut m = serde_json::Map::new();
        m.insert(
            "400".into(),
            problem_response("Malformed JSON or query string"),
        );
        m.insert("413".into(), problem_response("Body over the size limit"));
        m.insert(
            "415".into(),
            problem_response("Body is not application/json"),
        );
        m.insert(
            "422".into(),
            problem_response("A field breaks a rule (the problem names field and rule)"),
        );
        for (k, v) in extra {
            m.insert((*k).into(), problem_response(v));
        }
        Value::Object(m)
    };
    let merge = |mut a: Value, b: Value| {
        if let (Some(a), Some(b)) = (a.as_object_mut(), b.as_object()) {
            for (k, v) in b {
                a.insert(k.clone(), v.clone());
            }
        }
        a
    };
    let admin_auth = json!([{"adminToken": []}]);
    json!({
        "openapi": "3.1.0",
        "info": {
            "title": "hodos travel-time API",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Travel times (ETAs), matrices and routes over road graphs, with live, historical and heuristic tiers. Every valid request gets an answer that says which tier produced it and why. Estimates only: see the README's cautions.",
            "license": {"name": "MIT OR Apache-2.0", "identifier": "MIT OR Apache-2.0"}
        },
        "servers": [{"url": "http://127.0.0.1:8080", "description": "public API (default listener)"},
                    {"url": "http://127.0.0.1:8081", "description": "admin API (default listener)"}],
        "paths": {
            "/v1/eta": {
                "get": {
                    "operationId": "etaGet",
                    "summary": "Travel time between two coordinates (query string form)",
                    "parameters": [
                        {"name": "from", "in": "query", "required": true, "schema": {"type": "string", "pattern": "^-?[0-9.]+,-?[0-9.]+$"}, "description": "Origin as LAT,LON (WGS84 degrees)"},
                        {"name": "to", "in": "query", "required": true, "schema": {"type": "string"}, "description": "Destination as LAT,LON"},
                        {"name": "depart_at", "in": "query", "required": false, "schema": {"type": "string", "format": "date-time"}},
                        {"name": "budget_ms", "in": "query", "required": false, "schema": {"type": "integer", "minimum": 1}}
                    ],
                    "responses": merge(json!({"200": json_response("An ETA", "EtaResponse")}), errors(&[]))
                },
                "post": {
                    "operationId": "etaPost",
                    "summary": "Travel time between two coordinates",
                    "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/EtaRequest"}}}},
                    "responses": merge(json!({"200": json_response("An ETA", "EtaResponse")}), errors(&[]))
                }
            },
            "/v1/eta/matrix": {
                "post": {
                    "operationId": "etaMatrix",
                    "summary": "Travel-time matrix (bucket many-to-many); cells not done within the budget come from the heuristic tier and are marked",
                    "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/MatrixRequest"}}}},
                    "responses": merge(json!({"200": json_response("A matrix", "MatrixResponse")}), errors(&[]))
                }
            },
            "/v1/route": {
                "post": {
                    "operationId": "route",
                    "summary": "ETA plus the path as a GeoJSON LineString (RFC 7946)",
                    "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/EtaRequest"}}}},
                    "responses": merge(json!({"200": json_response("An ETA with geometry", "RouteResponse")}), errors(&[]))
                }
            },
            "/healthz": {"get": {"operationId": "healthz", "summary": "Liveness", "responses": {"200": {"description": "The process is alive", "content": {"application/json": {"schema": {"type": "object"}}}}}}},
            "/readyz": {"get": {"operationId": "readyz", "summary": "Readiness: every region serving or marked degraded, saying which", "responses": {"200": {"description": "Per-region state", "content": {"application/json": {"schema": {"type": "object"}}}}}}},
            "/metrics": {"get": {"operationId": "metrics", "summary": "Prometheus text exposition", "responses": {"200": {"description": "Metrics", "content": {"text/plain": {"schema": {"type": "string"}}}}}}},
            "/openapi.json": {"get": {"operationId": "openapi", "summary": "This document", "responses": {"200": {"description": "OpenAPI 3.1", "content": {"application/json": {"schema": {"type": "object"}}}}}}},
            "/admin/status": {"get": {"operationId": "adminStatus", "summary": "Per-region snapshot generation, data ages, last reload outcome", "security": admin_auth,
                "responses": {"200": {"description": "Status", "content": {"application/json": {"schema": {"type": "object"}}}}, "401": problem_response("Missing or wrong token")}}},
            "/admin/regions/{region}/historical": {"put": {"operationId": "adminPutHistorical", "summary": "Upload a historical profile (CSV: from_node,to_node,hour_of_week,speed_kmh)", "security": admin_auth,
                "parameters": [{"name": "region", "in": "path", "required": true, "schema": {"type": "string"}}],
                "requestBody": {"required": true, "content": {"text/csv": {"schema": {"type": "string"}}}},
                "responses": {"200": {"description": "Accepted, with the validation report", "content": {"application/json": {"schema": {"type": "object"}}}},
                              "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"), "413": problem_response("Upload too large"),
                              "422": problem_response("Rejected whole; the problem carries the validation report")}}},
            "/admin/regions/{region}/live": {"post": {"operationId": "adminPostLive", "summary": "Post live observations (JSON array, or CSV with Content-Type text/csv)", "security": admin_auth,
                "parameters": [{"name": "region", "in": "path", "required": true, "schema": {"type": "string"}}],
                "requestBody": {"required": true, "content": {
                    "application/json": {"schema": {"type": "array", "items": {"$ref": "#/components/schemas/Observation"}}},
                    "text/csv": {"schema": {"type": "string"}}}},
                "responses": {"200": {"description": "Applied, with the validation report", "content": {"application/json": {"schema": {"type": "object"}}}},
                              "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"),
                              "422": problem_response("Rejected whole; the problem carries the validation report")}}},
            "/admin/regions/{region}/reload": {"post": {"operationId": "adminReload", "summary": "Reload the region's artifact and historical table", "security": admin_auth,
                "parameters": [{"name": "region", "in": "path", "required": true, "schema": {"type": "string"}}],
                "responses": {"200": {"description": "Outcome (accepted or failed, with the error text); a failed reload leaves the serving snapshot as it was", "content": {"application/json": {"schema": {"type": "object"}}}},
                              "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region")}}}
        },
        "components": {
            "securitySchemes": {"adminToken": {"type": "http", "scheme": "bearer"}},
            "schemas": {
                "Coord": {"type": "object", "required": ["lat", "lon"], "additionalProperties": false,
                    "properties": {"lat": {"type": "number", "minimum": -90, "maximum": 90}, "lon": {"type": "number", "minimum": -180, "maximum": 180}}},
                "EtaRequest": {"type": "object", "required": ["from", "to"], "additionalProperties": false,
                    "properties": {"from": {"$ref": "#/components/schemas/Coord"}, "to": {"$ref": "#/components/schemas/Coord"},
                                   "depart_at": {"type": "string", "format": "date-time"}, "budget_ms": {"type": "integer", "minimum": 1}}},
                "MatrixRequest": {"type": "object", "required": ["from", "to"], "additionalProperties": false,
                    "properties": {"from": {"type": "array", "minItems": 1, "items": {"$ref": "#/components/schemas/Coord"}},
                                   "to": {"type": "array", "minItems": 1, "items": {"$ref": "#/components/schemas/Coord"}},
                                   "depart_at": {"type": "string", "format": "date-time"}, "budget_ms": {"type": "integer", "minimum": 1}}},
                "Tier": {"type": "string", "enum": ["live", "historical", "heuristic"]},
                "FallbackReason": {"type": ["string", "null"], "enum": ["no_live_data", "live_stale", "off_network", "unreachable", "budget_exceeded", "overloaded", "outside_regions", "region_unavailable", null]},
                "SnapshotRef": {"type": ["object", "null"], "properties": {"region": {"type": "string"}, "generation": {"type": "integer"}}},
                "EtaResponse": {"type": "object", "required": ["eta_s", "meters", "tier", "fallback_reason", "speeds_age_s", "snapshot"],
                    "properties": {"eta_s": {"type": "number"}, "meters": {"type": "number"}, "tier": {"$ref": "#/components/schemas/Tier"},
                                   "fallback_reason": {"$ref": "#/components/schemas/FallbackReason"}, "speeds_age_s": {"type": ["number", "null"]},
                                   "snapshot": {"$ref": "#/components/schemas/SnapshotRef"},
                                   "from_snap_m": {"type": ["number", "null"]}, "to_snap_m": {"type": ["number", "null"]}}},
                "RouteResponse": {"allOf": [{"$ref": "#/components/schemas/EtaResponse"},
                    {"type": "object", "required": ["geometry"], "properties": {"geometry": {"type": "object", "description": "GeoJSON LineString, [lon, lat] positions",
                        "properties": {"type": {"const": "LineString"}, "coordinates": {"type": "array", "items": {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}}}}}}]},
                "MatrixResponse": {"type": "object", "required": ["eta_s", "meters", "tier", "fallback_reason"],
                    "properties": {"eta_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                                   "meters": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                                   "tier": {"type": "array", "items": {"type": "array", "items": {"$ref": "#/components/schemas/Tier"}}},
                                   "fallback_reason": {"type": "array", "items": {"type": "array", "items": {"$ref": "#/components/schemas/FallbackReason"}}},
                                   "snapshot": {"$ref": "#/components/schemas/SnapshotRef"}}},
                "Observation": {"type": "object", "required": ["from_node", "to_node", "speed_kmh", "observed_at", "samples"],
                    "properties": {"from_node": {"type": "integer"}, "to_node": {"type": "integer"}, "speed_kmh": {"type": "number", "exclusiveMinimum": 0},
                                   "observed_at": {"type": "string", "format": "date-time"}, "samples": {"type": "integer", "minimum": 1}}},
                "Problem": {"type": "object", "description": "RFC 9457 problem details", "required": ["type", "title", "status", "detail"],
                    "properties": {"type": {"type": "string"}, "title": {"type": "string"}, "status": {"type": "integer"}, "detail": {"type": "string"},
                                   "field": {"type": "string"}, "rule": {"type": "string"}, "report": {"type": "object"}}}
            }
        }
    })
}
