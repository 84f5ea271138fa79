//! Bulk import (CSV, dry run first, atomic commit) and exports (CSV, JSON, GeoJSON).

use axum::body::Body;
use axum::extract::{DefaultBodyLimit, State};
use axum::http::{StatusCode, header};
use axum::response::IntoResponse;
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::Deserialize;
use serde_json::{Value, json};

use crate::app::AppState;
use crate::auth::Action;
use crate::error::{AppError, Result};
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::{ApiJson, ApiPath, ApiQuery};
use crate::http::upload::spool_body;
use crate::ledger::import::{AuditMode, ImportOptions};
use crate::transfer::{self, export::ExportKind, export::FilterText, mapping::ImportMapping};

/// The largest file an import request may carry (imports only; other bodies keep the small limit).
pub const MAX_IMPORT_BYTES: usize = 256 * 1024 * 1024;

/// Import routes (mounted with the larger body limit). The body is streamed to a
/// temporary file, so axum's default limit for buffered bodies is lifted here.
pub fn import_router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/projects/{id}/imports", post(import))
        .layer(DefaultBodyLimit::disable())
}

/// Export and mapping routes.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/api/v1/projects/{id}/import-mappings", post(save_mapping))
        .route("/api/v1/projects/{id}/exports/{kind}", get(export))
}

/// Query of an import: the saved mapping to use, and whether to commit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ImportQuery {
    mapping: String,
    #[serde(default)]
    commit: bool,
    #[serde(default)]
    file_name: Option<String>,
}

/// Checks (default) or commits a CSV file of field tests sent as the request body,
/// which is streamed to a temporary file first rather than held in memory.
async fn import(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<ImportQuery>,
    body: Body,
) -> Result<(StatusCode, Json<Value>)> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    let mapping = transfer::load_mapping(&s.db, id, &q.mapping).await?;
    let upload = spool_body(body, "body").await?;
    let opts = ImportOptions {
        commit: q.commit,
        audit: AuditMode::PerImport,
        actor,
    };
    let name = q.file_name.unwrap_or_else(|| "upload.csv".into());
    let report = transfer::import_csv(
        &s.db,
        id,
        std::io::BufReader::new(upload.file),
        &name,
        &mapping,
        &opts,
    )
    .await?;
    let status = if report.refused() {
        StatusCode::UNPROCESSABLE_ENTITY
    } else if report.committed {
        StatusCode::CREATED
    } else {
        StatusCode::OK
    };
    Ok((
        status,
        Json(json!({"summary": report.summary(), "report": report})),
    ))
}

/// Body of a saved mapping.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct MappingInput {
    name: String,
    mapping: ImportMapping,
}

async fn save_mapping(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<MappingInput>,
) -> Result<(StatusCode, Json<Value>)> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    let mapping_id = transfer::save_mapping(&s.db, id, &input.name, &input.mapping, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(json!({"id": mapping_id, "name": input.name})),
    ))
}

async fn export(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath((id, kind)): ApiPath<(i64, String)>,
    ApiQuery(filters): ApiQuery<FilterText>,
) -> Result<impl IntoResponse> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;
    let kind: ExportKind =
        serde_json::from_value(Value::String(kind.replace('-', "_"))).map_err(|_| {
            AppError::not_found(
                "kind",
                "export kinds are tests_csv, tests_json, lots_csv, lots_json, tests_geojson",
            )
        })?;
    let project = crate::ledger::setup::require_project(&s.db, id).await?;
    let mut out = Vec::new();
    transfer::export::export(&s.db, id, kind, &filters, &mut out).await?;
    Ok((
        [
            (header::CONTENT_TYPE, kind.content_type().to_string()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"{}\"", kind.file_name(&project.code)),
            ),
        ],
        out,
    ))
}
