//! The mould register: a lab specimen's volume comes from its mould's calibration.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::{code, date, number};
use crate::clock;
use crate::db::{self, Pool, audit};
use crate::error::{AppError, Result};

/// Body of a new mould.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MouldInput {
    pub code: String,
    /// Volume measured at calibration (water filling or dimensions), cm³.
    pub volume_cm3: f64,
    /// The empty mould's mass, g (a default for its specimens).
    pub mass_g: Option<f64>,
    pub calibrated_on: String,
}

/// Registers a mould in a project.
pub async fn create_mould(
    pool: &Pool,
    project_id: i64,
    input: &MouldInput,
    actor: &Actor,
) -> Result<db::moulds::Mould> {
    super::setup::require_project(pool, project_id).await?;
    let now = clock::now();
    let mould = db::moulds::Mould {
        id: 0,
        project_id,
        code: code("code", &input.code)?,
        // 100–20,000 cm³ spans the 4-in (944 cm³) and 6-in (2124 cm³) moulds of
        // ASTM D698/D1557 and the larger CBR and vibrating-hammer moulds (common practice).
        volume_cm3: number("volume_cm3", input.volume_cm3, 100.0, 20_000.0, "cm³")?,
        mass_g: input
            .mass_g
            .map(|m| number("mass_g", m, 1.0, 50_000.0, "g"))
            .transpose()?,
        calibrated_on: date("calibrated_on", &input.calibrated_on)?,
        created_at: now.clone(),
        created_by: actor.name.clone(),
    };
    let mut tx = db::begin_write(pool).await?;
    let m = db::moulds::insert(&mut tx, &mould).await.map_err(|e| {
        if db::is_unique_violation(&e) {
            AppError::conflict(
                "code",
                format!("mould {} already exists", mould.code),
                vec![],
            )
        } else {
            e.into()
        }
    })?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "create",
            entity: "mould",
            entity_id: Some(m.id),
            project_id: Some(project_id),
            before: None,
            after: Some(json!(m)),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(m)
}
