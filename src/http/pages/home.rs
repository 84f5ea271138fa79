//! The projects list and a project's home page.

use std::sync::Arc;

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::routing::get;

use super::{PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::{Action, allows};
use crate::db;
use crate::domain::{DisplayState, LotState};
use crate::http::caller::Caller;
use crate::ledger::lot_report::LotReport;
use crate::ledger::overview;
use crate::present::{self, Units};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/", get(projects))
        .route("/projects/{id}", get(project_home))
        .route("/projects/{id}/sources", get(sources))
}

/// One row of the projects list.
struct ProjectRow {
    id: i64,
    code: String,
    name: String,
    contract: String,
    client: String,
}

#[derive(Template)]
#[template(path = "projects.html")]
struct ProjectsPage {
    projects: Vec<ProjectRow>,
    demo: bool,
    who: String,
    admin: bool,
    /// The latest scheduled backup's failure, shown to admins only.
    backup_failure: Option<crate::backup::schedule::Attempt>,
    /// When the last good scheduled backup was taken (with the failure).
    backup_last_good: Option<String>,
}

async fn projects(State(s): State<AppState>, caller: Caller) -> PageResult {
    let visible = caller.visible_projects(&s.db).await?;
    let projects = db::projects::list(&s.db)
        .await?
        .into_iter()
        .filter(|p| visible.as_ref().is_none_or(|ids| ids.contains(&p.id)))
        .map(|p| ProjectRow {
            id: p.id,
            code: p.code,
            name: p.name,
            contract: p.contract,
            client: p.client,
        })
        .collect();
    let admin = caller.is_admin();
    render(&ProjectsPage {
        projects,
        demo: s.settings.demo,
        who: caller.actor().name,
        admin: caller.is_admin(),
        backup_failure: s.backups.failure().filter(|_| admin),
        backup_last_good: s
            .backups
            .last_good()
            .filter(|_| admin)
            .map(|g| crate::clock::display(&g.at)),
    })
}

/// A lot named in a home-page list.
pub struct LotLink {
    pub id: i64,
    pub code: String,
    pub place: String,
    pub note: String,
}

/// A state and how many lots are in it.
pub struct StateCount {
    pub code: String,
    pub label: String,
    pub count: usize,
}

/// A line of recent activity.
pub struct Activity {
    pub at: String,
    pub actor: String,
    pub what: String,
}

#[derive(Template)]
#[template(path = "project.html")]
struct ProjectPage {
    nav: ProjectNav,
    code: String,
    name: String,
    contract: String,
    client: String,
    contractor: String,
    states: Vec<StateCount>,
    total_lots: usize,
    tests_today: i64,
    tests_week: i64,
    tests_total: i64,
    failing: Vec<LotLink>,
    owed: Vec<LotLink>,
    queue: Vec<LotLink>,
    activity: Vec<Activity>,
    /// The caller may import a CSV file (links the import page).
    may_import: bool,
    may_setup: bool,
    /// Curves whose field points say the material may have changed.
    drift: Vec<crate::ledger::watch::DriftNote>,
    /// A newer drift run than the notes shown is under way.
    drift_pending: bool,
    /// Calibrations, leak tests and licences of the project's instruments due within 30 days.
    calibrations_due: Vec<(i64, String)>,
}

/// The display states counted on a project's home page, in the order shown.
const HOME_STATES: [DisplayState; 7] = [
    DisplayState::Open,
    DisplayState::OwedTests,
    DisplayState::Failing,
    DisplayState::Submitted,
    DisplayState::Rejected,
    DisplayState::Accepted,
    DisplayState::Certified,
];

/// How many lots are in each display state.
fn state_counts(reports: &[Arc<LotReport>]) -> Vec<StateCount> {
    HOME_STATES
        .iter()
        .map(|state| StateCount {
            code: state.to_string(),
            label: state.label().to_string(),
            count: reports.iter().filter(|r| r.display_state == *state).count(),
        })
        .collect()
}

/// The lists of lots that need someone: failing without a retest, owing tests, and
/// submitted for review (oldest first).
struct LotLists {
    failing: Vec<LotLink>,
    owed: Vec<LotLink>,
    queue: Vec<LotLink>,
}

fn lot_lists(reports: &[Arc<LotReport>], u: &Units) -> LotLists {
    let link = |r: &LotReport, note: String| LotLink {
        id: r.lot.id,
        code: r.lot.code.clone(),
        place: format!(
            "{} layer {}, {} to {}",
            r.lot.zone_name,
            r.lot.layer_number,
            u.chainage(r.lot.chainage_from_m),
            u.chainage(r.lot.chainage_to_m)
        ),
        note,
    };
    let takes_tests = |r: &&Arc<LotReport>| r.lot.state.takes_tests();
    let failing = reports
        .iter()
        .filter(takes_tests)
        .filter(|r| !r.failing_without_retest.is_empty())
        .map(|r| {
            let note = format!("awaiting retest: {}", r.failing_without_retest.join(", "));
            link(r, note)
        })
        .collect();
    let owed = reports
        .iter()
        .filter(takes_tests)
        .filter(|r| r.tests_owed > 0)
        .map(|r| {
            let note = format!("{} of {} tests still owed", r.tests_owed, r.tests_required);
            link(r, note)
        })
        .collect();
    let mut queue: Vec<_> = reports
        .iter()
        .filter(|r| r.lot.state == LotState::Submitted)
        .collect();
    queue.sort_by(|a, b| a.lot.state_changed_at.cmp(&b.lot.state_changed_at));
    let queue = queue
        .into_iter()
        .map(|r| {
            let note = format!(
                "submitted {}",
                crate::clock::display(&r.lot.state_changed_at)
            );
            link(r, note)
        })
        .collect();
    LotLists {
        failing,
        owed,
        queue,
    }
}

/// The project's latest audit rows in words.
async fn recent_activity(s: &AppState, id: i64) -> crate::error::Result<Vec<Activity>> {
    Ok(db::audit::recent(&s.db, id, 12)
        .await?
        .into_iter()
        .map(|a| Activity {
            at: crate::clock::display(&a.at),
            actor: a.actor,
            what: format!(
                "{} {} #{}",
                a.action,
                a.entity.replace('_', " "),
                a.entity_id.unwrap_or(0)
            ),
        })
        .collect())
}

/// Calibrations, leak tests and licences of the project's instruments due within 30 days.
async fn calibrations_due(s: &AppState, id: i64) -> crate::error::Result<Vec<(i64, String)>> {
    let today = crate::clock::date_of(&crate::clock::now());
    Ok(
        crate::ledger::instruments::due_for_project(&s.db, id, &today, 30)
            .await?
            .into_iter()
            .map(|(i, r, days)| {
                let words = present::due_words(&i.serial, r.kind.code(), r.due_on.as_deref(), days);
                (i.id, words)
            })
            .collect(),
    )
}

/// Tests taken since midnight (UTC), in the last seven days, and in all (from the lots'
/// summaries, which count every test entered).
async fn test_counts(
    s: &AppState,
    id: i64,
    reports: &[std::sync::Arc<crate::ledger::lot_report::LotReport>],
) -> crate::error::Result<(i64, i64, i64)> {
    let midnight = time::OffsetDateTime::now_utc().replace_time(time::Time::MIDNIGHT);
    let today = crate::clock::format(midnight);
    let week = crate::clock::format(midnight - time::Duration::days(6));
    Ok((
        db::field_tests::count_since(&s.db, id, &today).await?,
        db::field_tests::count_since(&s.db, id, &week).await?,
        reports.iter().map(|r| r.tests_entered as i64).sum(),
    ))
}

async fn project_home(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
) -> PageResult {
    let p = super::readable_project(&s, &caller, id).await?;
    let role = caller.role_in(&s.db, id).await?;
    let may_import = role.is_some_and(|r| allows(r, Action::ManageSetup));
    // The set-up page is for admins (people) and those who change set-up or tokens.
    let may_setup = caller.is_admin()
        || role.is_some_and(|r| allows(r, Action::ManageSetup) || allows(r, Action::ManageTokens));
    let u = Units::of(&p);
    let reports = overview::summaries(&s.db, s.ledger.views(), id).await?;
    let drift = crate::ledger::watch::drift_notes_cached(&s.db, s.ledger.drift(), id).await?;
    let lists = lot_lists(&reports, &u);
    let activity = recent_activity(&s, id).await?;
    let calibrations_due = calibrations_due(&s, id).await?;
    let (tests_today, tests_week, tests_total) = test_counts(&s, id, &reports).await?;
    render(&ProjectPage {
        calibrations_due,
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        total_lots: reports.len(),
        states: state_counts(&reports),
        tests_today,
        tests_week,
        tests_total,
        failing: lists.failing,
        owed: lists.owed,
        queue: lists.queue,
        activity,
        may_import,
        may_setup,
        drift: drift.notes,
        drift_pending: drift.pending,
        code: p.code,
        name: p.name,
        contract: p.contract,
        client: p.client,
        contractor: p.contractor,
    })
}

/// A lab test line on the sources page.
struct LabRow {
    id: i64,
    code: String,
    effort: String,
    mdd: String,
    omc: String,
    status: String,
    tested_on: String,
}

/// A source with its lab tests.
struct SourceBlock {
    code: String,
    name: String,
    description: String,
    classification: String,
    gs: String,
    labs: Vec<LabRow>,
}

#[derive(Template)]
#[template(path = "sources.html")]
struct SourcesPage {
    nav: ProjectNav,
    name: String,
    density_unit: String,
    sources: Vec<SourceBlock>,
}

async fn sources(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let p = super::readable_project(&s, &caller, id).await?;
    let u = Units::of(&p);
    let mut blocks = Vec::new();
    for src in db::sources::list(&s.db, id).await? {
        let labs = db::lab_tests::list_for_source(&s.db, src.id)
            .await?
            .into_iter()
            .map(|l| LabRow {
                id: l.id,
                code: l.code,
                effort: l.effort.label(),
                mdd: u.density(l.max_dry_density_kg_m3),
                omc: format!("{:.1}", l.optimum_water_content_pct),
                status: l.status.to_string(),
                tested_on: l.tested_on,
            })
            .collect();
        blocks.push(SourceBlock {
            code: src.code,
            name: src.name,
            description: src.description,
            classification: [src.uscs_class, src.aashto_class]
                .into_iter()
                .filter(|s| !s.is_empty())
                .collect::<Vec<_>>()
                .join(" / "),
            gs: match src.gs_coarse {
                Some(c) => format!(
                    "{:.2} (solids of the fines, ASTM D854), {:.2} (coarse: bulk oven-dry, ASTM C127 / AASHTO T 85)",
                    src.gs_fines, c
                ),
                None => format!("{:.2}", src.gs_fines),
            },
            labs,
        });
    }
    render(&SourcesPage {
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        name: p.name,
        density_unit: u.density_unit().to_string(),
        sources: blocks,
    })
}
