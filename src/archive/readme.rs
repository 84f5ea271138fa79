//! The README inside the archive: what it is, what each folder holds, how to check it.

use super::{ArchiveSummary, MANIFEST, SUMS};
use crate::db;

/// The README's text for a project's archive.
pub fn text(p: &db::projects::Project, s: &ArchiveSummary, made_by: &str) -> String {
    format!(
        "HANDOVER ARCHIVE OF THE COMPACTION QUALITY-CONTROL RECORD

Project   {code} - {name}
Contract  {contract}
Client    {client}
Contractor {contractor}
Made      {at} by {made_by}, with liftledger {version}

This archive holds the whole compaction quality-control record of the project
as it stood when the archive was made: {lots} lots, {tests} field tests,
{certs} certificate revisions and {audit} audit rows. It is meant to be read
without liftledger: every file is PDF, CSV (UTF-8) or JSON.

WHAT IS WHERE

  certificates/    every end-of-lift certificate revision, exactly as issued
                   (a superseded revision is kept beside the one that replaced it)
  records/         the record in CSV (for spreadsheets) and JSON (complete):
                   project, clauses, sources, lab_curves (JSON with points) and
                   lab_points.csv, lots (with state changes in JSON),
                   field_tests (readings as entered and reduced values),
                   certificates (the register)
  audit/           the audit log of the project: every change, who, when,
                   before and after
  {manifest}    every file above with its size, SHA-256 and what it holds
  {sums}       the same hashes in the format of the sha256sum tool

Units: densities kg/m3, water contents %, lengths metres, times UTC (RFC 3339).
Verdicts in records/lots.* were judged when the archive was made; a certificate
states the verdict its signer saw. Results describe the tested points only.

CHECKING THE ARCHIVE

A file changed or damaged since the archive was made no longer matches its
SHA-256. To check every file, unpack the archive and run, in its folder:

    sha256sum -c {sums}

or, with liftledger:  liftledger archive verify THIS-FILE.zip

A certificate PDF can also be checked on its own: its SHA-256 is listed in
records/certificates.csv beside its verification code.
",
        code = p.code,
        name = p.name,
        contract = p.contract,
        client = p.client,
        contractor = p.contractor,
        at = crate::clock::display(&crate::clock::now()),
        version = env!("CARGO_PKG_VERSION"),
        lots = s.lots,
        tests = s.field_tests,
        certs = s.certificates,
        audit = s.audit_rows,
        manifest = MANIFEST,
        sums = SUMS,
    )
}
