//! Users, memberships, sessions, API tokens and failed sign-ins.

use serde::Serialize;

use super::{Pool, Tx};
use super::{on_pool, on_tx};
use crate::auth::Role;

/// A stored user (the password hash is never serialised).
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct User {
    pub id: i64,
    pub username: String,
    pub display_name: String,
    #[serde(skip)]
    pub password_hash: String,
    /// 1 for an administrator (stored as an integer on every engine).
    pub is_admin: i64,
    /// 1 for an invented demo user.
    pub is_demo: i64,
    pub disabled_at: Option<String>,
    pub created_at: String,
    /// 1 when the password was set by someone else (reset, first start) and must be changed.
    pub must_change_password: i64,
}

impl User {
    /// True for an administrator.
    pub fn admin(&self) -> bool {
        self.is_admin != 0
    }
}

const USER: &str = "SELECT id, username, display_name, password_hash, is_admin, is_demo, disabled_at, created_at, \
    must_change_password FROM users";

/// Inserts a user.
pub async fn insert(
    tx: &mut Tx<'_>,
    username: &str,
    display_name: &str,
    password_hash: &str,
    is_admin: bool,
    is_demo: bool,
    now: &str,
) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "INSERT INTO users (username, display_name, password_hash, is_admin, is_demo, created_at)
         VALUES ($1, $2, $3, $4, $5, $6) RETURNING id",
    )
    .bind(username)
    .bind(display_name)
    .bind(password_hash)
    .bind(i64::from(is_admin))
    .bind(i64::from(is_demo))
    .bind(now)
    .fetch_one(&mut **tx)
    .await)
}

/// A user by name.
pub async fn by_username(pool: &Pool, username: &str) -> sqlx::Result<Option<User>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, User>(sqlx::AssertSqlSafe(
        format!("{USER} WHERE username = $1")
    ))
    .bind(username)
    .fetch_optional(pool)
    .await)
}

/// A user by id.
pub async fn get(pool: &Pool, id: i64) -> sqlx::Result<Option<User>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, User>(sqlx::AssertSqlSafe(
        format!("{USER} WHERE id = $1")
    ))
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// How many users exist (zero on a new database).
pub async fn count(pool: &Pool) -> sqlx::Result<i64> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT COUNT(*) FROM users"
    )
    .fetch_one(pool)
    .await)
}

/// Every user, by name.
pub async fn list(pool: &Pool) -> sqlx::Result<Vec<User>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, User>(sqlx::AssertSqlSafe(
        format!("{USER} ORDER BY username")
    ))
    .fetch_all(pool)
    .await)
}

/// Grants (or changes) a user's role in a project.
pub async fn grant(
    tx: &mut Tx<'_>,
    user_id: i64,
    project_id: i64,
    role: Role,
    now: &str,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "INSERT INTO memberships (user_id, project_id, role, created_at) VALUES ($1, $2, $3, $4)
         ON CONFLICT (user_id, project_id) DO UPDATE SET role = excluded.role",
    )
    .bind(user_id)
    .bind(project_id)
    .bind(role)
    .bind(now)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Ends a membership; false when the user was not a member.
pub async fn remove_membership(
    tx: &mut Tx<'_>,
    user_id: i64,
    project_id: i64,
) -> sqlx::Result<Option<Role>> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "DELETE FROM memberships WHERE user_id = $1 AND project_id = $2 RETURNING role",
    )
    .bind(user_id)
    .bind(project_id)
    .fetch_optional(&mut **tx)
    .await)
}

/// Disables (`Some(now)`) or re-enables (`None`) a user; false when nothing changed.
pub async fn set_disabled(
    tx: &mut Tx<'_>,
    user_id: i64,
    disabled_at: Option<&str>,
) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| (match disabled_at {
        Some(at) => {
            sqlx::query("UPDATE users SET disabled_at = $1 WHERE id = $2 AND disabled_at IS NULL")
                .bind(at)
                .bind(user_id)
        }
        None => sqlx::query(
            "UPDATE users SET disabled_at = NULL WHERE id = $1 AND disabled_at IS NOT NULL",
        )
        .bind(user_id),
    })
    .execute(&mut **tx)
    .await?
    .rows_affected());
    Ok(super::changed_one(q))
}

/// Stores a new password hash; `must_change` makes the next sign-in ask for a new one.
pub async fn set_password(
    tx: &mut Tx<'_>,
    user_id: i64,
    password_hash: &str,
    must_change: bool,
) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "UPDATE users SET password_hash = $1, must_change_password = $2 WHERE id = $3"
    )
    .bind(password_hash)
    .bind(i64::from(must_change))
    .bind(user_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Marks a user's password as one to change at next sign-in (the first admin's).
pub async fn require_password_change(tx: &mut Tx<'_>, user_id: i64) -> sqlx::Result<()> {
    on_tx!(tx, |tx| sqlx::query(
        "UPDATE users SET must_change_password = 1 WHERE id = $1"
    )
    .bind(user_id)
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Ends every live session of a user, except `keep` when given; returns how many ended.
pub async fn end_sessions_of(
    tx: &mut Tx<'_>,
    user_id: i64,
    keep: Option<i64>,
    now: &str,
) -> sqlx::Result<u64> {
    let done = on_tx!(tx, |tx| {
        sqlx::query(
        "UPDATE sessions SET ended_at = $1 WHERE user_id = $2 AND ended_at IS NULL AND id <> $3",
    )
    .bind(now)
    .bind(user_id)
    .bind(keep.unwrap_or(0))
    .execute(&mut **tx)
    .await
    .map(|r| r.rows_affected())
    })?;
    Ok(done)
}

/// A user's role in a project, if a member.
pub async fn role_in(pool: &Pool, user_id: i64, project_id: i64) -> sqlx::Result<Option<Role>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT role FROM memberships WHERE user_id = $1 AND project_id = $2"
    )
    .bind(user_id)
    .bind(project_id)
    .fetch_optional(pool)
    .await)
}

/// Ids of the projects a user belongs to.
pub async fn project_ids(pool: &Pool, user_id: i64) -> sqlx::Result<Vec<i64>> {
    on_pool!(pool, |pool| sqlx::query_scalar(
        "SELECT project_id FROM memberships WHERE user_id = $1 ORDER BY project_id"
    )
    .bind(user_id)
    .fetch_all(pool)
    .await)
}

/// Members of a project with their roles.
pub async fn members(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<(String, String, Role)>> {
    on_pool!(pool, |pool| {
        sqlx::query_as(
        "SELECT u.username, u.display_name, m.role FROM memberships m JOIN users u ON u.id = m.user_id
         WHERE m.project_id = $1 ORDER BY u.username",
    )
    .bind(project_id)
    .fetch_all(pool)
    .await
    })
}

/// A live session found by its token hash.
#[derive(Debug, Clone, sqlx::FromRow)]
pub struct Session {
    pub id: i64,
    pub user_id: i64,
    pub created_at: String,
    pub last_seen_at: String,
}

/// Starts a session.
pub async fn start_session(
    tx: &mut Tx<'_>,
    token_hash: &str,
    user_id: i64,
    now: &str,
) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| {
        sqlx::query_scalar(
        "INSERT INTO sessions (token_hash, user_id, created_at, last_seen_at) VALUES ($1, $2, $3, $4) RETURNING id",
    )
    .bind(token_hash)
    .bind(user_id)
    .bind(now)
    .bind(now)
    .fetch_one(&mut **tx)
    .await
    })
}

/// The live session with this token hash.
pub async fn session(pool: &Pool, token_hash: &str) -> sqlx::Result<Option<Session>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, Session>(
        "SELECT id, user_id, created_at, last_seen_at FROM sessions WHERE token_hash = $1 AND ended_at IS NULL",
    )
    .bind(token_hash)
    .fetch_optional(pool)
    .await
    })
}

/// A live session with its user, read in one query (every signed-in request needs both).
#[derive(Debug, Clone, sqlx::FromRow)]
pub struct SessionUser {
    pub session_id: i64,
    pub session_created_at: String,
    pub session_last_seen_at: String,
    #[sqlx(flatten)]
    pub user: User,
}

/// The live session with this token hash, and its user.
pub async fn session_user(pool: &Pool, token_hash: &str) -> sqlx::Result<Option<SessionUser>> {
    on_pool!(pool, |pool| {
        sqlx::query_as::<_, SessionUser>(
        "SELECT s.id AS session_id, s.created_at AS session_created_at, s.last_seen_at AS session_last_seen_at,
                u.id, u.username, u.display_name, u.password_hash, u.is_admin, u.is_demo, u.disabled_at,
                u.created_at, u.must_change_password
         FROM sessions s JOIN users u ON u.id = s.user_id
         WHERE s.token_hash = $1 AND s.ended_at IS NULL",
    )
    .bind(token_hash)
    .fetch_optional(pool)
    .await
    })
}

/// Records that a session was used now.
pub async fn touch_session(pool: &Pool, id: i64, now: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "UPDATE sessions SET last_seen_at = $1 WHERE id = $2"
    )
    .bind(now)
    .bind(id)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Ends a session (sign-out, idle expiry or rotation).
pub async fn end_session(pool: &Pool, id: i64, now: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "UPDATE sessions SET ended_at = $1 WHERE id = $2 AND ended_at IS NULL"
    )
    .bind(now)
    .bind(id)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Ends a session inside a transaction; false when it had already ended.
pub async fn end_session_tx(tx: &mut Tx<'_>, id: i64, now: &str) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| sqlx::query(
        "UPDATE sessions SET ended_at = $1 WHERE id = $2 AND ended_at IS NULL"
    )
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await?
    .rows_affected());
    Ok(super::changed_one(q))
}

/// A stored API token (without its secret).
#[derive(Debug, Clone, Serialize, sqlx::FromRow)]
pub struct ApiToken {
    pub id: i64,
    pub project_id: i64,
    pub role: Role,
    pub name: String,
    pub created_by: String,
    /// The user who made it; the token lives only while that user may hold its role.
    pub created_by_user_id: Option<i64>,
    pub created_at: String,
    pub expires_at: Option<String>,
    pub last_used_at: Option<String>,
    pub revoked_at: Option<String>,
}

const TOKEN: &str = "SELECT id, project_id, role, name, created_by, created_by_user_id, created_at, expires_at, \
    last_used_at, revoked_at FROM api_tokens";

/// A new token's row.
pub struct NewToken<'a> {
    pub project_id: i64,
    pub role: Role,
    pub name: &'a str,
    pub token_hash: &'a str,
    pub created_by: &'a str,
    pub created_by_user_id: i64,
    pub expires_at: &'a str,
}

/// Stores a new token's hash.
pub async fn insert_token(tx: &mut Tx<'_>, t: &NewToken<'_>, now: &str) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "INSERT INTO api_tokens (project_id, role, name, token_hash, created_by, created_at,
                                 created_by_user_id, expires_at)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING id",
    )
    .bind(t.project_id)
    .bind(t.role)
    .bind(t.name)
    .bind(t.token_hash)
    .bind(t.created_by)
    .bind(now)
    .bind(t.created_by_user_id)
    .bind(t.expires_at)
    .fetch_one(&mut **tx)
    .await)
}

/// A live token by the hash of its secret, with its creator's current role in the token's
/// project: not revoked, not expired, its creator enabled and still a member.
pub async fn live_token(
    pool: &Pool,
    token_hash: &str,
    now: &str,
) -> sqlx::Result<Option<(ApiToken, Role)>> {
    let row: Option<TokenWithCreator> = on_pool!(pool, |pool| {
        sqlx::query_as(
        "SELECT t.id, t.project_id, t.role, t.name, t.created_by, t.created_by_user_id, t.created_at,
                t.expires_at, t.last_used_at, t.revoked_at, m.role AS creator_role
         FROM api_tokens t
         JOIN users u ON u.id = t.created_by_user_id
         JOIN memberships m ON m.user_id = u.id AND m.project_id = t.project_id
         WHERE t.token_hash = $1 AND t.revoked_at IS NULL AND t.expires_at > $2
           AND u.disabled_at IS NULL",
    )
    .bind(token_hash)
    .bind(now)
    .fetch_optional(pool)
    .await
    })?;
    Ok(row.map(|r| (r.token, r.creator_role)))
}

#[derive(sqlx::FromRow)]
struct TokenWithCreator {
    #[sqlx(flatten)]
    token: ApiToken,
    creator_role: Role,
}

/// Revokes every live token a user made (in one project, or everywhere); returns how many.
pub async fn revoke_tokens_of(
    tx: &mut Tx<'_>,
    user_id: i64,
    project_id: Option<i64>,
    now: &str,
) -> sqlx::Result<u64> {
    let done = on_tx!(tx, |tx| {
        match project_id {
        Some(p) => sqlx::query(
            "UPDATE api_tokens SET revoked_at = $1
             WHERE created_by_user_id = $2 AND revoked_at IS NULL AND project_id = $3",
        )
        .bind(now)
        .bind(user_id)
        .bind(p),
        None => sqlx::query(
            "UPDATE api_tokens SET revoked_at = $1 WHERE created_by_user_id = $2 AND revoked_at IS NULL",
        )
        .bind(now)
        .bind(user_id),
    }
    .execute(&mut **tx)
    .await?
    .rows_affected()
    });
    Ok(done)
}

/// One token by id.
pub async fn token(pool: &Pool, id: i64) -> sqlx::Result<Option<ApiToken>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, ApiToken>(
        sqlx::AssertSqlSafe(format!("{TOKEN} WHERE id = $1"))
    )
    .bind(id)
    .fetch_optional(pool)
    .await)
}

/// Tokens of a project.
pub async fn tokens(pool: &Pool, project_id: i64) -> sqlx::Result<Vec<ApiToken>> {
    on_pool!(pool, |pool| sqlx::query_as::<_, ApiToken>(
        sqlx::AssertSqlSafe(format!("{TOKEN} WHERE project_id = $1 ORDER BY id"))
    )
    .bind(project_id)
    .fetch_all(pool)
    .await)
}

/// Records a token's use.
pub async fn touch_token(pool: &Pool, id: i64, now: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "UPDATE api_tokens SET last_used_at = $1 WHERE id = $2"
    )
    .bind(now)
    .bind(id)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Revokes a token; false when it was already revoked.
pub async fn revoke_token(tx: &mut Tx<'_>, id: i64, now: &str) -> sqlx::Result<bool> {
    let q = on_tx!(tx, |tx| sqlx::query(
        "UPDATE api_tokens SET revoked_at = $1 WHERE id = $2 AND revoked_at IS NULL"
    )
    .bind(now)
    .bind(id)
    .execute(&mut **tx)
    .await?
    .rows_affected());
    Ok(super::changed_one(q))
}

/// Holds the throttle of one key until the transaction ends, so counting a key's
/// failures and recording the next attempt are one step for every server sharing the
/// database (PostgreSQL: a transaction-scoped advisory lock; SQLite's `BEGIN IMMEDIATE`
/// already holds the only write lock).
pub async fn lock_throttle_key(tx: &mut Tx<'_>, key: &str) -> sqlx::Result<()> {
    if let Tx::Postgres(tx) = tx {
        sqlx::query("SELECT pg_advisory_xact_lock(hashtextextended($1, 0))")
            .bind(key)
            .execute(&mut **tx)
            .await?;
    }
    Ok(())
}

/// Failures under a key since a time, and the latest of them, read inside the throttle's lock.
pub async fn failures_since_tx(
    tx: &mut Tx<'_>,
    key: &str,
    since: &str,
) -> sqlx::Result<(i64, Option<String>)> {
    on_tx!(tx, |tx| sqlx::query_as(
        "SELECT COUNT(*), MAX(at) FROM sign_in_failures WHERE key = $1 AND at >= $2"
    )
    .bind(key)
    .bind(since)
    .fetch_one(&mut **tx)
    .await)
}

/// Counts an attempt as a failure before its password is checked; returns the row's id.
pub async fn reserve_attempt(tx: &mut Tx<'_>, key: &str, now: &str) -> sqlx::Result<i64> {
    on_tx!(tx, |tx| sqlx::query_scalar(
        "INSERT INTO sign_in_failures (key, at) VALUES ($1, $2) RETURNING id"
    )
    .bind(key)
    .bind(now)
    .fetch_one(&mut **tx)
    .await)
}

/// A reserved attempt that failed: its time becomes when the failure was answered.
pub async fn settle_failure(pool: &Pool, id: i64, now: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "UPDATE sign_in_failures SET at = $1 WHERE id = $2"
    )
    .bind(now)
    .bind(id)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// A reserved attempt that succeeded is not a failure.
pub async fn forget_attempt(pool: &Pool, id: i64) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "DELETE FROM sign_in_failures WHERE id = $1"
    )
    .bind(id)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Records a failed sign-in under a key (`user:…` or `addr:…`).
pub async fn record_failure(pool: &Pool, key: &str, now: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "INSERT INTO sign_in_failures (key, at) VALUES ($1, $2)"
    )
    .bind(key)
    .bind(now)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}

/// Failures under a key since a time, and the latest of them.
pub async fn failures_since(
    pool: &Pool,
    key: &str,
    since: &str,
) -> sqlx::Result<(i64, Option<String>)> {
    on_pool!(pool, |pool| sqlx::query_as(
        "SELECT COUNT(*), MAX(at) FROM sign_in_failures WHERE key = $1 AND at >= $2"
    )
    .bind(key)
    .bind(since)
    .fetch_one(pool)
    .await)
}

/// Forgets a user name's failures after a successful sign-in.
pub async fn clear_failures(pool: &Pool, key: &str) -> sqlx::Result<()> {
    on_pool!(pool, |pool| sqlx::query(
        "DELETE FROM sign_in_failures WHERE key = $1"
    )
    .bind(key)
    .execute(pool)
    .await
    .map(|r| r.rows_affected()))?;
    Ok(())
}
