//! The OpenAPI 3.1 description of `/api/v1`, built from one table of operations.
//!
//! A test compares this table with the routes registered in `src/http/`, so the
//! document cannot drift from the router.

use axum::routing::get;
use axum::{Json, Router};
use serde_json::{Map, Value, json};

use crate::app::AppState;

/// One documented operation: method, path, summary, and whether it takes a JSON body.
pub struct Operation {
    pub method: &'static str,
    pub path: &'static str,
    pub summary: &'static str,
    pub body: Option<&'static str>,
}

const fn op(
    method: &'static str,
    path: &'static str,
    summary: &'static str,
    body: Option<&'static str>,
) -> Operation {
    Operation {
        method,
        path,
        summary,
        body,
    }
}

/// Every operation of the JSON API.
pub const OPERATIONS: &[Operation] = &[
    op("get", "/api/v1/projects", "List projects", None),
    op(
        "post",
        "/api/v1/projects",
        "Create a project",
        Some("ProjectInput"),
    ),
    op("get", "/api/v1/projects/{id}", "One project", None),
    op(
        "get",
        "/api/v1/projects/{id}/clauses",
        "List spec clauses",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/clauses",
        "Create a spec clause",
        Some("ClauseInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/sources",
        "List borrow sources",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/sources",
        "Create a borrow source",
        Some("SourceInput"),
    ),
    op(
        "get",
        "/api/v1/sources/{id}/lab-tests",
        "List a source's lab compaction tests",
        None,
    ),
    op(
        "post",
        "/api/v1/sources/{id}/lab-tests",
        "Record a lab compaction test and fit its curve",
        Some("LabTestInput"),
    ),
    op(
        "get",
        "/api/v1/lab-tests/{id}",
        "One lab compaction test",
        None,
    ),
    op(
        "post",
        "/api/v1/lab-tests/{id}/approve",
        "Approve a curve awaiting approval, with a written reason (QC manager)",
        Some("ReasonInput"),
    ),
    op(
        "post",
        "/api/v1/lots/{id}/resample",
        "Judge a failed quality-index lot on a new random sample after rework",
        Some("ReasonInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/layers",
        "List layers by zone",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/layers",
        "Create a layer",
        Some("LayerInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/lots",
        "List lots (filters: chainage_from_m, chainage_to_m, layer_id, state, changed_since, changed_before, page, per_page)",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/lots",
        "Create a lot",
        Some("LotInput"),
    ),
    op(
        "get",
        "/api/v1/lots/{id}",
        "A lot with its tests, verdict, statistics and tests owed",
        None,
    ),
    op(
        "get",
        "/api/v1/lots/{id}/history",
        "A lot's state changes and audit trail",
        None,
    ),
    op(
        "get",
        "/api/v1/projects/{id}/review-queue",
        "Submitted lots, oldest first",
        None,
    ),
    op(
        "post",
        "/api/v1/lots/{id}/submit",
        "Submit a lot for review",
        Some("ReviewInput"),
    ),
    op(
        "post",
        "/api/v1/lots/{id}/accept",
        "Accept a submitted lot and issue its certificate",
        Some("ReviewInput"),
    ),
    op(
        "post",
        "/api/v1/lots/{id}/reject",
        "Reject a submitted lot (comment required)",
        Some("ReviewInput"),
    ),
    op(
        "get",
        "/api/v1/lots/{id}/field-tests",
        "A lot's field tests as judged",
        None,
    ),
    op(
        "post",
        "/api/v1/lots/{id}/field-tests",
        "Record a field test (with an Idempotency-Key header: stored once per key, a repeat answers 200 with the stored test)",
        Some("FieldTestInput"),
    ),
    op(
        "post",
        "/api/v1/lots/{id}/field-tests/preview",
        "Reduce and judge a field test without saving",
        Some("FieldTestInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/field-tests",
        "List field tests (filters: lot_id, layer_id, chainage_from_m, chainage_to_m, tested_from, tested_before, method, page, per_page)",
        None,
    ),
    op(
        "get",
        "/api/v1/field-tests/{id}",
        "One field test as judged",
        None,
    ),
    op(
        "get",
        "/api/v1/field-tests/{id}/history",
        "A field test's audit trail",
        None,
    ),
    op(
        "post",
        "/api/v1/field-tests/{id}/void",
        "Void a field test with a reason",
        Some("VoidInput"),
    ),
    op(
        "post",
        "/api/v1/field-tests/{id}/retests",
        "Record a retest of a failed test",
        Some("FieldTestInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/certificates",
        "Certificate revisions of a project",
        None,
    ),
    op(
        "get",
        "/api/v1/certificates/{id}",
        "One certificate revision",
        None,
    ),
    op(
        "get",
        "/api/v1/certificates/{id}/pdf",
        "The issued PDF bytes of a revision",
        None,
    ),
    op(
        "post",
        "/api/v1/verify",
        "Identify a certificate by code, hash or PDF bytes",
        Some("VerifyInput"),
    ),
    op(
        "post",
        "/api/v1/calc/lab-curve",
        "Fit a compaction curve",
        Some("LabCurveInput"),
    ),
    op(
        "post",
        "/api/v1/calc/field-density",
        "Reduce field density readings",
        Some("FieldDensityInput"),
    ),
    op(
        "post",
        "/api/v1/calc/oversize",
        "Oversize-correct a density and water content",
        Some("OversizeInput"),
    ),
    op(
        "post",
        "/api/v1/calc/acceptance",
        "Judge a set of relative compaction values",
        Some("AcceptanceInput"),
    ),
    op(
        "get",
        "/api/v1/me",
        "Who the caller is and which projects they see",
        None,
    ),
    op("get", "/api/v1/users", "List users (admin)", None),
    op(
        "post",
        "/api/v1/users",
        "Create a user (admin)",
        Some("UserInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/members",
        "Members of a project and their roles",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/members",
        "Give a user a role in a project (admin)",
        Some("GrantInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/tokens",
        "API tokens of a project (admin, QC manager or client engineer)",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/tokens",
        "Create an API token; the secret is shown once",
        Some("TokenInput"),
    ),
    op(
        "post",
        "/api/v1/tokens/{id}/revoke",
        "Revoke an API token",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/imports",
        "Check (dry run) or commit a CSV file of field tests sent as the body; query: mapping (saved name), commit, file_name",
        Some("CsvFile"),
    ),
    op(
        "post",
        "/api/v1/projects/{id}/import-mappings",
        "Save a column mapping for imports under a name",
        Some("MappingInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/exports/{kind}",
        "Export field tests or lot verdicts: tests_csv, tests_json, lots_csv, lots_json, tests_geojson (test-list filters apply)",
        None,
    ),
    op(
        "post",
        "/api/v1/lots/{id}/reopen",
        "Reopen an accepted lot (client engineer, reason required); its certificate is withdrawn",
        Some("ReasonInput"),
    ),
    op(
        "post",
        "/api/v1/lots/{id}/reference",
        "Re-point an open lot at another active curve of its source (QC manager, audited)",
        Some("RepointInput"),
    ),
    op(
        "post",
        "/api/v1/projects/{id}/members/remove",
        "End a user's membership (admin); their sessions end and their tokens there die",
        Some("MemberInput"),
    ),
    op(
        "post",
        "/api/v1/users/{id}/disable",
        "Disable a user (admin); every session and token of theirs ends",
        None,
    ),
    op(
        "post",
        "/api/v1/users/{id}/enable",
        "Re-enable a user (admin)",
        None,
    ),
    op(
        "post",
        "/api/v1/users/{id}/password-reset",
        "Set a user's password (admin); they must change it at next sign-in",
        Some("ResetInput"),
    ),
    op(
        "post",
        "/api/v1/me/password",
        "Change one's own password with the current one; every session ends, a new one is set",
        Some("PasswordChangeInput"),
    ),
    op(
        "get",
        "/api/v1/instruments",
        "The instrument register (organisation-wide)",
        None,
    ),
    op(
        "post",
        "/api/v1/instruments",
        "Register an instrument, with its first calibration (admins and QC managers)",
        Some("InstrumentInput"),
    ),
    op(
        "post",
        "/api/v1/instruments/import",
        "Import register rows from CSV (kind, serial, description, calibrated_on, due_on, cone_sand_mass_g, sand_density_kg_m3, volume_cm3); all or none",
        Some("CsvFile"),
    ),
    op(
        "get",
        "/api/v1/instruments/{id}",
        "An instrument with its records, assignments, standard counts and offsets",
        None,
    ),
    op(
        "post",
        "/api/v1/instruments/{id}/records",
        "Add a calibration, leak test or licence record",
        Some("InstrumentRecordInput"),
    ),
    op(
        "post",
        "/api/v1/instruments/{id}/assignments",
        "Assign an instrument to a project from a date (its open assignment ends that day)",
        Some("AssignmentInput"),
    ),
    op(
        "post",
        "/api/v1/instruments/{id}/standard-counts",
        "Record a gauge's daily standard count, judged against its last four accepted counts",
        Some("StandardCountInput"),
    ),
    op(
        "post",
        "/api/v1/instruments/{id}/offsets",
        "Compute a gauge's material offsets from at least three pairs and apply them from a date",
        Some("OffsetInput"),
    ),
    op(
        "get",
        "/api/v1/gauge-operators",
        "Registered gauge operators",
        None,
    ),
    op(
        "post",
        "/api/v1/gauge-operators",
        "Register a gauge operator with certification and expiry",
        Some("OperatorInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/instrument-tolerances",
        "The project's standard-count tolerances",
        None,
    ),
    op(
        "put",
        "/api/v1/projects/{id}/instrument-tolerances",
        "Set the project's standard-count tolerances",
        Some("TolerancesInput"),
    ),
    op(
        "put",
        "/api/v1/clauses/{id}/instrument-policy",
        "Whether the clause records tests from an instrument out of check (marked) or refuses them",
        Some("InstrumentPolicyInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/calibrations-due",
        "Calibrations, leak tests and licences of the project's instruments due within 30 days",
        None,
    ),
    op(
        "get",
        "/api/v1/projects/{id}/moulds",
        "List the project's registered compaction moulds",
        None,
    ),
    op(
        "post",
        "/api/v1/projects/{id}/moulds",
        "Register a compaction mould with its calibrated volume",
        Some("MouldInput"),
    ),
    op(
        "post",
        "/api/v1/projects/{id}/lots/split",
        "Split a stretch of a layer into lots every N metres (all or none are made)",
        Some("SplitInput"),
    ),
    op(
        "get",
        "/api/v1/projects/{id}/archive",
        "The project's handover archive (zip): every certificate revision, records as CSV and JSON, the audit log, a manifest of SHA-256 hashes (admins and client engineers)",
        None,
    ),
    op(
        "get",
        "/api/v1/lots/{id}/plan",
        "A lot's test-location plan (ASTM D3665, stratified), its earlier plans and how each test lies against it",
        None,
    ),
    op(
        "post",
        "/api/v1/lots/{id}/plan",
        "Declare a lot ready for testing: draw its random test locations from a recorded seed (a replan needs a reason; the old plan is kept)",
        Some("PlanInput"),
    ),
    op(
        "put",
        "/api/v1/clauses/{id}/planning-terms",
        "Set a clause's planning terms: plan tolerance, one-point references allowed, one-point dry window",
        Some("PlanningTermsInput"),
    ),
    op(
        "post",
        "/api/v1/sources/{id}/one-point-checks",
        "Record a one-point check (AASHTO T 272): MDD and OMC interpolated in the source's family of curves",
        Some("OnePointInput"),
    ),
    op(
        "get",
        "/api/v1/lab-tests/{id}/drift",
        "Whether a curve's field points say its material may have changed, with the tests that triggered it",
        None,
    ),
    op(
        "get",
        "/api/v1/projects/{id}/control-charts",
        "Individuals and moving-range charts of RC or moisture deviation per source, layer or technician, with run rules",
        None,
    ),
    op("get", "/api/v1/openapi.json", "This document", None),
];

/// Routes of this module.
pub fn router() -> Router<AppState> {
    Router::new().route("/api/v1/openapi.json", get(|| async { Json(document()) }))
}

/// The whole OpenAPI document.
pub fn document() -> Value {
    let mut paths = Map::new();
    for o in OPERATIONS {
        let entry = paths.entry(o.path).or_insert_with(|| json!({}));
        let mut operation = json!({
            "summary": o.summary,
            "responses": {
                "200": {"description": "Success (201 when something was created)", "content": {"application/json": {}}},
                "4XX": {"description": "Bad input or refused", "content": {"application/json": {"schema": {"$ref": "#/components/schemas/Error"}}}}
            }
        });
        if o.path.contains("{id}") {
            operation["parameters"] = json!([{"name": "id", "in": "path", "required": true, "schema": {"type": "integer"}}]);
        }
        if o.path.contains("{kind}")
            && let Some(a) = operation["parameters"].as_array_mut()
        {
            a.push(json!({"name": "kind", "in": "path", "required": true, "schema": {"type": "string"}}));
        }
        if let Some(body) = o.body {
            operation["requestBody"] = json!({
                "required": true,
                "content": {"application/json": {"schema": {"$ref": format!("#/components/schemas/{body}")}}}
            });
        }
        entry[o.method] = operation;
    }
    json!({
        "openapi": "3.1.0",
        "security": [{"session": []}, {"token": []}],
        "info": {
            "title": "liftledger API",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Earthworks compaction QC: field density tests, lab curves, lot acceptance and end-of-lift certificates. SI units; field names carry their units."
        },
        "paths": paths,
        "components": {
            "schemas": with_instrument_schemas(schemas()),
            "securitySchemes": {
                "session": {"type": "apiKey", "in": "cookie", "name": "liftledger_session"},
                "token": {"type": "http", "scheme": "bearer", "description": "a project-scoped API token (llt_…)"}
            }
        }
    })
}

fn obj(required: &[&str], props: Value) -> Value {
    json!({"type": "object", "required": required, "properties": props})
}

/// The register's bodies (kept apart: one `json!` of every schema passes the macro's recursion limit).
fn with_instrument_schemas(mut all: Value) -> Value {
    let num = json!({"type": "number"});
    let s = json!({"type": "string"});
    let int = json!({"type": "integer"});
    let mine = json!({
        "InstrumentInput": obj(&["kind", "serial"], json!({"kind": {"enum": ["nuclear_gauge", "sand_cone", "sand_batch", "balloon", "drive_cylinder"]},
            "serial": s, "description": s, "calibrated_on": {"type": "string", "format": "date"}, "due_on": {"type": "string", "format": "date"},
            "cone_sand_mass_g": num, "sand_density_kg_m3": num, "volume_cm3": num})),
        "InstrumentRecordInput": obj(&["kind", "done_on"], json!({"kind": {"enum": ["calibration", "leak_test", "licence"]},
            "done_on": {"type": "string", "format": "date"}, "due_on": {"type": "string", "format": "date"}, "reference": s,
            "cone_sand_mass_g": num, "sand_density_kg_m3": num, "volume_cm3": num})),
        "AssignmentInput": obj(&["project_id", "from_on"], json!({"project_id": int, "from_on": {"type": "string", "format": "date"}, "to_on": {"type": "string", "format": "date"}})),
        "StandardCountInput": obj(&["project_id", "counted_on", "density_count", "moisture_count"], json!({"project_id": int,
            "counted_on": {"type": "string", "format": "date"}, "density_count": int, "moisture_count": int})),
        "OffsetInput": obj(&["source_id", "mode", "effective_on", "pairs"], json!({"source_id": int, "mode": {"enum": ["direct_transmission", "backscatter"]},
            "effective_on": {"type": "string", "format": "date"}, "pairs": {"type": "array", "minItems": 3, "items": obj(&["gauge_wet_density_kg_m3", "reference_wet_density_kg_m3", "gauge_water_content_pct", "oven_water_content_pct"],
                json!({"gauge_wet_density_kg_m3": num, "reference_wet_density_kg_m3": num, "gauge_water_content_pct": num, "oven_water_content_pct": num}))}})),
        "OperatorInput": obj(&["code", "name", "certification", "expires_on"], json!({"code": s, "name": s, "certification": s, "expires_on": {"type": "string", "format": "date"}})),
        "TolerancesInput": obj(&["density_pct", "moisture_pct"], json!({"density_pct": num, "moisture_pct": num})),
        "InstrumentPolicyInput": obj(&["record_out_of_check"], json!({"record_out_of_check": {"type": "boolean"}})),
    });
    if let (Some(all), Some(mine)) = (all.as_object_mut(), mine.as_object()) {
        all.extend(mine.clone());
    }
    all
}

fn schemas() -> Value {
    let num = json!({"type": "number"});
    let s = json!({"type": "string"});
    let int = json!({"type": "integer"});
    json!({
        "Error": obj(&["error"], json!({"error": obj(&["field", "message"], json!({"field": s, "message": s, "reasons": {"type": "array", "items": s}, "request_id": s}))})),
        "ProjectInput": obj(&["code", "name"], json!({"code": s, "name": s, "contract": s, "client": s, "contractor": s,
            "unit_system": {"enum": ["si", "us"]}, "chainage_style": {"enum": ["km_metre", "feet_station"]}})),
        "ClauseInput": obj(&["code", "rc_min_pct", "effort", "rule", "min_tests_per_lot"],
            json!({"code": s, "title": s, "rc_min_pct": num, "moisture_below_pct": num, "moisture_above_pct": num, "effort": s,
                "rule": {"enum": ["every_test", "mean_and_min", "quality_index"]}, "allowance_pct": num, "min_pwl_pct": num,
                "area_per_test_m2": num, "length_per_test_m": num, "min_tests_per_lot": int, "oversize_limit_pct": num,
                "moisture_judgement": {"enum": ["per_test", "pwl"]}, "moisture_min_pwl_pct": num, "rc_plausible_max_pct": num,
                "rounding": {"enum": ["astm_e29", "absolute"]}, "limit_decimals": int,
                "oversize_sieve_mm": {"enum": [4.75, 19.0]}, "coarse_water_default_pct": num,
                "moisture_basis": {"enum": ["points_of_omc", "percent_of_omc", "absolute"],
                    "description": "points_of_omc (default): moisture_below_pct/moisture_above_pct, required; percent_of_omc: w / OMC × 100 within moisture_low_pct..moisture_high_pct; absolute: w within moisture_low_pct..moisture_high_pct"},
                "moisture_low_pct": num, "moisture_high_pct": num,
                "max_air_voids_pct": {"type": "number", "description": "greatest air voids allowed, percent; absent: not judged"}})),
        "SourceInput": obj(&["code", "name", "gs_fines"], json!({"code": s, "name": s, "description": s, "uscs_class": s,
            "aashto_class": s, "gs_fines": num,
            "gs_coarse": {"type": "number", "description": "bulk (oven-dry) specific gravity of the oversize (ASTM C127 / AASHTO T 85), used by the oversize correction; not the solids Gs"}})),
        "LabTestInput": obj(&["code", "tested_on", "effort", "points"], json!({"code": s, "tested_on": {"type": "string", "format": "date"},
            "effort": s, "custom_effort": {"type": "object"}, "specific_gravity": num,
            "points": {"type": "array", "items": {"type": "object", "properties": {"water_content_pct": num, "dry_density_kg_m3": num,
                "mass_mold_and_soil_g": num, "mass_mold_g": num, "mold_volume_cm3": num, "mass_wet_g": num, "mass_dry_g": num, "mass_tare_g": num, "mould": s}}},
            "supersedes_lab_test_id": int, "supersede_reason": s})),
        "LayerInput": obj(&["zone", "number"], json!({"zone": s, "number": int, "thickness_mm": num})),
        "LotInput": obj(&["code", "layer_id", "chainage_from_m", "chainage_to_m", "offset_left_m", "offset_right_m", "clause_id", "lab_test_id"],
            json!({"code": s, "layer_id": int, "chainage_from_m": num, "chainage_to_m": num, "offset_left_m": num, "offset_right_m": num,
                "clause_id": int, "lab_test_id": int})),
        "MouldInput": obj(&["code", "volume_cm3", "calibrated_on"], json!({"code": s, "volume_cm3": num, "mass_g": num,
            "calibrated_on": {"type": "string", "format": "date"}})),
        "SplitInput": obj(&["layer_id", "chainage_from_m", "chainage_to_m", "every_m", "code_prefix", "offset_left_m", "offset_right_m", "clause_id", "lab_test_id"],
            json!({"layer_id": int, "chainage_from_m": num, "chainage_to_m": num, "every_m": num, "code_prefix": s, "first_number": int,
                "offset_left_m": num, "offset_right_m": num, "clause_id": int, "lab_test_id": int})),
        "ReviewInput": obj(&[], json!({"comment": s})),
        "VoidInput": obj(&["reason"], json!({"reason": s})),
        "ReasonInput": obj(&["reason"], json!({"reason": s})),
        "CsvFile": {"type": "string", "description": "CSV text (comma, semicolon or tab; UTF-8, BOM allowed)"},
        "MappingInput": obj(&["name", "mapping"], json!({"name": s, "mapping": {"type": "object"}})),
        "UserInput": obj(&["username", "display_name", "password"], json!({"username": s, "display_name": s, "password": s, "is_admin": {"type": "boolean"}})),
        "GrantInput": obj(&["username", "role"], json!({"username": s, "role": {"enum": ["technician", "qc_manager", "client_engineer", "viewer"]}})),
        "TokenInput": obj(&["name", "role"], json!({"name": s, "role": {"enum": ["technician", "qc_manager", "client_engineer", "viewer"]},
            "expires_in_days": {"type": "integer", "minimum": 1, "maximum": 365, "default": 90}})),
        "ReasonInput": obj(&["reason"], json!({"reason": s})),
        "RepointInput": obj(&["lab_test_id", "reason"], json!({"lab_test_id": int, "reason": s})),
        "MemberInput": obj(&["username"], json!({"username": s})),
        "ResetInput": obj(&["new_password"], json!({"new_password": s})),
        "PasswordChangeInput": obj(&["current_password", "new_password"], json!({"current_password": s, "new_password": s})),
        "VerifyInput": obj(&[], json!({"code": s, "sha256": s, "pdf_base64": s})),
        "Readings": {"type": "object", "required": ["method"], "properties": {"method": {"enum": ["nuclear", "sand_cone", "balloon", "drive_cylinder"]},
            "wet_density_kg_m3": num, "moisture_density_kg_m3": num, "water_content_pct": num, "oven_water_content_pct": num,
            "gauge_serial": s, "probe_depth_mm": num, "mass_sand_used_g": num, "mass_sand_in_cone_g": num, "sand_density_kg_m3": num,
            "mass_wet_soil_g": num, "hole_volume_cm3": num, "cylinder_volume_cm3": num}},
        "FieldTestInput": obj(&["technician", "readings"], json!({"number": s, "tested_at": {"type": "string", "format": "date-time"},
            "technician": s, "instrument_serial": s, "calibration_override_reason": s, "chainage_m": num, "offset_m": num, "depth_mm": num, "coarse_pct": num,
            "coarse_water_content_pct": num, "easting": num, "northing": num, "readings": {"$ref": "#/components/schemas/Readings"},
            "confirm_implausible": {"type": "boolean"}})),
        "LabCurveInput": obj(&["specific_gravity", "points"], json!({"specific_gravity": num,
            "points": {"type": "array", "items": obj(&["water_content_pct", "dry_density_kg_m3"], json!({"water_content_pct": num, "dry_density_kg_m3": num}))}})),
        "FieldDensityInput": {"allOf": [{"$ref": "#/components/schemas/Readings"}, obj(&[], json!({"max_dry_density_kg_m3": num, "optimum_water_content_pct": num}))]},
        "OversizeInput": obj(&["fine_dry_density_kg_m3", "fine_water_content_pct", "coarse_pct", "coarse_specific_gravity", "coarse_water_content_pct"],
            json!({"fine_dry_density_kg_m3": num, "fine_water_content_pct": num, "coarse_pct": num, "coarse_specific_gravity": num,
                "coarse_water_content_pct": num, "limit_pct": num})),
        "PlanInput": obj(&[], json!({"seed": int, "edge_m": num, "reason": s,
            "exclusions": {"type": "array", "items": obj(&["chainage_from_m", "chainage_to_m"], json!({"chainage_from_m": num, "chainage_to_m": num}))}})),
        "PlanningTermsInput": obj(&["plan_tolerance_m", "one_point_allowed", "one_point_dry_window_pct"],
            json!({"plan_tolerance_m": num, "one_point_allowed": {"type": "boolean"}, "one_point_dry_window_pct": num})),
        "OnePointInput": obj(&["code", "tested_on", "effort", "wet_density_kg_m3", "water_content_pct"],
            json!({"code": s, "tested_on": {"type": "string", "format": "date"}, "effort": s, "wet_density_kg_m3": num,
                "water_content_pct": num, "field_test_id": int})),
        "AcceptanceInput": obj(&["rule", "values", "lower_limit"], json!({"rule": {"enum": ["every_test", "mean_and_min", "quality_index"]},
            "values": {"type": "array", "items": num}, "lower_limit": num, "allowance": num, "min_pwl": num})),
    })
}
