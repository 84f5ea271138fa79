//! The instrument register's pages: the list, an instrument's page (records,
//! assignments, offsets, its standard counts as a control chart) and the standard-count
//! form, which works on a phone.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::routing::get;
use serde::Deserialize;

use super::{PageResult, render, render_status, see_other};
use crate::app::AppState;
use crate::auth::Action;
use crate::charts::count_chart::{CountPoint, count_chart};
use crate::db;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::parse_form;
use crate::ledger::instruments::{self as reg, counts::CountInput};
use crate::reduction::instruments::InstrumentKind;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/instruments", get(list))
        .route("/instruments/{id}", get(page))
        .route(
            "/instruments/{id}/standard-counts",
            axum::routing::post(post_count),
        )
}

/// A row of the register list.
struct Row {
    id: i64,
    serial: String,
    kind: String,
    description: String,
    calibrated: String,
    due: String,
}

#[derive(Template)]
#[template(path = "instruments/list.html")]
struct ListPage {
    rows: Vec<Row>,
    operators: Vec<db::instruments::Operator>,
}

async fn list(State(s): State<AppState>, _caller: Caller) -> PageResult {
    let records = db::instruments::records(&s.db, None).await?;
    let rows = db::instruments::list_instruments(&s.db)
        .await?
        .into_iter()
        .map(|i| {
            let cal = records
                .iter()
                .filter(|r| {
                    r.instrument_id == i.id
                        && r.kind == crate::ledger::instruments::RecordKind::Calibration
                })
                .max_by(|a, b| a.done_on.cmp(&b.done_on));
            Row {
                id: i.id,
                kind: i.kind.label().to_string(),
                calibrated: cal.map(|c| c.done_on.clone()).unwrap_or_default(),
                due: cal.and_then(|c| c.due_on.clone()).unwrap_or_default(),
                serial: i.serial,
                description: i.description,
            }
        })
        .collect();
    render(&ListPage {
        rows,
        operators: db::instruments::operators(&s.db).await?,
    })
}

/// What the count form holds (text, so a mistake comes back as typed).
#[derive(Debug, Clone, Default, Deserialize)]
struct CountForm {
    #[serde(default)]
    project_id: String,
    #[serde(default)]
    counted_on: String,
    #[serde(default)]
    density_count: String,
    #[serde(default)]
    moisture_count: String,
}

/// A count row as shown.
struct CountRow {
    day: String,
    density: i64,
    moisture: i64,
    outcome: String,
    density_deviation: String,
    moisture_deviation: String,
}

#[derive(Template)]
#[template(path = "instruments/instrument.html")]
struct InstrumentPage {
    instrument: db::instruments::Instrument,
    kind: String,
    records: Vec<db::instruments::InstrumentRecord>,
    assignments: Vec<db::instruments::Assignment>,
    offsets: Vec<db::instruments::GaugeOffset>,
    counts: Vec<CountRow>,
    chart: String,
    gauge: bool,
    form: CountForm,
    error_field: String,
    error: String,
    projects: Vec<(i64, String)>,
}

async fn build(
    s: &AppState,
    id: i64,
    form: CountForm,
    error: Option<AppError>,
) -> Result<InstrumentPage, AppError> {
    let instrument = reg::require_instrument(&s.db, id).await?;
    let assignments = db::instruments::assignments(&s.db, Some(id), None).await?;
    let counts = db::instruments::counts(&s.db, Some(id), None).await?;
    let (dt, mt) = counts.last().map_or((1.0, 2.0), |c| {
        (c.density_tolerance_pct, c.moisture_tolerance_pct)
    });
    let points: Vec<CountPoint> = counts
        .iter()
        .map(|c| CountPoint {
            day: c.counted_on.clone(),
            density_deviation_pct: c.density_deviation_pct,
            moisture_deviation_pct: c.moisture_deviation_pct,
            outcome: c.outcome.clone(),
        })
        .collect();
    let mut projects = Vec::new();
    for a in assignments.iter().filter(|a| a.to_on.is_none()) {
        if let Some(p) = db::projects::get(&s.db, a.project_id).await? {
            projects.push((p.id, p.code));
        }
    }
    let pct = |v: Option<f64>| {
        v.map(|v| format!("{v:+.2} %"))
            .unwrap_or_else(|| "–".into())
    };
    Ok(InstrumentPage {
        kind: instrument.kind.label().to_string(),
        gauge: instrument.kind == InstrumentKind::NuclearGauge,
        records: db::instruments::records(&s.db, Some(id)).await?,
        offsets: db::instruments::offsets(&s.db, Some(id), None).await?,
        chart: if points.is_empty() {
            String::new()
        } else {
            count_chart(&points, dt, mt)
        },
        counts: counts
            .iter()
            .rev()
            .map(|c| CountRow {
                day: c.counted_on.clone(),
                density: c.density_count,
                moisture: c.moisture_count,
                outcome: c.outcome.clone(),
                density_deviation: pct(c.density_deviation_pct),
                moisture_deviation: pct(c.moisture_deviation_pct),
            })
            .collect(),
        instrument,
        assignments,
        form: CountForm {
            counted_on: if form.counted_on.is_empty() {
                crate::clock::date_of(&crate::clock::now())
            } else {
                form.counted_on.clone()
            },
            ..form
        },
        error_field: error
            .as_ref()
            .map(|e| e.field().to_string())
            .unwrap_or_default(),
        error: error.map(|e| e.user_message()).unwrap_or_default(),
        projects,
    })
}

async fn page(State(s): State<AppState>, _caller: Caller, Path(id): Path<i64>) -> PageResult {
    render(&build(&s, id, CountForm::default(), None).await?)
}

/// A whole number from a form field, naming the field when it is not one.
fn whole(field: &str, v: &str) -> Result<i64, AppError> {
    v.trim()
        .parse::<i64>()
        .map_err(|_| AppError::invalid(field, format!("'{}' is not a whole number", v.trim())))
}

async fn post_count(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: axum::body::Bytes,
) -> PageResult {
    let form: CountForm = parse_form(&body)?;
    let parsed = (|| {
        Ok::<_, AppError>(CountInput {
            project_id: whole("project_id", &form.project_id)?,
            counted_on: form.counted_on.clone(),
            density_count: whole("density_count", &form.density_count)?,
            moisture_count: whole("moisture_count", &form.moisture_count)?,
        })
    })();
    let result = match parsed {
        Ok(input) => {
            let actor = require(
                &s.db,
                &caller,
                Scope::Project(input.project_id),
                Action::EnterTests,
            )
            .await?;
            reg::counts::record_count(&s.db, id, &input, &actor).await
        }
        Err(e) => Err(e),
    };
    match result {
        Ok(_) => Ok(see_other(&format!("/instruments/{id}#counts"))),
        Err(AppError::Internal(e)) => Err(AppError::Internal(e).into()),
        Err(e) => render_status(
            StatusCode::UNPROCESSABLE_ENTITY,
            &build(&s, id, form, Some(e)).await?,
        ),
    }
}
