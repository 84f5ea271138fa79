//! The string codes of the API as enum schemas, so the document lists every value a field
//! takes. Each schema's values are read from the code list of the type the server decodes
//! (`ALL` and `code()` of the domain, reduction and ledger enums), so the document cannot
//! name a code the server refuses nor miss one it accepts. Used through
//! `#[schema(value_type = …)]` and `#[param(value_type = …)]`, and as the field types of the
//! schema-only bodies of `bodies.rs` (hence `Deserialize`, which nothing calls).

use utoipa::openapi::RefOr;
use utoipa::openapi::schema::{ObjectBuilder, Schema, Type};

use crate::reduction::lab::EffortPreset;

/// Joins a doc comment's lines into one description.
fn description(lines: &[&str]) -> String {
    lines.iter().map(|l| l.trim()).collect::<Vec<_>>().join(" ")
}

/// A string schema listing `codes`, described by `lines`.
fn code_list_schema(lines: &[&str], codes: Vec<&'static str>) -> RefOr<Schema> {
    ObjectBuilder::new()
        .schema_type(Type::String)
        .description(Some(description(lines)))
        .enum_values(Some(codes))
        .into()
}

/// Declares a schema type whose values are the codes of `$ty` (its `ALL` and `code()`).
macro_rules! codes_of {
    ($(#[doc = $doc:literal])+ $name:ident = $ty:ty) => {
        $(#[doc = $doc])+
        #[derive(serde::Deserialize)]
        pub struct $name;

        impl utoipa::PartialSchema for $name {
            fn schema() -> RefOr<Schema> {
                code_list_schema(&[$($doc),+], <$ty>::ALL.iter().map(|v| v.code()).collect())
            }
        }

        impl utoipa::ToSchema for $name {}
    };
}

codes_of!(
    /// Unit system a project shows its numbers in (the API is always SI).
    UnitSystem = crate::reduction::UnitSystem
);
codes_of!(
    /// How a project writes chainage on its pages.
    ChainageStyle = crate::reduction::ChainageStyle
);
codes_of!(
    /// The family of a lab test's effort.
    EffortFamily = crate::reduction::lab::EffortFamily
);
codes_of!(
    /// Lot acceptance rule.
    Rule = crate::domain::Rule
);
codes_of!(
    /// How a clause's moisture window is written.
    MoistureBasis = crate::domain::MoistureBasis
);
codes_of!(
    /// How moisture is judged.
    MoistureJudgement = crate::domain::MoistureMode
);
codes_of!(
    /// How a value is compared with its limit.
    Rounding = crate::reduction::rounding::RoundingMethod
);
codes_of!(
    /// Kind of a registered instrument.
    InstrumentKind = crate::reduction::instruments::InstrumentKind
);
codes_of!(
    /// Kind of an instrument's dated record.
    RecordKind = crate::ledger::instruments::RecordKind
);
codes_of!(
    /// Nuclear gauge mode.
    GaugeMode = crate::reduction::instruments::GaugeMode
);
codes_of!(
    /// A role in a project.
    Role = crate::auth::Role
);
codes_of!(
    /// A lot's stored state.
    LotState = crate::domain::LotState
);
codes_of!(
    /// The state a reader sees.
    DisplayState = crate::domain::DisplayState
);
codes_of!(
    /// How a test stands in its lot.
    Standing = crate::domain::Standing
);
codes_of!(
    /// A test's result in one word.
    TestResult = crate::domain::TestResult
);
codes_of!(
    /// A field density method.
    Method = crate::domain::Method
);
codes_of!(
    /// Where a test's water content came from.
    MoistureSource = crate::reduction::field::MoistureSource
);
codes_of!(
    /// What an export holds.
    ExportKind = crate::transfer::export::ExportKind
);
codes_of!(
    /// How control-chart points are grouped.
    GroupBy = crate::ledger::watch::GroupBy
);
codes_of!(
    /// What a control chart plots: relative compaction (%) or moisture deviation (points).
    Measure = crate::ledger::watch::Measure
);
codes_of!(
    /// Whether a test's instrument was in check on its date.
    InstrumentCheck = crate::reduction::instruments::InstrumentCheck
);
codes_of!(
    /// Whether a curve needs a QC manager's written approval before it may be a reference.
    Approval = crate::domain::Approval
);
codes_of!(
    /// A lab test's status.
    LabStatus = crate::domain::CurveStatus
);

/// A lab compaction effort in a new lab test: a standard preset, or `custom` with
/// `custom_effort`.
#[derive(serde::Deserialize)]
pub struct Effort;

impl utoipa::PartialSchema for Effort {
    fn schema() -> RefOr<Schema> {
        let codes = EffortPreset::ALL.iter().map(|p| p.code());
        code_list_schema(
            &["A lab compaction effort: a standard preset, or `custom` with `custom_effort`."],
            codes.chain(["custom"]).collect(),
        )
    }
}

impl utoipa::ToSchema for Effort {}

/// The effort a clause asks for: a preset, `custom`, or `any` (no effort required).
#[derive(serde::Deserialize)]
pub struct ClauseEffort;

impl utoipa::PartialSchema for ClauseEffort {
    fn schema() -> RefOr<Schema> {
        code_list_schema(
            &["The effort a clause asks for: a preset, `custom`, or `any` (no effort required)."],
            crate::domain::ClauseEffort::codes().collect(),
        )
    }
}

impl utoipa::ToSchema for ClauseEffort {}

/// A stored lab test's effort: a preset's code, or `custom: ` and the custom effort's name.
#[derive(serde::Deserialize)]
pub struct LabEffort;

impl utoipa::PartialSchema for LabEffort {
    fn schema() -> RefOr<Schema> {
        let presets: Vec<&str> = EffortPreset::ALL.iter().map(|p| p.code()).collect();
        ObjectBuilder::new()
            .schema_type(Type::String)
            .description(Some(
                "A lab test's effort: a preset's code, or `custom: ` followed by the name of the \
                 project's own effort (its energy is `effort_energy_kj_m3`).",
            ))
            .pattern(Some(format!("^({}|custom: .+)$", presets.join("|"))))
            .examples(["astm_d698_4in", "custom: site rammer"])
            .into()
    }
}

impl utoipa::ToSchema for LabEffort {}

#[cfg(test)]
mod tests {
    use utoipa::PartialSchema;

    use super::*;

    /// The listed values of a code schema.
    fn values<T: PartialSchema>() -> Vec<String> {
        let RefOr::T(Schema::Object(o)) = T::schema() else {
            panic!("not an object schema");
        };
        o.enum_values
            .unwrap_or_default()
            .into_iter()
            .map(|v| v.as_str().unwrap().to_string())
            .collect()
    }

    #[test]
    fn every_listed_code_is_one_the_server_reads_back() {
        for code in values::<Rule>() {
            assert!(code.parse::<crate::domain::Rule>().is_ok(), "{code}");
        }
        for code in values::<MoistureSource>() {
            let v = serde_json::Value::String(code.clone());
            serde_json::from_value::<crate::reduction::field::MoistureSource>(v).expect(&code);
        }
        for code in values::<ClauseEffort>() {
            assert!(
                crate::domain::ClauseEffort::parse_code(&code).is_some(),
                "{code}"
            );
        }
        // Ten presets (reduction::lab::EffortPreset), then custom and any.
        assert_eq!(values::<ClauseEffort>().len(), 12);
        assert_eq!(
            values::<MoistureJudgement>(),
            ["per_test", "pwl"],
            "the clause's moisture judgement codes"
        );
        assert_eq!(
            values::<Rounding>(),
            ["astm_e29", "absolute"],
            "ASTM E29's two methods"
        );
    }
}
