//! Fills the certificate view model from a judged lot.

use super::lot_report::LotReport;
use crate::clock;
use crate::pdf::{
    CertificateDoc, ClauseBlock, LotBlock, MaterialBlock, Paper, ReferenceBlock, SignoffBlock,
    SummaryBlock, TestRow,
};
use crate::present::{self, Units};

/// What the issuing step knows beyond the lot report.
pub struct Issue<'a> {
    pub number: &'a str,
    pub revision: i64,
    pub supersedes: Option<String>,
    pub verification_code: &'a str,
    pub issued_at: &'a str,
    pub submitted_by: &'a str,
    pub submitted_at: &'a str,
    pub accepted_by: &'a str,
    pub comment: &'a str,
}

/// The curve's approval in words: who approved it, when and why, with the concerns.
pub fn approval_words(lab: &crate::db::lab_tests::LabTest) -> String {
    use super::reference::{Approval, concern_messages};
    match lab.approval {
        Approval::NotNeeded => "not needed (no quality concern)".to_string(),
        Approval::NeedsApproval => {
            format!("AWAITING APPROVAL: {}", concern_messages(lab).join("; "))
        }
        Approval::Approved => format!(
            "approved by {} on {}: {} (concerns: {})",
            lab.approved_by.as_deref().unwrap_or("?"),
            lab.approved_at
                .as_deref()
                .map(clock::display)
                .unwrap_or_default(),
            lab.approval_reason.as_deref().unwrap_or(""),
            concern_messages(lab).join("; ")
        ),
    }
}

/// A test's notes on the certificate: its retest links, void, oversize and instrument.
fn test_notes(t: &super::lot_report::TestLine) -> String {
    let mut notes = t.cautions_without_instrument();
    if let Some(n) = &t.retest_of_number {
        notes.push(format!("retest of {n}"));
    }
    if let Some(reason) = &t.test.void_reason {
        notes.push(format!("void: {reason}"));
    }
    if let Some(by) = &t.superseded_by {
        notes.push(format!("superseded by {by}"));
    }
    if t.test.coarse_pct.is_some_and(|c| c > 0.0) {
        notes.push(format!(
            "oversize {:.0} %",
            t.test.coarse_pct.unwrap_or(0.0)
        ));
    }
    // The test's instrument, its calibration and that day's standard count.
    notes.extend(super::lot_report::instrument_cautions(&t.test));
    notes.join("; ")
}

/// One row of the schedule of tests.
fn test_row(t: &super::lot_report::TestLine, u: &Units) -> TestRow {
    TestRow {
        number: t.test.number.clone(),
        date: clock::date_of(&t.test.tested_at),
        chainage: u.chainage(t.test.chainage_m),
        offset: u.offset_short(t.test.offset_m),
        method: t.test.method.words(),
        wet_density: u.density(t.test.wet_density_kg_m3),
        water_content: format!("{:.1}", t.test.water_content_pct),
        dry_density: u.density(t.test.dry_density_kg_m3),
        relative_compaction: present::pct(t.relative_compaction_pct),
        moisture_deviation: present::signed(t.moisture_deviation_pct),
        result: t.result().to_string(),
        note: test_notes(t),
        rc_value: if t.standing == crate::domain::Standing::Voided {
            None
        } else {
            t.relative_compaction_pct
        },
        counted: t.standing.counted(),
    }
}

fn lot_block(r: &LotReport, u: &Units) -> LotBlock {
    LotBlock {
        lot_code: r.lot.code.clone(),
        zone: r.lot.zone_name.clone(),
        layer: format!("layer {}", r.lot.layer_number),
        chainage_from: u.chainage(r.lot.chainage_from_m),
        chainage_to: u.chainage(r.lot.chainage_to_m),
        offset_band: format!(
            "{} to {}",
            u.offset(r.lot.offset_left_m),
            u.offset(r.lot.offset_right_m)
        ),
        area: u.area(r.area_m2),
        length: u.length(r.length_m),
    }
}

fn material_block(r: &LotReport) -> MaterialBlock {
    MaterialBlock {
        source_name: format!("{} ({})", r.source.name, r.source.code),
        description: r.source.description.clone(),
        classification: [r.source.uscs_class.as_str(), r.source.aashto_class.as_str()]
            .iter()
            .filter(|s| !s.is_empty())
            .cloned()
            .collect::<Vec<_>>()
            .join(" / "),
    }
}

fn reference_block(r: &LotReport, u: &Units) -> ReferenceBlock {
    let effort = r.lab_test.effort.label();
    let corrected = r
        .tests
        .iter()
        .filter(|t| t.test.coarse_pct.is_some_and(|c| c > 0.0))
        .count();
    ReferenceBlock {
        lab_test_code: r.lab_test.code.clone(),
        effort,
        energy: format!("{:.0} kJ/m³", r.lab_test.effort_energy_kj_m3),
        mdd: u.density_with_unit(r.lab_test.max_dry_density_kg_m3),
        omc: format!("{:.1} %", r.lab_test.optimum_water_content_pct),
        specific_gravity: format!("{:.2}", r.lab_test.specific_gravity),
        fit_method: r.lab_test.fit_method.replace('_', " "),
        approval: approval_words(&r.lab_test),
        oversize_note: if corrected == 0 {
            "no oversize correction applied".to_string()
        } else {
            format!(
                "{corrected} test(s) judged against an oversize-corrected reference (ASTM D4718; retained on the {} mm sieve, limit {:.0} %; coarse bulk oven-dry Gs {}, ASTM C127 / AASHTO T 85)",
                r.clause.oversize_sieve_mm,
                r.clause.oversize_limit_pct,
                r.source
                    .gs_coarse
                    .map_or("–".to_string(), |g| format!("{g:.2}"))
            )
        },
    }
}

fn clause_block(r: &LotReport, u: &Units) -> ClauseBlock {
    let c = &r.clause;
    let v = &r.verdict;
    let mut frequency = vec![format!("at least {} per lot", c.min_tests_per_lot)];
    if let Some(a) = c.area_per_test_m2 {
        frequency.push(format!("one per {}", u.area(a)));
    }
    if let Some(l) = c.length_per_test_m {
        frequency.push(format!("one per {}", u.length(l)));
    }
    ClauseBlock {
        clause_code: format!("{} {}", c.code, c.title).trim().to_string(),
        rc_min: format!("{:.1} %", c.rc_min_pct),
        moisture_window: match &v.air_voids_limit {
            Some(av) => format!("{}; air voids {av}", v.moisture_window),
            None => v.moisture_window.clone(),
        },
        rule: format!(
            "{}; moisture: {}; {}",
            v.rule_label,
            v.moisture_judgement,
            super::lot_report::rounding_of(c).label()
        ),
        frequency: frequency.join(", "),
    }
}

fn summary_block(r: &LotReport) -> SummaryBlock {
    let v = &r.verdict;
    SummaryBlock {
        n: v.n.to_string(),
        mean: present::pct(v.mean),
        std_dev: v.std_dev.map_or("–".into(), |s| format!("{s:.2}")),
        min: present::pct(v.min),
        max: present::pct(v.max),
        quality_index: v.quality_index.map_or("–".into(), |q| format!("{q:.2}")),
        pwl: present::pct(v.pwl),
        verdict: if v.accepted {
            "MEETS CLAUSE"
        } else {
            "DOES NOT MEET CLAUSE"
        }
        .to_string(),
        reasons: v.reasons.clone(),
        frequency: format!(
            "{} required, {} counted: {}",
            r.tests_required,
            v.n,
            if r.tests_owed == 0 {
                "met".to_string()
            } else {
                format!("{} owed", r.tests_owed)
            }
        ),
        rc_limit: r.clause.rc_min_pct,
    }
}

fn signoff_block(issue: &Issue<'_>) -> SignoffBlock {
    SignoffBlock {
        submitted_by: issue.submitted_by.to_string(),
        submitted_at: if issue.submitted_at.is_empty() {
            String::new()
        } else {
            clock::display(issue.submitted_at)
        },
        accepted_by: issue.accepted_by.to_string(),
        accepted_at: clock::display(issue.issued_at),
        acceptance_comment: issue.comment.to_string(),
    }
}

/// Builds the certificate content for a lot.
pub fn build(r: &LotReport, issue: Issue<'_>) -> CertificateDoc {
    let u = Units::of(&r.project);
    CertificateDoc {
        paper: if u.system == crate::reduction::UnitSystem::Us {
            Paper::Letter
        } else {
            Paper::A4
        },
        project_name: r.project.name.clone(),
        contract: r.project.contract.clone(),
        client: r.project.client.clone(),
        contractor: r.project.contractor.clone(),
        certificate_number: issue.number.to_string(),
        revision: u32::try_from(issue.revision).unwrap_or(1),
        supersedes: issue.supersedes.clone(),
        verification_code: issue.verification_code.to_string(),
        issued_at: clock::display(issue.issued_at),
        lot: lot_block(r, &u),
        material: material_block(r),
        reference: reference_block(r, &u),
        clause: clause_block(r, &u),
        density_unit: u.density_unit().to_string(),
        offset_unit: u.offset_unit().to_string(),
        tests: r.tests.iter().map(|t| test_row(t, &u)).collect(),
        summary: summary_block(r),
        signoff: signoff_block(&issue),
        cautions: present::CAUTIONS.iter().map(|s| s.to_string()).collect(),
    }
}
