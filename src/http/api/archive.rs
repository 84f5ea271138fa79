//! The handover archive download: `GET /api/v1/projects/{id}/archive` (admins and
//! client engineers; the archive is the client's copy of the whole record).

use axum::Router;
use axum::extract::{Path, State};
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;

use crate::app::AppState;
use crate::auth::Action;
use crate::error::Result;
use crate::http::caller::{Caller, Scope, project_of, require};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/api/v1/projects/{id}/archive", get(download))
}

/// Builds the archive in memory and sends it as one zip file.
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
