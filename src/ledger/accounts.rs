//! People: users and memberships. Sign-in and sessions live in `ledger::sessions`,
//! API tokens in `ledger::tokens`, disabling and passwords in `ledger::people`; their
//! entry points are re-exported here.

use serde::Deserialize;
use serde_json::json;

pub use super::people::{change_own_password, remove_member, reset_password, set_enabled};
pub use super::sessions::{SignedIn, sign_in, sign_out};
pub use super::tokens::{Revoker, TokenInput, create_token, revoke_token};

use super::Actor;
use super::validate::text;
use crate::auth::{Role, password, secret};
use crate::clock;
use crate::db::{self, Pool, audit, users};
use crate::error::{AppError, Result};

/// The longest user name, checked before anything else (sign-in included).
pub const MAX_USERNAME: usize = 64;

/// Body of a new user.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UserInput {
    pub username: String,
    pub display_name: String,
    pub password: String,
    #[serde(default)]
    pub is_admin: bool,
}

/// Which record a change touched: (entity, id, project).
pub(crate) type Target<'a> = (&'a str, i64, Option<i64>);

/// Records a new record or a change that keeps no earlier value, as the actor's audit row.
pub(crate) async fn audit_change(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    action: &str,
    target: Target<'_>,
    after: serde_json::Value,
    now: &str,
) -> Result<()> {
    audit_replacing(tx, actor, action, target, None, after, now).await
}

/// Records a change with what it replaced (`before`), as the actor's audit row.
pub(crate) async fn audit_replacing(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    action: &str,
    (entity, id, project_id): Target<'_>,
    before: Option<serde_json::Value>,
    after: serde_json::Value,
    now: &str,
) -> Result<()> {
    audit::record(
        tx,
        &audit::Change {
            actor: &actor.name,
            action,
            entity,
            entity_id: Some(id),
            project_id,
            before,
            after: Some(after),
            origin: &actor.origin,
        },
        now,
    )
    .await?;
    Ok(())
}

/// Creates a user with an argon2id password hash.
pub async fn create_user(
    pool: &Pool,
    input: &UserInput,
    demo: bool,
    actor: &Actor,
) -> Result<users::User> {
    let username = text("username", &input.username, MAX_USERNAME)?.to_ascii_lowercase();
    if !username
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || "._-".contains(c))
    {
        return Err(AppError::invalid(
            "username",
            "may only hold letters, digits and . _ -",
        ));
    }
    let display = text("display_name", &input.display_name, 80)?;
    password::check_strength(&input.password).map_err(|m| AppError::invalid("password", m))?;
    let hash = password::hash_off_workers(&input.password).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let id = users::insert(
        &mut tx,
        &username,
        &display,
        &hash,
        input.is_admin,
        demo,
        &now,
    )
    .await
    .map_err(|e| {
        if db::is_unique_violation(&e) {
            AppError::conflict(
                "username",
                format!("user {username} already exists"),
                vec![],
            )
        } else {
            e.into()
        }
    })?;
    audit_change(&mut tx, actor, "create", ("user", id, None),
        json!({"username": username, "display_name": display, "is_admin": input.is_admin, "is_demo": demo}),
        &now,
    )
    .await?;
    tx.commit().await?;
    users::get(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("user {id} vanished").into())
}

/// Gives a user a role in a project (or changes it).
pub async fn grant(
    pool: &Pool,
    username: &str,
    project_id: i64,
    role: &str,
    actor: &Actor,
) -> Result<()> {
    let role = Role::parse_code(role).ok_or_else(|| {
        AppError::invalid(
            "role",
            "must be technician, qc_manager, client_engineer or viewer",
        )
    })?;
    let user = users::by_username(pool, &username.trim().to_ascii_lowercase())
        .await?
        .ok_or_else(|| AppError::invalid("username", format!("no user {username}")))?;
    super::setup::require_project(pool, project_id).await?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    users::grant(&mut tx, user.id, project_id, role, &now).await?;
    audit_change(
        &mut tx,
        actor,
        "grant",
        ("user", user.id, Some(project_id)),
        json!({"username": user.username, "project_id": project_id, "role": role.code()}),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(())
}

/// How a user is named in the record: "display name (username)".
pub fn actor_name(user: &users::User) -> String {
    format!("{} ({})", user.display_name, user.username)
}

/// On a database without users, creates `admin` with a random password and returns it (shown once).
pub async fn ensure_first_admin(pool: &Pool) -> Result<Option<String>> {
    if users::count(pool).await? > 0 {
        return Ok(None);
    }
    let password = secret::new_password()?;
    let admin = create_user(
        pool,
        &UserInput {
            username: "admin".into(),
            display_name: "Administrator".into(),
            password: password.clone(),
            is_admin: true,
        },
        false,
        &Actor::system("first start"),
    )
    .await?;
    // A printed password has been seen by whoever read the console: it is replaced at first sign-in.
    let mut tx = db::begin_write(pool).await?;
    users::require_password_change(&mut tx, admin.id).await?;
    tx.commit().await?;
    Ok(Some(password))
}

/// The demo sign-ins: (username, display name, role in the demo project or admin, password).
pub const DEMO_USERS: [(&str, &str, &str, &str); 5] = [
    ("admin", "Site Administrator", "admin", "demo-admin-pass"),
    ("achterberg", "D. Achterberg", "qc_manager", "demo-qc-pass"),
    ("okafor", "R. Okafor", "technician", "demo-tech-pass"),
    (
        "ferreira",
        "L. Ferreira",
        "client_engineer",
        "demo-engineer-pass",
    ),
    ("ng", "V. Ng", "viewer", "demo-viewer-pass"),
];
