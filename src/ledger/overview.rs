//! Whole-project views: every lot judged, loaded in a handful of queries.

use std::collections::HashMap;

use super::lot_report::{self, LotReport};
use crate::db::{self, Pool};
use crate::error::{AppError, Result};

/// Every lot of a project judged, in layer then chainage order.
#[tracing::instrument(skip(pool))]
pub async fn project_reports(pool: &Pool, project_id: i64) -> Result<Vec<LotReport>> {
    let project = db::projects::get(pool, project_id).await?.ok_or_else(|| {
        AppError::not_found("project_id", format!("project {project_id} does not exist"))
    })?;
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?;
    let clauses: HashMap<i64, _> = db::clauses::list(pool, project_id)
        .await?
        .into_iter()
        .map(|c| (c.id, c))
        .collect();
    let sources: HashMap<i64, _> = db::sources::list(pool, project_id)
        .await?
        .into_iter()
        .map(|s| (s.id, s))
        .collect();
    let labs: HashMap<i64, _> = db::lab_tests::list_for_project(pool, project_id)
        .await?
        .into_iter()
        .map(|l| (l.id, l))
        .collect();
    let mut tests: HashMap<i64, Vec<db::field_tests::FieldTest>> = HashMap::new();
    for t in db::field_tests::all_for_project(pool, project_id).await? {
        tests.entry(t.lot_id).or_default().push(t);
    }
    let mut current_certs: HashMap<i64, db::certificates::Certificate> = HashMap::new();
    for c in db::certificates::for_project(pool, project_id).await? {
        if c.superseded_at.is_none() {
            current_certs.insert(c.lot_id, c);
        }
    }
    let missing = |what: &str, id: i64| anyhow::anyhow!("lot {id} refers to a missing {what}");
    lots.into_iter()
        .map(|lot| {
            let id = lot.id;
            let clause = clauses
                .get(&lot.clause_id)
                .cloned()
                .ok_or_else(|| missing("clause", id))?;
            let source = sources
                .get(&lot.source_id)
                .cloned()
                .ok_or_else(|| missing("source", id))?;
            let lab = labs
                .get(&lot.lab_test_id)
                .cloned()
                .ok_or_else(|| missing("lab test", id))?;
            let lot_tests = tests.remove(&id).unwrap_or_default();
            let cert = current_certs.remove(&id);
            lot_report::assemble(lot, project.clone(), clause, source, lab, lot_tests, cert)
        })
        .collect()
}
