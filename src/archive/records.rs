//! The files of the archive: the records as CSV and JSON, the certificates, the audit log.

use std::collections::HashMap;
use std::io::{BufWriter, Seek, SeekFrom, Write};

use futures_util::TryStreamExt;
use serde::Serialize;
use serde_json::{Value, json};

use super::packer::Packer;
use crate::db::{self, Pool};
use crate::error::{AppError, Result};
use crate::ledger::overview;
use crate::present::Units;
use crate::transfer::export::{self, BOM, ExportFilter, ExportKind, ExportWriter};

/// How much of the record went in.
pub struct Counts {
    pub lots: usize,
    pub field_tests: u64,
}

fn io(e: impl Into<anyhow::Error>) -> AppError {
    AppError::Internal(e.into())
}

/// Rows as CSV with a header from their field names (UTF-8 with a byte-order mark).
fn csv_of<T: Serialize>(rows: &[T]) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(BOM.to_vec());
    for r in rows {
        w.serialize(r).map_err(io)?;
    }
    w.into_inner().map_err(|e| io(anyhow::anyhow!("{e}")))
}

/// Writes one table's rows as `records/NAME.json` and `records/NAME.csv`.
fn both<T: Serialize>(
    pack: &mut Packer<impl Write + Seek>,
    name: &str,
    what: &str,
    rows: &[T],
) -> Result<()> {
    pack.add_json(
        &format!("records/{name}.json"),
        &format!("{what} (JSON)"),
        &rows,
    )?;
    pack.add_bytes(
        &format!("records/{name}.csv"),
        &format!("{what} (CSV, one row each)"),
        &csv_of(rows)?,
    )
}

/// The project, its clauses, sources, lab curves with their points, lots and tests.
pub async fn write_all(
    pool: &Pool,
    project: &db::projects::Project,
    pack: &mut Packer<impl Write + Seek>,
) -> Result<Counts> {
    pack.add_json(
        "records/project.json",
        "the project: code, name, contract, parties, units and chainage style",
        project,
    )?;
    let clauses = db::clauses::list(pool, project.id).await?;
    both(
        pack,
        "clauses",
        "specification clauses: RC minimum, moisture window, acceptance rule, test frequency",
        &clauses,
    )?;
    let sources = db::sources::list(pool, project.id).await?;
    both(
        pack,
        "sources",
        "borrow sources: material, classification, specific gravities",
        &sources,
    )?;
    let labs = db::lab_tests::list_for_project(pool, project.id).await?;
    write_lab_curves(pack, &sources, &labs)?;
    write_lots_and_tests(pool, project, pack).await
}

fn write_lab_curves(
    pack: &mut Packer<impl Write + Seek>,
    sources: &[db::sources::Source],
    labs: &[db::lab_tests::LabTest],
) -> Result<()> {
    let source_code: HashMap<i64, &str> = sources.iter().map(|s| (s.id, s.code.as_str())).collect();
    let mut curves = Vec::new();
    let mut points: Vec<(String, usize, serde_json::Map<String, Value>)> = Vec::new();
    for lab in labs {
        let mut v = serde_json::to_value(lab).map_err(io)?;
        let parsed: Value = serde_json::from_str(&lab.points_json).unwrap_or(Value::Null);
        let warnings: Value = serde_json::from_str(&lab.warnings_json).unwrap_or(Value::Null);
        if let Some(list) = parsed.as_array() {
            for (i, p) in list.iter().enumerate() {
                if let Some(o) = p.as_object() {
                    points.push((lab.code.clone(), i + 1, o.clone()));
                }
            }
        }
        if let Some(o) = v.as_object_mut() {
            o.remove("points_json");
            o.remove("warnings_json");
            o.insert("source".into(), json!(source_code.get(&lab.source_id)));
            o.insert("points".into(), parsed);
            o.insert("warnings".into(), warnings);
        }
        curves.push(v);
    }
    pack.add_json(
        "records/lab_curves.json",
        "lab compaction curves: effort, Gs, fitted MDD and OMC, status (active or superseded) and every point as entered",
        &curves,
    )?;
    pack.add_bytes(
        "records/lab_curves.csv",
        "lab compaction curves (CSV, one row each; points in lab_points.csv)",
        &csv_of(labs)?,
    )?;
    pack.add_bytes(
        "records/lab_points.csv",
        "every point of every lab curve as entered (CSV, one row per point)",
        &points_csv(&points)?,
    )
}

/// Lab points with a column for every field any point carries.
fn points_csv(points: &[(String, usize, serde_json::Map<String, Value>)]) -> Result<Vec<u8>> {
    let mut keys: Vec<String> = points
        .iter()
        .flat_map(|(_, _, p)| p.keys().cloned())
        .collect();
    keys.sort();
    keys.dedup();
    let mut w = csv::Writer::from_writer(BOM.to_vec());
    let mut header = vec!["lab_test".to_string(), "point".to_string()];
    header.extend(keys.iter().cloned());
    w.write_record(&header).map_err(io)?;
    for (code, i, p) in points {
        let mut rec = vec![code.clone(), i.to_string()];
        rec.extend(keys.iter().map(|k| match p.get(k) {
            None | Some(Value::Null) => String::new(),
            Some(Value::String(s)) => s.clone(),
            Some(v) => v.to_string(),
        }));
        w.write_record(&rec).map_err(io)?;
    }
    w.into_inner().map_err(|e| io(anyhow::anyhow!("{e}")))
}

type TempOut = BufWriter<std::fs::File>;

fn temp() -> Result<TempOut> {
    Ok(BufWriter::new(tempfile::tempfile().map_err(io)?))
}

/// Every lot judged once, written four ways (tests and lots, CSV and JSON) into
/// temporary files one lot at a time, then copied into the archive.
async fn write_lots_and_tests(
    pool: &Pool,
    project: &db::projects::Project,
    pack: &mut Packer<impl Write + Seek>,
) -> Result<Counts> {
    let units = Units::of(project);
    let all = ExportFilter::default();
    let writer = |kind| ExportWriter::new(kind, units, all.clone(), temp()?);
    let (mut tests_csv, mut tests_json) = (
        writer(ExportKind::TestsCsv)?,
        writer(ExportKind::TestsJson)?,
    );
    let mut lots_csv = writer(ExportKind::LotsCsv)?;
    let mut transitions = lot_transitions(pool, project.id).await?;
    let mut lots_json = temp()?;
    lots_json.write_all(b"[").map_err(io)?;
    let mut n_lots = 0usize;
    overview::each_report(
        pool,
        project.id,
        |_| true,
        true,
        |r| {
            tests_csv.lot(&r)?;
            tests_json.lot(&r)?;
            lots_csv.lot(&r)?;
            let v = archived_lot(
                &units,
                &r,
                transitions.remove(&r.lot.id).unwrap_or_default(),
            );
            lots_json
                .write_all(if n_lots == 0 { b"\n" } else { b",\n" })
                .map_err(io)?;
            serde_json::to_writer(&mut lots_json, &v).map_err(io)?;
            n_lots += 1;
            Ok(())
        },
    )
    .await?;
    lots_json.write_all(b"\n]\n").map_err(io)?;
    let field_tests = tests_json.written();
    let files = [
        (
            "records/field_tests.csv",
            "every field test with its location, readings reduced, reference, RC, moisture deviation and result (CSV)",
            finish(tests_csv)?,
        ),
        (
            "records/field_tests.json",
            "every field test with the readings as entered, the reduced values, retest links and voids (JSON)",
            finish(tests_json)?,
        ),
        (
            "records/lots.csv",
            "every lot with its clause, reference curve, statistics, verdict as judged when the archive was made, and certificate (CSV)",
            finish(lots_csv)?,
        ),
        (
            "records/lots.json",
            "every lot with its extent, clause, source and curve, verdict as judged when the archive was made, certificate and state changes (JSON)",
            lots_json.into_inner().map_err(|e| io(e.into_error()))?,
        ),
    ];
    for (path, what, file) in files {
        add_temp(pack, path, what, file)?;
    }
    Ok(Counts {
        lots: n_lots,
        field_tests,
    })
}

/// Each lot's state changes, read before the lots are judged (one query per lot).
async fn lot_transitions(
    pool: &Pool,
    project_id: i64,
) -> Result<HashMap<i64, Vec<db::lots::Transition>>> {
    let lots = db::lots::list(
        pool,
        project_id,
        &db::lots::LotFilter {
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?;
    let mut transitions = HashMap::new();
    for lot in &lots {
        transitions.insert(lot.id, db::lots::transitions(pool, lot.id).await?);
    }
    Ok(transitions)
}

/// A lot as the export shows it, with what the archive adds: the record's ids, who made it
/// and when, and every state change.
fn archived_lot(
    units: &Units,
    r: &crate::ledger::lot_report::LotReport,
    transitions: Vec<db::lots::Transition>,
) -> serde_json::Value {
    let mut v = export::lot_object(units, r);
    v["source"] = json!(r.source.code);
    v["layer_id"] = json!(r.lot.layer_id);
    v["clause_id"] = json!(r.lot.clause_id);
    v["source_id"] = json!(r.lot.source_id);
    v["lab_test_id"] = json!(r.lot.lab_test_id);
    v["created_at"] = json!(r.lot.created_at);
    v["created_by"] = json!(r.lot.created_by);
    v["transitions"] = json!(transitions);
    v
}

/// A finished temporary file copied into the archive from its start.
fn add_temp(
    pack: &mut Packer<impl Write + Seek>,
    path: &str,
    what: &str,
    mut file: std::fs::File,
) -> Result<()> {
    file.seek(SeekFrom::Start(0)).map_err(io)?;
    pack.add_from(path, what, std::io::BufReader::new(file))
}

fn finish(w: ExportWriter<TempOut>) -> Result<std::fs::File> {
    let out = w.finish_into()?;
    out.into_inner().map_err(|e| io(e.into_error()))
}

/// Every certificate revision's PDF as issued, and the register of them.
pub async fn write_certificates(
    pool: &Pool,
    project: &db::projects::Project,
    pack: &mut Packer<impl Write + Seek>,
) -> Result<usize> {
    let mut certs = db::certificates::for_project(pool, project.id).await?;
    certs.sort_by_key(|c| (c.sequence, c.revision));
    let lots: HashMap<i64, String> = db::lots::list(
        pool,
        project.id,
        &db::lots::LotFilter {
            limit: i64::MAX,
            ..Default::default()
        },
    )
    .await?
    .into_iter()
    .map(|l| (l.id, l.code))
    .collect();
    let mut register = Vec::new();
    for c in &certs {
        let pdf = db::certificates::pdf(pool, c.id).await?.unwrap_or_default();
        let actual = hex::encode(<sha2::Sha256 as sha2::Digest>::digest(&pdf));
        if actual != c.sha256 {
            return Err(io(anyhow::anyhow!(
                "certificate {} revision {} does not match its stored SHA-256; not archived",
                c.number,
                c.revision
            )));
        }
        let path = format!(
            "certificates/{}-rev{}.pdf",
            safe_name(&c.number),
            c.revision
        );
        let lot = lots.get(&c.lot_id).cloned().unwrap_or_default();
        let standing = match &c.superseded_at {
            Some(at) => format!("superseded {at}"),
            None => "current".to_string(),
        };
        pack.add_bytes(
            &path,
            &format!(
                "certificate {} revision {} for lot {lot}, issued {} by {}, verification code {}; {standing}",
                c.number, c.revision, c.issued_at, c.issued_by, c.verification_code
            ),
            &pdf,
        )?;
        let mut row = serde_json::to_value(c).map_err(io)?;
        row["lot"] = json!(lot);
        row["file"] = json!(path);
        register.push(row);
    }
    pack.add_json(
        "records/certificates.json",
        "the certificate register: number, revision, lot, verification code, SHA-256, issue and supersession (JSON)",
        &register,
    )?;
    pack.add_bytes(
        "records/certificates.csv",
        "the certificate register (CSV)",
        &csv_of(&certs)?,
    )?;
    Ok(certs.len())
}

/// A certificate number as a file name: letters, digits, `-`, `_` and `.` kept.
fn safe_name(s: &str) -> String {
    s.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || "-_.".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect()
}

/// The project's audit log, every row oldest first, as CSV and JSON.
pub async fn write_audit(
    pool: &Pool,
    project: &db::projects::Project,
    pack: &mut Packer<impl Write + Seek>,
) -> Result<usize> {
    let rows: Vec<db::audit::AuditEntry> = db::audit::for_project(pool, project.id)
        .try_collect()
        .await?;
    pack.add_json(
        "audit/audit_log.json",
        "the project's audit log: every change with who, when, what, before and after (JSON)",
        &rows,
    )?;
    pack.add_bytes(
        "audit/audit_log.csv",
        "the project's audit log (CSV)",
        &csv_of(&rows)?,
    )?;
    Ok(rows.len())
}
