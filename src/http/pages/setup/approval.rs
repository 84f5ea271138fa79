//! Approving a lab curve that needs it: a QC manager reads the concerns on the
//! curve sheet and writes why the curve may still be a lot's reference.

use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, State};
use axum::routing::get;

use super::FormSpec;
use super::form::{Field, Kind, Values, decode};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::pages::{PageError, PageResult, ProjectNav, see_other};
use crate::ledger::Actor;
use crate::present::Units;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/lab-tests/{id}/approve", get(form).post(post))
}

/// Body of the approval form.
#[derive(serde::Deserialize)]
struct ApprovalInput {
    reason: String,
}

async fn spec(s: &AppState, caller: &Caller, id: i64) -> PageResult<(FormSpec, Units, Actor)> {
    let actor = require(&s.db, caller, Scope::LabTest(id), Action::ManageSetup).await?;
    let lab = db::lab_tests::get(&s.db, id).await?.ok_or_else(|| {
        PageError(AppError::not_found(
            "lab_test_id",
            "no such record in your projects",
        ))
    })?;
    let source = db::sources::get(&s.db, lab.source_id)
        .await?
        .ok_or_else(|| {
            PageError(AppError::Internal(anyhow::anyhow!(
                "lab test {id} has no source"
            )))
        })?;
    let project = crate::ledger::setup::require_project(&s.db, source.project_id).await?;
    let concerns = crate::ledger::certificate_doc::approval_words(&lab);
    Ok((
        FormSpec {
            nav: Some(ProjectNav {
                id: project.id,
                name: project.code.clone(),
            }),
            title: format!("Approve curve {} as a reference", lab.code),
            intro: format!(
                "{concerns}. The reason is kept with the curve, shown on its sheet and on every certificate that uses it."
            ),
            action_url: format!("/lab-tests/{id}/approve"),
            back_href: format!("/lab-tests/{id}"),
            back_label: "Back to the curve sheet".into(),
            fields: vec![
                Field::new(
                    "reason",
                    "Why this curve may be a reference",
                    Kind::TextArea,
                    true,
                )
                .hint("e.g. the peak is confirmed by a repeat specimen; name the evidence"),
            ],
            has_preview: false,
            submit_label: "Approve".into(),
        },
        Units::of(&project),
        actor,
    ))
}

async fn form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let (spec, _, _) = spec(&s, &caller, id).await?;
    spec.blank(&Values::new())
}

async fn post(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let (spec, units, actor) = spec(&s, &caller, id).await?;
    let values = decode(&body);
    let saved = spec
        .submit(&values, &units, async |input: ApprovalInput| {
            crate::ledger::reference::approve(&s.db, id, &input.reason, &actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |_| see_other(&format!("/lab-tests/{id}"))))
}
