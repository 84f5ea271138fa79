//! The JSON API, version 1, under `/api/v1`.

mod accounts;
mod archive;
mod calc;
mod certificates;
mod field_tests;
pub mod instruments;
pub mod openapi;
mod people;
pub mod planning;
mod projects;
mod signoff;
pub mod transfer;
mod verdicts;

use axum::Router;

use crate::app::AppState;

/// All `/api/v1` routes.
pub fn router() -> Router<AppState> {
    Router::new()
        .merge(accounts::router())
        .merge(projects::router())
        .merge(field_tests::router())
        .merge(calc::router())
        .merge(certificates::router())
        .merge(openapi::router())
        .merge(transfer::router())
        .merge(verdicts::router())
        .merge(people::router())
        .merge(signoff::router())
        .merge(archive::router())
        .merge(planning::router())
        .merge(instruments::router())
}

/// Paging parameters shared by every list.
#[derive(Debug, Clone, Copy, serde::Deserialize)]
pub struct Page {
    pub page: Option<i64>,
    pub per_page: Option<i64>,
}

impl Page {
    /// (limit, offset) with `per_page` capped at 1000.
    pub fn limit_offset(&self) -> crate::error::Result<(i64, i64)> {
        let per = self.per_page.unwrap_or(100);
        if !(1..=1000).contains(&per) {
            return Err(crate::error::AppError::invalid(
                "per_page",
                "must be between 1 and 1000",
            ));
        }
        let page = self.page.unwrap_or(1);
        if page < 1 {
            return Err(crate::error::AppError::invalid("page", "must be 1 or more"));
        }
        // A page far past the end must not overflow the offset.
        let offset = (page - 1)
            .checked_mul(per)
            .ok_or_else(|| crate::error::AppError::invalid("page", "is too large"))?;
        Ok((per, offset))
    }
}
