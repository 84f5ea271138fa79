//! The test list with filters, and a CSV download of exactly what is shown.

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::http::header;
use axum::response::IntoResponse;
use axum::routing::get;
use serde::Deserialize;

use super::{PageError, PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::auth::Action;
use crate::error::AppError;
use crate::http::caller::{Caller, Scope, require};
use crate::http::extract::ApiQuery;
use crate::ledger::lot_report::{LotReport, TestLine};
use crate::ledger::{overview, setup};
use crate::present::{self, Units};
use crate::reduction::Chainage;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/projects/{id}/tests", get(list))
        .route("/projects/{id}/tests.csv", get(csv))
}

/// The filters as typed (all optional).
#[derive(Debug, Default, Clone, Deserialize)]
#[serde(default)]
pub struct Filters {
    pub from: String,
    pub to: String,
    pub layer: String,
    pub date_from: String,
    pub date_to: String,
    pub method: String,
    pub verdict: String,
}

impl Filters {
    /// The query string that reproduces these filters.
    fn query(&self) -> String {
        let mut s = form_urlencoded::Serializer::new(String::new());
        for (k, v) in [
            ("from", &self.from),
            ("to", &self.to),
            ("layer", &self.layer),
            ("date_from", &self.date_from),
            ("date_to", &self.date_to),
            ("method", &self.method),
            ("verdict", &self.verdict),
        ] {
            if !v.is_empty() {
                s.append_pair(k, v);
            }
        }
        s.finish()
    }
}

/// A test with its lot, as listed.
pub struct Listed {
    pub lot: crate::db::lots::Lot,
    pub line: TestLine,
}

fn result_of(l: &TestLine) -> &'static str {
    match l.standing.as_str() {
        "voided" => "void",
        "superseded" => "superseded",
        _ if l.passed => "pass",
        _ => "fail",
    }
}

/// Newest first, as the list shows them.
fn newest_first(a: &Listed, b: &Listed) -> std::cmp::Ordering {
    b.line
        .test
        .tested_at
        .cmp(&a.line.test.tested_at)
        .then(b.line.test.id.cmp(&a.line.test.id))
}

/// Applies the filters to every judged test of the project, newest first; returns the
/// first `limit` selected (all when `None`) and how many were selected in all.
///
/// Lots are judged one at a time and only selected lines are kept (at most about
/// twice `limit` of them), so a large project's list does not hold the project.
async fn select(
    pool: &crate::db::Pool,
    project_id: i64,
    f: &Filters,
    u: &Units,
    limit: Option<usize>,
) -> Result<(Vec<Listed>, usize), AppError> {
    let ch = |field: &str, v: &str| -> Result<Option<f64>, AppError> {
        if v.trim().is_empty() {
            return Ok(None);
        }
        Chainage::parse(v.trim(), u.chainage)
            .map(|c| Some(c.metres()))
            .map_err(|e| AppError::invalid(field, e.to_string()))
    };
    let from = ch("from", &f.from)?;
    let to = ch("to", &f.to)?;
    let date = |field: &str, v: &str| -> Result<Option<String>, AppError> {
        if v.trim().is_empty() {
            Ok(None)
        } else {
            crate::ledger::validate::date(field, v).map(Some)
        }
    };
    let d_from = date("date_from", &f.date_from)?;
    let d_to = date("date_to", &f.date_to)?;
    let layer: Option<i64> = if f.layer.is_empty() {
        None
    } else {
        Some(
            f.layer
                .parse()
                .map_err(|_| AppError::invalid("layer", "choose a layer from the list"))?,
        )
    };
    if let Some(n) = limit
        && f.verdict.is_empty()
    {
        // Without a verdict filter the database picks the newest tests; only their lots
        // are judged (a whole pass would judge every lot of the project).
        let next_day = |d: &String| -> Result<String, AppError> {
            let fmt = time::macros::format_description!("[year]-[month]-[day]");
            let day = time::Date::parse(d, &fmt)
                .map_err(|_| AppError::invalid("date_to", "not a date like 2026-12-01"))?;
            Ok(day.next_day().unwrap_or(day).to_string())
        };
        let filter = crate::db::field_tests::TestFilter {
            lot_id: None,
            layer_id: layer,
            chainage_from_m: from,
            chainage_to_m: to,
            tested_from: d_from,
            tested_before: d_to.as_ref().map(next_day).transpose()?,
            method: (!f.method.is_empty()).then(|| f.method.clone()),
            limit: i64::try_from(n).unwrap_or(i64::MAX),
            offset: 0,
        };
        let total = crate::db::field_tests::count_matching(pool, project_id, &filter).await?;
        let newest = crate::db::field_tests::list(pool, project_id, &filter).await?;
        let mut lots: std::collections::HashMap<i64, LotReport> = Default::default();
        let mut out = Vec::with_capacity(newest.len());
        for t in &newest {
            if let std::collections::hash_map::Entry::Vacant(e) = lots.entry(t.lot_id) {
                e.insert(crate::ledger::lot_report::build(pool, t.lot_id).await?);
            }
            let r = &lots[&t.lot_id];
            if let Some(line) = r.tests.iter().find(|l| l.test.id == t.id) {
                out.push(Listed {
                    lot: r.lot.clone(),
                    line: line.clone(),
                });
            }
        }
        return Ok((out, usize::try_from(total).unwrap_or(0)));
    }
    let mut out = Vec::new();
    let mut total = 0usize;
    let keep = |lot: &crate::db::lots::Lot| layer.is_none_or(|l| l == lot.layer_id);
    overview::each_report(pool, project_id, keep, true, |r: LotReport| {
        for line in r.tests {
            let t = &line.test;
            let day = crate::clock::date_of(&t.tested_at);
            if from.is_some_and(|m| t.chainage_m < m)
                || to.is_some_and(|m| t.chainage_m > m)
                || d_from.as_ref().is_some_and(|d| day < *d)
                || d_to.as_ref().is_some_and(|d| day > *d)
                || (!f.method.is_empty() && t.method != f.method)
                || (!f.verdict.is_empty() && result_of(&line) != f.verdict)
            {
                continue;
            }
            total += 1;
            out.push(Listed {
                lot: r.lot.clone(),
                line,
            });
            if let Some(n) = limit
                && out.len() >= 2 * n.max(1)
            {
                out.sort_by(newest_first);
                out.truncate(n);
            }
        }
        Ok(())
    })
    .await?;
    out.sort_by(newest_first);
    if let Some(n) = limit {
        out.truncate(n);
    }
    Ok((out, total))
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
                method: t.method.replace('_', " "),
                dry: u.density(t.dry_density_kg_m3),
                water: format!("{:.1}", t.water_content_pct),
                rc: present::pct(x.line.relative_compaction_pct),
                dev: present::signed(x.line.moisture_deviation_pct),
                result: result_of(&x.line).to_string(),
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
    let du = u.density_unit();
    let header = [
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
        format!("wet_density_{}", du.replace('/', "_per_").replace('³', "3")),
        "water_content_pct".into(),
        format!("dry_density_{}", du.replace('/', "_per_").replace('³', "3")),
        "relative_compaction_pct".into(),
        "moisture_deviation_pct".into(),
        "result".into(),
        "retest_of".into(),
        "void_reason".into(),
        "reduction_version".into(),
    ];
    let io = |e: csv::Error| PageError(AppError::Internal(anyhow::Error::new(e)));
    w.write_record(&header).map_err(io)?;
    for x in &selected {
        let t = &x.line.test;
        w.write_record([
            t.number.clone(),
            x.lot.code.clone(),
            x.lot.zone_name.clone(),
            x.lot.layer_number.to_string(),
            t.tested_at.clone(),
            t.technician.clone(),
            t.method.clone(),
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
            result_of(&x.line).to_string(),
            x.line.retest_of_number.clone().unwrap_or_default(),
            t.void_reason.clone().unwrap_or_default(),
            t.reduction_version.clone(),
        ])
        .map_err(io)?;
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
