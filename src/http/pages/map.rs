//! The lift map: chainage along x, layers stacked by zone along y, one rectangle per lot.

use std::sync::Arc;

use askama::Template;
use axum::Router;
use axum::extract::{Path, State};
use axum::routing::get;
use serde::Deserialize;

use super::{PageResult, ProjectNav, render};
use crate::app::AppState;
use crate::charts::{LiftMapInput, MapLot, MapRow, MapState, lift_map};
use crate::db;
use crate::db::layers::Layer;
use crate::error::AppError;
use crate::http::caller::Caller;
use crate::http::extract::ApiQuery;
use crate::ledger::lot_report::LotReport;
use crate::ledger::overview;
use crate::present::Units;
use crate::reduction::Chainage;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/projects/{id}/map", get(map))
}

/// Zoom: a chainage range in the project's style (`0+400`) or metres.
#[derive(Debug, Deserialize)]
struct MapQuery {
    from: Option<String>,
    to: Option<String>,
}

/// A row of the lot table under the map.
struct LotRow {
    id: i64,
    code: String,
    zone: String,
    layer: i64,
    from: String,
    to: String,
    state_code: String,
    state: String,
    mark: String,
    tests: usize,
    owed: u32,
}

/// A state in the legend list.
struct StateKey {
    code: String,
    label: String,
    mark: String,
    count: usize,
}

#[derive(Template)]
#[template(path = "map.html")]
struct MapPage {
    nav: ProjectNav,
    name: String,
    svg: String,
    range: String,
    zoomed: bool,
    from_value: String,
    to_value: String,
    lots: Vec<LotRow>,
    states: Vec<StateKey>,
}

fn encode(s: &str) -> String {
    form_urlencoded::byte_serialize(s.as_bytes()).collect()
}

async fn map(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    ApiQuery(q): ApiQuery<MapQuery>,
) -> PageResult {
    let p = super::readable_project(&s, &caller, id).await?;
    let u = Units::of(&p);
    let from = parse_chainage("from", &q.from, u)?;
    let to = parse_chainage("to", &q.to, u)?;
    let reports = overview::summaries(&s.db, s.ledger.views(), id).await?;
    let layers = db::layers::list(&s.db, id).await?;
    let (extent_from, extent_to) = extent(&reports);
    let view_from = from.unwrap_or(extent_from);
    let view_to = to.unwrap_or(extent_to);
    if view_to <= view_from {
        return Err(AppError::invalid("to", "must be a chainage after from").into());
    }
    let visible: Vec<&LotReport> = reports
        .iter()
        .map(|r| r.as_ref())
        .filter(|r| r.lot.chainage_to_m > view_from && r.lot.chainage_from_m < view_to)
        .collect();
    let svg = draw(id, (view_from, view_to), &layers, &visible, u);
    render(&MapPage {
        nav: ProjectNav {
            id,
            name: p.code.clone(),
        },
        name: p.name.clone(),
        svg,
        range: format!("{} to {}", u.chainage(view_from), u.chainage(view_to)),
        zoomed: from.is_some() || to.is_some(),
        from_value: q.from.clone().unwrap_or_default(),
        to_value: q.to.clone().unwrap_or_default(),
        lots: visible.iter().map(|r| LotRow::of(r, u)).collect(),
        states: state_keys(&visible),
    })
}

/// A zoom bound typed by the user (blank means none), refused with the field named.
fn parse_chainage(field: &str, v: &Option<String>, u: Units) -> Result<Option<f64>, AppError> {
    match v.as_deref().map(str::trim).filter(|v| !v.is_empty()) {
        None => Ok(None),
        Some(t) => Chainage::parse(t, u.chainage)
            .map(|c| Some(c.metres()))
            .map_err(|e| AppError::invalid(field, e.to_string())),
    }
}

/// The chainage the project's lots cover, or 0–1000 m when it has none.
fn extent(reports: &[Arc<LotReport>]) -> (f64, f64) {
    let from = reports
        .iter()
        .map(|r| r.lot.chainage_from_m)
        .fold(f64::INFINITY, f64::min);
    let to = reports
        .iter()
        .map(|r| r.lot.chainage_to_m)
        .fold(f64::NEG_INFINITY, f64::max);
    if from.is_finite() {
        (from, to)
    } else {
        (0.0, 1000.0)
    }
}

/// The SVG of the visible lots over `view` (from, to metres); a dragged range zooms.
fn draw(id: i64, view: (f64, f64), layers: &[Layer], visible: &[&LotReport], u: Units) -> String {
    let rows: Vec<MapRow> = layers
        .iter()
        .enumerate()
        .map(|(i, l)| MapRow {
            zone: l.zone_name.clone(),
            layer: format!("layer {}", l.number),
            row: i,
        })
        .collect();
    let row_of = |layer_id: i64| layers.iter().position(|l| l.id == layer_id).unwrap_or(0);
    let lots = visible
        .iter()
        .map(|r| map_lot(r, row_of(r.lot.layer_id), u))
        .collect();
    let style = u.chainage;
    lift_map(&LiftMapInput {
        chainage_from_m: view.0,
        chainage_to_m: view.1,
        rows,
        lots,
        chainage_label: Box::new(move |m| {
            Chainage::new(m).map_or(format!("{m:.0}"), |c| c.format(style))
        }),
        width_px: 1100,
        zoom_href: Some(Box::new(move |a, b| {
            format!(
                "/projects/{id}/map?from={}&to={}",
                encode(&u.chainage(a)),
                encode(&u.chainage(b))
            )
        })),
    })
}

/// One lot's rectangle on map row `row`, with its hover title and link.
fn map_lot(r: &LotReport, row: usize, u: Units) -> MapLot {
    MapLot {
        row,
        from_m: r.lot.chainage_from_m,
        to_m: r.lot.chainage_to_m,
        state: r.display_state,
        title: format!(
            "{} · {} layer {} · {} to {} · {} · {} tests, {} owed",
            r.lot.code,
            r.lot.zone_name,
            r.lot.layer_number,
            u.chainage(r.lot.chainage_from_m),
            u.chainage(r.lot.chainage_to_m),
            r.display_state.label(),
            r.verdict.n,
            r.tests_owed
        ),
        href: format!("/lots/{}", r.lot.id),
    }
}

/// The legend: every state with how many visible lots show it.
fn state_keys(visible: &[&LotReport]) -> Vec<StateKey> {
    MapState::ALL
        .iter()
        .map(|st| StateKey {
            code: st.token().to_string(),
            label: st.label().to_string(),
            mark: st.mark().to_string(),
            count: visible.iter().filter(|r| r.display_state == *st).count(),
        })
        .collect()
}

impl LotRow {
    /// A visible lot as a row of the table under the map.
    fn of(r: &LotReport, u: Units) -> Self {
        let st = r.display_state;
        LotRow {
            id: r.lot.id,
            code: r.lot.code.clone(),
            zone: r.lot.zone_name.clone(),
            layer: r.lot.layer_number,
            from: u.chainage(r.lot.chainage_from_m),
            to: u.chainage(r.lot.chainage_to_m),
            state_code: st.token().to_string(),
            state: st.label().to_string(),
            mark: st.mark().to_string(),
            tests: r.tests_entered,
            owed: r.tests_owed,
        }
    }
}
