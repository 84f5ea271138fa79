//! An invented large project for load and scale measurements, built through the same
//! paths a user's data takes: projects, clauses, sources, lab curves, layers and lots
//! through `ledger::setup`, field tests through the bulk import path
//! (`ledger::import`), voids and reviews through `ledger::field` and `ledger::review`.
//!
//! Deterministic: one seed gives the same project, byte for byte except the times it
//! was made. Relative compaction is drawn from N(RC_min + 2.5, 1.5) and moisture from
//! N(OMC, 0.8), which fails about 6 % of first tests; every failure gets a retest at
//! the same spot a day later (itself failing now and then, then retested again), except
//! under the quality-index rule, which judges the lot's sample as it stands.
//!
//! Not part of the library: it drives the library from outside, as a client would, so
//! it names it `liftledger::`. `benches/scale_bench.rs` mounts this file with `#[path]`;
//! the binary mounts it with `mod scale;` in `src/main.rs` for `liftledger generate`.

use std::time::Instant;

use anyhow::anyhow;
use serde_json::json;

use liftledger::db::{self, Pool};
use liftledger::error::AppError;
use liftledger::ledger::field::FieldTestInput;
use liftledger::ledger::import::{
    AuditMode, ImportOptions, ImportReport, ImportRow, RowResult, RowSource, SourceOrigin,
    import_field_tests,
};
use liftledger::ledger::{self, Actor, setup};
use liftledger::reduction::field::{FieldReadings, reduce_field};
use liftledger::reduction::plausibility::refusal_without_confirmation;
use liftledger::reduction::verdict::{
    Reference, SpecLimits, judge_test, reference_for_coarse_fraction,
};

/// What to generate.
#[derive(Debug, Clone)]
pub struct ScaleOptions {
    pub seed: u64,
    /// Project code (unique in the database).
    pub project_code: String,
    /// Length of the alignment, metres.
    pub length_m: f64,
    /// Layers in all (split over the zones from the bottom: fill, subgrade, capping).
    pub layers: u32,
    /// 2 (fill, capping) or 3 (fill, subgrade, capping).
    pub zones: u32,
    /// Shortest and longest lot, metres.
    pub lot_min_m: f64,
    pub lot_max_m: f64,
    /// Field tests wanted, retests included (the result lands within a few percent).
    pub tests: u64,
    /// Tests voided after the import.
    pub voids: u32,
    /// Lots submitted and accepted (certificates issued) after the import.
    pub accepted_lots: u32,
    /// Lots submitted and left awaiting review.
    pub submitted_lots: u32,
    /// Most rows in one import transaction (cut at lot ends so retests stay with their failure).
    pub rows_per_import: u64,
    /// Audit rows of the imports.
    pub audit: AuditMode,
}

impl Default for ScaleOptions {
    fn default() -> Self {
        Self {
            seed: 20_261_201,
            project_code: "BIG".to_string(),
            length_m: 60_000.0,
            layers: 30,
            zones: 3,
            lot_min_m: 200.0,
            lot_max_m: 500.0,
            tests: 300_000,
            voids: 40,
            accepted_lots: 8,
            submitted_lots: 6,
            rows_per_import: 100_000,
            audit: AuditMode::PerImport,
        }
    }
}

impl ScaleOptions {
    /// The default job resized for about `tests` tests: the same lot lengths and tests per
    /// lot (about 58), with fewer layers and a shorter alignment for a smaller project, so a
    /// few thousand tests still make a project of several lots in every zone.
    pub fn for_tests(tests: u64) -> Self {
        let d = Self::default();
        let per_lot = d.tests as f64 / d.lots_planned();
        let lots = (tests as f64 / per_lot).max(6.0);
        let layers = (tests / 10_000).clamp(3, u64::from(d.layers)) as u32;
        let mean_lot_m = (d.lot_min_m + d.lot_max_m) / 2.0;
        Self {
            tests,
            layers,
            length_m: (lots / f64::from(layers) * mean_lot_m)
                .round()
                .max(d.lot_max_m * 2.0),
            ..d
        }
    }

    /// Lots the layout makes, about (layers × length / mean lot length).
    fn lots_planned(&self) -> f64 {
        f64::from(self.layers) * self.length_m / ((self.lot_min_m + self.lot_max_m) / 2.0)
    }
}

/// How far a generation has come, told after each lot's rows are made.
#[derive(Debug, Clone, Copy)]
pub struct Progress {
    /// Tests (retests included) handed to the import so far.
    pub generated: u64,
    /// Tests asked for (the result lands within a few percent).
    pub wanted: u64,
    /// Since the import began.
    pub elapsed: std::time::Duration,
}

/// What was generated and how long it took.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct ScaleSummary {
    pub project_id: i64,
    pub project_code: String,
    pub zones: u32,
    pub layers: u32,
    pub lots: u64,
    pub tests: u64,
    pub retests: u64,
    /// Tests that failed when taken (first tests and retests).
    pub failures: u64,
    pub voids: u32,
    pub accepted_lots: u32,
    pub submitted_lots: u32,
    pub imports: u32,
    pub setup_ms: u64,
    pub import_ms: u64,
    pub actions_ms: u64,
    pub total_ms: u64,
}

impl std::fmt::Display for ScaleSummary {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let rate = if self.import_ms > 0 {
            self.tests as f64 / (self.import_ms as f64 / 1000.0)
        } else {
            0.0
        };
        write!(
            f,
            "project {} (id {}): {} zones, {} layers, {} lots, {} tests ({} retests, {} failures, {} voids), \
             {} accepted and {} submitted lots; setup {:.1} s, {} imports {:.1} s ({rate:.0} tests/s), actions {:.1} s, total {:.1} s",
            self.project_code,
            self.project_id,
            self.zones,
            self.layers,
            self.lots,
            self.tests,
            self.retests,
            self.failures,
            self.voids,
            self.accepted_lots,
            self.submitted_lots,
            self.setup_ms as f64 / 1000.0,
            self.imports,
            self.import_ms as f64 / 1000.0,
            self.actions_ms as f64 / 1000.0,
            self.total_ms as f64 / 1000.0,
        )
    }
}

/// A small deterministic generator (xorshift64*), with normal draws by Box–Muller.
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// A generator from a seed (0 is moved to 1).
    pub fn new(seed: u64) -> Self {
        Self(seed.max(1))
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Uniform in [a, b).
    pub fn between(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * self.unit()
    }
    /// Normal with mean and standard deviation.
    pub fn normal(&mut self, mean: f64, sd: f64) -> f64 {
        let u1 = self.unit().max(1e-12);
        let u2 = self.unit();
        mean + sd * (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

/// One zone of the invented job.
struct ZonePlan {
    name: &'static str,
    clause: &'static str,
    source: usize,
    half_width_m: f64,
    layers: u32,
}

/// A lot to fill with tests.
#[derive(Debug, Clone)]
struct LotPlan {
    code: String,
    from_m: f64,
    to_m: f64,
    left_m: f64,
    right_m: f64,
    layer_index: u32,
    limits: SpecLimits,
    reference: Reference,
    gs_coarse: f64,
    oversize_limit: f64,
    tests: u32,
    /// False under the quality-index rule: a failed lot there is resampled, not patched
    /// test by test, so its failures stand without retests.
    retests: bool,
}

const TECHNICIANS: [&str; 6] = [
    "I. Brandvold",
    "K. Osei-Tutu",
    "M. Lindqvist",
    "R. Achebe-Park",
    "S. Varga",
    "T. Okonkwo",
];

fn round1(v: f64) -> f64 {
    (v * 10.0).round() / 10.0
}

/// Lab points of three invented materials (below their zero-air-voids lines).
fn lab_points(material: usize) -> serde_json::Value {
    let pts: [(f64, f64); 5] = match material {
        0 => [
            (7.8, 1868.0),
            (9.7, 1927.0),
            (11.4, 1958.0),
            (13.2, 1932.0),
            (15.1, 1872.0),
        ],
        1 => [
            (5.5, 1990.0),
            (7.0, 2050.0),
            (8.5, 2078.0),
            (10.0, 2055.0),
            (11.5, 2000.0),
        ],
        _ => [
            (12.0, 1690.0),
            (14.0, 1740.0),
            (16.0, 1762.0),
            (18.0, 1738.0),
            (20.0, 1690.0),
        ],
    };
    serde_json::Value::Array(
        pts.iter()
            .map(|(w, d)| json!({"water_content_pct": w, "dry_density_kg_m3": d}))
            .collect(),
    )
}

fn app(e: AppError) -> anyhow::Error {
    match e {
        AppError::Internal(e) => e,
        e => anyhow!("{}: {}", e.field(), e.user_message()),
    }
}

fn parse<T: serde::de::DeserializeOwned>(v: serde_json::Value) -> anyhow::Result<T> {
    Ok(serde_json::from_value(v)?)
}

/// Generates the test rows of the planned lots, lot after lot.
struct TestGenerator {
    rng: Rng,
    lots: Vec<LotPlan>,
    lot: usize,
    /// Rows of the current lot not yet handed out.
    queue: std::collections::VecDeque<ImportRow>,
    next_number: u64,
    failures: u64,
    retests: u64,
    length_m: f64,
    start: time::OffsetDateTime,
    /// Rows handed to the import, and rows asked for.
    handed_out: u64,
    wanted: u64,
    started: Instant,
}

impl TestGenerator {
    /// A nuclear or sand-cone reading giving this dry density and water content.
    fn readings(&mut self, dry: f64, w: f64) -> FieldReadings {
        if self.rng.unit() < 0.9 {
            FieldReadings::Nuclear {
                wet_density_kg_m3: round1(dry * (1.0 + w / 100.0)),
                moisture_density_kg_m3: Some(round1(dry * w / 100.0)),
                water_content_pct: None,
                oven_water_content_pct: None,
                gauge_serial: None,
                probe_depth_mm: Some(200.0),
            }
        } else {
            let sand = 1450.0;
            let cone = 1620.0;
            let volume_cm3 = self.rng.between(2400.0, 3200.0);
            FieldReadings::SandCone {
                mass_sand_used_g: round1(cone + volume_cm3 * sand / 1000.0),
                mass_sand_in_cone_g: cone,
                sand_density_kg_m3: sand,
                mass_wet_soil_g: round1(dry * (1.0 + w / 100.0) * volume_cm3 / 1000.0),
                water_content_pct: round1(w * 10.0) / 10.0,
            }
        }
    }

    /// Readings drawn around the means, drawn again while the point lies further above zero
    /// air voids than entry accepts unconfirmed (a gauge cannot read it); true in the second
    /// place when the test fails, judged exactly as the record will judge it.
    fn plausible_readings(
        &mut self,
        reference: &Reference,
        limits: &SpecLimits,
        rc_mean: f64,
        rc_sd: f64,
        w_sd: f64,
    ) -> (FieldReadings, bool) {
        let mut attempt = 0;
        loop {
            attempt += 1;
            let rc = self.rng.normal(rc_mean, rc_sd);
            let dev = self.rng.normal(0.0, w_sd);
            let dry = rc / 100.0 * reference.max_dry_density.kg_m3();
            let w = (reference.optimum_water_content.pct() + dev).max(1.0);
            let readings = self.readings(dry, w);
            let Ok(r) = reduce_field(&readings) else {
                return (readings, true);
            };
            let refused = reference.specific_gravity.and_then(|gs| {
                refusal_without_confirmation(gs, r.water_content.pct(), r.dry_density.kg_m3())
            });
            if refused.is_none() || attempt >= 50 {
                let passed = judge_test(r.dry_density, r.water_content, reference, limits).passed;
                return (readings, !passed);
            }
        }
    }

    /// One test (or retest) at a spot; true in the second place when it fails.
    #[allow(clippy::too_many_arguments)]
    fn row(
        &mut self,
        lot: &LotPlan,
        number: String,
        retest_of: Option<String>,
        chainage: f64,
        offset: f64,
        day: f64,
        rc_mean: f64,
        rc_sd: f64,
        w_sd: f64,
    ) -> (ImportRow, bool) {
        let coarse = (self.rng.unit() < 0.01).then(|| round1(self.rng.between(8.0, 25.0)));
        let reference = match coarse {
            Some(c) => reference_for_coarse_fraction(
                &lot.reference,
                c,
                lot.gs_coarse,
                2.0,
                lot.oversize_limit,
            )
            .unwrap_or(lot.reference),
            None => lot.reference,
        };
        let (readings, failed) =
            self.plausible_readings(&reference, &lot.limits, rc_mean, rc_sd, w_sd);
        let when = self.start
            + time::Duration::seconds(
                (day * 86_400.0 + self.rng.between(0.0, 9.0 * 3600.0)) as i64,
            );
        // A straight alignment on an invented grid, bearing 30° from grid north.
        let (s, c) = 30f64.to_radians().sin_cos();
        let easting = 512_000.0 + chainage * s + offset * c;
        let northing = 6_204_000.0 + chainage * c - offset * s;
        let technician =
            TECHNICIANS[(self.rng.unit() * TECHNICIANS.len() as f64) as usize % TECHNICIANS.len()];
        let input = FieldTestInput {
            number: Some(number),
            tested_at: Some(liftledger::clock::format(when)),
            technician: technician.to_string(),
            instrument_serial: format!("G-{}", 3100 + (lot.layer_index % 7)),
            chainage_m: Some((chainage * 1000.0).round() / 1000.0),
            offset_m: Some((offset * 100.0).round() / 100.0),
            depth_mm: Some(200.0),
            coarse_pct: coarse,
            coarse_water_content_pct: coarse.map(|_| 2.0),
            easting: Some((easting * 1000.0).round() / 1000.0),
            northing: Some((northing * 1000.0).round() / 1000.0),
            readings,
            confirm_implausible: false,
            calibration_override_reason: None,
        };
        (
            ImportRow {
                row: 0,
                lot: Some(lot.code.clone()),
                retest_of,
                input,
                cells: None,
            },
            failed,
        )
    }

    /// Fills the queue with the next lot's rows; false when every lot is done.
    fn fill_next_lot(&mut self) -> bool {
        let Some(lot) = self.lots.get(self.lot).cloned() else {
            return false;
        };
        self.lot += 1;
        let base_day = f64::from(lot.layer_index) * 12.0 + lot.from_m / self.length_m * 10.0;
        for i in 0..lot.tests {
            let chainage = self.rng.between(lot.from_m + 1.0, lot.to_m - 1.0);
            let offset = self.rng.between(lot.left_m + 0.5, lot.right_m - 0.5);
            let day = base_day + f64::from(i) / f64::from(lot.tests.max(1)) * 1.5;
            let number = format!("S{:07}", self.next_number);
            self.next_number += 1;
            let (row, mut failed) = self.row(
                &lot,
                number.clone(),
                None,
                chainage,
                offset,
                day,
                lot.limits.rc_min_pct + 2.5,
                1.5,
                0.8,
            );
            self.queue.push_back(row);
            let mut failed_number = number.clone();
            let mut round = 1;
            while failed && lot.retests && round <= 3 {
                self.failures += 1;
                self.retests += 1;
                let retest = format!("{number}-R{round}");
                let (row, f) = self.row(
                    &lot,
                    retest.clone(),
                    Some(failed_number.clone()),
                    chainage,
                    offset,
                    day + f64::from(round),
                    lot.limits.rc_min_pct + 3.0,
                    1.0,
                    0.5,
                );
                self.queue.push_back(row);
                failed = f;
                failed_number = retest;
                round += 1;
            }
            if failed {
                self.failures += 1;
            }
        }
        true
    }
}

/// Told of each lot's rows as they are made.
pub type ProgressFn<'a> = dyn FnMut(&Progress) + Send + 'a;

/// The generator seen as an import source, stopping at a lot end once `limit` rows are out.
struct ImportSlice<'a, 'p> {
    generator: &'a mut TestGenerator,
    limit: u64,
    given: u64,
    progress: &'a mut ProgressFn<'p>,
}

impl RowSource for ImportSlice<'_, '_> {
    fn next_row(&mut self) -> Option<RowResult> {
        if self.generator.queue.is_empty() {
            if self.given >= self.limit || !self.generator.fill_next_lot() {
                return None;
            }
            (self.progress)(&Progress {
                generated: self.generator.handed_out,
                wanted: self.generator.wanted,
                elapsed: self.generator.started.elapsed(),
            });
        }
        self.given += 1;
        self.generator.handed_out += 1;
        let mut row = self.generator.queue.pop_front()?;
        row.row = self.given + 1;
        Some(Ok(row))
    }

    fn origin(&self) -> SourceOrigin {
        SourceOrigin {
            file_name: "generated large project".to_string(),
            bytes: 0,
            sha256: String::new(),
        }
    }
}

/// The clauses of the invented job: one per zone, each with another acceptance rule.
fn clause_bodies() -> [serde_json::Value; 3] {
    [
        json!({"code": "FILL-92", "title": "Embankment fill", "rc_min_pct": 92.0, "moisture_below_pct": 2.0,
               "moisture_above_pct": 2.0, "effort": "astm_d1557_4in", "rule": "mean_and_min", "allowance_pct": 3.0,
               "area_per_test_m2": 200.0, "min_tests_per_lot": 5}),
        json!({"code": "SUBG-95", "title": "Subgrade", "rc_min_pct": 95.0, "moisture_below_pct": 2.0,
               "moisture_above_pct": 2.0, "effort": "astm_d1557_4in", "rule": "quality_index", "min_pwl_pct": 85.0,
               "area_per_test_m2": 200.0, "min_tests_per_lot": 5}),
        json!({"code": "CAP-97", "title": "Capping", "rc_min_pct": 97.0, "moisture_below_pct": 2.0,
               "moisture_above_pct": 2.0, "effort": "astm_d1557_4in", "rule": "every_test",
               "area_per_test_m2": 200.0, "min_tests_per_lot": 5}),
    ]
}

/// The material sources of the invented job (lab points by index: [`lab_points`]).
fn source_bodies() -> [serde_json::Value; 3] {
    [
        json!({"code": "BPA", "name": "Borrow pit A", "description": "Invented sandy lean clay", "uscs_class": "SC",
               "gs_fines": 2.68, "gs_coarse": 2.65}),
        json!({"code": "QB", "name": "Quarry B", "description": "Invented crushed gravelly sand", "uscs_class": "SW",
               "gs_fines": 2.65, "gs_coarse": 2.66}),
        json!({"code": "CC", "name": "Cut C", "description": "Invented silty clay", "uscs_class": "CL",
               "gs_fines": 2.72, "gs_coarse": 2.65}),
    ]
}

/// The zones from the bottom, sharing `layers` between them.
fn zone_plans(zones: u32, layers: u32) -> Vec<ZonePlan> {
    let zone = |name, clause, source, half_width_m, layers| ZonePlan {
        name,
        clause,
        source,
        half_width_m,
        layers,
    };
    if zones <= 2 {
        let cap = (layers / 5).max(1);
        vec![
            zone("Embankment fill", "FILL-92", 0, 15.0, layers - cap),
            zone("Capping", "CAP-97", 1, 10.0, cap),
        ]
    } else {
        let cap = (layers / 10).max(1);
        let sub = (layers / 4).max(1);
        vec![
            zone("Embankment fill", "FILL-92", 0, 15.0, layers - cap - sub),
            zone("Subgrade", "SUBG-95", 2, 12.0, sub),
            zone("Capping", "CAP-97", 1, 10.0, cap),
        ]
    }
}

/// The project's set-up as stored: its clauses, sources and lab curves.
struct Frame {
    pid: i64,
    clauses: Vec<db::clauses::Clause>,
    sources: Vec<db::sources::Source>,
    labs: Vec<db::lab_tests::LabTest>,
}

/// The project, its clauses, sources and lab curves, through `ledger::setup`.
async fn build_frame(pool: &Pool, pid: i64, actor: &Actor) -> anyhow::Result<Frame> {
    let mut frame = Frame {
        pid,
        clauses: Vec::new(),
        sources: Vec::new(),
        labs: Vec::new(),
    };
    for c in clause_bodies() {
        let clause = setup::create_clause(pool, pid, &parse(c)?, actor).await;
        frame.clauses.push(clause.map_err(app)?);
    }
    for (i, s) in source_bodies().into_iter().enumerate() {
        let src = setup::create_source(pool, pid, &parse(s)?, actor)
            .await
            .map_err(app)?;
        let body = json!({"code": format!("{}-M1", src.code), "tested_on": "2026-01-20",
            "effort": "astm_d1557_4in", "points": lab_points(i)});
        let lab = setup::create_lab_test(pool, src.id, &parse(body)?, actor).await;
        frame.labs.push(lab.map_err(app)?);
        frame.sources.push(src);
    }
    Ok(frame)
}

/// Lays the lots out: every layer of every zone split into lots of lot_min..lot_max metres.
async fn plan_lots(
    pool: &Pool,
    frame: &Frame,
    zones: &[ZonePlan],
    opts: &ScaleOptions,
    rng: &mut Rng,
    actor: &Actor,
) -> anyhow::Result<(Vec<LotPlan>, u32)> {
    let mut plans = Vec::new();
    let mut layer_index = 0u32;
    for z in zones {
        let clause = frame
            .clauses
            .iter()
            .find(|c| c.code == z.clause)
            .ok_or_else(|| anyhow!("clause {} missing", z.clause))?;
        let lab = &frame.labs[z.source];
        let template = LotPlan {
            code: String::new(),
            from_m: 0.0,
            to_m: 0.0,
            left_m: -z.half_width_m,
            right_m: z.half_width_m,
            layer_index,
            limits: liftledger::ledger::lot_report::limits_of(clause)?,
            reference: liftledger::ledger::lot_report::reference_of(lab)?,
            gs_coarse: frame.sources[z.source].gs_coarse.unwrap_or(2.65),
            oversize_limit: clause.oversize_limit_pct,
            tests: 0,
            retests: clause.rule != liftledger::domain::Rule::QualityIndex,
        };
        for n in 1..=z.layers {
            let layer = setup::create_layer(
                pool,
                frame.pid,
                &parse(json!({"zone": z.name, "number": n, "thickness_mm": 250}))?,
                actor,
            )
            .await
            .map_err(app)?;
            let mut k = 0;
            for (from, to) in lot_stretches(opts, rng) {
                k += 1;
                let code = format!("{}{:02}-{:03}", &z.name[..1], layer_index + 1, k);
                let body = json!({"code": code, "layer_id": layer.id, "chainage_from_m": from, "chainage_to_m": to,
                    "offset_left_m": -z.half_width_m, "offset_right_m": z.half_width_m,
                    "clause_id": clause.id, "lab_test_id": lab.id});
                let lot = setup::create_lot(pool, frame.pid, &parse(body)?, actor).await;
                plans.push(LotPlan {
                    code: lot.map_err(app)?.code,
                    from_m: from,
                    to_m: to,
                    layer_index,
                    ..template.clone()
                });
            }
            layer_index += 1;
        }
    }
    Ok((plans, layer_index))
}

/// The stretches of one layer's lots, end to end along the alignment.
fn lot_stretches(opts: &ScaleOptions, rng: &mut Rng) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    let mut from = 0.0;
    while from < opts.length_m - 1.0 {
        let mut len = rng.between(opts.lot_min_m, opts.lot_max_m).round();
        if opts.length_m - (from + len) < opts.lot_min_m {
            len = opts.length_m - from;
        }
        out.push((from, from + len));
        from += len;
    }
    out
}

/// Tests per lot in proportion to length, with some spread (a few lots fall short).
fn share_tests(plans: &mut [LotPlan], tests: u64, rng: &mut Rng) {
    let total_len: f64 = plans.iter().map(|p| p.to_m - p.from_m).sum();
    let first_tests = tests as f64 / 1.065;
    for p in plans {
        let share = (p.to_m - p.from_m) / total_len * first_tests;
        p.tests = (share * rng.between(0.9, 1.12)).round().max(3.0) as u32;
    }
}

/// Imports the generator's rows in slices of `rows_per_import`; (tests, imports).
async fn import_all(
    pool: &Pool,
    pid: i64,
    generator: &mut TestGenerator,
    opts: &ScaleOptions,
    actor: &Actor,
    progress: &mut ProgressFn<'_>,
) -> anyhow::Result<(u64, u32)> {
    let import_opts = ImportOptions {
        commit: true,
        audit: opts.audit,
        actor: actor.clone(),
    };
    let mut tests = 0;
    let mut imports = 0;
    loop {
        let mut slice = ImportSlice {
            generator: &mut *generator,
            limit: opts.rows_per_import.max(1),
            given: 0,
            progress: &mut *progress,
        };
        let report: ImportReport = import_field_tests(pool, pid, &mut slice, &import_opts)
            .await
            .map_err(app)?;
        if report.rows == 0 {
            return Ok((tests, imports));
        }
        if report.refused() {
            return Err(anyhow!(
                "generated rows were refused: {:?}",
                report.problems.iter().take(5).collect::<Vec<_>>()
            ));
        }
        tests += report.new_tests;
        imports += 1;
    }
}

/// Voids `count` tests spread over the project's id range; how many were voided.
async fn void_some(pool: &Pool, pid: i64, count: u32, actor: &Actor) -> anyhow::Result<u32> {
    let (first, last) = db::bulk::test_id_range(pool, pid).await?.unwrap_or((0, 0));
    let mut voids = 0;
    if last > first {
        for i in 0..count {
            let id = first + (last - first) * i64::from(i + 1) / i64::from(count + 1);
            if ledger::field::void_test(pool, id, "gauge standardisation out of date", actor)
                .await
                .is_ok()
            {
                voids += 1;
            }
        }
    }
    Ok(voids)
}

/// Submits lots until `opts.accepted_lots` are accepted and `opts.submitted_lots` more
/// await review; (accepted, submitted).
async fn review_some(
    pool: &Pool,
    pid: i64,
    opts: &ScaleOptions,
    actor: &Actor,
) -> anyhow::Result<(u32, u32)> {
    let mut accepted = 0;
    let mut submitted = 0;
    let filter = db::lots::LotFilter {
        limit: 400,
        ..Default::default()
    };
    let reviewer = Actor::system("client engineer (invented)");
    for lot in db::lots::list(pool, pid, &filter).await? {
        if accepted >= opts.accepted_lots && submitted >= opts.submitted_lots {
            break;
        }
        if ledger::review::submit(pool, lot.id, "lift complete", actor)
            .await
            .is_err()
        {
            continue;
        }
        if accepted < opts.accepted_lots {
            ledger::review::accept(pool, lot.id, "accepted on the record", &reviewer)
                .await
                .map_err(app)?;
            accepted += 1;
        } else {
            submitted += 1;
        }
    }
    Ok((accepted, submitted))
}

/// Builds the invented large project in `pool` and returns what was made.
#[allow(dead_code)] // the binary mounts this file too and calls `generate_with`
pub async fn generate(pool: &Pool, opts: ScaleOptions) -> anyhow::Result<ScaleSummary> {
    generate_with(pool, opts, &mut |_| {}).await
}

/// [`generate`], telling `progress` after each lot's tests are made.
pub async fn generate_with(
    pool: &Pool,
    opts: ScaleOptions,
    progress: &mut ProgressFn<'_>,
) -> anyhow::Result<ScaleSummary> {
    let started = Instant::now();
    let actor = Actor::system("scale generator");
    let mut rng = Rng::new(opts.seed);
    let project = setup::create_project(
        pool,
        &parse(json!({"code": opts.project_code, "name": "Invented ridge motorway (scale test)",
            "contract": "SCALE-1", "client": "Invented roads authority", "contractor": "Invented earthworks JV"}))?,
        &actor,
    )
    .await
    .map_err(app)?;
    let pid = project.id;
    let frame = build_frame(pool, pid, &actor).await?;
    let zones = zone_plans(opts.zones, opts.layers);
    let (mut plans, layers) = plan_lots(pool, &frame, &zones, &opts, &mut rng, &actor).await?;
    share_tests(&mut plans, opts.tests, &mut rng);
    let setup_ms = started.elapsed().as_millis() as u64;

    let import_started = Instant::now();
    let mut generator = TestGenerator {
        rng: Rng::new(opts.seed ^ 0x9E37_79B9_7F4A_7C15),
        lots: plans,
        lot: 0,
        queue: Default::default(),
        next_number: 1,
        failures: 0,
        retests: 0,
        length_m: opts.length_m,
        start: time::macros::datetime!(2026-02-02 07:00 UTC),
        handed_out: 0,
        wanted: opts.tests,
        started: import_started,
    };
    let (tests, imports) = import_all(pool, pid, &mut generator, &opts, &actor, progress).await?;
    let import_ms = import_started.elapsed().as_millis() as u64;

    let actions_started = Instant::now();
    let voids = void_some(pool, pid, opts.voids, &actor).await?;
    let (accepted, submitted) = review_some(pool, pid, &opts, &actor).await?;
    Ok(ScaleSummary {
        project_id: pid,
        project_code: project.code,
        zones: zones.len() as u32,
        layers,
        lots: generator.lots.len() as u64,
        tests,
        retests: generator.retests,
        failures: generator.failures,
        voids,
        accepted_lots: accepted,
        submitted_lots: submitted,
        imports,
        setup_ms,
        import_ms,
        actions_ms: actions_started.elapsed().as_millis() as u64,
        total_ms: started.elapsed().as_millis() as u64,
    })
}
