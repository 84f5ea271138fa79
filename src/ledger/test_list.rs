//! The test list: a project's judged tests under the list's filters, newest first.

use serde::Deserialize;

use super::lot_report::{LotReport, TestLine};
use super::overview;
use crate::error::AppError;
use crate::present::Units;
use crate::reduction::Chainage;

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
    pub fn query(&self) -> String {
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

/// Newest first, as the list shows them.
fn newest_first(a: &Listed, b: &Listed) -> std::cmp::Ordering {
    b.line
        .test
        .tested_at
        .cmp(&a.line.test.tested_at)
        .then(b.line.test.id.cmp(&a.line.test.id))
}

/// The filters read into typed bounds; each refusal names its field.
struct Bounds {
    from: Option<f64>,
    to: Option<f64>,
    date_from: Option<String>,
    date_to: Option<String>,
    layer: Option<i64>,
}

impl Bounds {
    fn parse(f: &Filters, u: &Units) -> Result<Self, AppError> {
        let ch = |field: &str, v: &str| -> Result<Option<f64>, AppError> {
            if v.trim().is_empty() {
                return Ok(None);
            }
            Chainage::parse(v.trim(), u.chainage)
                .map(|c| Some(c.metres()))
                .map_err(|e| AppError::invalid(field, e.to_string()))
        };
        let date = |field: &str, v: &str| -> Result<Option<String>, AppError> {
            if v.trim().is_empty() {
                Ok(None)
            } else {
                crate::ledger::validate::date(field, v).map(Some)
            }
        };
        let from = ch("from", &f.from)?;
        let to = ch("to", &f.to)?;
        let date_from = date("date_from", &f.date_from)?;
        let date_to = date("date_to", &f.date_to)?;
        let layer = if f.layer.is_empty() {
            None
        } else {
            Some(
                f.layer
                    .parse()
                    .map_err(|_| AppError::invalid("layer", "choose a layer from the list"))?,
            )
        };
        Ok(Bounds {
            from,
            to,
            date_from,
            date_to,
            layer,
        })
    }

    /// Whether a judged test passes every filter (the layer is chosen by lot beforehand).
    fn admits(&self, f: &Filters, line: &TestLine) -> bool {
        let t = &line.test;
        let day = crate::clock::date_of(&t.tested_at);
        !(self.from.is_some_and(|m| t.chainage_m < m)
            || self.to.is_some_and(|m| t.chainage_m > m)
            || self.date_from.as_ref().is_some_and(|d| day < *d)
            || self.date_to.as_ref().is_some_and(|d| day > *d)
            || (!f.method.is_empty() && t.method.code() != f.method)
            || (!f.verdict.is_empty() && line.result().code() != f.verdict))
    }
}

/// Applies the filters to every judged test of the project, newest first; returns the
/// first `limit` selected (all when `None`) and how many were selected in all.
///
/// A page (`limit` given) judges only the lots of the tests it shows; the whole list
/// (a download) judges lots one at a time, keeping only selected lines.
pub async fn select(
    pool: &crate::db::Pool,
    project_id: i64,
    f: &Filters,
    u: &Units,
    limit: Option<usize>,
) -> Result<(Vec<Listed>, usize), AppError> {
    let bounds = Bounds::parse(f, u)?;
    match limit {
        // Without a verdict filter the database picks the newest tests; only their lots
        // are judged (a whole pass would judge every lot of the project).
        Some(n) if f.verdict.is_empty() => {
            newest_from_database(pool, project_id, f, &bounds, n).await
        }
        // With one, the stored summaries say which tests have that result.
        Some(n) => newest_with_result(pool, project_id, f, &bounds, n).await,
        _ => judged_pass(pool, project_id, f, &bounds, limit).await,
    }
}

/// The database's filter of the typed bounds, `n` at most.
fn database_filter(
    f: &Filters,
    b: &Bounds,
    n: usize,
) -> Result<crate::db::field_tests::TestFilter, AppError> {
    let next_day = |d: &String| -> Result<String, AppError> {
        let fmt = time::macros::format_description!("[year]-[month]-[day]");
        let day = time::Date::parse(d, &fmt)
            .map_err(|_| AppError::invalid("date_to", "not a date like 2026-12-01"))?;
        Ok(day.next_day().unwrap_or(day).to_string())
    };
    Ok(crate::db::field_tests::TestFilter {
        lot_id: None,
        layer_id: b.layer,
        chainage_from_m: b.from,
        chainage_to_m: b.to,
        tested_from: b.date_from.clone(),
        tested_before: b.date_to.as_ref().map(next_day).transpose()?,
        method: (!f.method.is_empty()).then(|| f.method.clone()),
        limit: i64::try_from(n).unwrap_or(i64::MAX),
        offset: 0,
    })
}

/// The newest `n` tests the database selects, each judged with its lot, and how many match.
async fn newest_from_database(
    pool: &crate::db::Pool,
    project_id: i64,
    f: &Filters,
    b: &Bounds,
    n: usize,
) -> Result<(Vec<Listed>, usize), AppError> {
    let filter = database_filter(f, b, n)?;
    let total = crate::db::field_tests::count_matching(pool, project_id, &filter).await?;
    let newest = crate::db::field_tests::list(pool, project_id, &filter).await?;
    let picked: Vec<(i64, i64)> = newest.iter().map(|t| (t.id, t.lot_id)).collect();
    let out = lines_of(pool, &picked).await?;
    Ok((out, usize::try_from(total).unwrap_or(0)))
}

/// The newest `n` tests with the wanted result, and how many there are: the results come
/// from the lots' stored summaries (no lot is judged for the choice), the other filters
/// from the database; only the lots of the tests shown are judged, for their lines.
async fn newest_with_result(
    pool: &crate::db::Pool,
    project_id: i64,
    f: &Filters,
    b: &Bounds,
    n: usize,
) -> Result<(Vec<Listed>, usize), AppError> {
    let wanted =
        super::lot_summaries::tests_with_result(pool, project_id, b.layer, &f.verdict).await?;
    if wanted.is_empty() {
        return Ok((Vec::new(), 0));
    }
    let filter = database_filter(f, b, n)?;
    let matching: Vec<(i64, i64)> = crate::db::field_tests::ids_matching(pool, project_id, &filter)
        .await?
        .into_iter()
        .filter(|(id, _)| wanted.contains(id))
        .collect();
    let total = matching.len();
    let out = lines_of(pool, &matching[..n.min(total)]).await?;
    Ok((out, total))
}

/// The judged lines of the picked (test, lot) pairs, in their order, each lot judged once.
async fn lines_of(pool: &crate::db::Pool, picked: &[(i64, i64)]) -> Result<Vec<Listed>, AppError> {
    let mut lots: std::collections::HashMap<i64, LotReport> = Default::default();
    let mut out = Vec::with_capacity(picked.len());
    for &(test_id, lot_id) in picked {
        if let std::collections::hash_map::Entry::Vacant(e) = lots.entry(lot_id) {
            e.insert(crate::ledger::lot_report::build(pool, lot_id).await?);
        }
        let r = &lots[&lot_id];
        if let Some(line) = r.tests.iter().find(|l| l.test.id == test_id) {
            out.push(Listed {
                lot: r.lot.clone(),
                line: line.clone(),
            });
        }
    }
    Ok(out)
}

/// Every lot of the project judged in turn, its tests filtered; the newest `limit` kept.
async fn judged_pass(
    pool: &crate::db::Pool,
    project_id: i64,
    f: &Filters,
    b: &Bounds,
    limit: Option<usize>,
) -> Result<(Vec<Listed>, usize), AppError> {
    let mut out = Vec::new();
    let mut total = 0usize;
    let keep = |lot: &crate::db::lots::Lot| b.layer.is_none_or(|l| l == lot.layer_id);
    overview::each_report(pool, project_id, keep, true, |r: LotReport| {
        for line in r.tests {
            if !b.admits(f, &line) {
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
