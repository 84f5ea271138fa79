//! A project's set-up page: what the contract has so far and a form for each next step.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::routing::get;

use super::Context;
use super::summary::{Terms, clause_words};
use crate::app::AppState;
use crate::auth::{Action, allows};
use crate::db;
use crate::domain::{Approval, CurveStatus};
use crate::error::AppError;
use crate::http::caller::Caller;
use crate::http::pages::{PageError, PageResult, ProjectNav, render};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/projects/{id}/setup", get(hub))
}

/// A line of the page: words and, when it has a page, its link.
pub struct Line {
    pub text: String,
    pub href: String,
    /// A further action on the line (e.g. enter a lab curve for a source).
    pub action_href: String,
    pub action_label: String,
}

impl Line {
    fn plain(text: String, href: String) -> Self {
        Self {
            text,
            href,
            action_href: String::new(),
            action_label: String::new(),
        }
    }
}

/// A clause with its rule in words.
pub struct ClauseLine {
    pub title: String,
    pub words: Vec<String>,
}

#[derive(Template)]
#[template(path = "setup/hub.html")]
struct HubPage {
    nav: ProjectNav,
    id: i64,
    project: String,
    may_people: bool,
    may_setup: bool,
    may_tokens: bool,
    members: Vec<(String, String)>,
    clauses: Vec<ClauseLine>,
    sources: Vec<Line>,
    moulds: Vec<String>,
    layers: Vec<String>,
    lots: Vec<Line>,
}

/// Who may see the set-up page: admins (people) and those who may change set-up or tokens.
struct Rights {
    people: bool,
    setup: bool,
    tokens: bool,
}

async fn rights(s: &AppState, caller: &Caller, project_id: i64) -> PageResult<Rights> {
    let role = caller.role_in(&s.db, project_id).await?;
    let r = Rights {
        people: caller.is_admin(),
        setup: role.is_some_and(|r| allows(r, Action::ManageSetup)),
        tokens: role.is_some_and(|r| allows(r, Action::ManageTokens)),
    };
    if !(r.people || r.setup || r.tokens) {
        return Err(PageError(AppError::forbidden(
            "only administrators and QC managers set a project up",
        )));
    }
    Ok(r)
}

async fn hub(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let ctx = Context::load(&s, &caller, id, Action::Read).await?;
    let r = rights(&s, &caller, id).await?;
    let u = &ctx.units;
    let members = db::users::members(&s.db, id)
        .await?
        .into_iter()
        .map(|(user, name, role)| {
            let role = role.label();
            (user.clone(), format!("{name} ({user}), {role}"))
        })
        .collect();
    let clauses = db::clauses::list(&s.db, id)
        .await?
        .iter()
        .map(|c| ClauseLine {
            title: format!("{} {}", c.code, c.title).trim().to_string(),
            words: clause_words(&Terms::from(c)),
        })
        .collect();
    let sources = source_lines(&s, id).await?;
    let moulds = db::moulds::list(&s.db, id)
        .await?
        .into_iter()
        .map(|m| {
            format!(
                "{} · {:.1} cm³ · calibrated {}",
                m.code, m.volume_cm3, m.calibrated_on
            )
        })
        .collect();
    let layers = db::layers::list(&s.db, id)
        .await?
        .into_iter()
        .map(|l| match l.thickness_mm {
            Some(t) => format!("{} layer {} · {t:.0} mm", l.zone_name, l.number),
            None => format!("{} layer {}", l.zone_name, l.number),
        })
        .collect();
    let lots = lot_lines(&s, id, u).await?;
    render(&HubPage {
        nav: ctx.nav.clone(),
        id,
        project: format!("{} {}", ctx.project.code, ctx.project.name),
        may_people: r.people,
        may_setup: r.setup,
        may_tokens: r.tokens,
        members,
        clauses,
        sources,
        moulds,
        layers,
        lots,
    })
}

/// Each borrow source with its active curves (those awaiting approval said so) and the
/// link to enter a new curve.
async fn source_lines(s: &AppState, id: i64) -> PageResult<Vec<Line>> {
    let curves = db::lab_tests::list_for_project(&s.db, id).await?;
    Ok(db::sources::list(&s.db, id)
        .await?
        .into_iter()
        .map(|src| {
            let active: Vec<String> = curves
                .iter()
                .filter(|t| t.source_id == src.id && t.status == CurveStatus::Active)
                .map(|t| {
                    if t.approval == Approval::NeedsApproval {
                        format!("{} (awaiting approval)", t.code)
                    } else {
                        t.code.clone()
                    }
                })
                .collect();
            Line {
                text: format!(
                    "{} {} · Gs {:.2} · curves: {}",
                    src.code,
                    src.name,
                    src.gs_fines,
                    if active.is_empty() {
                        "none yet".into()
                    } else {
                        active.join(", ")
                    }
                ),
                href: String::new(),
                action_href: format!("/sources/{}/setup/lab-curves/new", src.id),
                action_label: format!("Enter a lab curve for {}", src.code),
            }
        })
        .collect())
}

/// The project's lots (the first 200), each linked to its sheet.
async fn lot_lines(s: &AppState, id: i64, u: &crate::present::Units) -> PageResult<Vec<Line>> {
    Ok(db::lots::list(
        &s.db,
        id,
        &db::lots::LotFilter {
            limit: 200,
            ..Default::default()
        },
    )
    .await?
    .into_iter()
    .map(|l| {
        Line::plain(
            format!(
                "{} · {} layer {} · {} to {}",
                l.code,
                l.zone_name,
                l.layer_number,
                u.chainage(l.chainage_from_m),
                u.chainage(l.chainage_to_m)
            ),
            format!("/lots/{}", l.id),
        )
    })
    .collect())
}
