//! One field test: readings exactly as entered, what they reduce to, and its history.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::routing::get;

use super::{PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::Action;
use crate::db;
use crate::http::caller::{Caller, Scope, require};
use crate::ledger::{self, lot_report};
use crate::present::{self, Units};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/field-tests/{id}", get(page))
}

/// A line of history.
struct Event {
    at: String,
    actor: String,
    action: String,
    origin: String,
}

#[derive(Template)]
#[template(path = "field_test.html")]
struct TestPage {
    nav: ProjectNav,
    number: String,
    lot_id: i64,
    lot_code: String,
    taken: String,
    technician: String,
    method: String,
    instrument: String,
    chainage: String,
    offset: String,
    readings: Vec<(String, String)>,
    wet: String,
    water: String,
    moisture_source: String,
    dry: String,
    rc: String,
    dev: String,
    reference: String,
    result: String,
    reasons: Vec<String>,
    version: String,
    void_reason: String,
    history: Vec<Event>,
    cautions: Vec<String>,
}

async fn page(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require(&s.db, &caller, Scope::Test(id), Action::Read).await?;
    let t = ledger::field::require_test(&s.db, id).await?;
    let report = lot_report::build(&s.db, t.lot_id).await?;
    let u = Units::of(&report.project);
    let line = report.tests.iter().find(|l| l.test.id == id);
    let readings = match serde_json::from_str::<serde_json::Value>(&t.readings_json) {
        Ok(serde_json::Value::Object(m)) => m
            .into_iter()
            .filter(|(_, v)| !v.is_null())
            .map(|(k, v)| {
                (
                    k.replace('_', " "),
                    v.to_string().trim_matches('"').to_string(),
                )
            })
            .collect(),
        _ => Vec::new(),
    };
    let result = line.map_or(crate::domain::TestResult::Fail, |l| l.result());
    let history = db::audit::for_entity(&s.db, "field_test", id)
        .await?
        .into_iter()
        .map(|a| Event {
            at: crate::clock::display(&a.at),
            actor: a.actor,
            action: a.action,
            origin: a.origin,
        })
        .collect();
    render(&TestPage {
        nav: ProjectNav {
            id: report.project.id,
            name: report.project.code.clone(),
        },
        number: t.number.clone(),
        lot_id: t.lot_id,
        lot_code: report.lot.code.clone(),
        taken: crate::clock::display(&t.tested_at),
        technician: t.technician.clone(),
        method: t.method.words(),
        instrument: t.instrument_serial.clone(),
        chainage: u.chainage(t.chainage_m),
        offset: u.offset(t.offset_m),
        readings,
        wet: u.density_with_unit(t.wet_density_kg_m3),
        water: format!("{:.2} %", t.water_content_pct),
        moisture_source: t.moisture_source.clone(),
        dry: u.density_with_unit(t.dry_density_kg_m3),
        rc: format!(
            "{} %",
            present::pct(line.and_then(|l| l.relative_compaction_pct))
        ),
        dev: format!(
            "{} points",
            present::signed(line.and_then(|l| l.moisture_deviation_pct))
        ),
        reference: line
            .and_then(|l| Some((l.reference_mdd_kg_m3?, l.reference_omc_pct?)))
            .map_or("–".into(), |(m, o)| {
                format!("MDD {}, OMC {o:.1} %", u.density_with_unit(m))
            }),
        result: result.to_string(),
        reasons: line
            .map(|l| l.cautions().into_iter().chain(l.reasons.clone()).collect())
            .unwrap_or_default(),
        version: t.reduction_version.clone(),
        void_reason: t.void_reason.clone().unwrap_or_default(),
        history,
        cautions: super::cautions(),
    })
}
