//! The handover archive download: `GET /api/v1/projects/{id}/archive` (admins and
//! client engineers; the archive is the client's copy of the whole record).

use axum::extract::{Path, State};
use axum::http::header;
use axum::response::IntoResponse;
use utoipa_axum::router::OpenApiRouter;
use utoipa_axum::routes;

use super::doc::{IdPath, Refusals};

use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, project_of, require};

/// Routes of this module.
pub fn router() -> OpenApiRouter<AppState> {
    OpenApiRouter::new().routes(routes!(download))
}

/// The project's handover archive (zip).
///
/// Every certificate revision, records as CSV and JSON, the audit log, and a manifest of
/// SHA-256 hashes (administrators and client engineers). Built in memory and sent as one file.
#[utoipa::path(get, path = "/api/v1/projects/{id}/archive", tag = "transfer",
    params(IdPath),
    responses((status = 200, description = "The archive", content_type = "application/zip", body = [u8],
        headers(("Content-Disposition" = String, description = "attachment; filename=…"))), Refusals))]
async fn download(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
) -> Result<impl IntoResponse> {
    let actor = if caller.is_admin() {
        project_of(&s.db, Scope::Project(id)).await?;
        caller.actor()
    } else {
        require(&s.db, &caller, Scope::Project(id), Action::TakeArchive).await?
    };
    let (out, summary) =
        crate::archive::write(&s.db, id, &actor.name, std::io::Cursor::new(Vec::new())).await?;
    tracing::info!(project = %summary.project_code, files = summary.files, by = %actor.name, "handover archive downloaded");
    let disposition = format!(
        "attachment; filename=\"{}\"",
        crate::archive::file_name(&summary.project_code)
    );
    Ok((
        [
            (header::CONTENT_TYPE, "application/zip".to_string()),
            (header::CONTENT_DISPOSITION, disposition),
        ],
        out.into_inner(),
    ))
}
