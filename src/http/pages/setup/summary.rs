//! A clause's terms in plain words, as the ledger will apply them.
//!
//! Shown on the clause form's preview and on the set-up page, so a QC manager
//! reads the rule back before tests are judged by it.

use crate::db::clauses::Clause;
use crate::domain::{ClauseEffort, MoistureBasis, MoistureMode, Rule};
use crate::reduction::rounding::RoundingMethod;

/// The terms the words are made from (a stored clause, or a form not yet saved: a code the
/// form has wrong is `None`, and its own message stands beside its field).
pub struct Terms {
    pub rc_min_pct: f64,
    pub moisture_basis: MoistureBasis,
    pub moisture_below_pct: Option<f64>,
    pub moisture_above_pct: Option<f64>,
    pub moisture_low_pct: Option<f64>,
    pub moisture_high_pct: Option<f64>,
    pub max_air_voids_pct: Option<f64>,
    pub effort: Option<ClauseEffort>,
    pub rule: Option<Rule>,
    pub allowance_pct: Option<f64>,
    pub min_pwl_pct: Option<f64>,
    pub area_per_test_m2: Option<f64>,
    pub length_per_test_m: Option<f64>,
    pub min_tests_per_lot: i64,
    pub oversize_limit_pct: Option<f64>,
    pub moisture_judgement: MoistureMode,
    pub moisture_min_pwl_pct: Option<f64>,
    /// `None` reads as the default (103 %).
    pub rc_plausible_max_pct: Option<f64>,
    pub rounding: RoundingMethod,
}

impl From<&Clause> for Terms {
    fn from(c: &Clause) -> Self {
        Self {
            rc_min_pct: c.rc_min_pct,
            moisture_basis: c.moisture_basis,
            moisture_below_pct: Some(c.moisture_below_pct),
            moisture_above_pct: Some(c.moisture_above_pct),
            moisture_low_pct: c.moisture_low_pct,
            moisture_high_pct: c.moisture_high_pct,
            max_air_voids_pct: c.max_air_voids_pct,
            effort: Some(c.effort),
            rule: Some(c.rule),
            allowance_pct: c.allowance_pct,
            min_pwl_pct: c.min_pwl_pct,
            area_per_test_m2: c.area_per_test_m2,
            length_per_test_m: c.length_per_test_m,
            min_tests_per_lot: c.min_tests_per_lot,
            oversize_limit_pct: Some(c.oversize_limit_pct),
            moisture_judgement: c.moisture_judgement,
            moisture_min_pwl_pct: c.moisture_min_pwl_pct,
            rc_plausible_max_pct: Some(c.rc_plausible_max_pct),
            rounding: c.rounding,
        }
    }
}

fn rule_words(t: &Terms) -> String {
    match t.rule {
        Some(Rule::EveryTest) => format!(
            "Every counted test must reach {:.1} % relative compaction.",
            t.rc_min_pct
        ),
        Some(Rule::MeanAndMin) => format!(
            "The lot's mean relative compaction must reach {:.1} % and no counted test may fall more than {:.1} points below it.",
            t.rc_min_pct,
            t.allowance_pct.unwrap_or(0.0)
        ),
        Some(Rule::QualityIndex) => format!(
            "At least {:.0} % of the lot must lie above {:.1} % relative compaction, estimated from the tests' mean and standard deviation (percent within limits).",
            t.min_pwl_pct.unwrap_or(90.0),
            t.rc_min_pct
        ),
        None => "The rule is not one liftledger knows.".to_string(),
    }
}

fn frequency_words(t: &Terms) -> String {
    let mut parts = vec![format!("at least {} tests per lot", t.min_tests_per_lot)];
    if let Some(a) = t.area_per_test_m2 {
        parts.push(format!("one per {a:.0} m² of lift"));
    }
    if let Some(l) = t.length_per_test_m {
        parts.push(format!("one per {l:.0} m of chainage"));
    }
    format!("Tests owed: {}, whichever asks for more.", parts.join(", "))
}

/// A bound in words, or that it is missing (a form previewed before it is complete).
fn bound(v: Option<f64>) -> String {
    v.map_or_else(|| "(not given)".to_string(), |v| format!("{v:.1}"))
}

/// Where the window lies, as the clause writes it.
fn window_words(t: &Terms) -> String {
    match t.moisture_basis {
        MoistureBasis::PercentOfOmc => format!(
            "between {} % and {} % of the optimum (water content divided by OMC)",
            bound(t.moisture_low_pct),
            bound(t.moisture_high_pct)
        ),
        MoistureBasis::Absolute => format!(
            "between {} % and {} % water content, whatever the optimum",
            bound(t.moisture_low_pct),
            bound(t.moisture_high_pct)
        ),
        MoistureBasis::PointsOfOmc => format!(
            "between {} points dry and {} points wet of the optimum",
            bound(t.moisture_below_pct),
            bound(t.moisture_above_pct)
        ),
    }
}

fn moisture_words(t: &Terms) -> String {
    match t.moisture_judgement {
        MoistureMode::Pwl => format!(
            "At least {:.0} % of the lot's water contents must lie {} (percent within limits, both sides).",
            t.moisture_min_pwl_pct.unwrap_or(90.0),
            window_words(t)
        ),
        MoistureMode::PerTest => {
            format!("Each test's water content must lie {}.", window_words(t))
        }
    }
}

/// The clause's rule in sentences, in the order the ledger applies it.
pub fn clause_words(t: &Terms) -> Vec<String> {
    let mut words = vec![
        format!(
            "Judged against {}.",
            t.effort.map_or(
                "a lab curve of an effort liftledger does not know".into(),
                |e| e.words()
            )
        ),
        rule_words(t),
        moisture_words(t),
        frequency_words(t),
    ];
    if let Some(max) = t.max_air_voids_pct {
        words.push(format!(
            "Each test's air voids must be at most {max:.1} %, at the curve's specific gravity."
        ));
    }
    words.push(format!(
        "A test above {:.1} % relative compaction is flagged as implausible for a person to check.",
        t.rc_plausible_max_pct.unwrap_or(103.0)
    ));
    words.push(match t.rounding {
        RoundingMethod::Absolute => "Values are compared with the limits unrounded.".to_string(),
        RoundingMethod::AstmE29 => "Values are rounded to the limit's written precision before they are compared (ASTM E29).".to_string(),
    });
    if let Some(o) = t.oversize_limit_pct {
        words.push(format!(
            "Oversize is corrected for up to {o:.0} % coarse fraction; a test with more cannot be judged against the curve."
        ));
    }
    words
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mean_and_minimum_reads_as_both_limits() {
        let t = Terms {
            rc_min_pct: 95.0,
            moisture_basis: MoistureBasis::PointsOfOmc,
            moisture_below_pct: Some(2.0),
            moisture_above_pct: Some(1.5),
            moisture_low_pct: None,
            moisture_high_pct: None,
            max_air_voids_pct: None,
            effort: Some(ClauseEffort::Preset(
                crate::reduction::lab::EffortPreset::AstmD1557Mold4in,
            )),
            rule: Some(Rule::MeanAndMin),
            allowance_pct: Some(3.0),
            min_pwl_pct: None,
            area_per_test_m2: Some(1000.0),
            length_per_test_m: None,
            min_tests_per_lot: 3,
            oversize_limit_pct: Some(30.0),
            moisture_judgement: MoistureMode::PerTest,
            moisture_min_pwl_pct: None,
            rc_plausible_max_pct: None,
            rounding: RoundingMethod::AstmE29,
        };
        let words = clause_words(&t).join(" ");
        assert!(
            words.contains("mean relative compaction must reach 95.0 %"),
            "{words}"
        );
        assert!(words.contains("more than 3.0 points below"), "{words}");
        assert!(
            words.contains("2.0 points dry and 1.5 points wet"),
            "{words}"
        );
        assert!(words.contains("one per 1000 m²"), "{words}");
    }
}
