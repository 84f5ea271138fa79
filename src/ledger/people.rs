//! Changes to people that end their sessions at once: removing a membership,
//! disabling a user, changing or resetting a password.

use serde_json::json;

use super::Actor;
use super::accounts::audit_change;
use super::sessions::SignedIn;
use crate::auth::{password, secret};
use crate::clock;
use crate::db::{self, Pool, users};
use crate::error::{AppError, Result};

async fn require_user(pool: &Pool, username: &str) -> Result<users::User> {
    users::by_username(pool, &username.trim().to_ascii_lowercase())
        .await?
        .ok_or_else(|| AppError::not_found("username", format!("no user {}", username.trim())))
}

/// Ends a user's role in a project; their sessions end and the tokens they made there die.
pub async fn remove_member(
    pool: &Pool,
    username: &str,
    project_id: i64,
    actor: &Actor,
) -> Result<()> {
    let user = require_user(pool, username).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let Some(role) = users::remove_membership(&mut tx, user.id, project_id).await? else {
        return Err(AppError::not_found(
            "username",
            format!("{} is not a member of this project", user.username),
        ));
    };
    let tokens = users::revoke_tokens_of(&mut tx, user.id, Some(project_id), &now).await?;
    let sessions = users::end_sessions_of(&mut tx, user.id, None, &now).await?;
    audit_change(
        &mut tx,
        actor,
        "remove_membership",
        ("user", user.id, Some(project_id)),
        json!({"username": user.username, "role": role, "tokens_revoked": tokens, "sessions_ended": sessions}),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(())
}

/// Disables (`enabled = false`) or re-enables a user; disabling ends every session and
/// kills every token the user made.
pub async fn set_enabled(
    pool: &Pool,
    username: &str,
    enabled: bool,
    actor: &Actor,
) -> Result<users::User> {
    let user = require_user(pool, username).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let at = (!enabled).then_some(now.as_str());
    if !users::set_disabled(&mut tx, user.id, at).await? {
        let state = if enabled { "enabled" } else { "disabled" };
        return Err(AppError::conflict(
            "username",
            format!("{} is already {state}", user.username),
            vec![],
        ));
    }
    let (mut tokens, mut sessions) = (0, 0);
    if !enabled {
        tokens = users::revoke_tokens_of(&mut tx, user.id, None, &now).await?;
        sessions = users::end_sessions_of(&mut tx, user.id, None, &now).await?;
    }
    audit_change(
        &mut tx,
        actor,
        if enabled { "enable" } else { "disable" },
        ("user", user.id, None),
        json!({"username": user.username, "tokens_revoked": tokens, "sessions_ended": sessions}),
        &now,
    )
    .await?;
    tx.commit().await?;
    users::get(pool, user.id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("user {} vanished", user.id).into())
}

fn check_new_password(new: &str) -> Result<()> {
    password::check_strength(new).map_err(|m| AppError::invalid("new_password", m))
}

/// Stores a new password and ends every session of the user; returns how many ended.
async fn store_password(
    pool: &Pool,
    user: &users::User,
    new: &str,
    must_change: bool,
    (action, actor): (&str, &Actor),
) -> Result<u64> {
    let hash = password::hash_off_workers(new).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    users::set_password(&mut tx, user.id, &hash, must_change).await?;
    let ended = users::end_sessions_of(&mut tx, user.id, None, &now).await?;
    audit_change(
        &mut tx,
        actor,
        action,
        ("user", user.id, None),
        json!({"username": user.username, "must_change_password": must_change, "sessions_ended": ended}),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(ended)
}

/// A user changes their own password, proving the current one. Every session ends,
/// this one included; the caller gets a fresh session in its place.
pub async fn change_own_password(
    pool: &Pool,
    user_id: i64,
    current: &str,
    new: &str,
    actor: &Actor,
) -> Result<SignedIn> {
    if current.chars().count() > password::MAX_CHARS {
        return Err(AppError::invalid("current_password", "is wrong"));
    }
    check_new_password(new)?;
    let user = users::get(pool, user_id)
        .await?
        .filter(|u| u.disabled_at.is_none())
        .ok_or_else(|| AppError::unauthorized("sign in first"))?;
    if !password::verify_off_workers(current, &user.password_hash).await {
        return Err(AppError::invalid("current_password", "is wrong"));
    }
    if current == new {
        return Err(AppError::invalid(
            "new_password",
            "must differ from the current password",
        ));
    }
    store_password(pool, &user, new, false, ("change_password", actor)).await?;
    let secret = secret::new("lls_")?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    users::start_session(&mut tx, &secret::digest(&secret), user.id, &now).await?;
    tx.commit().await?;
    let user = users::get(pool, user_id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("user {user_id} vanished"))?;
    Ok(SignedIn { secret, user })
}

/// An administrator sets a user's password; the user must change it at next sign-in.
pub async fn reset_password(pool: &Pool, username: &str, new: &str, actor: &Actor) -> Result<u64> {
    check_new_password(new)?;
    let user = require_user(pool, username).await?;
    store_password(pool, &user, new, true, ("reset_password", actor)).await
}
