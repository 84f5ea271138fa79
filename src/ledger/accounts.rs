//! People and devices: users, memberships, sign-in with throttling, sessions and API tokens.

use serde::Deserialize;
use serde_json::json;

use super::Actor;
use super::validate::text;
use crate::auth::{Role, password, secret, throttle};
use crate::clock;
use crate::db::{self, Pool, audit, users};
use crate::error::{AppError, Result};

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
type Target<'a> = (&'a str, i64, Option<i64>);

async fn audit_change(
    tx: &mut db::Tx<'_>,
    actor: &Actor,
    action: &str,
    (entity, id, project_id): Target<'_>,
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
            before: None,
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
    let username = text("username", &input.username, 40)?.to_ascii_lowercase();
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
    let hash = password::hash(&input.password)?;
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
    users::grant(&mut tx, user.id, project_id, role.code(), &now).await?;
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

/// A fresh session after a successful sign-in: the cookie secret and the user.
pub struct SignedIn {
    pub secret: String,
    pub user: users::User,
}

fn minus_secs(now: &str, secs: i64) -> String {
    clock::parse(now)
        .map(|t| clock::format(t - time::Duration::seconds(secs)))
        .unwrap_or_default()
}

async fn wait_for(pool: &Pool, key: &str, now: &str) -> Result<i64> {
    let (n, last) =
        users::failures_since(pool, key, &minus_secs(now, throttle::WINDOW_SECS)).await?;
    let wait = throttle::wait_after(n);
    let Some(last) = last.and_then(|l| clock::parse(&l)) else {
        return Ok(0);
    };
    let now_t = clock::parse(now).unwrap_or(last);
    let elapsed = (now_t - last).whole_seconds();
    Ok((wait - elapsed).max(0))
}

/// Checks a user name and password; slows repeated failures per user and per address.
pub async fn sign_in(
    pool: &Pool,
    username: &str,
    password: &str,
    address: &str,
) -> Result<SignedIn> {
    let username = username.trim().to_ascii_lowercase();
    let now = clock::now();
    let user_key = format!("user:{username}");
    let addr_key = format!("addr:{address}");
    let wait = wait_for(pool, &user_key, &now)
        .await?
        .max(wait_for(pool, &addr_key, &now).await?);
    if wait > 0 {
        return Err(AppError::TooManyRequests {
            message: format!("too many failed sign-ins; try again in {wait} s"),
            retry_after_secs: u64::try_from(wait).unwrap_or(1),
        });
    }
    let user = users::by_username(pool, &username).await?;
    let ok = match &user {
        Some(u) if u.disabled_at.is_none() => password::verify(password, &u.password_hash),
        _ => {
            // Spend the same time as a real check so a missing name is not revealed by timing.
            let _ = password::verify(
                password,
                "$argon2id$v=19$m=19456,t=2,p=1$c2FsdHNhbHQ$aGFzaGhhc2hoYXNoaGFzaA",
            );
            false
        }
    };
    let Some(user) = user.filter(|_| ok) else {
        // The wait runs from when the failure is answered, not from when the (slow)
        // password check began.
        let now = clock::now();
        users::record_failure(pool, &user_key, &now).await?;
        users::record_failure(pool, &addr_key, &now).await?;
        let mut tx = db::begin_write(pool).await?;
        audit::record(
            &mut tx,
            &audit::Change {
                actor: &username,
                action: "sign_in_failed",
                entity: "user",
                entity_id: None,
                project_id: None,
                before: None,
                after: None,
                origin: address,
            },
            &now,
        )
        .await?;
        tx.commit().await?;
        crate::metrics::sign_in_failed();
        return Err(AppError::unauthorized("user name or password is wrong"));
    };
    users::clear_failures(pool, &user_key).await?;
    let secret = secret::new("lls_")?;
    let mut tx = db::begin_write(pool).await?;
    let sid = users::start_session(&mut tx, &secret::digest(&secret), user.id, &now).await?;
    audit::record(
        &mut tx,
        &audit::Change {
            actor: &actor_name(&user),
            action: "sign_in",
            entity: "session",
            entity_id: Some(sid),
            project_id: None,
            before: None,
            after: None,
            origin: address,
        },
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(SignedIn { secret, user })
}

/// How a user is named in the record: "display name (username)".
pub fn actor_name(user: &users::User) -> String {
    format!("{} ({})", user.display_name, user.username)
}

/// Body of a new API token.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TokenInput {
    pub name: String,
    pub role: String,
}

/// Creates an API token for a project; the secret is returned once and only its hash kept.
pub async fn create_token(
    pool: &Pool,
    project_id: i64,
    input: &TokenInput,
    actor: &Actor,
) -> Result<(String, users::ApiToken)> {
    let name = text("name", &input.name, 80)?;
    let role = Role::parse_code(&input.role).ok_or_else(|| {
        AppError::invalid(
            "role",
            "must be technician, qc_manager, client_engineer or viewer",
        )
    })?;
    let secret = secret::new("llt_")?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let id = users::insert_token(
        &mut tx,
        project_id,
        role.code(),
        &name,
        &secret::digest(&secret),
        &actor.name,
        &now,
    )
    .await?;
    audit_change(
        &mut tx,
        actor,
        "create",
        ("api_token", id, Some(project_id)),
        json!({"name": name, "role": role.code()}),
        &now,
    )
    .await?;
    tx.commit().await?;
    let token = users::token(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("token {id} vanished"))?;
    Ok((secret, token))
}

/// Revokes a token.
pub async fn revoke_token(pool: &Pool, id: i64, actor: &Actor) -> Result<users::ApiToken> {
    let t = users::token(pool, id)
        .await?
        .ok_or_else(|| AppError::not_found("token_id", format!("token {id} does not exist")))?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    if !users::revoke_token(&mut tx, id, &now).await? {
        return Err(AppError::conflict(
            "token_id",
            format!("token {} is already revoked", t.name),
            vec![],
        ));
    }
    audit_change(
        &mut tx,
        actor,
        "revoke",
        ("api_token", id, Some(t.project_id)),
        json!({"name": t.name}),
        &now,
    )
    .await?;
    tx.commit().await?;
    users::token(pool, id)
        .await?
        .ok_or_else(|| anyhow::anyhow!("token {id} vanished").into())
}

/// On a database without users, creates `admin` with a random password and returns it (shown once).
pub async fn ensure_first_admin(pool: &Pool) -> Result<Option<String>> {
    if users::count(pool).await? > 0 {
        return Ok(None);
    }
    let password = secret::new_password()?;
    create_user(
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
