//! Export of field tests and lot verdicts as CSV (UTF-8 with a byte-order mark, quoted
//! where needed) and JSON, with the test list's filters. Writers stream to any
//! `std::io::Write`; every number comes judged from `crate::ledger`.

use std::io::Write;

use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::ledger::lot_report::{LotReport, TestLine};
use crate::ledger::{overview, setup, validate};
use crate::present::Units;
use crate::reduction::Chainage;

/// The filters as typed (all optional), the same words as the test list page.
#[derive(Debug, Default, Clone, Deserialize, Serialize)]
#[serde(default)]
pub struct FilterText {
    /// Chainage from, in the project's style or metres.
    pub from: String,
    /// Chainage to.
    pub to: String,
    /// Layer id.
    pub layer: String,
    /// First day, `YYYY-MM-DD`.
    pub date_from: String,
    /// Last day, `YYYY-MM-DD`.
    pub date_to: String,
    pub method: String,
    /// pass, fail, void or superseded (tests); a lot state for lots.
    pub verdict: String,
}

/// Filters read and checked.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct ExportFilter {
    pub chainage_from_m: Option<f64>,
    pub chainage_to_m: Option<f64>,
    pub layer_id: Option<i64>,
    pub date_from: Option<String>,
    pub date_to: Option<String>,
    pub method: Option<crate::domain::Method>,
    pub verdict: Option<String>,
}

impl ExportFilter {
    /// Reads typed filters in a project's chainage style, naming the field at fault.
    pub fn parse(t: &FilterText, units: &Units) -> Result<Self> {
        let ch = |field: &str, v: &str| -> Result<Option<f64>> {
            let v = v.trim();
            if v.is_empty() {
                return Ok(None);
            }
            Chainage::parse(v, units.chainage)
                .map(|c| Some(c.metres()))
                .map_err(|e| AppError::invalid(field, e.to_string()))
        };
        let date = |field: &str, v: &str| -> Result<Option<String>> {
            if v.trim().is_empty() {
                Ok(None)
            } else {
                validate::date(field, v).map(Some)
            }
        };
        let layer_id = match t.layer.trim() {
            "" => None,
            l => Some(
                l.parse()
                    .map_err(|_| AppError::invalid("layer", "choose a layer from the list"))?,
            ),
        };
        let nonempty = |s: &str| Some(s.trim().to_string()).filter(|s| !s.is_empty());
        let method = nonempty(&t.method)
            .map(|m| {
                m.parse::<crate::domain::Method>().map_err(|_| {
                    AppError::invalid(
                        "method",
                        format!("unknown method '{m}'; use nuclear, sand_cone, balloon or drive_cylinder"),
                    )
                })
            })
            .transpose()?;
        Ok(Self {
            chainage_from_m: ch("from", &t.from)?,
            chainage_to_m: ch("to", &t.to)?,
            layer_id,
            date_from: date("date_from", &t.date_from)?,
            date_to: date("date_to", &t.date_to)?,
            method,
            verdict: nonempty(&t.verdict),
        })
    }

    /// True when a judged test passes the filters.
    pub fn keeps_test(&self, r: &LotReport, line: &TestLine) -> bool {
        let t = &line.test;
        let day = crate::clock::date_of(&t.tested_at);
        !(self.layer_id.is_some_and(|l| l != r.lot.layer_id)
            || self.chainage_from_m.is_some_and(|m| t.chainage_m < m)
            || self.chainage_to_m.is_some_and(|m| t.chainage_m > m)
            || self.date_from.as_ref().is_some_and(|d| day < *d)
            || self.date_to.as_ref().is_some_and(|d| day > *d)
            || self.method.is_some_and(|m| t.method != m)
            || self
                .verdict
                .as_ref()
                .is_some_and(|v| line.result().code() != v))
    }

    /// True when a lot passes the filters (chainage overlap, layer, state as shown).
    pub fn keeps_lot(&self, r: &LotReport) -> bool {
        !(self.layer_id.is_some_and(|l| l != r.lot.layer_id)
            || self
                .chainage_from_m
                .is_some_and(|m| r.lot.chainage_to_m < m)
            || self
                .chainage_to_m
                .is_some_and(|m| r.lot.chainage_from_m > m)
            || self
                .verdict
                .as_ref()
                .is_some_and(|v| r.display_state.code() != v))
    }
}

/// The UTF-8 byte-order mark that makes spreadsheet programs read units and names right.
pub const BOM: &[u8] = b"\xEF\xBB\xBF";

/// Column headings of the field-test CSV.
pub const TEST_COLUMNS: [&str; 28] = [
    "number",
    "lot",
    "zone",
    "layer",
    "tested_at_utc",
    "technician",
    "method",
    "instrument_serial",
    "chainage",
    "chainage_m",
    "offset_m",
    "depth_mm",
    "easting",
    "northing",
    "wet_density_kg_m3",
    "water_content_pct",
    "dry_density_kg_m3",
    "moisture_source",
    "coarse_pct",
    "reference_mdd_kg_m3",
    "reference_omc_pct",
    "relative_compaction_pct",
    "moisture_deviation_pct",
    "result",
    "retest_of",
    "superseded_by",
    "void_reason",
    "reduction_version",
];

fn opt(v: Option<f64>, decimals: usize) -> String {
    v.map_or(String::new(), |v| format!("{v:.decimals$}"))
}

fn io(e: impl Into<anyhow::Error>) -> AppError {
    AppError::Internal(e.into())
}

/// One test as a CSV record, in [`TEST_COLUMNS`] order.
fn test_fields(units: &Units, r: &LotReport, line: &TestLine) -> [String; 28] {
    let t = &line.test;
    [
        t.number.clone(),
        r.lot.code.clone(),
        r.lot.zone_name.clone(),
        r.lot.layer_number.to_string(),
        t.tested_at.clone(),
        t.technician.clone(),
        t.method.code().to_string(),
        t.instrument_serial.clone(),
        units.chainage(t.chainage_m),
        format!("{:.3}", t.chainage_m),
        format!("{:.2}", t.offset_m),
        opt(t.depth_mm, 0),
        opt(t.easting, 3),
        opt(t.northing, 3),
        format!("{:.1}", t.wet_density_kg_m3),
        format!("{:.2}", t.water_content_pct),
        format!("{:.1}", t.dry_density_kg_m3),
        t.moisture_source.clone(),
        opt(t.coarse_pct, 1),
        opt(line.reference_mdd_kg_m3, 1),
        opt(line.reference_omc_pct, 2),
        opt(line.relative_compaction_pct, 2),
        opt(line.moisture_deviation_pct, 2),
        line.result().to_string(),
        line.retest_of_number.clone().unwrap_or_default(),
        line.superseded_by.clone().unwrap_or_default(),
        t.void_reason.clone().unwrap_or_default(),
        t.reduction_version.clone(),
    ]
}

/// One test as a JSON object (readings as entered, reduced values, verdict).
pub fn test_object(units: &Units, r: &LotReport, line: &TestLine) -> Value {
    let t = &line.test;
    let readings: Value = serde_json::from_str(&t.readings_json).unwrap_or(Value::Null);
    json!({
        "id": t.id,
        "number": t.number,
        "lot": r.lot.code,
        "zone": r.lot.zone_name,
        "layer": r.lot.layer_number,
        "tested_at": t.tested_at,
        "technician": t.technician,
        "method": t.method,
        "instrument_serial": t.instrument_serial,
        "chainage": units.chainage(t.chainage_m),
        "chainage_m": t.chainage_m,
        "offset_m": t.offset_m,
        "depth_mm": t.depth_mm,
        "easting": t.easting,
        "northing": t.northing,
        "coarse_pct": t.coarse_pct,
        "coarse_water_content_pct": t.coarse_water_content_pct,
        "readings": readings,
        "wet_density_kg_m3": t.wet_density_kg_m3,
        "water_content_pct": t.water_content_pct,
        "dry_density_kg_m3": t.dry_density_kg_m3,
        "moisture_source": t.moisture_source,
        "reference_mdd_kg_m3": line.reference_mdd_kg_m3,
        "reference_omc_pct": line.reference_omc_pct,
        // The one-point check (AASHTO T 272) the test was judged against instead of the curve.
        "reference_one_point": line.one_point_code,
        "relative_compaction_pct": line.relative_compaction_pct,
        "moisture_deviation_pct": line.moisture_deviation_pct,
        "passed": line.passed,
        "result": line.result().code(),
        "retest_of": line.retest_of_number,
        "superseded_by": line.superseded_by,
        "void_reason": t.void_reason,
        "reduction_version": t.reduction_version,
    })
}

/// Column headings of the lot-verdict CSV.
pub const LOT_COLUMNS: [&str; 26] = [
    "lot",
    "zone",
    "layer",
    "chainage_from",
    "chainage_to",
    "chainage_from_m",
    "chainage_to_m",
    "offset_left_m",
    "offset_right_m",
    "area_m2",
    "clause",
    "rule",
    "lab_test",
    "reference_mdd_kg_m3",
    "state",
    "shown_as",
    "tests_counted",
    "tests_required",
    "tests_owed",
    "mean_rc_pct",
    "std_dev_rc_pct",
    "min_rc_pct",
    "pwl_pct",
    "accepted",
    "failing_without_retest",
    "certificate",
];

fn lot_fields(units: &Units, r: &LotReport) -> [String; 26] {
    let v = &r.verdict;
    [
        r.lot.code.clone(),
        r.lot.zone_name.clone(),
        r.lot.layer_number.to_string(),
        units.chainage(r.lot.chainage_from_m),
        units.chainage(r.lot.chainage_to_m),
        format!("{:.3}", r.lot.chainage_from_m),
        format!("{:.3}", r.lot.chainage_to_m),
        format!("{:.2}", r.lot.offset_left_m),
        format!("{:.2}", r.lot.offset_right_m),
        format!("{:.0}", r.area_m2),
        r.clause.code.clone(),
        v.rule.clone(),
        r.lab_test.code.clone(),
        format!("{:.1}", r.lab_test.max_dry_density_kg_m3),
        r.lot.state.to_string(),
        r.display_state.to_string(),
        v.n.to_string(),
        r.tests_required.to_string(),
        r.tests_owed.to_string(),
        opt(v.mean, 2),
        opt(v.std_dev, 2),
        opt(v.min, 2),
        opt(v.pwl, 1),
        v.accepted.to_string(),
        r.failing_without_retest.join(" "),
        r.certificate
            .as_ref()
            .map(|c| format!("{} rev {}", c.number, c.revision))
            .unwrap_or_default(),
    ]
}

/// One lot's verdict as a JSON object.
pub fn lot_object(units: &Units, r: &LotReport) -> Value {
    json!({
        "id": r.lot.id,
        "lot": r.lot.code,
        "zone": r.lot.zone_name,
        "layer": r.lot.layer_number,
        "chainage_from": units.chainage(r.lot.chainage_from_m),
        "chainage_to": units.chainage(r.lot.chainage_to_m),
        "chainage_from_m": r.lot.chainage_from_m,
        "chainage_to_m": r.lot.chainage_to_m,
        "offset_left_m": r.lot.offset_left_m,
        "offset_right_m": r.lot.offset_right_m,
        "area_m2": r.area_m2,
        "clause": r.clause.code,
        "lab_test": r.lab_test.code,
        "reference_mdd_kg_m3": r.lab_test.max_dry_density_kg_m3,
        "reference_omc_pct": r.lab_test.optimum_water_content_pct,
        "state": r.lot.state,
        "shown_as": r.display_state,
        "verdict": r.verdict,
        "tests_required": r.tests_required,
        "tests_owed": r.tests_owed,
        "failing_without_retest": r.failing_without_retest,
        "submit_blockers": r.submit_blockers,
        "certificate": r.certificate.as_ref().map(|c| json!({
            "number": c.number, "revision": c.revision, "current": r.certificate_current
        })),
    })
}

/// Writes already-judged lots as one export.
pub fn write_all<W: Write>(
    kind: ExportKind,
    out: W,
    units: &Units,
    reports: &[LotReport],
    f: &ExportFilter,
) -> Result<u64> {
    let mut w = ExportWriter::new(kind, *units, f.clone(), out)?;
    for r in reports {
        w.lot(r)?;
    }
    w.finish()
}

/// Where an export's bytes go: through a CSV writer, or straight out (JSON).
enum Out<W: Write> {
    Csv(Box<csv::Writer<W>>),
    Json(W),
}

/// An export written lot by lot, so a whole project never has to be in memory at once.
pub struct ExportWriter<W: Write> {
    kind: ExportKind,
    units: Units,
    filter: ExportFilter,
    out: Out<W>,
    written: u64,
}

impl<W: Write> ExportWriter<W> {
    /// Starts an export: the byte-order mark and header of a CSV, the opening of JSON.
    pub fn new(kind: ExportKind, units: Units, filter: ExportFilter, mut out: W) -> Result<Self> {
        let out = match kind {
            ExportKind::TestsCsv | ExportKind::LotsCsv => {
                out.write_all(BOM).map_err(io)?;
                let mut w = csv::Writer::from_writer(out);
                if kind == ExportKind::TestsCsv {
                    w.write_record(TEST_COLUMNS).map_err(io)?;
                } else {
                    w.write_record(LOT_COLUMNS).map_err(io)?;
                }
                Out::Csv(Box::new(w))
            }
            ExportKind::TestsJson | ExportKind::LotsJson => {
                out.write_all(b"[").map_err(io)?;
                Out::Json(out)
            }
            ExportKind::TestsGeojson => {
                out.write_all(br#"{"type":"FeatureCollection","features":["#)
                    .map_err(io)?;
                Out::Json(out)
            }
        };
        Ok(Self {
            kind,
            units,
            filter,
            out,
            written: 0,
        })
    }

    fn json(&mut self, v: &Value) -> Result<()> {
        if let Out::Json(out) = &mut self.out {
            out.write_all(if self.written == 0 { b"\n" } else { b",\n" })
                .map_err(io)?;
            serde_json::to_writer(&mut *out, v).map_err(io)?;
        }
        self.written += 1;
        Ok(())
    }

    fn csv<const N: usize>(&mut self, fields: [String; N]) -> Result<()> {
        if let Out::Csv(w) = &mut self.out {
            w.write_record(fields.iter().map(|f| super::csv_safe::cell(f).into_owned()))
                .map_err(io)?;
        }
        self.written += 1;
        Ok(())
    }

    /// Writes what the filters keep of one judged lot.
    pub fn lot(&mut self, r: &LotReport) -> Result<()> {
        let units = self.units;
        match self.kind {
            ExportKind::LotsCsv | ExportKind::LotsJson if !self.filter.keeps_lot(r) => Ok(()),
            ExportKind::LotsCsv => self.csv(lot_fields(&units, r)),
            ExportKind::LotsJson => self.json(&lot_object(&units, r)),
            ExportKind::TestsCsv | ExportKind::TestsJson | ExportKind::TestsGeojson => {
                for line in &r.tests {
                    if !self.filter.keeps_test(r, line) {
                        continue;
                    }
                    match self.kind {
                        ExportKind::TestsCsv => self.csv(test_fields(&units, r, line))?,
                        ExportKind::TestsJson => self.json(&test_object(&units, r, line))?,
                        _ => {
                            if let Some(feat) = super::geojson::feature(&units, r, line) {
                                self.json(&feat)?;
                            }
                        }
                    }
                }
                Ok(())
            }
        }
    }

    /// Records written so far.
    pub fn written(&self) -> u64 {
        self.written
    }

    /// Ends the export and flushes it; returns the number of records written.
    pub fn finish(self) -> Result<u64> {
        let n = self.written;
        self.finish_into()?;
        Ok(n)
    }

    /// Ends the export, flushes it and hands back the writer (an archive copies it on).
    pub fn finish_into(self) -> Result<W> {
        match self.out {
            Out::Csv(w) => {
                let mut out = w.into_inner().map_err(|e| io(anyhow::anyhow!("{e}")))?;
                out.flush().map_err(io)?;
                Ok(out)
            }
            Out::Json(mut out) => {
                let close: &[u8] = if self.kind == ExportKind::TestsGeojson {
                    b"\n]}\n"
                } else {
                    b"\n]\n"
                };
                out.write_all(close).map_err(io)?;
                out.flush().map_err(io)?;
                Ok(out)
            }
        }
    }
}

/// What to export.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ExportKind {
    TestsCsv,
    TestsJson,
    LotsCsv,
    LotsJson,
    TestsGeojson,
}

impl ExportKind {
    /// Every export.
    pub const ALL: [ExportKind; 5] = [
        Self::TestsCsv,
        Self::TestsJson,
        Self::LotsCsv,
        Self::LotsJson,
        Self::TestsGeojson,
    ];

    /// The code in the export's path (`tests_csv`, …).
    pub fn code(self) -> &'static str {
        match self {
            Self::TestsCsv => "tests_csv",
            Self::TestsJson => "tests_json",
            Self::LotsCsv => "lots_csv",
            Self::LotsJson => "lots_json",
            Self::TestsGeojson => "tests_geojson",
        }
    }

    /// The media type of the export.
    pub fn content_type(self) -> &'static str {
        match self {
            ExportKind::TestsCsv | ExportKind::LotsCsv => "text/csv; charset=utf-8",
            ExportKind::TestsJson | ExportKind::LotsJson => "application/json",
            ExportKind::TestsGeojson => "application/geo+json",
        }
    }
    /// A file name for the download, e.g. `MLR-field-tests.csv`.
    pub fn file_name(self, project_code: &str) -> String {
        let tail = match self {
            ExportKind::TestsCsv => "field-tests.csv",
            ExportKind::TestsJson => "field-tests.json",
            ExportKind::LotsCsv => "lots.csv",
            ExportKind::LotsJson => "lots.json",
            ExportKind::TestsGeojson => "field-tests.geojson",
        };
        format!("{project_code}-{tail}")
    }
}

/// How far beyond its ends a lot may hold a test (the boundary tolerance of entry).
const LOT_END_SLACK_M: f64 = 1.0;

/// Judges a project lot by lot and writes one export of it; returns the number of records.
///
/// Lots outside the chainage range or layer asked for are not judged at all, and only
/// one lot's report is in memory at a time: an export's memory does not grow with the
/// project. Each lot is judged by `lot_report::assemble`, as everywhere else.
pub async fn export<W: Write>(
    pool: &Pool,
    project_id: i64,
    kind: ExportKind,
    filters: &FilterText,
    out: W,
) -> Result<u64> {
    let p: db::projects::Project = setup::require_project(pool, project_id).await?;
    let units = Units::of(&p);
    let f = ExportFilter::parse(filters, &units)?;
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            chainage_from_m: f.chainage_from_m.map(|m| m - LOT_END_SLACK_M),
            chainage_to_m: f.chainage_to_m.map(|m| m + LOT_END_SLACK_M),
            layer_id: f.layer_id,
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?;
    // What every lot shares is read once; per lot only its tests are.
    let mut rows = overview::ProjectRows::load(pool, project_id).await?;
    let mut w = ExportWriter::new(kind, units, f, out)?;
    for lot in lots {
        let tests = db::field_tests::for_lot(pool, lot.id).await?;
        w.lot(&rows.judge(lot, tests)?)?;
    }
    w.finish()
}
