//! Admin pages: a new project, the organisation's people, and project roles.
//!
//! Disabling people, resetting passwords and removing roles call the same account
//! functions as the API and the `liftledger user` commands.

use askama::Template;
use axum::Router;
use axum::body::Bytes;
use axum::extract::{Path, State};
use axum::routing::get;

use super::form::{Field, Kind, Values, decode};
use super::{Context, FormSpec, require_admin};
use crate::app::AppState;
use crate::auth::{Action, Role};
use crate::db;
use crate::http::caller::Caller;
use crate::http::pages::{PageResult, render, see_other};
use crate::ledger::accounts::{self, UserInput};
use crate::ledger::setup::{self, ProjectInput};

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new()
        .route("/projects/new", get(project_form).post(project_post))
        .route("/setup/users", get(users))
        .route("/setup/users/new", get(user_form).post(user_post))
        .route(
            "/projects/{id}/setup/members/new",
            get(member_form).post(member_post),
        )
        .route(
            "/projects/{id}/setup/members/remove",
            axum::routing::post(member_remove),
        )
        .route(
            "/setup/users/{username}/access",
            axum::routing::post(user_access),
        )
        .route(
            "/setup/users/{username}/reset",
            get(reset_form).post(reset_post),
        )
}

fn pairs(v: &[(&str, &str)]) -> Vec<(String, String)> {
    v.iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect()
}

fn project_spec() -> FormSpec {
    FormSpec {
        nav: None,
        title: "New project".into(),
        intro: "A contract: its code and parties, and how its lengths and densities are written."
            .into(),
        action_url: "/projects/new".into(),
        back_href: "/".into(),
        back_label: "Back to projects".into(),
        fields: vec![
            Field::new("code", "Project code", Kind::Text, true)
                .hint("short and unique, e.g. NR-14"),
            Field::new("name", "Name", Kind::Text, true),
            Field::new("contract", "Contract", Kind::Text, false),
            Field::new("client", "Client", Kind::Text, false),
            Field::new("contractor", "Contractor", Kind::Text, false),
            Field::new(
                "unit_system",
                "Units",
                Kind::Choice(pairs(&[
                    ("si", "SI (kg/m³, m)"),
                    ("us", "US customary (lb/ft³, ft)"),
                ])),
                true,
            ),
            Field::new(
                "chainage_style",
                "Chainage written as",
                Kind::Choice(pairs(&[
                    ("km_metre", "km+metres (12+345.600)"),
                    ("feet_station", "stations of 100 ft (123+45.67)"),
                ])),
                true,
            ),
        ],
        has_preview: false,
        submit_label: "Create the project".into(),
    }
}

async fn project_form(caller: Caller) -> PageResult {
    require_admin(&caller)?;
    let defaults: Values = [("unit_system", "si"), ("chainage_style", "km_metre")]
        .iter()
        .map(|(k, v)| (k.to_string(), v.to_string()))
        .collect();
    project_spec().blank(&defaults)
}

async fn project_post(State(s): State<AppState>, caller: Caller, body: Bytes) -> PageResult {
    let actor = require_admin(&caller)?;
    let values = decode(&body);
    let units = crate::present::Units {
        system: crate::reduction::UnitSystem::Si,
        chainage: crate::reduction::ChainageStyle::KmMetre,
    };
    let saved = project_spec()
        .submit(&values, &units, async |input: ProjectInput| {
            setup::create_project(&s.db, &input, &actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |p| see_other(&format!("/projects/{}/setup", p.id))))
}

/// A person of the organisation as the list shows them.
struct PersonRow {
    username: String,
    display_name: String,
    admin: bool,
    disabled: bool,
}

#[derive(Template)]
#[template(path = "setup/users.html")]
struct UsersPage {
    people: Vec<PersonRow>,
}

async fn users(State(s): State<AppState>, caller: Caller) -> PageResult {
    require_admin(&caller)?;
    let people = db::users::list(&s.db)
        .await?
        .into_iter()
        .map(|u| PersonRow {
            username: u.username,
            display_name: u.display_name,
            admin: u.is_admin != 0,
            disabled: u.disabled_at.is_some(),
        })
        .collect();
    render(&UsersPage { people })
}

fn user_spec() -> FormSpec {
    FormSpec {
        nav: None,
        title: "Add a person".into(),
        intro: "Someone who signs in. Give them a role in a project afterwards; an administrator manages projects and people only.".into(),
        action_url: "/setup/users/new".into(),
        back_href: "/setup/users".into(),
        back_label: "Back to people".into(),
        fields: vec![
            Field::new("username", "User name", Kind::Text, true).hint("letters, digits and . _ -"),
            Field::new("display_name", "Full name", Kind::Text, true).hint("as it appears on certificates"),
            Field::new("password", "First password", Kind::Secret, true).hint("tell it to them privately"),
            Field::new("is_admin", "Administrator", Kind::Tick, false),
        ],
        has_preview: false,
        submit_label: "Add".into(),
    }
}

async fn user_form(caller: Caller) -> PageResult {
    require_admin(&caller)?;
    user_spec().blank(&Values::new())
}

async fn user_post(State(s): State<AppState>, caller: Caller, body: Bytes) -> PageResult {
    let actor = require_admin(&caller)?;
    let values = decode(&body);
    let units = crate::present::Units {
        system: crate::reduction::UnitSystem::Si,
        chainage: crate::reduction::ChainageStyle::KmMetre,
    };
    let spec = user_spec();
    let saved = spec
        .submit(&values, &units, async |input: UserInput| {
            accounts::create_user(&s.db, &input, false, &actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |_| see_other("/setup/users")))
}

async fn member_spec(s: &AppState, ctx: &Context) -> PageResult<FormSpec> {
    let people = db::users::list(&s.db)
        .await?
        .into_iter()
        .filter(|u| u.disabled_at.is_none())
        .map(|u| {
            (
                u.username.clone(),
                format!("{} ({})", u.display_name, u.username),
            )
        })
        .collect();
    let roles = Role::ALL
        .iter()
        .map(|r| (r.code().to_string(), r.label().to_string()))
        .collect();
    Ok(FormSpec {
        nav: Some(ctx.nav.clone()),
        title: "Give someone a role".into(),
        intro: "Roles are parties: site technicians and QC managers work for the contractor; client engineers sign lots off. A new role replaces the person's old one in this project.".into(),
        action_url: format!("/projects/{}/setup/members/new", ctx.project.id),
        back_href: format!("/projects/{}/setup", ctx.project.id),
        back_label: "Back to set-up".into(),
        fields: vec![
            Field::new("username", "Person", Kind::Choice(people), true),
            Field::new("role", "Role in this project", Kind::Choice(roles), true),
        ],
        has_preview: false,
        submit_label: "Give the role".into(),
    })
}

/// Body of the role form.
#[derive(serde::Deserialize)]
struct MemberInput {
    username: String,
    role: String,
}

async fn member_form(State(s): State<AppState>, caller: Caller, Path(id): Path<i64>) -> PageResult {
    require_admin(&caller)?;
    let ctx = Context::load(&s, &caller, id, Action::Read).await?;
    member_spec(&s, &ctx).await?.blank(&Values::new())
}

async fn member_post(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let actor = require_admin(&caller)?;
    let ctx = Context::load(&s, &caller, id, Action::Read).await?;
    let values = decode(&body);
    let saved = member_spec(&s, &ctx)
        .await?
        .submit(&values, &ctx.units, async |m: MemberInput| {
            accounts::grant(&s.db, &m.username, id, &m.role, &actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |_| see_other(&format!("/projects/{id}/setup"))))
}

fn si_units() -> crate::present::Units {
    crate::present::Units {
        system: crate::reduction::UnitSystem::Si,
        chainage: crate::reduction::ChainageStyle::KmMetre,
    }
}

/// An administrator's button post: the admin first, then the form's fields.
fn admin_form<T: serde::de::DeserializeOwned>(
    caller: &Caller,
    body: &[u8],
) -> PageResult<(crate::ledger::Actor, T)> {
    let actor = require_admin(caller)?;
    Ok((actor, crate::http::extract::parse_form(body)?))
}

/// Body of the remove button beside a member.
#[derive(serde::Deserialize)]
struct RemoveInput {
    username: String,
}

async fn member_remove(
    State(s): State<AppState>,
    caller: Caller,
    Path(id): Path<i64>,
    body: Bytes,
) -> PageResult {
    let (actor, input): (_, RemoveInput) = admin_form(&caller, &body)?;
    accounts::remove_member(&s.db, &input.username, id, &actor).await?;
    Ok(see_other(&format!("/projects/{id}/setup")))
}

/// Body of the disable / enable button beside a person.
#[derive(serde::Deserialize)]
struct AccessInput {
    enabled: String,
}

async fn user_access(
    State(s): State<AppState>,
    caller: Caller,
    Path(username): Path<String>,
    body: Bytes,
) -> PageResult {
    let (actor, input): (_, AccessInput) = admin_form(&caller, &body)?;
    accounts::set_enabled(&s.db, &username, input.enabled == "yes", &actor).await?;
    Ok(see_other("/setup/users"))
}

fn reset_spec(username: &str) -> FormSpec {
    FormSpec {
        nav: None,
        title: format!("Reset the password of {username}"),
        intro: "Every session of theirs ends now, and they must choose their own password at their next sign-in.".into(),
        action_url: format!("/setup/users/{username}/reset"),
        back_href: "/setup/users".into(),
        back_label: "Back to people".into(),
        fields: vec![Field::new("new_password", "New password", Kind::Secret, true).hint("tell it to them privately")],
        has_preview: false,
        submit_label: "Reset".into(),
    }
}

/// Body of the reset form.
#[derive(serde::Deserialize)]
struct ResetInput {
    new_password: String,
}

async fn reset_form(caller: Caller, Path(username): Path<String>) -> PageResult {
    require_admin(&caller)?;
    reset_spec(&username).blank(&Values::new())
}

async fn reset_post(
    State(s): State<AppState>,
    caller: Caller,
    Path(username): Path<String>,
    body: Bytes,
) -> PageResult {
    let actor = require_admin(&caller)?;
    let values = decode(&body);
    let saved = reset_spec(&username)
        .submit(&values, &si_units(), async |input: ResetInput| {
            accounts::reset_password(&s.db, &username, &input.new_password, &actor).await
        })
        .await?;
    Ok(saved.map_or_else(|r| r, |_| see_other("/setup/users")))
}
