//! Sign-in with an atomic throttle, sign-out and session expiry, each audited.
//!
//! The throttle counts an attempt as a failure *before* its password is checked, in the
//! same locked step that reads the count (see `db::users::lock_throttle_key`), so a burst
//! of parallel guesses cannot all read "under the limit" and all reach argon2: on one
//! server or many sharing PostgreSQL, at most `throttle::FREE_FAILURES` do.

use super::Actor;
use super::accounts::{MAX_USERNAME, actor_name};
use crate::auth::{password, secret, throttle};
use crate::clock;
use crate::db::{self, Pool, audit, users};
use crate::error::{AppError, Result};

/// A session ends after this long without use.
pub const IDLE_SECS: i64 = 8 * 3600;
/// A session ends this long after sign-in, however busy.
pub const LIFETIME_SECS: i64 = 7 * 24 * 3600;

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

fn seconds_between(earlier: &str, later: &str) -> i64 {
    match (clock::parse(earlier), clock::parse(later)) {
        (Some(a), Some(b)) => (b - a).whole_seconds(),
        _ => 0,
    }
}

/// Seconds a key must still wait, read inside the throttle's lock.
async fn wait_for(tx: &mut db::Tx<'_>, key: &str, now: &str) -> Result<i64> {
    let since = minus_secs(now, throttle::WINDOW_SECS);
    let (n, last) = users::failures_since_tx(tx, key, &since).await?;
    let wait = throttle::wait_after(n);
    let Some(last) = last else {
        return Ok(0);
    };
    Ok(throttle::still_to_wait(wait, seconds_between(&last, now)))
}

/// Refuses an over-long name or password before anything is written or hashed.
fn check_bounds(username: &str, password: &str) -> Result<()> {
    if username.chars().count() > MAX_USERNAME {
        return Err(AppError::invalid(
            "username",
            format!("is longer than {MAX_USERNAME} characters"),
        ));
    }
    if password.chars().count() > password::MAX_CHARS {
        return Err(AppError::invalid(
            "password",
            format!("is longer than {} characters", password::MAX_CHARS),
        ));
    }
    if username.chars().any(char::is_control) {
        return Err(AppError::invalid("username", "contains control characters"));
    }
    Ok(())
}

/// Counts the attempt under both keys, or refuses it while either must wait.
/// Returns the ids of the two reserved failure rows.
async fn reserve(pool: &Pool, keys: [&str; 2]) -> Result<[i64; 2]> {
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    // Always user key first, then address key: one order, so two attempts never deadlock.
    let mut wait = 0;
    for key in keys {
        users::lock_throttle_key(&mut tx, key).await?;
        wait = wait.max(wait_for(&mut tx, key, &now).await?);
    }
    if wait > 0 {
        tx.rollback().await?;
        return Err(AppError::TooManyRequests {
            message: format!("too many failed sign-ins; try again in {wait} s"),
            retry_after_secs: u64::try_from(wait).unwrap_or(1),
        });
    }
    let user_row = users::reserve_attempt(&mut tx, keys[0], &now).await?;
    let addr_row = users::reserve_attempt(&mut tx, keys[1], &now).await?;
    tx.commit().await?;
    Ok([user_row, addr_row])
}

/// Checks a user name and password; slows repeated failures per user and per address.
pub async fn sign_in(
    pool: &Pool,
    username: &str,
    password: &str,
    address: &str,
) -> Result<SignedIn> {
    check_bounds(username, password)?;
    let username = username.trim().to_ascii_lowercase();
    let user_key = format!("user:{username}");
    let addr_key = format!("addr:{address}");
    let reserved = reserve(pool, [&user_key, &addr_key]).await?;
    let user = users::by_username(pool, &username).await?;
    let ok = match &user {
        Some(u) if u.disabled_at.is_none() => {
            password::verify_off_workers(password, &u.password_hash).await
        }
        _ => {
            // Spend the same time as a real check so a missing name is not revealed by timing.
            let _ = password::verify_off_workers(
                password,
                "$argon2id$v=19$m=19456,t=2,p=1$c2FsdHNhbHQ$aGFzaGhhc2hoYXNoaGFzaA",
            )
            .await;
            false
        }
    };
    let Some(user) = user.filter(|_| ok) else {
        // The wait runs from when the failure is answered, not from when the (slow)
        // password check began.
        let now = clock::now();
        for id in reserved {
            users::settle_failure(pool, id, &now).await?;
        }
        let failed = Event::new(&username, "sign_in_failed", None, address);
        record(pool, failed, &now).await?;
        crate::metrics::sign_in_failed();
        return Err(AppError::unauthorized("user name or password is wrong"));
    };
    for id in reserved {
        users::forget_attempt(pool, id).await?;
    }
    users::clear_failures(pool, &user_key).await?;
    let secret = secret::new("lls_")?;
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    let sid = users::start_session(&mut tx, &secret::digest(&secret), user.id, &now).await?;
    let actor = actor_name(&user);
    record_in(
        &mut tx,
        Event::new(&actor, "sign_in", Some(sid), address),
        &now,
    )
    .await?;
    tx.commit().await?;
    Ok(SignedIn { secret, user })
}

/// A sign-in, a refused sign-in, a sign-out or an expiry, as its audit row tells it.
struct Event<'a> {
    actor: &'a str,
    action: &'a str,
    /// The session opened or ended; none for a refused sign-in (recorded against the user).
    session_id: Option<i64>,
    origin: &'a str,
    after: Option<serde_json::Value>,
}

impl<'a> Event<'a> {
    fn new(actor: &'a str, action: &'a str, session_id: Option<i64>, origin: &'a str) -> Self {
        Event {
            actor,
            action,
            session_id,
            origin,
            after: None,
        }
    }
}

async fn record_in(tx: &mut db::Tx<'_>, e: Event<'_>, now: &str) -> Result<()> {
    audit::record(
        tx,
        &audit::Change {
            actor: e.actor,
            action: e.action,
            entity: if e.session_id.is_some() {
                "session"
            } else {
                "user"
            },
            entity_id: e.session_id,
            project_id: None,
            before: None,
            after: e.after,
            origin: e.origin,
        },
        now,
    )
    .await?;
    Ok(())
}

async fn record(pool: &Pool, e: Event<'_>, now: &str) -> Result<()> {
    let mut tx = db::begin_write(pool).await?;
    record_in(&mut tx, e, now).await?;
    tx.commit().await?;
    Ok(())
}

/// Ends a session at the user's request, audited.
pub async fn sign_out(pool: &Pool, session_id: i64, actor: &Actor) -> Result<()> {
    let now = clock::now();
    users::end_session(pool, session_id, &now).await?;
    let event = Event::new(&actor.name, "sign_out", Some(session_id), &actor.origin);
    record(pool, event, &now).await
}

/// Why a presented session no longer counts, if it does not.
pub fn expiry(found: &users::SessionUser, now: &str) -> Option<&'static str> {
    if seconds_between(&found.session_created_at, now) > LIFETIME_SECS {
        Some("lifetime")
    } else if seconds_between(&found.session_last_seen_at, now) > IDLE_SECS {
        Some("idle")
    } else {
        None
    }
}

/// Ends a session that ran out (idle or past its lifetime), audited with the reason.
pub async fn expire(
    pool: &Pool,
    found: &users::SessionUser,
    reason: &str,
    origin: &str,
) -> Result<()> {
    let now = clock::now();
    let mut tx = db::begin_write(pool).await?;
    users::end_session_tx(&mut tx, found.session_id, &now).await?;
    let actor = actor_name(&found.user);
    let event = Event {
        after: Some(serde_json::json!({"reason": reason})),
        ..Event::new(&actor, "session_expired", Some(found.session_id), origin)
    };
    record_in(&mut tx, event, &now).await?;
    tx.commit().await?;
    Ok(())
}
