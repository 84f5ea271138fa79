//! The parts of the OpenAPI document that no single route owns: its title, the two ways
//! to authenticate, the one error body and the refusals every operation may answer.
//!
//! Operations come from the `#[utoipa::path]` of each handler, collected by the
//! `OpenApiRouter`s of the resource modules, so a route cannot exist without its entry.

use std::collections::BTreeMap;

use serde::Serialize;
use utoipa::openapi::security::{ApiKey, ApiKeyValue, HttpAuthScheme, HttpBuilder, SecurityScheme};
use utoipa::openapi::{ContentBuilder, Ref, RefOr, Response, ResponseBuilder};
use utoipa::{IntoResponses, Modify, OpenApi, ToSchema};

use super::codes;
use crate::http::caller::SESSION_COOKIE;

/// Name of the session-cookie security scheme in the document.
pub const SESSION: &str = "session";
/// Name of the bearer-token security scheme in the document.
pub const TOKEN: &str = "token";

/// The document's fixed part.
#[derive(OpenApi)]
#[openapi(
    info(
        title = "liftledger API",
        description = "Earthworks compaction QC: field density tests, lab curves, lot acceptance and \
            end-of-lift certificates. SI units throughout; every quantity carries its unit in its name \
            (`_kg_m3`, `_pct`, `_m`, `_mm`, `_g`, `_cm3`, `_m2`). Times are RFC 3339 in UTC, dates \
            are `YYYY-MM-DD`. A refusal is always the `Error` body, naming the field at fault. \
            A state-changing request made with the session cookie must come from this site \
            (its `Origin` or `Referer` names this host); a bearer token carries no cookie and is not \
            subject to that check."
    ),
    modifiers(&Security),
    security(("session" = []), ("token" = [])),
    components(schemas(
        ErrorBody, ErrorDetail,
        // Codes named by query and path parameters (bodies and answers bring their own).
        codes::LotState, codes::Method, codes::ExportKind, codes::GroupBy, codes::Measure,
    )),
    tags(
        (name = "projects", description = "Projects and their set-up: clauses, sources, lab tests, layers, lots, moulds"),
        (name = "lots", description = "Lots: reports, history, review"),
        (name = "field-tests", description = "Field density tests"),
        (name = "certificates", description = "End-of-lift certificates and their verification"),
        (name = "calculators", description = "Stateless calculators: nothing is stored"),
        (name = "accounts", description = "Users, memberships and API tokens"),
        (name = "transfer", description = "CSV import, saved mappings and exports"),
        (name = "planning", description = "Test-location plans, one-point checks, drift and control charts"),
        (name = "instruments", description = "The instrument register"),
        (name = "meta", description = "This document"),
    )
)]
pub struct ApiDoc;

/// Adds the session cookie and the bearer token as security schemes.
struct Security;

impl Modify for Security {
    fn modify(&self, openapi: &mut utoipa::openapi::OpenApi) {
        let components = openapi.components.get_or_insert_with(Default::default);
        components.add_security_scheme(
            SESSION,
            SecurityScheme::ApiKey(ApiKey::Cookie(ApiKeyValue::with_description(
                SESSION_COOKIE,
                "the session cookie set by signing in at /sign-in (HttpOnly, SameSite=Lax)",
            ))),
        );
        components.add_security_scheme(
            TOKEN,
            SecurityScheme::Http(
                HttpBuilder::new()
                    .scheme(HttpAuthScheme::Bearer)
                    .description(Some(
                        "a project-scoped API token (`llt_…`), made at POST /api/v1/projects/{id}/tokens",
                    ))
                    .build(),
            ),
        );
    }
}

/// The body of every refusal (see `crate::error::AppError`).
#[derive(Debug, Serialize, ToSchema)]
#[schema(example = json!({"error": {"field": "chainage_m", "message": "1200 m is outside lot L-3 (1000–1100 m)", "request_id": "3f2c9a1e0b7d4c55"}}))]
pub struct ErrorBody {
    pub error: ErrorDetail,
}

/// What was refused and why.
#[derive(Debug, Serialize, ToSchema)]
pub struct ErrorDetail {
    /// The field at fault (`body` for an unreadable body, "" for a fault of the server).
    pub field: String,
    /// The reason, for people.
    pub message: String,
    /// What must be fixed before the request can succeed (409 refusals by a record's state).
    #[schema(nullable = false)]
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub reasons: Vec<String>,
    /// The request's id, also in its `X-Request-Id` header and the server's log lines.
    #[schema(nullable = false)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub request_id: Option<String>,
}

/// The refusals any operation may answer, each referencing the one `ErrorBody` schema.
pub struct Refusals;

/// (status, when) of every refusal.
const REFUSALS: [(u16, &str); 6] = [
    (
        400,
        "The body or a parameter could not be read (malformed JSON, wrong type, unknown field)",
    ),
    (401, "No valid session or token"),
    (
        403,
        "The caller's role does not allow this, or a cookie request came from another site",
    ),
    (
        404,
        "A record named in the path or the body does not exist (or is not the caller's to see)",
    ),
    (
        409,
        "The record's current state refuses the request; `reasons` lists what to fix",
    ),
    (422, "A value was read but breaks a rule; `field` names it"),
];

impl IntoResponses for Refusals {
    fn responses() -> BTreeMap<String, RefOr<Response>> {
        REFUSALS
            .iter()
            .map(|(status, when)| {
                let body = ContentBuilder::new()
                    .schema(Some(Ref::from_schema_name("ErrorBody")))
                    .build();
                let response = ResponseBuilder::new()
                    .description(*when)
                    .content("application/json", body)
                    .build();
                (status.to_string(), RefOr::T(response))
            })
            .collect()
    }
}

/// Gives every operation a unique id made of its method and path (`post_lots_id_field_tests`):
/// handler names alone repeat across modules.
pub fn name_operations(doc: &mut utoipa::openapi::OpenApi) {
    for (path, item) in doc.paths.paths.iter_mut() {
        let slug: String = path
            .trim_start_matches("/api/v1/")
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
            .collect::<String>()
            .split('_')
            .filter(|s| !s.is_empty())
            .collect::<Vec<_>>()
            .join("_");
        for (method, op) in [
            ("get", &mut item.get),
            ("put", &mut item.put),
            ("post", &mut item.post),
            ("delete", &mut item.delete),
        ] {
            if let Some(op) = op {
                op.operation_id = Some(format!("{method}_{slug}"));
            }
        }
    }
}

/// The id in a path such as `/api/v1/lots/{id}`.
#[derive(utoipa::IntoParams)]
#[into_params(parameter_in = Path)]
#[allow(dead_code)]
pub struct IdPath {
    /// Id of the record the path names (an id that names nothing answers 404).
    #[param(minimum = 1, maximum = 9007199254740991.0)]
    pub id: i64,
}
