//! Reading field tests and lab points from CSV, one row at a time.
//!
//! The reader strips a UTF-8 byte-order mark, takes comma, semicolon or tab (or picks
//! one from the header line), honours quoted fields, and turns each row into the same
//! input the site entry form builds. Every byte read is hashed (SHA-256) on the way,
//! so the import's audit row can name exactly the file it came from. Nothing is
//! collected: memory stays flat in the size of the file.

use std::collections::HashMap;
use std::io::{BufRead, BufReader, Read};
use std::sync::Arc;

use sha2::{Digest, Sha256};

use super::mapping::{ImportMapping, LabPointMapping, LabTarget, Separator, Target, parse_method};
use crate::ledger::field::FieldTestInput;
use crate::ledger::import::{
    CellLocator, ImportRow, LabPointRow, RowProblem, RowResult, RowSource, SourceOrigin,
};
use crate::ledger::setup::LabPointInput;
use crate::readings::parse_number;
use crate::readings::{DensityUnits, parse_readings};
use crate::reduction::field::FieldReadings;
use crate::reduction::{Chainage, ChainageStyle, Density, METRES_PER_FOOT, UnitSystem};

/// Longest cell accepted, characters (a longer one is a problem, not a crash).
pub const MAX_CELL_CHARS: usize = 10_000;
/// Bytes looked at to find the separator.
const SNIFF_BYTES: usize = 64 * 1024;

/// Hashes and counts every byte read through it.
pub struct HashingReader<R> {
    inner: R,
    hasher: Sha256,
    bytes: u64,
}

impl<R: Read> HashingReader<R> {
    /// Wraps a reader.
    pub fn new(inner: R) -> Self {
        Self {
            inner,
            hasher: Sha256::new(),
            bytes: 0,
        }
    }
    /// Bytes read so far.
    pub fn bytes(&self) -> u64 {
        self.bytes
    }
    /// SHA-256 (hex) of the bytes read so far.
    pub fn sha256(&self) -> String {
        hex::encode(self.hasher.clone().finalize())
    }
}

impl<R: Read> Read for HashingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }
}

/// Which separator a header line uses most: comma, semicolon or tab (quotes respected).
pub fn sniff_separator(head: &[u8]) -> u8 {
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for &b in head {
        match b {
            b'"' => quoted = !quoted,
            b'\n' | b'\r' if !quoted => break,
            b',' if !quoted => counts[0] += 1,
            b';' if !quoted => counts[1] += 1,
            b'\t' if !quoted => counts[2] += 1,
            _ => {}
        }
    }
    let seps = [b',', b';', b'\t'];
    let mut best = 0;
    for i in 1..3 {
        if counts[i] > counts[best] {
            best = i;
        }
    }
    seps[best]
}

/// Opens a CSV stream: strips a BOM and settles the separator; the rest is left to csv.
fn open_csv<R: Read>(
    input: R,
    separator: Separator,
) -> std::io::Result<csv::Reader<BufReader<HashingReader<R>>>> {
    let mut buf = BufReader::with_capacity(SNIFF_BYTES, HashingReader::new(input));
    let head = buf.fill_buf()?;
    let bom = head.starts_with(&[0xEF, 0xBB, 0xBF]);
    let sep = match separator.byte() {
        Some(b) => b,
        None => sniff_separator(if bom { &head[3..] } else { head }),
    };
    if bom {
        buf.consume(3);
    }
    Ok(csv::ReaderBuilder::new()
        .delimiter(sep)
        .has_headers(false)
        .flexible(true)
        .from_reader(buf))
}

/// The header cells, trimmed (invalid UTF-8 shown lossily).
fn header_names(rec: &csv::ByteRecord) -> Vec<String> {
    rec.iter()
        .map(|c| String::from_utf8_lossy(c).trim().to_string())
        .collect()
}

/// Finds a mapped column in the header: exactly, else ignoring case and spaces.
fn find_column(header: &[String], name: &str) -> Option<usize> {
    let norm = |s: &str| -> String {
        s.chars()
            .filter(|c| !c.is_whitespace())
            .flat_map(char::to_lowercase)
            .collect()
    };
    header
        .iter()
        .position(|h| h == name.trim())
        .or_else(|| header.iter().position(|h| norm(h) == norm(name)))
}

/// Where each mapped target sits in the file.
#[derive(Debug)]
struct ColumnIndex {
    /// Target → (column position, column name as in the mapping).
    at: HashMap<Target, (usize, String)>,
}

/// The cells of one row, kept to name columns in problems found later.
struct CsvCells {
    record: csv::ByteRecord,
    index: Arc<ColumnIndex>,
}

impl CellLocator for CsvCells {
    fn locate(&self, field: &str, method: &str) -> (String, String) {
        let target = Target::for_ledger_field(field, method).map(|t| match t {
            // An offset in feet is reported where the file has it.
            Target::OffsetM if !self.index.at.contains_key(&Target::OffsetM) => Target::OffsetFt,
            t => t,
        });
        match target.and_then(|t| self.index.at.get(&t)) {
            Some((i, name)) => (
                name.clone(),
                self.record
                    .get(*i)
                    .map(|c| String::from_utf8_lossy(c).trim().to_string())
                    .unwrap_or_default(),
            ),
            None => (
                target.map_or_else(|| field.to_string(), |t| t.code().to_string()),
                String::new(),
            ),
        }
    }
}

/// Field-test rows read from a CSV file through a mapping.
pub struct CsvFieldTests<R: Read> {
    reader: Option<csv::Reader<BufReader<HashingReader<R>>>>,
    file_name: String,
    mapping: ImportMapping,
    index: Arc<ColumnIndex>,
    width: usize,
    record: csv::ByteRecord,
    /// Problems of the header or mapping, given once as the first "row" (no rows follow).
    opening: Option<Vec<RowProblem>>,
    done: bool,
}

impl<R: Read> CsvFieldTests<R> {
    /// Opens a file for reading through a mapping; header and mapping problems come out
    /// as the first row's problems, and then no rows are read.
    pub fn new(input: R, file_name: &str, mapping: &ImportMapping) -> Self {
        let mut opening = Vec::new();
        let mut header = Vec::new();
        let reader = match open_csv(input, mapping.separator) {
            Ok(mut r) => {
                let mut rec = csv::ByteRecord::new();
                match r.read_byte_record(&mut rec) {
                    Ok(true) => header = header_names(&rec),
                    Ok(false) => opening.push(RowProblem::new(1, "", "", "the file is empty")),
                    Err(e) => opening.push(RowProblem::new(
                        1,
                        "",
                        "",
                        format!("cannot read the header: {e}"),
                    )),
                }
                Some(r)
            }
            Err(e) => {
                opening.push(RowProblem::new(
                    0,
                    "",
                    "",
                    format!("cannot read the file: {e}"),
                ));
                None
            }
        };
        for p in mapping.problems() {
            opening.push(RowProblem::new(1, "", "", format!("mapping: {p}")));
        }
        let mut at = HashMap::new();
        if !header.is_empty() {
            for (name, target) in &mapping.columns {
                match find_column(&header, name) {
                    Some(i) => {
                        at.insert(*target, (i, name.clone()));
                    }
                    None => opening.push(RowProblem::new(
                        1,
                        name,
                        "",
                        format!(
                            "the mapping names column '{name}' but the header has no such column (it has: {})",
                            header.join(", ")
                        ),
                    )),
                }
            }
        }
        Self {
            reader,
            file_name: file_name.to_string(),
            mapping: mapping.clone(),
            index: Arc::new(ColumnIndex { at }),
            width: header.len(),
            record: csv::ByteRecord::new(),
            opening: (!opening.is_empty()).then_some(opening),
            done: false,
        }
    }

    /// Reads one data row into an import row (or its problems).
    fn parse_row(&self) -> RowResult {
        let rec = &self.record;
        let line = rec.position().map_or(0, |p| p.line());
        let mut problems = Vec::new();
        if rec.len() > self.width
            && rec
                .iter()
                .skip(self.width)
                .any(|c| !c.iter().all(u8::is_ascii_whitespace))
        {
            problems.push(RowProblem::new(
                line,
                "",
                "",
                format!(
                    "the row has {} fields but the header has {}; check quotes and separators",
                    rec.len(),
                    self.width
                ),
            ));
        }
        let mut cells = RowCells::default();
        for (target, (i, name)) in &self.index.at {
            let raw = rec.get(*i).unwrap_or(b"");
            match std::str::from_utf8(raw) {
                Ok(s) if s.len() > MAX_CELL_CHARS && s.chars().count() > MAX_CELL_CHARS => problems
                    .push(RowProblem::new(
                        line,
                        name,
                        s,
                        format!("is longer than {MAX_CELL_CHARS} characters"),
                    )),
                Ok(s) => {
                    let s = s.trim();
                    if !s.is_empty() {
                        cells.insert(*target, s);
                    }
                }
                Err(_) => problems.push(RowProblem::new(
                    line,
                    name,
                    &String::from_utf8_lossy(raw),
                    "is not valid UTF-8 text; save the file as UTF-8",
                )),
            }
        }
        let mut cr = CellReader {
            line,
            index: &self.index,
            cells: &cells,
            problems: &mut problems,
            units: self.mapping.units,
            chainage: self.mapping.chainage,
        };
        let built = build_input(&mut cr, &self.mapping);
        match built {
            Some((input, lot, retest_of)) if problems.is_empty() => Ok(ImportRow {
                row: line,
                lot,
                retest_of,
                input,
                cells: Some(Box::new(CsvCells {
                    record: rec.clone(),
                    index: self.index.clone(),
                })),
            }),
            _ => Err(problems),
        }
    }
}

impl<R: Read + Send> RowSource for CsvFieldTests<R> {
    fn next_row(&mut self) -> Option<RowResult> {
        if let Some(p) = self.opening.take() {
            self.done = true;
            return Some(Err(p));
        }
        if self.done {
            return None;
        }
        let reader = self.reader.as_mut()?;
        loop {
            match reader.read_byte_record(&mut self.record) {
                Ok(false) => {
                    self.done = true;
                    return None;
                }
                // A line holding only separators or spaces is not a row.
                Ok(true)
                    if self
                        .record
                        .iter()
                        .all(|c| c.iter().all(u8::is_ascii_whitespace)) =>
                {
                    continue;
                }
                Ok(true) => return Some(self.parse_row()),
                Err(e) => {
                    self.done = true;
                    let line = e.position().map_or(0, |p| p.line());
                    return Some(Err(vec![RowProblem::new(
                        line,
                        "",
                        "",
                        format!("the file cannot be read past here: {e}"),
                    )]));
                }
            }
        }
    }

    fn origin(&self) -> SourceOrigin {
        let (bytes, sha256) = match &self.reader {
            Some(r) => (
                r.get_ref().get_ref().bytes(),
                r.get_ref().get_ref().sha256(),
            ),
            None => (0, String::new()),
        };
        SourceOrigin {
            file_name: self.file_name.clone(),
            bytes,
            sha256,
        }
    }
}

/// The non-empty mapped cells of one row, by target (no allocation per row).
#[derive(Default)]
struct RowCells<'a>([Option<&'a str>; Target::ALL.len()]);

impl<'a> RowCells<'a> {
    fn insert(&mut self, t: Target, v: &'a str) {
        self.0[t as usize] = Some(v);
    }
    fn get(&self, t: &Target) -> Option<&&'a str> {
        self.0[*t as usize].as_ref()
    }
}

/// Reads the mapped cells of one row, collecting every problem at once.
struct CellReader<'a> {
    line: u64,
    index: &'a ColumnIndex,
    cells: &'a RowCells<'a>,
    problems: &'a mut Vec<RowProblem>,
    units: UnitSystem,
    chainage: ChainageStyle,
}

impl CellReader<'_> {
    fn column(&self, t: Target) -> String {
        self.index
            .at
            .get(&t)
            .map_or_else(|| format!("({} not mapped)", t.code()), |(_, n)| n.clone())
    }

    fn text(&self, t: Target) -> Option<String> {
        self.cells.get(&t).map(|s| s.to_string())
    }

    /// A yes/no cell: yes, true, y or 1 (any case) is yes; empty, no, false, n or 0 is no;
    /// anything else is a problem named at its column.
    fn yes(&mut self, t: Target) -> Option<bool> {
        let Some(raw) = self.cells.get(&t).copied() else {
            return Some(false);
        };
        match raw.trim().to_ascii_lowercase().as_str() {
            "yes" | "true" | "y" | "1" => Some(true),
            "" | "no" | "false" | "n" | "0" => Some(false),
            _ => {
                self.problem(t, raw, format!("'{raw}' is not yes or no"));
                None
            }
        }
    }

    fn problem(&mut self, t: Target, value: &str, reason: impl Into<String>) {
        let column = self.column(t);
        self.problems
            .push(RowProblem::new(self.line, &column, value, reason));
    }

    /// A number as the site entry form reads it (a decimal comma is taken as a point).
    fn number(&mut self, t: Target) -> Option<f64> {
        let raw = *self.cells.get(&t)?;
        match parse_number(raw) {
            Some(x) => Some(x),
            None => {
                self.problem(t, raw, format!("'{raw}' is not a number"));
                None
            }
        }
    }

    /// The test's readings through the one parser (`crate::readings`), each problem
    /// named at the column it came from.
    fn readings(&mut self, method: &str, depth: Option<f64>) -> Option<FieldReadings> {
        let units = DensityUnits {
            bulk: self.units,
            sand: self.units,
        };
        let cells = self.cells;
        match parse_readings(method, units, depth, |f| {
            cells.get(&Target::from(f)).copied()
        }) {
            Ok(r) => Some(r),
            Err(problems) => {
                for p in problems {
                    self.problem(Target::from(p.field), &p.value, p.reason);
                }
                None
            }
        }
    }
}

/// Turns a lone decimal comma into a point ("1,5" → "1.5"); text with a point is left alone.
fn decimal_point(raw: &str) -> std::borrow::Cow<'_, str> {
    if raw.contains(',') && !raw.contains('.') {
        raw.replace(',', ".").into()
    } else {
        raw.into()
    }
}

/// Builds the ledger's input from a row's cells (None when a required part is missing).
fn build_input(
    r: &mut CellReader<'_>,
    mapping: &ImportMapping,
) -> Option<(FieldTestInput, Option<String>, Option<String>)> {
    let method_text = r.text(Target::Method).or_else(|| mapping.method.clone());
    let method = match method_text.as_deref() {
        Some(m) => match parse_method(m) {
            Some(code) => Some(code),
            None => {
                r.problem(
                    Target::Method,
                    m,
                    "is not one of nuclear, sand_cone, balloon, drive_cylinder",
                );
                None
            }
        },
        None => {
            r.problem(Target::Method, "", "is required");
            None
        }
    };
    let chainage = match r.cells.get(&Target::Chainage).copied() {
        // A decimal comma ("1+040,5" in a semicolon file) reads as a point.
        Some(raw) => match Chainage::parse(&decimal_point(raw), r.chainage) {
            Ok(c) => Some(c.metres()),
            Err(e) => {
                r.problem(Target::Chainage, raw, e.to_string());
                None
            }
        },
        None => None,
    };
    let offset = match (r.number(Target::OffsetM), r.number(Target::OffsetFt)) {
        (Some(m), _) => Some(m),
        (None, Some(ft)) => Some(ft * METRES_PER_FOOT),
        _ => None,
    };
    let depth = r.number(Target::DepthMm);
    let coarse = r.number(Target::CoarsePct);
    let coarse_w = r.number(Target::CoarseWaterContentPct);
    let easting = r.number(Target::Easting);
    let northing = r.number(Target::Northing);
    let readings = r.readings(method?, depth)?;
    let input = FieldTestInput {
        number: r.text(Target::Number),
        tested_at: r.text(Target::TestedAt),
        technician: r.text(Target::Technician).unwrap_or_default(),
        instrument_serial: r.text(Target::InstrumentSerial).unwrap_or_default(),
        chainage_m: chainage,
        offset_m: offset,
        depth_mm: depth,
        coarse_pct: coarse,
        coarse_water_content_pct: coarse_w,
        easting,
        northing,
        readings,
        confirm_implausible: r.yes(Target::ConfirmImplausible)?,
        calibration_override_reason: None,
    };
    Some((input, r.text(Target::Lot), r.text(Target::RetestOf)))
}

/// One lab point from its row's cells (`at`: field, column position, column name), and
/// the cells as written, to name them in a later refusal.
fn read_point(
    rec: &csv::ByteRecord,
    at: &[(LabTarget, usize, String)],
    units: UnitSystem,
    line: u64,
) -> (
    std::result::Result<LabPointInput, Vec<RowProblem>>,
    HashMap<LabTarget, String>,
) {
    let mut problems = Vec::new();
    let mut values: HashMap<LabTarget, f64> = HashMap::new();
    let mut texts = HashMap::new();
    for (t, i, name) in at {
        let raw = String::from_utf8_lossy(rec.get(*i).unwrap_or(b""))
            .trim()
            .to_string();
        if raw.is_empty() {
            continue;
        }
        match parse_number(&raw) {
            Some(x) if *t == LabTarget::DryDensity && units == UnitSystem::Us => {
                match Density::from_lb_ft3(x) {
                    Ok(d) => {
                        values.insert(*t, d.kg_m3());
                    }
                    Err(e) => problems.push(RowProblem::new(line, name, &raw, e.to_string())),
                }
            }
            Some(x) => {
                values.insert(*t, x);
            }
            None => problems.push(RowProblem::new(
                line,
                name,
                &raw,
                format!("'{raw}' is not a number"),
            )),
        }
        texts.insert(*t, raw);
    }
    if !problems.is_empty() {
        return (Err(problems), texts);
    }
    let v = |t| values.get(&t).copied();
    let point = LabPointInput {
        water_content_pct: v(LabTarget::WaterContentPct),
        dry_density_kg_m3: v(LabTarget::DryDensity),
        mass_mold_and_soil_g: v(LabTarget::MassMoldAndSoilG),
        mass_mold_g: v(LabTarget::MassMoldG),
        mold_volume_cm3: v(LabTarget::MoldVolumeCm3),
        mass_wet_g: v(LabTarget::MassWetG),
        mass_dry_g: v(LabTarget::MassDryG),
        mass_tare_g: v(LabTarget::MassTareG),
        mould: None,
    };
    (Ok(point), texts)
}

/// Lab compaction points read from a CSV file (one specimen a row; small files).
pub struct CsvLabPoints {
    /// Each row's line and point, or its problems.
    pub rows: Vec<LabPointRow>,
    /// Point field → column name, to name columns in refusals.
    columns: HashMap<LabTarget, String>,
    /// Line → the row's cells by field.
    cells: HashMap<u64, HashMap<LabTarget, String>>,
    pub origin: SourceOrigin,
}

/// Most points read from a lab file (a lab test has a handful).
const MAX_POINTS: usize = 1000;

/// A CSV file read through the hashing reader (its size and SHA-256 known at the end).
type HashedCsv<R> = csv::Reader<BufReader<HashingReader<R>>>;

/// Where each mapped point field stands in a lab file: (field, column index, column name).
type LabColumns = Vec<(LabTarget, usize, String)>;

impl CsvLabPoints {
    /// Reads every point of a lab file (at most [`MAX_POINTS`] rows are read).
    pub fn read<R: Read>(input: R, file_name: &str, mapping: &LabPointMapping) -> Self {
        let mut out = Self {
            rows: Vec::new(),
            columns: mapping
                .columns
                .iter()
                .map(|(c, t)| (*t, c.clone()))
                .collect(),
            cells: HashMap::new(),
            origin: SourceOrigin {
                file_name: file_name.to_string(),
                ..Default::default()
            },
        };
        match open_lab_file(input, mapping) {
            Ok((mut reader, at)) => {
                out.read_points(&mut reader, &at, mapping.units);
                let h = reader.get_ref().get_ref();
                out.origin.bytes = h.bytes();
                out.origin.sha256 = h.sha256();
            }
            Err(opening) => out.rows.push(Err(opening)),
        }
        out
    }

    /// Every point row after the header, blank rows skipped; a row past [`MAX_POINTS`] or
    /// a file unreadable past some row ends the reading with a problem.
    fn read_points<R: Read>(
        &mut self,
        reader: &mut HashedCsv<R>,
        at: &LabColumns,
        units: UnitSystem,
    ) {
        let mut rec = csv::ByteRecord::new();
        loop {
            match reader.read_byte_record(&mut rec) {
                Ok(true) => {}
                Ok(false) => break,
                Err(e) => {
                    self.rows.push(Err(vec![RowProblem::new(
                        0,
                        "",
                        "",
                        format!("the file cannot be read past here: {e}"),
                    )]));
                    break;
                }
            }
            if rec.iter().all(|c| c.iter().all(u8::is_ascii_whitespace)) {
                continue;
            }
            let line = rec.position().map_or(0, |p| p.line());
            if self.rows.len() >= MAX_POINTS {
                self.rows.push(Err(vec![RowProblem::new(
                    line,
                    "",
                    "",
                    format!("a lab test has at most {MAX_POINTS} points"),
                )]));
                break;
            }
            let (point, texts) = read_point(&rec, at, units, line);
            self.cells.insert(line, texts);
            self.rows.push(point.map(|p| (line, p)));
        }
    }

    /// (column, cell) of a point field on a line, for naming a refusal.
    pub fn locate(&self, line: u64, field: &str) -> (String, String) {
        match LabTarget::for_ledger_field(field) {
            Some(t) => (
                self.columns
                    .get(&t)
                    .cloned()
                    .unwrap_or_else(|| t.code().to_string()),
                self.cells
                    .get(&line)
                    .and_then(|c| c.get(&t))
                    .cloned()
                    .unwrap_or_default(),
            ),
            None => (field.to_string(), String::new()),
        }
    }
}

/// A lab file opened and its header matched with the mapping, or the problems that stop
/// it before its first row (unreadable, empty, a mapped column missing).
fn open_lab_file<R: Read>(
    input: R,
    mapping: &LabPointMapping,
) -> std::result::Result<(HashedCsv<R>, LabColumns), Vec<RowProblem>> {
    let mut reader = open_csv(input, mapping.separator).map_err(|e| {
        vec![RowProblem::new(
            0,
            "",
            "",
            format!("cannot read the file: {e}"),
        )]
    })?;
    let mut rec = csv::ByteRecord::new();
    let header = match reader.read_byte_record(&mut rec) {
        Ok(true) => header_names(&rec),
        _ => return Err(vec![RowProblem::new(1, "", "", "the file is empty")]),
    };
    let mut at = Vec::new();
    let mut opening = Vec::new();
    for (name, t) in &mapping.columns {
        match find_column(&header, name) {
            Some(i) => at.push((*t, i, name.clone())),
            None => opening.push(RowProblem::new(
                1,
                name,
                "",
                format!("the mapping names column '{name}' but the header has no such column"),
            )),
        }
    }
    if opening.is_empty() {
        Ok((reader, at))
    } else {
        Err(opening)
    }
}
