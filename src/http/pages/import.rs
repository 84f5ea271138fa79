//! The import page: a CSV file of field tests checked (dry run) or imported (one
//! transaction) through one of the project's saved column mappings.
//!
//! The form posts `multipart/form-data`; the file part is spooled to a temporary file
//! (`http::upload`) and `transfer::import_csv` reads it from there. Without JavaScript
//! the form posts as usual; `static/import.js` sends the same form with
//! XMLHttpRequest to show the upload's progress, then shows the server's answer.

use askama::Template;
use axum::Router;
use axum::extract::multipart::{Field, MultipartRejection};
use axum::extract::{DefaultBodyLimit, Multipart, Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post};

use super::{PageError, PageResult, ProjectNav, render, render_status};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::{AppError, Result};
use crate::http::api::transfer::MAX_IMPORT_BYTES;
use crate::http::caller::{Caller, Scope, require};
use crate::http::upload::{Spooled, spool_field};
use crate::ledger::import::{AuditMode, ImportOptions, ImportReport};
use crate::ledger::{Actor, setup};
use crate::transfer;

/// The form (mounted with the ordinary body limit).
pub fn router() -> Router<AppState> {
    Router::new().route("/projects/{id}/import", get(form))
}

/// The upload (mounted with the import body limit). The file is streamed to disk,
/// so axum's default limit for buffered bodies is lifted here.
pub fn upload_router() -> Router<AppState> {
    Router::new()
        .route("/projects/{id}/import", post(upload))
        .layer(DefaultBodyLimit::disable())
}

#[derive(Template)]
#[template(path = "import.html")]
struct ImportPage {
    nav: ProjectNav,
    name: String,
    /// Names of the project's saved mappings.
    mappings: Vec<String>,
    /// The mapping selected in the form.
    chosen: String,
    max_bytes: usize,
    max_mib: usize,
    /// "field: reason" when the form could not be used; nothing was written.
    error: String,
    /// What the last file did, and whether it was a dry run.
    report: Option<ImportReport>,
    checked: bool,
}

impl ImportPage {
    /// A clean check with something new: Import is the button to press next.
    fn ready(&self) -> bool {
        self.checked
            && self
                .report
                .as_ref()
                .is_some_and(|r| !r.refused() && r.new_tests > 0)
    }

    async fn load(pool: &db::Pool, id: i64) -> Result<Self> {
        let p = setup::require_project(pool, id).await?;
        let mappings = db::bulk::list_mappings(pool, id)
            .await?
            .into_iter()
            .map(|m| m.name)
            .collect::<Vec<_>>();
        Ok(Self {
            nav: ProjectNav {
                id,
                name: p.code.clone(),
            },
            name: p.name,
            chosen: mappings.first().cloned().unwrap_or_default(),
            mappings,
            max_bytes: MAX_IMPORT_BYTES,
            max_mib: MAX_IMPORT_BYTES / (1024 * 1024),
            error: String::new(),
            report: None,
            checked: true,
        })
    }
}

async fn form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    render(&ImportPage::load(&s.db, id).await?)
}

async fn upload(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    form: std::result::Result<Multipart, MultipartRejection>,
) -> PageResult {
    let actor = require(&s.db, &caller, Scope::Project(id), Action::ManageSetup).await?;
    let mut page = ImportPage::load(&s.db, id).await?;
    let outcome = match read_form(form).await {
        Ok(sent) => {
            if !sent.mapping.is_empty() {
                page.chosen.clone_from(&sent.mapping);
            }
            run(&s.db, id, &page.mappings, sent, actor).await
        }
        Err(e) => Err(e),
    };
    match outcome {
        Ok((commit, report)) => {
            let status = if report.refused() {
                StatusCode::UNPROCESSABLE_ENTITY
            } else {
                StatusCode::OK
            };
            page.checked = !commit;
            page.report = Some(report);
            render_status(status, &page)
        }
        Err(e @ AppError::Internal(_)) => Err(PageError(e)),
        Err(e) => {
            page.error = format!("{}: {}", e.field(), e.user_message());
            render_status(e.status(), &page)
        }
    }
}

/// The form as sent; checked by `run`.
#[derive(Default)]
struct Sent {
    mapping: String,
    mode: String,
    file_name: String,
    file: Option<Spooled>,
}

/// Reads every part of the form, spooling the file part to disk as it arrives.
async fn read_form(form: std::result::Result<Multipart, MultipartRejection>) -> Result<Sent> {
    let mut form = form.map_err(|e| AppError::BadRequest {
        field: "file".into(),
        message: format!(
            "the form must be sent as multipart/form-data ({})",
            e.body_text()
        ),
    })?;
    let mut sent = Sent::default();
    while let Some(part) = form.next_field().await.map_err(|e| AppError::BadRequest {
        field: "file".into(),
        message: format!("the form could not be read: {}", e.body_text()),
    })? {
        match part.name().unwrap_or("") {
            "file" => {
                let name = part.file_name().unwrap_or("");
                // Some browsers send the whole path of the chosen file.
                sent.file_name = name.rsplit(['/', '\\']).next().unwrap_or("").to_string();
                sent.file = Some(spool_field(part, "file").await?);
            }
            "mapping" => sent.mapping = short_text(part, "mapping").await?,
            "mode" => sent.mode = short_text(part, "mode").await?,
            other => {
                return Err(AppError::invalid(
                    other,
                    "is not a field of the import form (mapping, mode, file)",
                ));
            }
        }
    }
    Ok(sent)
}

/// A small text field of the form, trimmed.
async fn short_text(mut part: Field<'_>, field: &str) -> Result<String> {
    let mut bytes = Vec::new();
    while let Some(chunk) = part.chunk().await.map_err(|e| AppError::BadRequest {
        field: field.into(),
        message: e.body_text(),
    })? {
        bytes.extend_from_slice(&chunk);
        if bytes.len() > 200 {
            return Err(AppError::invalid(field, "is longer than 200 bytes"));
        }
    }
    String::from_utf8(bytes)
        .map(|t| t.trim().to_string())
        .map_err(|_| AppError::invalid(field, "is not UTF-8 text"))
}

/// Checks the form, then checks or commits the file; returns (committed?, report).
async fn run(
    pool: &db::Pool,
    project_id: i64,
    saved: &[String],
    sent: Sent,
    actor: Actor,
) -> Result<(bool, ImportReport)> {
    if sent.mapping.is_empty() {
        return Err(AppError::invalid(
            "mapping",
            "choose one of the project's saved column mappings",
        ));
    }
    if !saved.contains(&sent.mapping) {
        return Err(AppError::invalid(
            "mapping",
            format!("this project has no saved mapping named '{}'", sent.mapping),
        ));
    }
    let file = match sent.file {
        Some(f) if f.bytes > 0 => f,
        Some(_) if !sent.file_name.is_empty() => {
            return Err(AppError::invalid(
                "file",
                format!("'{}' is empty", sent.file_name),
            ));
        }
        _ => return Err(AppError::invalid("file", "choose a CSV file")),
    };
    let commit = match sent.mode.as_str() {
        "check" => false,
        "commit" => true,
        "" => return Err(AppError::invalid("mode", "press Check file or Import")),
        other => {
            return Err(AppError::invalid(
                "mode",
                format!("must be check or commit, not '{other}'"),
            ));
        }
    };
    let mapping = transfer::load_mapping(pool, project_id, &sent.mapping).await?;
    let name = if sent.file_name.is_empty() {
        "upload.csv".to_string()
    } else {
        sent.file_name
    };
    let opts = ImportOptions {
        commit,
        audit: AuditMode::PerImport,
        actor,
    };
    let reader = std::io::BufReader::new(file.file);
    let report = transfer::import_csv(pool, project_id, reader, &name, &mapping, &opts).await?;
    Ok((commit, report))
}
