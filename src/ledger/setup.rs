//! Creating the frame that tests are judged in: projects, clauses, sources, lab curves, layers and lots.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::{code, number, optional_text, quantity, text};
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::error::{AppError, Result};
use crate::reduction::{self, ChainageStyle, SpecificGravity, UnitSystem};

/// Body of a new project.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProjectInput {
    pub code: String,
    pub name: String,
    #[serde(default)]
    pub contract: String,
    #[serde(default)]
    pub client: String,
    #[serde(default)]
    pub contractor: String,
    #[serde(default = "default_units")]
    pub unit_system: String,
    #[serde(default = "default_chainage_style")]
    pub chainage_style: String,
}

fn default_units() -> String {
    "si".into()
}
fn default_chainage_style() -> String {
    "km_metre".into()
}

pub(super) async fn audit_insert(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    entity: &str,
    id: i64,
    project_id: i64,
    after: serde_json::Value,
    now: &str,
) -> Result<()> {
    audit::record(
        tx,
        &audit::Change {
            actor: &actor.name,
            action: "create",
            entity,
            entity_id: Some(id),
            project_id: Some(project_id),
            before: None,
            after: Some(after),
            origin: &actor.origin,
        },
        now,
    )
    .await?;
    Ok(())
}

pub(super) fn unique(field: &str, what: &str) -> impl FnOnce(sqlx::Error) -> AppError {
    let field = field.to_string();
    let what = what.to_string();
    move |e| {
        if db::is_unique_violation(&e) {
            AppError::conflict(field, format!("{what} already exists"), vec![])
        } else {
            e.into()
        }
    }
}

pub use super::clauses::{ClauseInput, clause_moisture, clause_rule, create_clause};
pub use super::lab_curves::{
    CustomEffortInput, LabPointInput, LabTestInput, create_lab_test, reduce_lab_point,
    resolve_effort,
};

/// Creates a project.
pub async fn create_project(
    pool: &Pool,
    input: &ProjectInput,
    actor: &Actor,
) -> Result<db::projects::Project> {
    let unit = UnitSystem::parse_code(&input.unit_system)
        .ok_or_else(|| AppError::invalid("unit_system", "must be \"si\" or \"us\""))?;
    let style = ChainageStyle::parse_code(&input.chainage_style).ok_or_else(|| {
        AppError::invalid("chainage_style", "must be \"km_metre\" or \"feet_station\"")
    })?;
    let new = db::projects::NewProject {
        code: code("code", &input.code)?.to_ascii_uppercase(),
        name: text("name", &input.name, 200)?,
        contract: optional_text("contract", &input.contract, 200)?,
        client: optional_text("client", &input.client, 200)?,
        contractor: optional_text("contractor", &input.contractor, 200)?,
        unit_system: unit.code().to_string(),
        chainage_style: style.code().to_string(),
    };
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let p = db::projects::insert(&mut tx, &new, &now)
        .await
        .map_err(unique("code", &format!("a project with code {}", new.code)))?;
    audit_insert(&mut tx, actor, "project", p.id, p.id, json!(p), &now).await?;
    tx.commit().await?;
    Ok(p)
}

/// Body of a new borrow source.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SourceInput {
    pub code: String,
    pub name: String,
    #[serde(default)]
    pub description: String,
    #[serde(default)]
    pub uscs_class: String,
    #[serde(default)]
    pub aashto_class: String,
    pub gs_fines: f64,
    /// Bulk (oven-dry) specific gravity of the oversize particles (ASTM C127 / AASHTO T 85), used
    /// by the oversize correction — not the solids Gs of ASTM D854.
    pub gs_coarse: Option<f64>,
}

/// Creates a borrow source in a project.
pub async fn create_source(
    pool: &Pool,
    project_id: i64,
    input: &SourceInput,
    actor: &Actor,
) -> Result<db::sources::Source> {
    require_project(pool, project_id).await?;
    let gs = quantity("gs_fines", SpecificGravity::new(input.gs_fines))?;
    let gs_coarse = input
        .gs_coarse
        .map(|g| quantity("gs_coarse", SpecificGravity::new(g)).map(|g| g.value()))
        .transpose()?;
    let source = db::sources::Source {
        id: 0,
        project_id,
        code: code("code", &input.code)?,
        name: text("name", &input.name, 200)?,
        description: optional_text("description", &input.description, 2000)?,
        uscs_class: optional_text("uscs_class", &input.uscs_class, 20)?,
        aashto_class: optional_text("aashto_class", &input.aashto_class, 20)?,
        gs_fines: gs.value(),
        gs_coarse,
        created_at: clock::now(),
    };
    let mut tx = db::begin_write(pool).await?;
    let s = db::sources::insert(&mut tx, &source)
        .await
        .map_err(unique("code", &format!("source {}", source.code)))?;
    audit_insert(
        &mut tx,
        actor,
        "source",
        s.id,
        project_id,
        json!(s),
        &s.created_at,
    )
    .await?;
    tx.commit().await?;
    Ok(s)
}

/// Body of a new layer.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayerInput {
    pub zone: String,
    #[serde(deserialize_with = "crate::ledger::validate::whole::i64")]
    pub number: i64,
    pub thickness_mm: Option<f64>,
}

/// Creates a layer (and its zone when new).
pub async fn create_layer(
    pool: &Pool,
    project_id: i64,
    input: &LayerInput,
    actor: &Actor,
) -> Result<db::layers::Layer> {
    require_project(pool, project_id).await?;
    let zone = text("zone", &input.zone, 80)?;
    let number = number("number", input.number as f64, 1.0, 999.0, "")? as i64;
    let thickness = input
        .thickness_mm
        .map(|t| number_mm("thickness_mm", t))
        .transpose()?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let z = db::layers::zone_by_name_or_insert(&mut tx, project_id, &zone).await?;
    let id = db::layers::insert(&mut tx, project_id, z.id, number, thickness, &now)
        .await
        .map_err(unique("number", &format!("layer {number} of zone {zone}")))?;
    audit_insert(
        &mut tx,
        actor,
        "layer",
        id,
        project_id,
        json!({"zone": zone, "number": number, "thickness_mm": thickness}),
        &now,
    )
    .await?;
    tx.commit().await?;
    db::layers::get(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("layer {id} vanished after insert").into())
}

fn number_mm(field: &str, v: f64) -> Result<f64> {
    number(field, v, 10.0, 2000.0, "mm")
}

/// Body of a new lot.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LotInput {
    pub code: String,
    pub layer_id: i64,
    pub chainage_from_m: f64,
    pub chainage_to_m: f64,
    pub offset_left_m: f64,
    pub offset_right_m: f64,
    pub clause_id: i64,
    pub lab_test_id: i64,
}

/// Checks a lot's body against the project: its layer, clause and active lab curve,
/// its chainage and offsets. Nothing is written.
pub async fn check_lot(pool: &Pool, project_id: i64, input: &LotInput) -> Result<db::lots::NewLot> {
    require_project(pool, project_id).await?;
    let layer = db::layers::get(pool, input.layer_id).await?;
    if layer.as_ref().is_none_or(|l| l.project_id != project_id) {
        return Err(AppError::invalid(
            "layer_id",
            format!("layer {} is not a layer of this project", input.layer_id),
        ));
    }
    let clause = db::clauses::get(pool, input.clause_id).await?;
    if clause.as_ref().is_none_or(|c| c.project_id != project_id) {
        return Err(AppError::invalid(
            "clause_id",
            format!("clause {} is not a clause of this project", input.clause_id),
        ));
    }
    let lab = db::lab_tests::get(pool, input.lab_test_id)
        .await?
        .ok_or_else(|| {
            AppError::invalid(
                "lab_test_id",
                format!("lab test {} does not exist", input.lab_test_id),
            )
        })?;
    let source = db::sources::get(pool, lab.source_id)
        .await?
        .filter(|s| s.project_id == project_id)
        .ok_or_else(|| {
            AppError::invalid(
                "lab_test_id",
                "the lab test's source is not in this project",
            )
        })?;
    super::reference::check_lot_reference(
        clause
            .as_ref()
            .ok_or_else(|| anyhow::anyhow!("clause vanished"))?,
        &lab,
    )?;
    let from = quantity(
        "chainage_from_m",
        reduction::Chainage::new(input.chainage_from_m),
    )?;
    let to = quantity(
        "chainage_to_m",
        reduction::Chainage::new(input.chainage_to_m),
    )?;
    if to.metres() <= from.metres() {
        return Err(AppError::invalid(
            "chainage_to_m",
            "must be greater than chainage_from_m",
        ));
    }
    let left = quantity("offset_left_m", reduction::Offset::new(input.offset_left_m))?;
    let right = quantity(
        "offset_right_m",
        reduction::Offset::new(input.offset_right_m),
    )?;
    if right.metres() <= left.metres() {
        return Err(AppError::invalid(
            "offset_right_m",
            "must be greater than offset_left_m",
        ));
    }
    Ok(db::lots::NewLot {
        project_id,
        layer_id: input.layer_id,
        code: code("code", &input.code)?,
        chainage_from_m: from.metres(),
        chainage_to_m: to.metres(),
        offset_left_m: left.metres(),
        offset_right_m: right.metres(),
        clause_id: input.clause_id,
        source_id: source.id,
        lab_test_id: lab.id,
    })
}

/// Writes a checked lot with its audit row inside the caller's transaction.
pub async fn insert_lot(
    tx: &mut db::Tx<'_>,
    new: &db::lots::NewLot,
    actor: &Actor,
    now: &str,
) -> Result<i64> {
    let id = db::lots::insert(tx, new, &actor.name, now)
        .await
        .map_err(unique("code", &format!("lot {}", new.code)))?;
    audit_insert(
        tx,
        actor,
        "lot",
        id,
        new.project_id,
        json!({"code": new.code, "layer_id": new.layer_id, "chainage_from_m": new.chainage_from_m,
               "chainage_to_m": new.chainage_to_m, "offset_left_m": new.offset_left_m,
               "offset_right_m": new.offset_right_m, "clause_id": new.clause_id, "lab_test_id": new.lab_test_id}),
        now,
    )
    .await?;
    Ok(id)
}

/// Creates a lot on a layer, judged by a clause against an active lab curve.
pub async fn create_lot(
    pool: &Pool,
    project_id: i64,
    input: &LotInput,
    actor: &Actor,
) -> Result<db::lots::Lot> {
    let new = check_lot(pool, project_id, input).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let id = insert_lot(&mut tx, &new, actor, &now).await?;
    tx.commit().await?;
    db::lots::get(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("lot {id} vanished after insert").into())
}

/// Fails with 404 naming `project_id` when the project does not exist.
pub async fn require_project(pool: &Pool, project_id: i64) -> Result<db::projects::Project> {
    db::projects::get(pool, project_id).await?.ok_or_else(|| {
        AppError::not_found("project_id", format!("project {project_id} does not exist"))
    })
}
