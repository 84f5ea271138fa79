//! Answers about people, memberships and API tokens.

use serde::Serialize;
use utoipa::ToSchema;

use crate::db::users;
use crate::http::api::codes;

/// A user account (never its password hash).
#[derive(Debug, Serialize, ToSchema)]
#[schema(example = json!({"id": 3, "username": "alice", "display_name": "Alice Moreau", "is_admin": false, "is_demo": false,
    "disabled_at": null, "created_at": "2026-03-01T08:00:00Z", "must_change_password": false}))]
pub struct UserAnswer {
    pub id: i64,
    pub username: String,
    pub display_name: String,
    pub is_admin: bool,
    /// An invented demo user.
    pub is_demo: bool,
    #[schema(format = DateTime)]
    pub disabled_at: Option<String>,
    #[schema(format = DateTime)]
    pub created_at: String,
    /// The password was set by someone else and must be changed at next sign-in.
    pub must_change_password: bool,
}

impl From<&users::User> for UserAnswer {
    fn from(u: &users::User) -> Self {
        Self {
            id: u.id,
            username: u.username.clone(),
            display_name: u.display_name.clone(),
            is_admin: u.is_admin != 0,
            is_demo: u.is_demo != 0,
            disabled_at: u.disabled_at.clone(),
            created_at: u.created_at.clone(),
            must_change_password: u.must_change_password != 0,
        }
    }
}

/// An API token (never its secret, which is shown once when made).
#[derive(Debug, Serialize, ToSchema)]
pub struct TokenAnswer {
    pub id: i64,
    pub project_id: i64,
    #[schema(value_type = codes::Role)]
    pub role: String,
    pub name: String,
    pub created_by: String,
    /// The user who made it; the token lives only while that user may hold its role.
    pub created_by_user_id: Option<i64>,
    #[schema(format = DateTime)]
    pub created_at: String,
    #[schema(format = DateTime)]
    pub expires_at: Option<String>,
    #[schema(format = DateTime)]
    pub last_used_at: Option<String>,
    #[schema(format = DateTime)]
    pub revoked_at: Option<String>,
}

impl From<&users::ApiToken> for TokenAnswer {
    fn from(t: &users::ApiToken) -> Self {
        Self {
            id: t.id,
            project_id: t.project_id,
            role: t.role.to_string(),
            name: t.name.clone(),
            created_by: t.created_by.clone(),
            created_by_user_id: t.created_by_user_id,
            created_at: t.created_at.clone(),
            expires_at: t.expires_at.clone(),
            last_used_at: t.last_used_at.clone(),
            revoked_at: t.revoked_at.clone(),
        }
    }
}

/// A new token: its secret, shown this once.
#[derive(Debug, Serialize, ToSchema)]
pub struct NewTokenAnswer {
    /// The bearer secret (`llt_…`); only its hash is stored.
    pub token: String,
    pub details: TokenAnswer,
    pub note: String,
}

/// Who the caller is.
#[derive(Debug, Serialize, ToSchema)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum MeAnswer {
    /// A person signed in with a session (or their token's maker for a token).
    User {
        user: UserAnswer,
        /// Ids of the projects the user is a member of; null for an administrator, who sees all.
        projects: Option<Vec<i64>>,
    },
    /// A project-scoped API token.
    Token { token: TokenAnswer },
}

/// A member of a project.
#[derive(Debug, Serialize, ToSchema)]
pub struct MemberAnswer {
    pub username: String,
    pub display_name: String,
    #[schema(value_type = codes::Role)]
    pub role: crate::auth::Role,
}

/// A role given in a project.
#[derive(Debug, Serialize, ToSchema)]
pub struct GrantAnswer {
    pub username: String,
    pub project_id: i64,
    #[schema(value_type = codes::Role)]
    pub role: String,
}

/// A membership ended.
#[derive(Debug, Serialize, ToSchema)]
pub struct RemovedAnswer {
    pub username: String,
    pub project_id: i64,
    pub removed: bool,
}

/// A password set by an administrator.
#[derive(Debug, Serialize, ToSchema)]
pub struct ResetAnswer {
    pub username: String,
    pub must_change_password: bool,
    /// Sessions of the user that ended.
    pub sessions_ended: u64,
}

/// One's own password changed.
#[derive(Debug, Serialize, ToSchema)]
pub struct ChangedAnswer {
    pub changed: bool,
    pub note: String,
}
