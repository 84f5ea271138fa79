//! API tokens: made by a project member for a role within their own, expiring, and
//! living only while their creator may still hold that role.
//!
//! Roles are parties, not a ladder (`Role::within`): a QC manager can never mint a
//! client engineer's token and so can never sign their own lot, and an administrator
//! needs a role in the project to make one at all.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::text;
use crate::auth::{Role, secret};
use crate::clock;
use crate::db::{self, Pool, audit, users};
use crate::error::{AppError, Result};

/// Days a token lives when the request names none.
pub const DEFAULT_DAYS: i64 = 90;
/// The longest life a token may be given.
pub const MAX_DAYS: i64 = 365;

/// Body of a new API token.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TokenInput {
    pub name: String,
    pub role: String,
    /// Days until it expires: 1 to 365, default 90.
    #[serde(default)]
    pub expires_in_days: Option<i64>,
}

fn parse_role(code: &str) -> Result<Role> {
    Role::parse_code(code).ok_or_else(|| {
        AppError::invalid(
            "role",
            "must be technician, qc_manager, client_engineer or viewer",
        )
    })
}

/// The creator's own role in the project, which must contain the token's.
async fn creator_role(pool: &Pool, creator_id: i64, project_id: i64, wanted: Role) -> Result<Role> {
    let user = users::get(pool, creator_id)
        .await?
        .filter(|u| u.disabled_at.is_none())
        .ok_or_else(|| AppError::forbidden("a disabled user may not make tokens"))?;
    let Some(own) = users::role_in(pool, user.id, project_id).await? else {
        return Err(AppError::forbidden(
            "making a token needs a role in this project; a token never holds more than its maker",
        ));
    };
    if !wanted.within(own) {
        return Err(AppError::forbidden(format!(
            "a {} may not make a {} token: a token may do only what its maker may do",
            own.label(),
            wanted.label()
        )));
    }
    Ok(own)
}

/// Creates an API token for a project on behalf of user `creator_id`; the secret is
/// returned once and only its hash kept.
pub async fn create_token(
    pool: &Pool,
    project_id: i64,
    input: &TokenInput,
    creator_id: i64,
    actor: &Actor,
) -> Result<(String, users::ApiToken)> {
    let name = text("name", &input.name, 80)?;
    let role = parse_role(&input.role)?;
    let days = input.expires_in_days.unwrap_or(DEFAULT_DAYS);
    if !(1..=MAX_DAYS).contains(&days) {
        return Err(AppError::invalid(
            "expires_in_days",
            format!("must be 1 to {MAX_DAYS} days"),
        ));
    }
    creator_role(pool, creator_id, project_id, role).await?;
    let secret = secret::new("llt_")?;
    let now = clock::now();
    let expires_at = clock::parse(&now)
        .map(|t| clock::format(t + time::Duration::days(days)))
        .ok_or_else(|| anyhow::anyhow!("clock gave an unreadable time {now}"))?;
    let mut tx = db::begin_write(pool).await?;
    let id = users::insert_token(
        &mut tx,
        &users::NewToken {
            project_id,
            role,
            name: &name,
            token_hash: &secret::digest(&secret),
            created_by: &actor.name,
            created_by_user_id: creator_id,
            expires_at: &expires_at,
        },
        &now,
    )
    .await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "create",
            entity: "api_token",
            entity_id: Some(id),
            project_id: Some(project_id),
            before: None,
            after: Some(json!({"name": name, "role": role.code(), "expires_at": expires_at})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    let token = users::token(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("token {id} vanished"))?;
    Ok((secret, token))
}

/// Who asks to revoke a token.
pub enum Revoker {
    /// An administrator: may revoke any token (a stolen device is an emergency).
    Admin,
    /// A project member with this role: only tokens whose role lies within their own.
    Member(Role),
}

/// Revokes a token. A QC manager cannot revoke a client engineer's tokens (nor the reverse
/// beyond a viewer's): each party keeps its own devices.
pub async fn revoke_token(
    pool: &Pool,
    id: i64,
    by: Revoker,
    actor: &Actor,
) -> Result<users::ApiToken> {
    let t = users::token(pool, id)
        .await?
        .ok_or_else(|| AppError::not_found("token_id", format!("token {id} does not exist")))?;
    if let Revoker::Member(own) = by {
        let role = t.role;
        if !role.within(own) {
            return Err(AppError::forbidden(format!(
                "a {} may not revoke a {} token",
                own.label(),
                role.label()
            )));
        }
    }
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !users::revoke_token(&mut tx, id, &now).await? {
        return Err(AppError::conflict(
            "token_id",
            format!("token {} is already revoked", t.name),
            vec![],
        ));
    }
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor.name,
            action: "revoke",
            entity: "api_token",
            entity_id: Some(id),
            project_id: Some(t.project_id),
            before: None,
            after: Some(json!({"name": t.name})),
            origin: &actor.origin,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    users::token(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("token {id} vanished").into())
}
