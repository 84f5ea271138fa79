//! Review queue, certificate list, a certificate's download page, and the verify page.

use askama::Template;
use axum::Router;
use axum::extract::{Multipart, Path, State};
use axum::routing::get;

use super::{PageError, PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::domain::LotState;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::ledger::{setup, verify};
use crate::present::Units;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/projects/{id}/review", get(queue))
        .route("/projects/{id}/certificates", get(certificates))
        .route("/certificates/{id}", get(certificate))
        .route("/verify", get(verify_form).post(verify_post))
}

/// A lot waiting for review.
struct QueueRow {
    id: i64,
    code: String,
    place: String,
    since: String,
    by: String,
}

#[derive(Template)]
#[template(path = "review.html")]
struct QueuePage {
    nav: ProjectNav,
    name: String,
    rows: Vec<QueueRow>,
}

async fn queue(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let p = super::readable_project(&s, &caller, id).await?;
    let u = Units::of(&p);
    let mut rows = Vec::new();
    for l in db::lots::in_state(&s.db, id, LotState::Submitted).await? {
        let by = db::lots::transitions(&s.db, l.id)
            .await?
            .into_iter()
            .rev()
            .find(|t| t.to_state == LotState::Submitted)
            .map(|t| t.actor)
            .unwrap_or_default();
        rows.push(QueueRow {
            id: l.id,
            place: format!(
                "{} layer {} · {} to {}",
                l.zone_name,
                l.layer_number,
                u.chainage(l.chainage_from_m),
                u.chainage(l.chainage_to_m)
            ),
            since: crate::clock::display(&l.state_changed_at),
            code: l.code,
            by,
        });
    }
    render(&QueuePage {
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        name: p.name,
        rows,
    })
}

/// The code of a certificate's lot (blank if the lot is gone).
async fn lot_code(s: &AppState, lot_id: i64) -> crate::error::Result<String> {
    Ok(db::lots::get(&s.db, lot_id)
        .await?
        .map(|l| l.code)
        .unwrap_or_default())
}

/// A certificate revision in a list.
struct CertRow {
    id: i64,
    number: String,
    revision: i64,
    lot_id: i64,
    lot: String,
    issued: String,
    by: String,
    current: bool,
    /// Withdrawn when its lot was reopened.
    withdrawn: bool,
}

#[derive(Template)]
#[template(path = "certificates.html")]
struct CertificatesPage {
    nav: ProjectNav,
    name: String,
    rows: Vec<CertRow>,
}

async fn certificates(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
) -> PageResult {
    let p = super::readable_project(&s, &caller, id).await?;
    let mut rows = Vec::new();
    for c in db::certificates::for_project(&s.db, id).await? {
        let lot = lot_code(&s, c.lot_id).await?;
        rows.push(CertRow {
            current: c.is_current(),
            withdrawn: c.withdrawn_at.is_some(),
            id: c.id,
            number: c.number,
            revision: c.revision,
            lot_id: c.lot_id,
            lot,
            issued: crate::clock::display(&c.issued_at),
            by: c.issued_by,
        });
    }
    render(&CertificatesPage {
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        name: p.name,
        rows,
    })
}

#[derive(Template)]
#[template(path = "certificate.html")]
struct CertificatePage {
    nav: ProjectNav,
    id: i64,
    number: String,
    revision: i64,
    lot_id: i64,
    lot: String,
    issued: String,
    by: String,
    sha256: String,
    code: String,
    current: bool,
    superseded: String,
    /// "when, by whom: why" when the lot was reopened; empty otherwise.
    withdrawn: String,
    others: Vec<CertRow>,
}

async fn certificate(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Certificate(id), Action::Read).await?;

    let c = verify::require_certificate(&s.db, id).await?;
    let p = setup::require_project(&s.db, c.project_id).await?;
    let lot = lot_code(&s, c.lot_id).await?;
    let others = db::certificates::for_lot(&s.db, c.lot_id)
        .await?
        .into_iter()
        .filter(|o| o.id != c.id)
        .map(|o| CertRow {
            current: o.is_current(),
            withdrawn: o.withdrawn_at.is_some(),
            id: o.id,
            number: o.number,
            revision: o.revision,
            lot_id: o.lot_id,
            lot: lot.clone(),
            issued: crate::clock::display(&o.issued_at),
            by: o.issued_by,
        })
        .collect();
    render(&CertificatePage {
        current: c.is_current(),
        nav: ProjectNav {
            id: p.id,
            name: p.code.clone(),
        },
        id,
        number: c.number,
        revision: c.revision,
        lot_id: c.lot_id,
        lot,
        issued: crate::clock::display(&c.issued_at),
        by: c.issued_by,
        sha256: c.sha256,
        code: c.verification_code,
        withdrawn: c
            .withdrawn_at
            .as_deref()
            .map(|t| {
                format!(
                    "{} by {}: {}",
                    crate::clock::display(t),
                    c.withdrawn_by.as_deref().unwrap_or(""),
                    c.withdrawn_reason.as_deref().unwrap_or("")
                )
            })
            .unwrap_or_default(),
        superseded: c
            .superseded_at
            .map(|t| crate::clock::display(&t))
            .unwrap_or_default(),
        others,
    })
}

#[derive(Template)]
#[template(path = "verify.html")]
struct VerifyPage {
    asked: bool,
    found: bool,
    current: bool,
    withdrawn: bool,
    message: String,
    certificate_id: i64,
    detail: String,
    error: String,
}

async fn verify_form() -> PageResult {
    render(&VerifyPage {
        asked: false,
        found: false,
        current: false,
        withdrawn: false,
        message: String::new(),
        certificate_id: 0,
        detail: String::new(),
        error: String::new(),
    })
}

async fn verify_post(State(s): State<AppState>, mut form: Multipart) -> PageResult {
    let bad = |m: String| {
        PageError(AppError::BadRequest {
            field: "form".into(),
            message: m,
        })
    };
    let mut code = String::new();
    let mut hash = String::new();
    let mut pdf: Vec<u8> = Vec::new();
    while let Some(field) = form.next_field().await.map_err(|e| bad(e.to_string()))? {
        match field.name().unwrap_or("") {
            "code" => code = field.text().await.map_err(|e| bad(e.to_string()))?,
            "sha256" => hash = field.text().await.map_err(|e| bad(e.to_string()))?,
            "pdf" => {
                pdf = field
                    .bytes()
                    .await
                    .map_err(|e| bad(e.to_string()))?
                    .to_vec()
            }
            _ => {}
        }
    }
    let query = if !pdf.is_empty() {
        verify::Query::Pdf(pdf)
    } else if !code.trim().is_empty() {
        verify::Query::Code(code)
    } else if !hash.trim().is_empty() {
        verify::Query::Hash(hash)
    } else {
        return super::render_status(
            axum::http::StatusCode::UNPROCESSABLE_ENTITY,
            &VerifyPage {
                asked: false,
                found: false,
                current: false,
                withdrawn: false,
                message: String::new(),
                certificate_id: 0,
                detail: String::new(),
                error: "Give a verification code, a SHA-256, or choose a PDF file.".into(),
            },
        );
    };
    let v = verify::verify(&s.db, query).await?;
    let found = v["found"].as_bool().unwrap_or(false);
    render(&VerifyPage {
        asked: true,
        found,
        current: v["current"].as_bool().unwrap_or(false),
        withdrawn: v["withdrawn"].as_bool().unwrap_or(false),
        message: v["message"].as_str().unwrap_or("").to_string(),
        certificate_id: v["certificate"]["id"].as_i64().unwrap_or(0),
        detail: if found {
            format!(
                "lot {} · issued {} by {} · SHA-256 {}",
                v["lot_code"].as_str().unwrap_or(""),
                crate::clock::display(v["certificate"]["issued_at"].as_str().unwrap_or("")),
                v["certificate"]["issued_by"].as_str().unwrap_or(""),
                v["certificate"]["sha256"].as_str().unwrap_or("")
            )
        } else {
            String::new()
        },
        error: String::new(),
    })
}
