//! Stored codes other than lot states: a test's standing, a test's method, a clause's rule;
//! and the one macro giving every stored code its text form and its database encoding.

use serde::{Deserialize, Serialize};

use crate::reduction::acceptance::{AcceptanceRule, TestStanding};

/// A stored code that names no known value: the kind of value and the code read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownCode {
    /// What the code should have named ("lot state", "acceptance rule", ...).
    pub kind: &'static str,
    /// The code found.
    pub code: String,
}

impl std::fmt::Display for UnknownCode {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "unknown {} code {:?}", self.kind, self.code)
    }
}

impl std::error::Error for UnknownCode {}

/// Gives a fieldless enum its stored code: `code()`, `ALL`, `parse_code`, `FromStr`,
/// `Display`, and sqlx `Type`/`Encode`/`Decode` for both engines (as text). Decoding
/// an unknown code is an error (sqlx wraps it with the column's name), never a default.
macro_rules! stored_code {
    ($ty:ident, $kind:literal, { $($variant:ident => $code:literal),+ $(,)? }) => {
        impl $ty {
            /// Every value, in declaration order.
            pub const ALL: [$ty; [$($code),+].len()] = [$($ty::$variant),+];

            /// The code stored in the database and used in JSON.
            pub fn code(self) -> &'static str {
                match self {
                    $($ty::$variant => $code),+
                }
            }

            /// Reads a stored code; `None` for one this build does not know.
            pub fn parse_code(code: &str) -> Option<Self> {
                match code {
                    $($code => Some($ty::$variant),)+
                    _ => None,
                }
            }
        }

        impl std::str::FromStr for $ty {
            type Err = $crate::domain::UnknownCode;
            fn from_str(code: &str) -> Result<Self, Self::Err> {
                Self::parse_code(code).ok_or_else(|| $crate::domain::UnknownCode {
                    kind: $kind,
                    code: code.to_string(),
                })
            }
        }

        impl std::fmt::Display for $ty {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.code())
            }
        }

        $crate::domain::stored_as_text!($ty);
    };
}

/// sqlx `Type`/`Encode`/`Decode` of a type with `code()` (a `&str` or a `String`) and
/// `FromStr`, for every engine that stores text (SQLite and PostgreSQL): stored as its code;
/// an unknown code fails the decode, and sqlx names the column beside it.
macro_rules! stored_as_text {
    ($ty:ty) => {
        impl<DB: sqlx::Database> sqlx::Type<DB> for $ty
        where
            str: sqlx::Type<DB>,
        {
            fn type_info() -> <DB as sqlx::Database>::TypeInfo {
                <str as sqlx::Type<DB>>::type_info()
            }

            fn compatible(ty: &<DB as sqlx::Database>::TypeInfo) -> bool {
                <str as sqlx::Type<DB>>::compatible(ty)
            }
        }

        impl<'q, DB: sqlx::Database> sqlx::Encode<'q, DB> for $ty
        where
            String: sqlx::Encode<'q, DB>,
        {
            fn encode_by_ref(
                &self,
                buf: &mut <DB as sqlx::Database>::ArgumentBuffer,
            ) -> Result<sqlx::encode::IsNull, sqlx::error::BoxDynError> {
                <String as sqlx::Encode<'q, DB>>::encode(String::from(self.code()), buf)
            }
        }

        impl<'r, DB: sqlx::Database> sqlx::Decode<'r, DB> for $ty
        where
            &'r str: sqlx::Decode<'r, DB>,
        {
            fn decode(
                value: <DB as sqlx::Database>::ValueRef<'r>,
            ) -> Result<Self, sqlx::error::BoxDynError> {
                let code = <&'r str as sqlx::Decode<'r, DB>>::decode(value)?;
                Ok(code.parse::<$ty>()?)
            }
        }
    };
}

pub(crate) use {stored_as_text, stored_code};

/// `FromStr` (by the type's own `parse_code`), `Display` and the database encoding of an
/// enum defined where this crate's other layers need it (auth, reduction, ledger) with its
/// own `code()` and `parse_code()`.
macro_rules! code_of_elsewhere {
    ($ty:ty, $kind:literal) => {
        impl std::str::FromStr for $ty {
            type Err = UnknownCode;
            fn from_str(code: &str) -> Result<Self, Self::Err> {
                Self::parse_code(code).ok_or_else(|| UnknownCode {
                    kind: $kind,
                    code: code.to_string(),
                })
            }
        }

        impl std::fmt::Display for $ty {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.code())
            }
        }

        stored_as_text!($ty);
    };
}

code_of_elsewhere!(crate::auth::Role, "role");
code_of_elsewhere!(
    crate::reduction::instruments::InstrumentCheck,
    "instrument check"
);
code_of_elsewhere!(
    crate::reduction::instruments::InstrumentKind,
    "instrument kind"
);
code_of_elsewhere!(crate::reduction::rounding::RoundingMethod, "rounding");
code_of_elsewhere!(
    crate::ledger::instruments::RecordKind,
    "instrument record kind"
);

/// How a clause writes its moisture window (a clause's `moisture_basis` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MoistureBasis {
    /// Points dry and wet of the optimum (w − OMC within −below…+above); the default.
    #[default]
    PointsOfOmc,
    /// Percent of the optimum (w / OMC × 100 within low…high).
    PercentOfOmc,
    /// A range of water content (w within low…high), whatever the optimum.
    Absolute,
}

stored_code!(MoistureBasis, "moisture basis", {
    PointsOfOmc => "points_of_omc",
    PercentOfOmc => "percent_of_omc",
    Absolute => "absolute",
});

/// How a clause judges moisture over a lot (a clause's `moisture_judgement` column); the
/// least percent within limits of `Pwl` sits beside it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MoistureMode {
    /// Every counted test inside the window; the default.
    #[default]
    PerTest,
    /// Two-sided percent within limits of the lot's water contents (quality-index clauses).
    Pwl,
}

stored_code!(MoistureMode, "moisture judgement", {
    PerTest => "per_test",
    Pwl => "pwl",
});

/// Whether a test counts towards its lot's acceptance (a lot report's line).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum Standing {
    /// In the statistics.
    Counted,
    /// Voided: out of every statistic, still on record.
    Voided,
    /// Not the latest non-voided test of its retest chain.
    Superseded,
    /// Stands for its location but cannot be judged.
    CannotBeJudged,
    /// Taken for an earlier random sample of a re-sampled lot.
    EarlierSample,
}

stored_code!(Standing, "test standing", {
    Counted => "counted",
    Voided => "voided",
    Superseded => "superseded",
    CannotBeJudged => "cannot_be_judged",
    EarlierSample => "earlier_sample",
});

impl From<&TestStanding> for Standing {
    fn from(s: &TestStanding) -> Self {
        match s {
            TestStanding::Counted => Standing::Counted,
            TestStanding::Voided => Standing::Voided,
            TestStanding::Superseded { .. } => Standing::Superseded,
            TestStanding::CannotBeJudged => Standing::CannotBeJudged,
            TestStanding::EarlierSample => Standing::EarlierSample,
        }
    }
}

impl Standing {
    /// True when the test is in the lot's statistics.
    pub fn counted(self) -> bool {
        self == Standing::Counted
    }
}

/// A test's result in one word, as a lot report shows it (not stored: worked out from the
/// test's standing and verdict each time).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TestResult {
    /// Counted and meets the clause.
    Pass,
    /// Counted and misses the clause.
    Fail,
    /// Voided.
    Void,
    /// Replaced by a retest.
    Superseded,
    /// Stands for its location but cannot be judged.
    Unjudged,
    /// Taken for an earlier random sample of a re-sampled lot.
    Resampled,
}

stored_code!(TestResult, "test result", {
    Pass => "pass",
    Fail => "fail",
    Void => "void",
    Superseded => "superseded",
    Unjudged => "unjudged",
    Resampled => "resampled",
});

/// How a field test measured density (a field test's `method` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Nuclear gauge (ASTM D6938).
    Nuclear,
    /// Sand cone (ASTM D1556).
    SandCone,
    /// Rubber balloon (ASTM D2167).
    Balloon,
    /// Drive cylinder (ASTM D2937).
    DriveCylinder,
}

stored_code!(Method, "field test method", {
    Nuclear => "nuclear",
    SandCone => "sand_cone",
    Balloon => "balloon",
    DriveCylinder => "drive_cylinder",
});

impl Method {
    /// The method of a set of readings.
    pub fn of(readings: &crate::reduction::field::FieldReadings) -> Self {
        use crate::reduction::field::FieldReadings as R;
        match readings {
            R::Nuclear { .. } => Method::Nuclear,
            R::SandCone { .. } => Method::SandCone,
            R::Balloon { .. } => Method::Balloon,
            R::DriveCylinder { .. } => Method::DriveCylinder,
        }
    }

    /// The method in words for tables ("sand cone").
    pub fn words(self) -> String {
        self.code().replace('_', " ")
    }
}

/// How a clause accepts a lot (a clause's `rule` column); its parameters sit beside it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum Rule {
    /// Every counted test meets the minimum and the moisture window.
    EveryTest,
    /// Lot mean meets the minimum, no test more than the allowance below it.
    MeanAndMin,
    /// Estimated percent within limits at least the threshold.
    QualityIndex,
}

stored_code!(Rule, "acceptance rule", {
    EveryTest => "every_test",
    MeanAndMin => "mean_and_min",
    QualityIndex => "quality_index",
});

impl Rule {
    /// The rule with its parameter; an error naming the field when the parameter is missing.
    pub fn with(
        self,
        allowance_pct: Option<f64>,
        min_pwl_pct: Option<f64>,
    ) -> Result<AcceptanceRule, (&'static str, String)> {
        Ok(match self {
            Rule::EveryTest => AcceptanceRule::EveryTest,
            Rule::MeanAndMin => AcceptanceRule::MeanAndMin {
                allowance_pct: allowance_pct.ok_or((
                    "allowance_pct",
                    "the mean-and-minimum rule needs an allowance".to_string(),
                ))?,
            },
            Rule::QualityIndex => AcceptanceRule::QualityIndex {
                min_pwl_pct: min_pwl_pct.ok_or((
                    "min_pwl_pct",
                    "the quality-index rule needs a least percent within limits".to_string(),
                ))?,
            },
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_round_trip_and_unknown_codes_are_refused() {
        for s in &Standing::ALL {
            assert_eq!(Standing::parse_code(s.code()), Some(*s));
            assert_eq!(serde_json::to_value(s).unwrap(), s.code());
        }
        for m in &Method::ALL {
            assert_eq!(m.code().parse::<Method>(), Ok(*m));
            assert_eq!(serde_json::to_value(m).unwrap(), m.code());
        }
        for r in &Rule::ALL {
            assert_eq!(r.code().parse::<Rule>(), Ok(*r));
            assert_eq!(serde_json::to_value(r).unwrap(), r.code());
        }
        let e = "every_tests".parse::<Rule>().unwrap_err();
        assert_eq!(
            e.to_string(),
            "unknown acceptance rule code \"every_tests\""
        );
    }

    #[test]
    fn a_rule_without_its_parameter_names_the_field() {
        assert_eq!(
            Rule::MeanAndMin.with(None, None).unwrap_err().0,
            "allowance_pct"
        );
        assert_eq!(
            Rule::QualityIndex.with(Some(1.0), None).unwrap_err().0,
            "min_pwl_pct"
        );
        assert_eq!(
            Rule::QualityIndex.with(None, Some(90.0)).unwrap(),
            AcceptanceRule::QualityIndex { min_pwl_pct: 90.0 }
        );
    }
}

/// Whether a lab curve may still be chosen (a lab test's `status` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum CurveStatus {
    /// In use: a lot may take it as its reference.
    Active,
    /// Replaced by a newer curve of the same source (kept on record).
    Superseded,
}

stored_code!(CurveStatus, "curve status", {
    Active => "active",
    Superseded => "superseded",
});

/// Whether a stored curve needs a QC manager's approval before a lot may use it (a lab
/// test's `approval` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum Approval {
    /// No concern: the curve can be a reference as it is.
    NotNeeded,
    /// A concern was found: no lot may use it until a QC manager approves it.
    NeedsApproval,
    /// Approved with a written reason.
    Approved,
}

stored_code!(Approval, "curve approval", {
    NotNeeded => "not_needed",
    NeedsApproval => "needs_approval",
    Approved => "approved",
});

impl Approval {
    /// Words for pages and certificates.
    pub fn label(self) -> &'static str {
        match self {
            Self::NotNeeded => "no approval needed",
            Self::NeedsApproval => "awaiting QC manager approval",
            Self::Approved => "approved by the QC manager",
        }
    }
}
