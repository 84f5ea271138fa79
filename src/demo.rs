//! Loads the invented demo project in `demo-data/` through the same ledger
//! functions the API uses, so the demo exercises every rule a user meets.

use std::collections::HashMap;

use anyhow::{Context, anyhow};
use serde::de::DeserializeOwned;
use serde_json::Value;

mod planning;

use crate::db::Pool;
use crate::ledger::{self, Actor};

mod instruments;

const PROJECT: &str = include_str!("../demo-data/project.json");
const FIELD_TESTS: &str = include_str!("../demo-data/field-tests.json");
const ACTIONS: &str = include_str!("../demo-data/actions.json");

/// Takes `key` out of a JSON object as text.
fn take_str(v: &mut Value, key: &str) -> anyhow::Result<String> {
    v.as_object_mut()
        .and_then(|o| o.remove(key))
        .and_then(|x| x.as_str().map(str::to_string))
        .ok_or_else(|| anyhow!("demo record lacks '{key}': {v}"))
}

fn take_i64(v: &mut Value, key: &str) -> anyhow::Result<i64> {
    v.as_object_mut()
        .and_then(|o| o.remove(key))
        .and_then(|x| x.as_i64())
        .ok_or_else(|| anyhow!("demo record lacks '{key}': {v}"))
}

fn parse<T: DeserializeOwned>(v: Value) -> anyhow::Result<T> {
    Ok(serde_json::from_value(v)?)
}

fn user_error(e: crate::error::AppError) -> anyhow::Error {
    match e {
        crate::error::AppError::Internal(inner) => inner,
        e if e.reasons().is_empty() => anyhow!("{}: {}", e.field(), e.user_message()),
        e => anyhow!(
            "{}: {} ({})",
            e.field(),
            e.user_message(),
            e.reasons().join("; ")
        ),
    }
}

/// The demo's people, each with their role on the project.
async fn create_people(pool: &Pool, pid: i64, admin: &Actor) -> anyhow::Result<()> {
    for (username, display, role, password) in ledger::accounts::DEMO_USERS {
        let input = ledger::accounts::UserInput {
            username: username.into(),
            display_name: display.into(),
            password: password.into(),
            is_admin: role == "admin",
        };
        ledger::accounts::create_user(pool, &input, true, admin)
            .await
            .map_err(user_error)?;
        if role != "admin" {
            ledger::accounts::grant(pool, username, pid, role, admin)
                .await
                .map_err(user_error)?;
        }
    }
    Ok(())
}

/// Clauses, sources and lab tests of `demo-data/project.json`: (clause ids, lab ids) by code.
async fn create_materials(
    pool: &Pool,
    pid: i64,
    frame: &mut Value,
    actor: &Actor,
) -> anyhow::Result<(HashMap<String, i64>, HashMap<String, i64>)> {
    let mut clauses = HashMap::new();
    for c in frame["clauses"].as_array_mut().into_iter().flatten() {
        let c = ledger::setup::create_clause(pool, pid, &parse(c.take())?, actor)
            .await
            .map_err(user_error)?;
        clauses.insert(c.code.clone(), c.id);
    }
    let mut sources = HashMap::new();
    for s in frame["sources"].as_array_mut().into_iter().flatten() {
        let s = ledger::setup::create_source(pool, pid, &parse(s.take())?, actor)
            .await
            .map_err(user_error)?;
        sources.insert(s.code.clone(), s.id);
    }
    let mut labs = HashMap::new();
    for t in frame["lab_tests"].as_array_mut().into_iter().flatten() {
        let source = take_str(t, "source")?;
        let sid = *sources
            .get(&source)
            .ok_or_else(|| anyhow!("unknown source {source}"))?;
        let lab = ledger::setup::create_lab_test(pool, sid, &parse(t.take())?, actor)
            .await
            .map_err(user_error)?;
        labs.insert(lab.code.clone(), lab.id);
    }
    Ok((clauses, labs))
}

/// Layers and lots of `demo-data/project.json`: lot ids by code.
async fn create_lots(
    pool: &Pool,
    pid: i64,
    frame: &mut Value,
    (clauses, labs): &(HashMap<String, i64>, HashMap<String, i64>),
    actor: &Actor,
) -> anyhow::Result<HashMap<String, i64>> {
    let mut layers = HashMap::new();
    for l in frame["layers"].as_array_mut().into_iter().flatten() {
        let layer = ledger::setup::create_layer(pool, pid, &parse(l.take())?, actor)
            .await
            .map_err(user_error)?;
        layers.insert((layer.zone_name.clone(), layer.number), layer.id);
    }
    let mut lots = HashMap::new();
    for l in frame["lots"].as_array_mut().into_iter().flatten() {
        let zone = take_str(l, "zone")?;
        let number = take_i64(l, "layer")?;
        let clause = take_str(l, "clause")?;
        let lab = take_str(l, "lab_test")?;
        let obj = l
            .as_object_mut()
            .ok_or_else(|| anyhow!("lot is not an object"))?;
        obj.insert("layer_id".into(), layers[&(zone.clone(), number)].into());
        obj.insert("clause_id".into(), clauses[&clause].into());
        obj.insert("lab_test_id".into(), labs[&lab].into());
        let lot = ledger::setup::create_lot(pool, pid, &parse(l.take())?, actor)
            .await
            .map_err(user_error)?;
        lots.insert(lot.code.clone(), lot.id);
    }
    Ok(lots)
}

/// The field tests of `demo-data/field-tests.json`, retests after their failures: test
/// ids by number.
async fn record_tests(
    pool: &Pool,
    lots: &HashMap<String, i64>,
    actor: &Actor,
) -> anyhow::Result<HashMap<String, i64>> {
    let mut tests: Vec<Value> =
        serde_json::from_str(FIELD_TESTS).context("reading demo-data/field-tests.json")?;
    let mut numbers = HashMap::new();
    let ledger = ledger::Ledger::new(pool.clone());
    for t in &mut tests {
        let lot = take_str(t, "lot")?;
        let retest_of = t.as_object_mut().and_then(|o| o.remove("retest_of"));
        let input: ledger::field::FieldTestInput = parse(t.take())?;
        let stored = match retest_of.as_ref().and_then(Value::as_str) {
            Some(failed) => {
                let failed_id = *numbers
                    .get(failed)
                    .ok_or_else(|| anyhow!("retest of unknown {failed}"))?;
                ledger.record_retest(failed_id, &input, actor).await
            }
            None => ledger
                .record_test(lots[&lot], &input, actor)
                .await
                .map(|(t, _)| t),
        }
        .map_err(user_error)
        .with_context(|| format!("demo test {:?} on lot {lot}", input.number))?;
        numbers.insert(stored.number.clone(), stored.id);
    }
    Ok(numbers)
}

/// One action of `demo-data/actions.json`: a void, or a lot submitted, accepted,
/// rejected or reopened.
async fn act(
    pool: &Pool,
    a: &Value,
    lots: &HashMap<String, i64>,
    numbers: &HashMap<String, i64>,
) -> anyhow::Result<()> {
    let comment = a["comment"].as_str().unwrap_or("");
    let actor = Actor::system(a["by"].as_str().unwrap_or("demo"));
    let what = a["action"].as_str().unwrap_or("");
    let result = if what == "void" {
        let num = a["test"].as_str().unwrap_or("");
        let id = *numbers
            .get(num)
            .ok_or_else(|| anyhow!("void of unknown test {num}"))?;
        ledger::field::void_test(pool, id, comment, &actor)
            .await
            .map(|_| ())
    } else {
        let code = a["lot"].as_str().unwrap_or("");
        let id = *lots
            .get(code)
            .ok_or_else(|| anyhow!("action on unknown lot {code}"))?;
        match what {
            "submit" => ledger::review::submit(pool, id, comment, &actor)
                .await
                .map(|_| ()),
            "accept" => ledger::review::accept(pool, id, comment, &actor)
                .await
                .map(|_| ()),
            "reject" => ledger::review::reject(pool, id, comment, &actor)
                .await
                .map(|_| ()),
            "reopen" => ledger::reopen::reopen(pool, id, comment, &actor)
                .await
                .map(|_| ()),
            other => return Err(anyhow!("unknown demo action {other}")),
        }
    };
    result
        .map_err(user_error)
        .with_context(|| format!("demo action {a}"))
}

/// Loads the demo project; returns a one-line summary of what was created.
pub async fn load(pool: &Pool) -> anyhow::Result<String> {
    let admin = Actor::system("Site Administrator (admin)");
    let setup_actor = Actor::system("D. Achterberg (achterberg)");
    let entry_actor = Actor::system("R. Okafor (okafor)");
    let mut frame: Value =
        serde_json::from_str(PROJECT).context("reading demo-data/project.json")?;
    let project = ledger::setup::create_project(pool, &parse(frame["project"].take())?, &admin)
        .await
        .map_err(user_error)?;
    let pid = project.id;
    create_people(pool, pid, &admin).await?;
    let materials = create_materials(pool, pid, &mut frame, &setup_actor).await?;
    let lots = create_lots(pool, pid, &mut frame, &materials, &setup_actor).await?;
    let numbers = record_tests(pool, &lots, &entry_actor).await?;
    let actions: Vec<Value> =
        serde_json::from_str(ACTIONS).context("reading demo-data/actions.json")?;
    for a in &actions {
        act(pool, a, &lots, &numbers).await?;
    }
    planning::load(pool, pid, &setup_actor, &entry_actor).await?;
    instruments::load(pool, pid)
        .await
        .context("demo instrument register")?;
    Ok(format!(
        "project {} with {} lots, {} field tests, {} review actions",
        project.code,
        lots.len(),
        numbers.len(),
        actions.len()
    ))
}
