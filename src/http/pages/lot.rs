//! The lot sheet, and the form actions a lot allows (submit, accept, reject, void).

use crate::domain::{LotState, Standing};
use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::{get, post};

use super::{PageError, PageResult, ProjectNav, cautions, see_other};
use crate::app::AppState;
use crate::auth::{Action, Role, allows};
use crate::charts::{RcBar, RcChartInput, RcStatus, rc_chart};
use crate::db;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::ApiQuery;
use crate::http::extract::parse_form;
use crate::ledger::lot_report::{LotReport, TestLine, TestWindow};
use crate::ledger::{self, lot_report};
use crate::present::{self, Units};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/lots/{id}", get(sheet))
        .route("/lots/{id}/submit", post(submit))
        .route("/lots/{id}/accept", post(accept))
        .route("/lots/{id}/reject", post(reject))
        .route("/field-tests/{id}/void", post(void))
}

/// A test row on the sheet, already formatted.
pub struct Row {
    pub id: i64,
    pub number: String,
    pub date: String,
    pub chainage: String,
    pub offset: String,
    pub method: String,
    pub wet: String,
    pub water: String,
    pub dry: String,
    pub rc: String,
    pub dev: String,
    pub result: String,
    pub struck: bool,
    pub note: String,
    pub can_retest: bool,
    pub can_void: bool,
}

/// Formats the lot's tests inside `window` as sheet rows.
pub fn rows(
    r: &LotReport,
    window: TestWindow,
    u: &Units,
    may_retest: bool,
    may_void: bool,
) -> Vec<Row> {
    let takes_changes = r.lot.state != LotState::Submitted;
    let retested = r.tests_with_live_retest();
    r.lines_in(window)
        .iter()
        .map(|t| Row {
            id: t.test.id,
            number: t.test.number.clone(),
            date: crate::clock::display(&t.test.tested_at),
            chainage: u.chainage(t.test.chainage_m),
            offset: u.offset(t.test.offset_m),
            method: t.test.method.words(),
            wet: u.density(t.test.wet_density_kg_m3),
            water: format!("{:.1}", t.test.water_content_pct),
            dry: u.density(t.test.dry_density_kg_m3),
            rc: present::pct(t.relative_compaction_pct),
            dev: present::signed(t.moisture_deviation_pct),
            result: t.result().to_string(),
            struck: !t.standing.counted(),
            note: note(t, u),
            can_retest: may_retest
                && takes_changes
                && !t.passed
                && t.test.void_reason.is_none()
                && !retested.contains(&t.test.id),
            can_void: may_void && takes_changes && t.test.void_reason.is_none(),
        })
        .collect()
}

/// What the sheet says beside a test: cautions, standing, retest, void, failure reasons.
fn note(t: &TestLine, u: &Units) -> String {
    let mut notes = Vec::new();
    notes.extend(t.cautions());
    if t.standing == Standing::EarlierSample {
        notes.push("earlier sample: on record, out of the statistics".to_string());
    }
    if let Some(n) = &t.retest_of_number {
        notes.push(format!("retest of {n}"));
    }
    if let Some(v) = &t.test.void_reason {
        notes.push(format!(
            "void: {v} ({})",
            t.test.voided_by.clone().unwrap_or_default()
        ));
    }
    if let Some(b) = &t.superseded_by {
        notes.push(format!("superseded by {b}"));
    }
    if t.standing.counted() && !t.passed {
        notes.extend(t.reasons.iter().cloned());
    }
    if let Some(c) = t.test.coarse_pct.filter(|c| *c > 0.0) {
        notes.push(format!(
            "oversize {c:.0} %, reference {}",
            u.density_with_unit(t.reference_mdd_kg_m3.unwrap_or(0.0))
        ));
    }
    notes.join("; ")
}

/// The sheet's page of the test table: which rows, in words, and the links either side.
struct Pager {
    /// "Tests 501–1,000 of 90,000 (page 2 of 180)".
    words: String,
    prev: Option<String>,
    next: Option<String>,
    /// More than one page: the pager is shown.
    paged: bool,
}

impl Pager {
    /// Page `page` (from 1) of a lot of `total` tests; refused past the last page.
    fn new(lot_id: i64, page: usize, total: usize) -> crate::error::Result<Self> {
        let per = TestWindow::SHEET_ROWS;
        let pages = total.div_ceil(per).max(1);
        if page == 0 || page > pages {
            return Err(AppError::invalid(
                "page",
                format!(
                    "must be between 1 and {pages}: the lot's {} tests fill {pages} page{} of {per}",
                    present::grouped(total as u64),
                    if pages == 1 { "" } else { "s" }
                ),
            ));
        }
        let range = TestWindow::sheet_page(page).range(total);
        let href = |p: usize| format!("/lots/{lot_id}?page={p}#tests-heading");
        let words = if range.is_empty() {
            "No tests yet".to_string()
        } else {
            format!(
                "Tests {}–{} of {} (page {page} of {pages})",
                present::grouped(range.start as u64 + 1),
                present::grouped(range.end as u64),
                present::grouped(total as u64)
            )
        };
        Ok(Self {
            words,
            prev: (page > 1).then(|| href(page - 1)),
            next: (page < pages).then(|| href(page + 1)),
            paged: pages > 1,
        })
    }
}

/// The RC-per-test chart of a lot.
pub fn chart(r: &LotReport) -> String {
    let tests = r
        .tests
        .iter()
        .filter_map(|t| {
            let rc = t.relative_compaction_pct?;
            let status = match t.standing {
                Standing::Voided => RcStatus::Voided,
                Standing::Superseded => RcStatus::Superseded,
                _ if t.passed => RcStatus::Pass,
                _ => RcStatus::Fail,
            };
            Some(RcBar {
                label: t.test.number.clone(),
                rc_pct: rc,
                status,
                href: None,
            })
        })
        .collect();
    rc_chart(&RcChartInput {
        title: format!("Relative compaction per test, lot {}", r.lot.code),
        tests,
        limit_pct: r.clause.rc_min_pct,
        mean_pct: r.verdict.mean,
    })
}

/// A certificate revision listed on the sheet.
struct CertLine {
    id: i64,
    number: String,
    revision: i64,
    issued: String,
    current: bool,
    /// Withdrawn when its lot was reopened.
    withdrawn: bool,
}

/// A state change listed on the sheet.
struct HistoryLine {
    at: String,
    actor: String,
    what: String,
}

#[derive(Template)]
#[template(path = "lot.html")]
struct LotPage {
    nav: ProjectNav,
    id: i64,
    code: String,
    state: String,
    state_label: String,
    zone: String,
    layer: i64,
    from: String,
    to: String,
    band: String,
    length: String,
    area: String,
    clause: String,
    clause_title: String,
    rc_min: String,
    window: String,
    rule: String,
    frequency: String,
    lab_id: i64,
    lab_code: String,
    source: String,
    mdd: String,
    omc: String,
    gs: String,
    effort: String,
    density_unit: String,
    rows: Vec<Row>,
    pager: Pager,
    accepted: bool,
    n: usize,
    mean: String,
    sd: String,
    min: String,
    max: String,
    q: String,
    pwl: String,
    reasons: Vec<String>,
    required: u32,
    owed: u32,
    blockers: Vec<String>,
    chart: String,
    can_add: bool,
    can_submit: bool,
    show_blockers: bool,
    role: String,
    can_review: bool,
    can_reissue: bool,
    cert_stale: bool,
    certs: Vec<CertLine>,
    history: Vec<HistoryLine>,
    message: String,
    cautions: Vec<String>,
}

/// The sheet's query: which page of the test table (from 1; the first when not given).
#[derive(Debug, Default, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct SheetQuery {
    page: Option<usize>,
}

async fn sheet(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    ApiQuery(q): ApiQuery<SheetQuery>,
) -> PageResult {
    require(&s.db, &caller, Scope::Lot(id), Action::Read).await?;
    let page = q.page.unwrap_or(1);
    sheet_with(&s, &caller, id, page, String::new(), StatusCode::OK).await
}

/// Page `page` of the lot sheet with `message` above it (a refused action's reasons),
/// answered with `status`.
async fn sheet_with(
    s: &AppState,
    caller: &Caller,
    id: i64,
    page: usize,
    message: String,
    status: StatusCode,
) -> PageResult {
    let r = lot_report::build(&s.db, id).await?;
    let pager = Pager::new(id, page, r.tests.len())?;
    let role = caller.role_in(&s.db, r.project.id).await?;
    let records = Records {
        certs: cert_lines(s, id).await?,
        history: history_lines(s, id).await?,
        pager,
        window: TestWindow::sheet_page(page),
    };
    let page = LotPage::new(&r, role, records, message);
    super::render_status(status, &page)
}

/// The lot's certificate revisions, as stored.
async fn cert_lines(s: &AppState, lot_id: i64) -> crate::error::Result<Vec<CertLine>> {
    Ok(db::certificates::for_lot(&s.db, lot_id)
        .await?
        .into_iter()
        .map(|c| CertLine {
            current: c.is_current(),
            withdrawn: c.withdrawn_at.is_some(),
            id: c.id,
            number: c.number,
            revision: c.revision,
            issued: crate::clock::display(&c.issued_at),
        })
        .collect())
}

/// The lot's state changes, with their comments.
async fn history_lines(s: &AppState, lot_id: i64) -> crate::error::Result<Vec<HistoryLine>> {
    Ok(db::lots::transitions(&s.db, lot_id)
        .await?
        .into_iter()
        .map(|t| HistoryLine {
            at: crate::clock::display(&t.at),
            actor: t.actor,
            what: if t.comment.is_empty() {
                format!("{} → {}", t.from_state, t.to_state)
            } else {
                format!("{} → {}: {}", t.from_state, t.to_state, t.comment)
            },
        })
        .collect())
}

/// What the sheet lists under the lot besides its report, and which tests it shows.
struct Records {
    certs: Vec<CertLine>,
    history: Vec<HistoryLine>,
    pager: Pager,
    window: TestWindow,
}

/// The clause's test frequency in words: "at least 3 per lot, one per 500 m²".
fn frequency_words(c: &db::clauses::Clause, u: &Units) -> String {
    let mut frequency = vec![format!("at least {} per lot", c.min_tests_per_lot)];
    if let Some(a) = c.area_per_test_m2 {
        frequency.push(format!("one per {}", u.area(a)));
    }
    if let Some(l) = c.length_per_test_m {
        frequency.push(format!("one per {}", u.length(l)));
    }
    frequency.join(", ")
}

/// The moisture window, with the air-voids limit when the clause sets one.
fn window_words(v: &lot_report::Verdict) -> String {
    match &v.air_voids_limit {
        Some(av) => format!("{}; air voids {av}", v.moisture_window),
        None => v.moisture_window.clone(),
    }
}

impl LotPage {
    /// The sheet of a judged lot as the caller's `role` sees it.
    fn new(r: &LotReport, role: Option<Role>, records: Records, message: String) -> Self {
        let may = |a: Action| role.is_some_and(|r| allows(r, a));
        let u = Units::of(&r.project);
        let (c, v, lot) = (&r.clause, &r.verdict, &r.lot);
        LotPage {
            nav: ProjectNav {
                id: r.project.id,
                name: r.project.code.clone(),
            },
            id: lot.id,
            code: lot.code.clone(),
            state: r.display_state.token().to_string(),
            state_label: r.display_state.label().to_string(),
            zone: lot.zone_name.clone(),
            layer: lot.layer_number,
            from: u.chainage(lot.chainage_from_m),
            to: u.chainage(lot.chainage_to_m),
            band: format!(
                "{} to {}",
                u.offset(lot.offset_left_m),
                u.offset(lot.offset_right_m)
            ),
            length: u.length(r.length_m),
            area: u.area(r.area_m2),
            clause: c.code.clone(),
            clause_title: c.title.clone(),
            rc_min: format!("{:.1} %", c.rc_min_pct),
            window: window_words(v),
            rule: v.rule_label.clone(),
            frequency: frequency_words(c, &u),
            lab_id: r.lab_test.id,
            lab_code: r.lab_test.code.clone(),
            source: format!("{} ({})", r.source.name, r.source.code),
            mdd: u.density_with_unit(r.lab_test.max_dry_density_kg_m3),
            omc: format!("{:.1} %", r.lab_test.optimum_water_content_pct),
            gs: format!("{:.2}", r.lab_test.specific_gravity),
            effort: r.lab_test.effort.label(),
            density_unit: u.density_unit().to_string(),
            rows: rows(
                r,
                records.window,
                &u,
                may(Action::EnterTests),
                may(Action::VoidTest),
            ),
            pager: records.pager,
            accepted: v.accepted,
            n: v.n,
            mean: present::pct(v.mean),
            sd: v.std_dev.map_or("–".into(), |x| format!("{x:.2}")),
            min: present::pct(v.min),
            max: present::pct(v.max),
            q: v.quality_index.map_or("–".into(), |x| format!("{x:.2}")),
            pwl: present::pct(v.pwl),
            reasons: v.reasons.clone(),
            required: r.tests_required,
            owed: r.tests_owed,
            blockers: r.submit_blockers.clone(),
            chart: chart(r),
            can_add: may(Action::EnterTests) && lot.state.takes_tests(),
            can_submit: may(Action::SubmitLot)
                && lot.state.may_become(LotState::Submitted)
                && r.submit_blockers.is_empty(),
            show_blockers: lot.state.may_become(LotState::Submitted),
            can_review: may(Action::ReviewLot) && lot.state == LotState::Submitted,
            can_reissue: may(Action::ReviewLot)
                && lot.state == LotState::Accepted
                && !r.certificate_current,
            role: role.map_or("no project role".to_string(), |r| r.label().to_string()),
            cert_stale: lot.state == LotState::Accepted
                && r.certificate.is_some()
                && !r.certificate_current,
            certs: records.certs,
            history: records.history,
            message,
            cautions: cautions(),
        }
    }
}

/// The comment box of a review form.
#[derive(serde::Deserialize)]
struct CommentForm {
    #[serde(default)]
    comment: String,
}

/// A review step posted from the sheet.
#[derive(Clone, Copy)]
enum Step {
    Submit,
    Accept,
    Reject,
}

impl Step {
    /// The permission the step needs.
    fn action(self) -> Action {
        match self {
            Step::Submit => Action::SubmitLot,
            Step::Accept | Step::Reject => Action::ReviewLot,
        }
    }
}

/// Runs a review step; on refusal, re-renders the sheet with the reasons and the right status.
async fn act(s: AppState, caller: Caller, id: i64, body: &[u8], step: Step) -> PageResult {
    let a = require(&s.db, &caller, Scope::Lot(id), step.action()).await?;

    let form: CommentForm = parse_form(body).map_err(PageError)?;
    let c = form.comment;
    let done = match step {
        Step::Submit => ledger::review::submit(&s.db, id, &c, &a).await,
        Step::Accept => ledger::review::accept(&s.db, id, &c, &a).await,
        Step::Reject => ledger::review::reject(&s.db, id, &c, &a).await,
    };
    match done {
        Ok(_) => Ok(see_other(&format!("/lots/{id}"))),
        Err(e @ (AppError::Conflict { .. } | AppError::Invalid { .. })) => {
            let mut msg = e.user_message();
            if !e.reasons().is_empty() {
                msg = format!("{msg}: {}", e.reasons().join("; "));
            }
            sheet_with(&s, &caller, id, 1, msg, e.status()).await
        }
        Err(e) => Err(e.into()),
    }
}

async fn submit(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    act(s, caller, id, &body, Step::Submit).await
}

async fn accept(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    act(s, caller, id, &body, Step::Accept).await
}

async fn reject(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    act(s, caller, id, &body, Step::Reject).await
}

/// The reason box of the void form.
#[derive(serde::Deserialize)]
struct VoidForm {
    #[serde(default)]
    reason: String,
}

async fn void(
    State(s): State<AppState>,
    Path(id): Path<i64>,
    caller: Caller,
    body: axum::body::Bytes,
) -> PageResult {
    let a = require(&s.db, &caller, Scope::Test(id), Action::VoidTest).await?;

    let form: VoidForm = parse_form(&body).map_err(PageError)?;
    let test = ledger::field::require_test(&s.db, id).await?;
    match ledger::field::void_test(&s.db, id, &form.reason, &a).await {
        Ok(_) => Ok(see_other(&format!("/lots/{}", test.lot_id))),
        Err(e @ (AppError::Conflict { .. } | AppError::Invalid { .. })) => {
            sheet_with(
                &s,
                &caller,
                test.lot_id,
                1,
                format!("void {}: {}", test.number, e.user_message()),
                e.status(),
            )
            .await
        }
        Err(e) => Err(e.into()),
    }
}
