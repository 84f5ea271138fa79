//! A set-up form: its fields, the values typed into them, and their translation
//! into the JSON body the API takes.
//!
//! Every set-up page turns what was typed into the very body a JSON client would
//! send and hands it to the same ledger function, so a page can never accept what
//! the API refuses (or the other way round). This module only does the typing:
//! text to numbers, chainages in the project's style to metres, empty optional
//! fields left out. Rules about values stay in the ledger.

use std::collections::BTreeMap;

use serde_json::{Map, Value};

use crate::error::AppError;
use crate::present::Units;
use crate::reduction::Chainage;

/// What an input holds and how its text becomes JSON.
#[derive(Debug, Clone)]
pub enum Kind {
    /// Free text, sent as a string.
    Text,
    /// A password: typed hidden and never shown back.
    Secret,
    /// Several lines of text.
    TextArea,
    /// A decimal number (a comma is read as the decimal mark).
    Number,
    /// A whole number.
    Integer,
    /// A calendar date (YYYY-MM-DD), sent as a string.
    Date,
    /// One of fixed choices: (value sent, words shown).
    Choice(Vec<(String, String)>),
    /// A record of the project chosen by id: (id, words shown).
    Record(Vec<(i64, String)>),
    /// A chainage typed in the project's style, sent in metres.
    Chainage,
    /// A tick box, sent as a boolean.
    Tick,
}

/// One input of a form.
#[derive(Debug, Clone)]
pub struct Field {
    /// The JSON member it fills, also the input's name and id.
    pub name: String,
    pub label: String,
    pub kind: Kind,
    pub required: bool,
    /// A line under the input: unit, default, what the value means.
    pub hint: String,
}

impl Field {
    /// A field with no hint.
    pub fn new(name: &str, label: &str, kind: Kind, required: bool) -> Self {
        Self {
            name: name.into(),
            label: label.into(),
            kind,
            required,
            hint: String::new(),
        }
    }

    /// The same field with a hint line.
    pub fn hint(mut self, hint: &str) -> Self {
        self.hint = hint.into();
        self
    }
}

/// What was typed, by input name.
pub type Values = BTreeMap<String, String>;

/// Problems by input name ("" for the form as a whole).
pub type Errors = BTreeMap<String, String>;

/// Reads a URL-encoded form body (the last value wins for a repeated name).
pub fn decode(body: &[u8]) -> Values {
    form_urlencoded::parse(body)
        .map(|(k, v)| (k.into_owned(), v.into_owned()))
        .collect()
}

/// Turns typed values into a JSON object for the fields, or every field's problem at once.
pub fn to_json(
    fields: &[Field],
    values: &Values,
    units: &Units,
) -> Result<Map<String, Value>, Errors> {
    let mut out = Map::new();
    let mut errors = Errors::new();
    for f in fields {
        let raw = values.get(&f.name).map(|v| v.trim()).unwrap_or("");
        if let Kind::Tick = f.kind {
            out.insert(f.name.clone(), Value::Bool(!raw.is_empty()));
            continue;
        }
        if raw.is_empty() {
            if f.required {
                errors.insert(f.name.clone(), "is required".into());
            }
            continue;
        }
        match typed(&f.kind, raw, units) {
            Ok(v) => {
                out.insert(f.name.clone(), v);
            }
            Err(message) => {
                errors.insert(f.name.clone(), message);
            }
        }
    }
    if errors.is_empty() {
        Ok(out)
    } else {
        Err(errors)
    }
}

/// One value typed as its kind asks.
fn typed(kind: &Kind, raw: &str, units: &Units) -> Result<Value, String> {
    match kind {
        Kind::Text | Kind::Secret | Kind::TextArea | Kind::Date => {
            Ok(Value::String(raw.to_string()))
        }
        Kind::Number => number(raw).map(Value::from),
        Kind::Integer => raw
            .parse::<i64>()
            .map(Value::from)
            .map_err(|_| format!("'{raw}' is not a whole number")),
        Kind::Choice(options) => options
            .iter()
            .find(|(v, _)| v == raw)
            .map(|(v, _)| Value::String(v.clone()))
            .ok_or_else(|| format!("'{raw}' is not one of the choices")),
        Kind::Record(options) => raw
            .parse::<i64>()
            .ok()
            .filter(|id| options.iter().any(|(o, _)| o == id))
            .map(Value::from)
            .ok_or_else(|| "choose one of the listed records".to_string()),
        Kind::Chainage => Chainage::parse(raw, units.chainage)
            .map(|c| Value::from(c.metres()))
            .map_err(|e| e.to_string()),
        Kind::Tick => Ok(Value::Bool(true)),
    }
}

/// A decimal number as people type it ("95", "95.5", "95,5").
pub fn number(raw: &str) -> Result<f64, String> {
    let v = raw.trim().replace(',', ".");
    match v.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => Err(format!("'{}' is not a number", raw.trim())),
    }
}

/// Places a refusal from the ledger: beside its field when the form has one, else on the form.
pub fn place(error: &AppError, fields: &[Field]) -> Errors {
    let field = error.field();
    let mut errors = Errors::new();
    let known = fields.iter().any(|f| f.name == field);
    if known {
        errors.insert(field.to_string(), error.user_message());
    } else if field.is_empty() || field == "body" {
        errors.insert(String::new(), error.user_message());
    } else {
        errors.insert(String::new(), format!("{field}: {}", error.user_message()));
    }
    errors
}

/// Is this a refusal to show on the form (a user's mistake), rather than a failure?
pub fn is_refusal(error: &AppError) -> bool {
    error.status().is_client_error() && !matches!(error, AppError::Unauthorized { .. })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::reduction::{ChainageStyle, UnitSystem};

    fn units() -> Units {
        Units {
            system: UnitSystem::Si,
            chainage: ChainageStyle::KmMetre,
        }
    }

    fn values(pairs: &[(&str, &str)]) -> Values {
        pairs
            .iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect()
    }

    #[test]
    fn numbers_chainages_and_empty_optional_fields_become_the_api_body() {
        let fields = vec![
            Field::new("rc_min_pct", "RC", Kind::Number, true),
            Field::new("from_m", "From", Kind::Chainage, true),
            Field::new("title", "Title", Kind::Text, false),
            Field::new(
                "layer_id",
                "Layer",
                Kind::Record(vec![(7, "L1".into())]),
                true,
            ),
        ];
        let body = to_json(
            &fields,
            &values(&[
                ("rc_min_pct", "95,5"),
                ("from_m", "1+250"),
                ("title", " "),
                ("layer_id", "7"),
            ]),
            &units(),
        )
        .expect("valid");
        // 1+250 in km+metre style is 1250 m (common practice for highway chainage).
        assert_eq!(
            Value::Object(body),
            serde_json::json!({"rc_min_pct": 95.5, "from_m": 1250.0, "layer_id": 7})
        );
    }

    #[test]
    fn every_bad_field_is_named_at_once() {
        let fields = vec![
            Field::new("rc_min_pct", "RC", Kind::Number, true),
            Field::new("number", "Number", Kind::Integer, true),
            Field::new(
                "layer_id",
                "Layer",
                Kind::Record(vec![(7, "L1".into())]),
                true,
            ),
            Field::new(
                "rule",
                "Rule",
                Kind::Choice(vec![("every_test".into(), "Every test".into())]),
                true,
            ),
        ];
        let errors = to_json(
            &fields,
            &values(&[("number", "2.5"), ("layer_id", "8"), ("rule", "other")]),
            &units(),
        )
        .expect_err("invalid");
        assert_eq!(
            errors.get("rc_min_pct").map(String::as_str),
            Some("is required")
        );
        assert_eq!(
            errors.get("number").map(String::as_str),
            Some("'2.5' is not a whole number")
        );
        assert_eq!(
            errors.get("layer_id").map(String::as_str),
            Some("choose one of the listed records")
        );
        assert_eq!(
            errors.get("rule").map(String::as_str),
            Some("'other' is not one of the choices")
        );
    }

    #[test]
    fn a_ledger_refusal_lands_beside_its_field_or_on_the_form() {
        let fields = vec![Field::new("code", "Code", Kind::Text, true)];
        let beside = place(&AppError::invalid("code", "already exists"), &fields);
        assert_eq!(
            beside.get("code").map(String::as_str),
            Some("already exists")
        );
        let top = place(
            &AppError::invalid("points[2].mass_dry_g", "is negative"),
            &fields,
        );
        assert_eq!(
            top.get("").map(String::as_str),
            Some("points[2].mass_dry_g: is negative")
        );
    }
}
