//! Which project a record belongs to, so permissions can be checked before anything else.

use super::Pool;
use super::on_pool;

/// The project of a lot.
pub async fn project_of_lot(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM lots WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The project of a field test.
pub async fn project_of_test(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM field_tests WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The project of a borrow source.
pub async fn project_of_source(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM sources WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The project of a lab test.
pub async fn project_of_lab_test(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT s.project_id FROM lab_tests t JOIN sources s ON s.id = t.source_id WHERE t.id = $1",
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The project of a certificate.
pub async fn project_of_certificate(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM certificates WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Whether a project exists.
pub async fn project_exists(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT id FROM projects WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// The project of an API token.
pub async fn project_of_token(pool: &Pool, id: i64) -> sqlx::Result<Option<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM api_tokens WHERE id = $1"
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}
