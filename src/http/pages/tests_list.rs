//! The test list with filters, and a CSV download of exactly what is shown.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;

use super::{PageError, PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::Action;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::ApiQuery;
use crate::ledger::setup;
use crate::ledger::test_list::{Filters, Listed, select};
use crate::present::{self, Units};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/projects/{id}/tests", get(list))
        .route("/projects/{id}/tests.csv", get(csv))
}

/// A formatted row.
struct Row {
    lot_id: i64,
    lot: String,
    number: String,
    taken: String,
    layer: String,
    chainage: String,
    offset: String,
    method: String,
    dry: String,
    water: String,
    rc: String,
    dev: String,
    result: String,
}

/// A layer choice in the filter.
struct LayerOption {
    id: i64,
    label: String,
    selected: bool,
}

#[derive(Template)]
#[template(path = "tests.html")]
struct TestsPage {
    nav: ProjectNav,
    name: String,
    f: Filters,
    layers: Vec<LayerOption>,
    rows: Vec<Row>,
    total: usize,
    shown: usize,
    csv_url: String,
    density_unit: String,
    error: String,
}

const PAGE_ROWS: usize = 500;

async fn list(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    ApiQuery(f): ApiQuery<Filters>,
) -> PageResult {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    let p = setup::require_project(&s.db, id).await?;
    let u = Units::of(&p);
    let ((selected, total), error) = match select(&s.db, id, &f, &u, Some(PAGE_ROWS)).await {
        Ok(v) => (v, String::new()),
        Err(e @ (AppError::Invalid { .. } | AppError::BadRequest { .. })) => (
            (Vec::new(), 0),
            format!("{}: {}", e.field(), e.user_message()),
        ),
        Err(e) => return Err(e.into()),
    };
    let layers = crate::db::layers::list(&s.db, id)
        .await?
        .into_iter()
        .map(|l| LayerOption {
            selected: f.layer == l.id.to_string(),
            id: l.id,
            label: format!("{} layer {}", l.zone_name, l.number),
        })
        .collect();
    let rows = selected
        .iter()
        .map(|x| {
            let t = &x.line.test;
            Row {
                lot_id: x.lot.id,
                lot: x.lot.code.clone(),
                number: t.number.clone(),
                taken: crate::clock::display(&t.tested_at),
                layer: format!("{} {}", x.lot.zone_name, x.lot.layer_number),
                chainage: u.chainage(t.chainage_m),
                offset: u.offset(t.offset_m),
                method: t.method.words(),
                dry: u.density(t.dry_density_kg_m3),
                water: format!("{:.1}", t.water_content_pct),
                rc: present::pct(x.line.relative_compaction_pct),
                dev: present::signed(x.line.moisture_deviation_pct),
                result: x.line.result().to_string(),
            }
        })
        .collect();
    let q = f.query();
    render(&TestsPage {
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        name: p.name.clone(),
        total,
        shown: selected.len(),
        csv_url: if q.is_empty() {
            format!("/projects/{id}/tests.csv")
        } else {
            format!("/projects/{id}/tests.csv?{q}")
        },
        f,
        layers,
        rows,
        density_unit: u.density_unit().to_string(),
        error,
    })
}

async fn csv(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    ApiQuery(f): ApiQuery<Filters>,
) -> Result<impl IntoResponse, PageError> {
    require(&s.db, &caller, Scope::Project(id), Action::Read).await?;

    let p = setup::require_project(&s.db, id).await?;
    let u = Units::of(&p);
    let (selected, _) = select(&s.db, id, &f, &u, None).await?;
    let mut w = csv::WriterBuilder::new().from_writer(Vec::new());
    let io = |e: csv::Error| PageError(AppError::Internal(anyhow::Error::new(e)));
    w.write_record(csv_header(u.density_unit())).map_err(io)?;
    for x in &selected {
        let safe = csv_row(x, &u)
            .into_iter()
            .map(|c| crate::transfer::csv_safe::cell(&c).into_owned());
        w.write_record(safe).map_err(io)?;
    }
    let body = w
        .into_inner()
        .map_err(|e| PageError(AppError::Internal(anyhow::anyhow!("{e}"))))?;
    // A UTF-8 byte-order mark makes spreadsheet programs read the units correctly.
    let mut bytes = vec![0xEF, 0xBB, 0xBF];
    bytes.extend(body);
    Ok((
        [
            (header::CONTENT_TYPE, "text/csv; charset=utf-8".to_string()),
            (
                header::CONTENT_DISPOSITION,
                format!("attachment; filename=\"{}-field-tests.csv\"", p.code),
            ),
        ],
        bytes,
    ))
}

/// The CSV's columns; densities carry the project's unit in their names.
fn csv_header(du: &str) -> [String; 19] {
    let unit = du.replace('/', "_per_").replace('³', "3");
    [
        "test".to_string(),
        "lot".into(),
        "zone".into(),
        "layer".into(),
        "tested_at_utc".into(),
        "technician".into(),
        "method".into(),
        "chainage".into(),
        "chainage_m".into(),
        "offset_m".into(),
        format!("wet_density_{}", unit),
        "water_content_pct".into(),
        format!("dry_density_{}", unit),
        "relative_compaction_pct".into(),
        "moisture_deviation_pct".into(),
        "result".into(),
        "retest_of".into(),
        "void_reason".into(),
        "reduction_version".into(),
    ]
}

/// One test's CSV cells, in the columns of [`csv_header`].
fn csv_row(x: &Listed, u: &Units) -> [String; 19] {
    let t = &x.line.test;
    [
        t.number.clone(),
        x.lot.code.clone(),
        x.lot.zone_name.clone(),
        x.lot.layer_number.to_string(),
        t.tested_at.clone(),
        t.technician.clone(),
        t.method.code().to_string(),
        u.chainage(t.chainage_m),
        format!("{:.3}", t.chainage_m),
        format!("{:.2}", t.offset_m),
        u.density(t.wet_density_kg_m3),
        format!("{:.2}", t.water_content_pct),
        u.density(t.dry_density_kg_m3),
        x.line
            .relative_compaction_pct
            .map_or(String::new(), |v| format!("{v:.2}")),
        x.line
            .moisture_deviation_pct
            .map_or(String::new(), |v| format!("{v:.2}")),
        x.line.result().to_string(),
        x.line.retest_of_number.clone().unwrap_or_default(),
        t.void_reason.clone().unwrap_or_default(),
        t.reduction_version.clone(),
    ]
}
