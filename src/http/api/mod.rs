//! The JSON API, version 1, under `/api/v1`.
//!
//! Each resource module exposes an `OpenApiRouter` whose routes come from its handlers'
//! `#[utoipa::path]`, so a route and its entry in the OpenAPI document are one thing.

mod accounts;
pub mod answers;
mod archive;
pub mod bodies;
mod calc;
mod certificates;
pub mod codes;
pub mod doc;
mod docs_page;
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
use utoipa::OpenApi;
use utoipa_axum::router::OpenApiRouter;

use crate::app::AppState;

/// Every documented route but the import (which is mounted under its own body limit).
fn documented() -> OpenApiRouter<AppState> {
    OpenApiRouter::with_openapi(doc::ApiDoc::openapi())
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

/// All `/api/v1` routes but the import, and the interactive API page.
pub fn router() -> Router<AppState> {
    let (routes, _) = documented().split_for_parts();
    routes.merge(docs_page::router())
}

/// The import route (the caller mounts it under the import body limit).
pub fn import_router() -> Router<AppState> {
    transfer::import_router().split_for_parts().0
}

/// The OpenAPI document of every route above, built from the same routers.
pub fn document() -> utoipa::openapi::OpenApi {
    let mut all = documented().into_openapi();
    all.merge(transfer::import_router().into_openapi());
    doc::name_operations(&mut all);
    all
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
