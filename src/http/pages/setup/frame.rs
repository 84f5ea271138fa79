//! The frame tests are judged in, one form each: clauses, borrow sources, moulds,
//! layers and single lots (QC managers).

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::State;
use axum::routing::get;
use serde::de::DeserializeOwned;

use super::form::{Field, Kind, Values, decode};
use super::summary::{Terms, clause_words};
use super::{Context, FormSpec, ManageSetup, wants_preview};
use crate::app::AppState;
use crate::db;
use crate::domain::ClauseEffort;
use crate::domain::{Approval, CurveStatus};
use crate::http::pages::{PageResult, see_other};
use crate::ledger::moulds::{self, MouldInput};
use crate::ledger::setup::{self, ClauseInput, LayerInput, LotInput, SourceInput};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route(
            "/projects/{id}/setup/clauses/new",
            get(clause_form).post(clause_post),
        )
        .route(
            "/projects/{id}/setup/sources/new",
            get(source_form).post(source_post),
        )
        .route(
            "/projects/{id}/setup/moulds/new",
            get(mould_form).post(mould_post),
        )
        .route(
            "/projects/{id}/setup/layers/new",
            get(layer_form).post(layer_post),
        )
        .route(
            "/projects/{id}/setup/lots/new",
            get(lot_form).post(lot_post),
        )
}

fn hub(ctx: &Context) -> String {
    format!("/projects/{}/setup", ctx.project.id)
}

/// Saves a set-up form through its ledger function and goes back to the set-up page, or
/// shows the form again with its problems (nothing saved).
async fn save_to_hub<T: DeserializeOwned, R>(
    ctx: &Context,
    spec: &FormSpec,
    body: &Bytes,
    save: impl AsyncFnOnce(T) -> crate::error::Result<R>,
) -> PageResult {
    let values = decode(body);
    let saved = spec.submit(&values, &ctx.units, save).await?;
    Ok(saved.map_or_else(|refused| refused, |_| see_other(&hub(ctx))))
}

fn spec(ctx: &Context, title: &str, intro: &str, path: &str, fields: Vec<Field>) -> FormSpec {
    FormSpec {
        nav: Some(ctx.nav.clone()),
        title: title.into(),
        intro: intro.into(),
        action_url: format!("/projects/{}/setup/{path}", ctx.project.id),
        back_href: hub(ctx),
        back_label: "Back to set-up".into(),
        fields,
        has_preview: false,
        submit_label: "Save".into(),
    }
}

fn pairs(v: &[(&str, &str)]) -> Vec<(String, String)> {
    v.iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect()
}

/// Every effort a clause may name: the presets, a custom effort, or any.
pub fn clause_efforts() -> Vec<(String, String)> {
    ClauseEffort::codes()
        .filter_map(ClauseEffort::parse_code)
        .map(|e| {
            let label = match e {
                ClauseEffort::Preset(p) => p.label(),
                ClauseEffort::Custom => "A custom effort",
                ClauseEffort::Any => "Any effort",
            };
            (e.code().to_string(), label.to_string())
        })
        .collect()
}

/// Every field of a new clause, in the order the form shows them.
fn clause_fields() -> Vec<Field> {
    [
        identity_fields(),
        moisture_fields(),
        rule_fields(),
        frequency_fields(),
        judging_fields(),
    ]
    .concat()
}

/// The clause's code, title, effort and density limit.
fn identity_fields() -> Vec<Field> {
    vec![
        Field::new("code", "Clause code", Kind::Text, true)
            .hint("as the specification numbers it, e.g. 6.4.2"),
        Field::new("title", "Title", Kind::Text, false),
        Field::new(
            "effort",
            "Reference effort",
            Kind::Choice(clause_efforts()),
            true,
        )
        .hint("lots under this clause are judged against a curve of this effort"),
        Field::new(
            "rc_min_pct",
            "Relative compaction at least (%)",
            Kind::Number,
            true,
        ),
    ]
}

/// The moisture window in any of its three forms, and the air-voids limit.
fn moisture_fields() -> Vec<Field> {
    vec![
        Field::new(
            "moisture_basis",
            "Moisture window written as",
            Kind::Choice(pairs(&[
                ("points_of_omc", "Points dry and wet of optimum (default)"),
                ("percent_of_omc", "Percent of optimum (w / OMC)"),
                ("absolute", "A range of water content"),
            ])),
            false,
        ),
        Field::new(
            "moisture_below_pct",
            "Moisture window, dry of optimum (points)",
            Kind::Number,
            false,
        )
        .hint("points-of-optimum windows"),
        Field::new(
            "moisture_above_pct",
            "Moisture window, wet of optimum (points)",
            Kind::Number,
            false,
        )
        .hint("points-of-optimum windows"),
        Field::new(
            "moisture_low_pct",
            "Moisture window, lower bound (%)",
            Kind::Number,
            false,
        )
        .hint("percent-of-optimum or water-content windows, e.g. 90 or 9.0"),
        Field::new(
            "moisture_high_pct",
            "Moisture window, upper bound (%)",
            Kind::Number,
            false,
        )
        .hint("percent-of-optimum or water-content windows, e.g. 110 or 14.0"),
        Field::new(
            "max_air_voids_pct",
            "Air voids at most (%)",
            Kind::Number,
            false,
        )
        .hint("empty: air voids are not judged"),
    ]
}

/// The acceptance rule and its figures.
fn rule_fields() -> Vec<Field> {
    vec![
        Field::new(
            "rule",
            "Acceptance rule",
            Kind::Choice(pairs(&[
                ("every_test", "Every test meets the minimum"),
                ("mean_and_min", "Mean meets the minimum, no test far below"),
                ("quality_index", "Percent within limits (statistical)"),
            ])),
            true,
        ),
        Field::new(
            "allowance_pct",
            "Allowance below the minimum (points)",
            Kind::Number,
            false,
        )
        .hint("mean-and-minimum rule only"),
        Field::new(
            "min_pwl_pct",
            "Least percent within limits (%)",
            Kind::Number,
            false,
        )
        .hint("percent-within-limits rule only"),
    ]
}

/// How many tests a lot owes.
fn frequency_fields() -> Vec<Field> {
    vec![
        Field::new(
            "min_tests_per_lot",
            "Least tests per lot",
            Kind::Integer,
            true,
        ),
        Field::new(
            "area_per_test_m2",
            "One test per (m² of lift)",
            Kind::Number,
            false,
        ),
        Field::new(
            "length_per_test_m",
            "One test per (m of chainage)",
            Kind::Number,
            false,
        ),
    ]
}

/// How values are corrected, flagged, rounded and judged for moisture.
fn judging_fields() -> Vec<Field> {
    vec![
        Field::new(
            "oversize_limit_pct",
            "Oversize correction up to (% coarse)",
            Kind::Number,
            false,
        )
        .hint("empty: the library's default"),
        Field::new(
            "moisture_judgement",
            "How moisture is judged",
            Kind::Choice(pairs(&[
                ("per_test", "Each test inside the window (default)"),
                (
                    "pwl",
                    "Percent within the window (percent-within-limits rule only)",
                ),
            ])),
            false,
        ),
        Field::new(
            "moisture_min_pwl_pct",
            "Least percent within the moisture window (%)",
            Kind::Number,
            false,
        )
        .hint("when moisture is judged by percent within limits"),
        Field::new(
            "rc_plausible_max_pct",
            "Flag relative compaction above (%)",
            Kind::Number,
            false,
        )
        .hint("empty: 103 %; a higher RC is flagged as implausible"),
        Field::new(
            "rounding",
            "Comparing with the limits",
            Kind::Choice(pairs(&[
                (
                    "astm_e29",
                    "Round to the limit's precision first (ASTM E29, default)",
                ),
                ("absolute", "Compare the unrounded value"),
            ])),
            false,
        ),
        Field::new(
            "limit_decimals",
            "Decimals the limits are written with",
            Kind::Integer,
            false,
        )
        .hint("empty: 1, as in 95.0 %"),
        Field::new(
            "oversize_sieve_mm",
            "Oversize sieve (mm)",
            Kind::Number,
            false,
        )
        .hint("4.75 or 19; sets the correction's limit"),
        Field::new(
            "coarse_water_default_pct",
            "Coarse water content assumed when not given (%)",
            Kind::Number,
            false,
        )
        .hint("shown as assumed on every test that uses it"),
    ]
}

fn clause_spec(ctx: &Context) -> FormSpec {
    let mut s = spec(
        ctx,
        "New clause",
        "The specification clause lots are judged by. Preview reads the rule back in words before it is saved.",
        "clauses/new",
        clause_fields(),
    );
    s.has_preview = true;
    s
}

async fn clause_form(ManageSetup(ctx): ManageSetup) -> PageResult {
    let defaults: Values = [
        ("rule", "every_test"),
        ("min_tests_per_lot", "3"),
        ("rc_min_pct", "95"),
    ]
    .iter()
    .map(|(k, v)| (k.to_string(), v.to_string()))
    .collect();
    clause_spec(&ctx).blank(&defaults)
}

/// A form's optional code as its type: the default when left out or not known (the ledger
/// refuses an unknown one beside its field when the form is saved).
fn code_or_default<T: std::str::FromStr + Default>(code: Option<&str>) -> T {
    code.and_then(|c| c.trim().parse().ok()).unwrap_or_default()
}

/// The clause as words, escaped by its own template.
#[derive(Template)]
#[template(
    source = r#"<div class="notice" id="clause-words"><h2>As it will be applied</h2><ul>{% for w in words %}<li>{{ w }}</li>{% endfor %}</ul><p>Not saved yet.</p></div>"#,
    ext = "html"
)]
struct ClauseWords {
    words: Vec<String>,
}

async fn clause_post(
    State(s): State<AppState>,
    ManageSetup(ctx): ManageSetup,
    body: Bytes,
) -> PageResult {
    let spec = clause_spec(&ctx);
    let values = decode(&body);
    if wants_preview(&values) {
        let input: ClauseInput = match spec.input(&values, &ctx.units) {
            Ok(i) => i,
            Err(errors) => return spec.refused(&values, &errors),
        };
        let words = clause_words(&Terms {
            rc_min_pct: input.rc_min_pct,
            moisture_basis: code_or_default(input.moisture_basis.as_deref()),
            moisture_below_pct: input.moisture_below_pct,
            moisture_above_pct: input.moisture_above_pct,
            moisture_low_pct: input.moisture_low_pct,
            moisture_high_pct: input.moisture_high_pct,
            max_air_voids_pct: input.max_air_voids_pct,
            effort: input.effort.parse().ok(),
            rule: input.rule.parse().ok(),
            allowance_pct: input.allowance_pct,
            min_pwl_pct: input.min_pwl_pct,
            area_per_test_m2: input.area_per_test_m2,
            length_per_test_m: input.length_per_test_m,
            min_tests_per_lot: input.min_tests_per_lot,
            oversize_limit_pct: input.oversize_limit_pct,
            moisture_judgement: code_or_default(input.moisture_judgement.as_deref()),
            moisture_min_pwl_pct: input.moisture_min_pwl_pct,
            rc_plausible_max_pct: input.rc_plausible_max_pct,
            rounding: code_or_default(input.rounding.as_deref()),
        });
        let html = ClauseWords { words }
            .render()
            .map_err(anyhow::Error::from)
            .map_err(crate::error::AppError::from)?;
        return crate::http::pages::render(&spec.page(&values, &Default::default(), html));
    }
    let save = async |input: ClauseInput| {
        setup::create_clause(&s.db, ctx.project.id, &input, &ctx.actor).await
    };
    save_to_hub(&ctx, &spec, &body, save).await
}

fn source_spec(ctx: &Context) -> FormSpec {
    spec(
        ctx,
        "New borrow source",
        "Where fill comes from and what it is. Its lab curves are entered from its set-up line.",
        "sources/new",
        vec![
            Field::new("code", "Source code", Kind::Text, true),
            Field::new("name", "Name", Kind::Text, true),
            Field::new("description", "Description", Kind::TextArea, false),
            Field::new("uscs_class", "USCS class", Kind::Text, false).hint("e.g. SC, GW-GM"),
            Field::new("aashto_class", "AASHTO class", Kind::Text, false).hint("e.g. A-2-4"),
            Field::new("gs_fines", "Specific gravity of the fines (Gs)", Kind::Number, true)
                .hint("of the soil solids passing the oversize sieve; draws the zero-air-voids line"),
            Field::new("gs_coarse", "Bulk specific gravity of the oversize", Kind::Number, false)
                .hint("oven-dry bulk specific gravity of the retained gravel (ASTM C127 / AASHTO T 85), used by the oversize correction"),
        ],
    )
}

async fn source_form(ManageSetup(ctx): ManageSetup) -> PageResult {
    source_spec(&ctx).blank(&Values::new())
}

async fn source_post(
    State(s): State<AppState>,
    ManageSetup(ctx): ManageSetup,
    body: Bytes,
) -> PageResult {
    let save = async |input: SourceInput| {
        setup::create_source(&s.db, ctx.project.id, &input, &ctx.actor).await
    };
    save_to_hub(&ctx, &source_spec(&ctx), &body, save).await
}

fn mould_spec(ctx: &Context) -> FormSpec {
    spec(
        ctx,
        "Register a mould",
        "Each compaction mould with its calibrated volume. Lab curves entered from raw masses take the volume from here.",
        "moulds/new",
        vec![
            Field::new("code", "Mould mark", Kind::Text, true).hint("as stamped or painted on the mould"),
            Field::new("volume_cm3", "Calibrated volume (cm³)", Kind::Number, true)
                .hint("measured at calibration; nominal 944 cm³ for a 4-in and 2124 cm³ for a 6-in mould (ASTM D698)"),
            Field::new("mass_g", "Empty mass (g)", Kind::Number, false),
            Field::new("calibrated_on", "Calibrated on", Kind::Date, true),
        ],
    )
}

async fn mould_form(ManageSetup(ctx): ManageSetup) -> PageResult {
    mould_spec(&ctx).blank(&Values::new())
}

async fn mould_post(
    State(s): State<AppState>,
    ManageSetup(ctx): ManageSetup,
    body: Bytes,
) -> PageResult {
    let save = async |input: MouldInput| {
        moulds::create_mould(&s.db, ctx.project.id, &input, &ctx.actor).await
    };
    save_to_hub(&ctx, &mould_spec(&ctx), &body, save).await
}

fn layer_spec(ctx: &Context) -> FormSpec {
    spec(
        ctx,
        "New layer",
        "A lift of a zone (embankment fill, subgrade, capping…). A new zone name makes the zone.",
        "layers/new",
        vec![
            Field::new("zone", "Zone", Kind::Text, true),
            Field::new("number", "Layer number", Kind::Integer, true)
                .hint("1 is the lowest lift of the zone"),
            Field::new(
                "thickness_mm",
                "Compacted thickness (mm)",
                Kind::Number,
                false,
            ),
        ],
    )
}

async fn layer_form(ManageSetup(ctx): ManageSetup) -> PageResult {
    layer_spec(&ctx).blank(&Values::new())
}

async fn layer_post(
    State(s): State<AppState>,
    ManageSetup(ctx): ManageSetup,
    body: Bytes,
) -> PageResult {
    let save = async |input: LayerInput| {
        setup::create_layer(&s.db, ctx.project.id, &input, &ctx.actor).await
    };
    save_to_hub(&ctx, &layer_spec(&ctx), &body, save).await
}

/// The records a lot form offers: the project's layers, clauses and active curves.
pub struct LotChoices {
    pub layers: Vec<(i64, String)>,
    pub clauses: Vec<(i64, String)>,
    pub curves: Vec<(i64, String)>,
}

impl LotChoices {
    /// Reads the project's choices.
    pub async fn load(pool: &db::Pool, ctx: &Context) -> PageResult<Self> {
        let u = &ctx.units;
        let layers = db::layers::list(pool, ctx.project.id)
            .await?
            .into_iter()
            .map(|l| (l.id, format!("{} layer {}", l.zone_name, l.number)))
            .collect();
        let clauses = db::clauses::list(pool, ctx.project.id)
            .await?
            .into_iter()
            .map(|c| (c.id, format!("{} {}", c.code, c.title).trim().to_string()))
            .collect();
        let curves = db::lab_tests::list_for_project(pool, ctx.project.id)
            .await?
            .into_iter()
            .filter(|t| t.status == CurveStatus::Active && t.approval != Approval::NeedsApproval)
            .map(|t| {
                (
                    t.id,
                    format!(
                        "{} · MDD {} at OMC {:.1} %",
                        t.code,
                        u.density_with_unit(t.max_dry_density_kg_m3),
                        t.optimum_water_content_pct
                    ),
                )
            })
            .collect();
        Ok(Self {
            layers,
            clauses,
            curves,
        })
    }

    /// The fields every lot form shares: layer, offsets, clause and curve.
    pub fn fields(&self, offset_unit: &str) -> Vec<Field> {
        vec![
            Field::new("layer_id", "Layer", Kind::Record(self.layers.clone()), true),
            Field::new(
                "offset_left_m",
                &format!("Left edge offset ({offset_unit})"),
                Kind::Number,
                true,
            )
            .hint("from the centreline, negative to the left"),
            Field::new(
                "offset_right_m",
                &format!("Right edge offset ({offset_unit})"),
                Kind::Number,
                true,
            ),
            Field::new(
                "clause_id",
                "Clause",
                Kind::Record(self.clauses.clone()),
                true,
            ),
            Field::new(
                "lab_test_id",
                "Reference lab curve",
                Kind::Record(self.curves.clone()),
                true,
            )
            .hint("active curves only; the clause's effort must match"),
        ]
    }
}

async fn lot_spec(s: &AppState, ctx: &Context) -> PageResult<FormSpec> {
    let choices = LotChoices::load(&s.db, ctx).await?;
    let mut fields = vec![
        Field::new("code", "Lot code", Kind::Text, true),
        Field::new("chainage_from_m", "From chainage", Kind::Chainage, true),
        Field::new("chainage_to_m", "To chainage", Kind::Chainage, true),
    ];
    fields.extend(choices.fields("m"));
    Ok(spec(
        ctx,
        "New lot",
        "One lot of a layer, judged by a clause against a lab curve. To divide a whole stretch at once, use the split page.",
        "lots/new",
        fields,
    ))
}

async fn lot_form(State(s): State<AppState>, ManageSetup(ctx): ManageSetup) -> PageResult {
    lot_spec(&s, &ctx).await?.blank(&Values::new())
}

async fn lot_post(
    State(s): State<AppState>,
    ManageSetup(ctx): ManageSetup,
    body: Bytes,
) -> PageResult {
    let values = decode(&body);
    let saved = lot_spec(&s, &ctx)
        .await?
        .submit(&values, &ctx.units, async |input: LotInput| {
            setup::create_lot(&s.db, ctx.project.id, &input, &ctx.actor).await
        })
        .await?;
    Ok(saved.map_or_else(
        |refused| refused,
        |lot| see_other(&format!("/lots/{}", lot.id)),
    ))
}
