//! A layer split into lots every N metres, previewed on the lift map before saving.

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, State};
use axum::routing::get;

use super::form::{Field, Kind, Values, decode};
use super::frame::LotChoices;
use super::{Context, FormSpec, wants_preview};
use crate::app::AppState;
use crate::auth::Action;
use crate::charts::{LiftMapInput, MapLot, MapRow, MapState, lift_map};
use crate::db;
use crate::error::AppError;
use crate::http::caller::Caller;
use crate::http::pages::{PageError, PageResult, render, see_other};
use crate::ledger::lot_split::{self, SplitInput};
use crate::reduction::Chainage;

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route(
        "/projects/{id}/setup/lots/split",
        get(split_form).post(split_post),
    )
}

async fn split_spec(s: &AppState, ctx: &Context) -> PageResult<FormSpec> {
    let choices = LotChoices::load(&s.db, ctx).await?;
    let mut fields = vec![
        Field::new("chainage_from_m", "From chainage", Kind::Chainage, true),
        Field::new("chainage_to_m", "To chainage", Kind::Chainage, true),
        Field::new("every_m", "Lot length (m)", Kind::Number, true).hint(
            "lots are cut from the start; a remainder under a tenth of this joins the last lot",
        ),
        Field::new("code_prefix", "Lot code prefix", Kind::Text, true)
            .hint("e.g. EF2- makes EF2-1, EF2-2, …"),
        Field::new("first_number", "First number", Kind::Integer, false).hint("1 when empty"),
    ];
    fields.extend(choices.fields("m"));
    Ok(FormSpec {
        nav: Some(ctx.nav.clone()),
        title: "Split a layer into lots".into(),
        intro: "Divide a stretch of one layer into lots of equal length. Preview draws them on the lift map; Save makes all of them or, on any problem, none.".into(),
        action_url: format!("/projects/{}/setup/lots/split", ctx.project.id),
        back_href: format!("/projects/{}/setup", ctx.project.id),
        back_label: "Back to set-up".into(),
        fields,
        has_preview: true,
        submit_label: "Make the lots".into(),
    })
}

async fn split_form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    let ctx = Context::load(&s, &caller, id, Action::ManageSetup).await?;
    let defaults: Values = [("every_m", "100"), ("first_number", "1")]
        .iter()
        .map(|(k, v)| (k.to_string(), v.to_string()))
        .collect();
    split_spec(&s, &ctx).await?.blank(&defaults)
}

/// The planned lots on their layer, beside the lots the layer has.
#[derive(Template)]
#[template(
    source = r#"<div class="notice" id="split-plan"><h2>{{ count }} lots planned (not saved yet)</h2><ul>{% for l in lines %}<li>{{ l }}</li>{% endfor %}</ul></div><figure class="chart" id="split-map">{{ map|safe }}<figcaption>The layer with the planned lots (shown as open) and the lots it already has.</figcaption></figure>"#,
    ext = "html"
)]
struct Plan {
    count: usize,
    lines: Vec<String>,
    map: String,
}

async fn plan_html(
    s: &AppState,
    ctx: &Context,
    input: &SplitInput,
    planned: &[db::lots::NewLot],
) -> PageResult<String> {
    let u = &ctx.units;
    let layer = db::layers::get(&s.db, input.layer_id)
        .await?
        .ok_or_else(|| PageError(AppError::invalid("layer_id", "no such layer")))?;
    let existing = db::lots::list(
        &s.db,
        ctx.project.id,
        &db::lots::LotFilter {
            layer_id: Some(layer.id),
            limit: 100_000,
            ..Default::default()
        },
    )
    .await?;
    let mut lots: Vec<MapLot> = existing
        .iter()
        .map(|l| MapLot {
            row: 0,
            from_m: l.chainage_from_m,
            to_m: l.chainage_to_m,
            state: l.state.into(),
            title: format!("{} (exists)", l.code),
            href: format!("/lots/{}", l.id),
        })
        .collect();
    lots.extend(planned.iter().map(|l| MapLot {
        row: 0,
        from_m: l.chainage_from_m,
        to_m: l.chainage_to_m,
        state: MapState::Open,
        title: format!("{} (planned)", l.code),
        href: String::new(),
    }));
    let from = lots.iter().map(|l| l.from_m).fold(f64::INFINITY, f64::min);
    let to = lots
        .iter()
        .map(|l| l.to_m)
        .fold(f64::NEG_INFINITY, f64::max);
    let style = u.chainage;
    let map = lift_map(&LiftMapInput {
        chainage_from_m: from,
        chainage_to_m: to,
        rows: vec![MapRow {
            zone: layer.zone_name.clone(),
            layer: format!("layer {}", layer.number),
            row: 0,
        }],
        lots,
        chainage_label: Box::new(move |m| {
            Chainage::new(m).map_or(format!("{m:.0}"), |c| c.format(style))
        }),
        width_px: 900,
        zoom_href: None,
    });
    let lines = planned
        .iter()
        .map(|l| {
            format!(
                "{} · {} to {}",
                l.code,
                u.chainage(l.chainage_from_m),
                u.chainage(l.chainage_to_m)
            )
        })
        .collect();
    Plan {
        count: planned.len(),
        lines,
        map,
    }
    .render()
    .map_err(|e| PageError(AppError::Internal(anyhow::Error::new(e))))
}

async fn split_post(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let ctx = Context::load(&s, &caller, id, Action::ManageSetup).await?;
    let spec = split_spec(&s, &ctx).await?;
    let values = decode(&body);
    if wants_preview(&values) {
        let input: SplitInput = match spec.input(&values, &ctx.units) {
            Ok(i) => i,
            Err(errors) => return spec.refused(&values, &errors),
        };
        return match lot_split::plan(&s.db, id, &input).await {
            Ok(planned) => {
                let html = plan_html(&s, &ctx, &input, &planned).await?;
                render(&spec.page(&values, &Default::default(), html))
            }
            Err(e) if super::form::is_refusal(&e) => {
                spec.refused(&values, &super::form::place(&e, &spec.fields))
            }
            Err(e) => Err(PageError(e)),
        };
    }
    let saved = spec
        .submit(&values, &ctx.units, async |input: SplitInput| {
            lot_split::create(&s.db, id, &input, &ctx.actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |_| see_other(&format!("/projects/{id}/map"))))
}
