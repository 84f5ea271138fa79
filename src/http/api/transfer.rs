//! Bulk import (CSV, dry run first, atomic commit) and exports (CSV, JSON, GeoJSON).

use axum::Json;
use axum::body::Body;
use axum::extract::{DefaultBodyLimit, State};
use axum::http::{StatusCode, header};
use axum::response::IntoResponse;
use serde::Deserialize;
use serde_json::Value;
use utoipa::IntoParams;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::answers::{ImportAnswer, MappingAnswer};
use super::bodies;
use super::codes;
use super::doc::{IdPath, Refusals};

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
pub fn import_router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(import))
        .layer(DefaultBodyLimit::disable())
}

/// Export and mapping routes.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new()
        .routes(routes!(save_mapping))
        .routes(routes!(export))
}

/// Query of an import: the saved mapping to use, and whether to commit.
#[derive(Debug, Deserialize, IntoParams)]
#[serde(deny_unknown_fields)]
#[into_params(parameter_in = Query)]
struct ImportQuery {
    /// Name of a saved mapping (POST …/import-mappings).
    mapping: String,
    /// Commit the import (default: a dry run that changes nothing).
    #[serde(default)]
    #[param(default = false)]
    commit: bool,
    /// The file's name, kept with the import's record.
    #[serde(default)]
    file_name: Option<String>,
}

/// Check (dry run) or commit a CSV file of field tests sent as the body.
///
/// The body is streamed to a temporary file first rather than held in memory (up to
/// 256 MiB). All rows are written or none.
#[utoipa::path(post, path = "/api/v1/projects/{id}/imports", tag = "transfer",
    params(IdPath, ImportQuery),
    request_body(content = String, content_type = "text/csv",
        description = "CSV text (comma, semicolon or tab; UTF-8, BOM allowed)"),
    responses(
        (status = 200, description = "Dry run: what would be created", body = ImportAnswer),
        (status = 201, description = "Committed", body = ImportAnswer),
        Refusals))]
async fn import(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiQuery(q): ApiQuery<ImportQuery>,
    body: Body,
) -> Result<(StatusCode, Json<ImportAnswer>)> {
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
    let summary = report.summary();
    let report = serde_json::to_value(&report).map_err(anyhow::Error::from)?;
    Ok((status, Json(ImportAnswer { summary, report })))
}

/// Body of a saved mapping.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct MappingInput {
    name: String,
    mapping: ImportMapping,
}

/// Save a column mapping for imports under a name.
#[utoipa::path(post, path = "/api/v1/projects/{id}/import-mappings", tag = "transfer", request_body = bodies::MappingInput,
    params(IdPath),
    responses((status = 201, description = "The saved mapping", body = MappingAnswer), Refusals))]
async fn save_mapping(
    State(s): State<AppState>,
    caller: Caller,
    ApiPath(id): ApiPath<i64>,
    ApiJson(input): ApiJson<MappingInput>,
) -> Result<(StatusCode, Json<MappingAnswer>)> {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    let mapping_id = transfer::save_mapping(&s.db, id, &input.name, &input.mapping, &actor).await?;
    Ok((
        StatusCode::CREATED,
        Json(MappingAnswer {
            id: mapping_id,
            name: input.name,
        }),
    ))
}

/// The export filters (those of the test list page; all optional).
#[derive(IntoParams)]
#[into_params(parameter_in = Query)]
#[allow(dead_code)]
struct ExportFilters {
    /// Chainage from, in the project's style or metres.
    from: Option<String>,
    /// Chainage to.
    to: Option<String>,
    /// Layer id.
    layer: Option<String>,
    /// First day, `YYYY-MM-DD` (empty: no bound, as the test list's form sends it).
    #[param(pattern = r"^(\d{4}-(0[1-9]|1[0-2])-(0[1-9]|[12]\d|3[01]))?$")]
    date_from: Option<String>,
    /// Last day, `YYYY-MM-DD` (empty: no bound).
    #[param(pattern = r"^(\d{4}-(0[1-9]|1[0-2])-(0[1-9]|[12]\d|3[01]))?$")]
    date_to: Option<String>,
    #[param(value_type = Option<codes::Method>)]
    method: Option<String>,
    /// pass, fail, void or superseded (tests); a lot state for lots.
    verdict: Option<String>,
}

/// Export field tests or lot verdicts as CSV, JSON or GeoJSON (test-list filters apply).
#[utoipa::path(get, path = "/api/v1/projects/{id}/exports/{kind}", tag = "transfer",
    params(IdPath,
        ("kind" = codes::ExportKind, Path, description = "What to export (`-` may stand for `_`)"),
        ExportFilters),
    responses(
        (status = 200, description = "The export as a file",
            content((String = "text/csv"), (serde_json::Value = "application/json"), (Object = "application/geo+json")),
            headers(("Content-Disposition" = String, description = "attachment; filename=…"))),
        Refusals))]
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
