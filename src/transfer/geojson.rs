//! GeoJSON (RFC 7946) FeatureCollection of the field tests that carry coordinates.
//!
//! Coordinates are the project grid easting and northing exactly as entered: no
//! coordinate reference system is assumed and no transformation is made. RFC 7946
//! expects WGS 84 longitude/latitude, so a GIS reading this file must be told the
//! project's grid (the file names it nowhere); every point is `[easting, northing]`.

use std::io::Write;

use serde_json::{Value, json};

use super::export::{ExportFilter, result_of};
use crate::error::{AppError, Result};
use crate::ledger::lot_report::{LotReport, TestLine};
use crate::present::Units;

/// One test as a Point feature (None when it has no coordinates).
pub fn feature(units: &Units, r: &LotReport, line: &TestLine) -> Option<Value> {
    let t = &line.test;
    let (e, n) = (t.easting?, t.northing?);
    Some(json!({
        "type": "Feature",
        "id": t.id,
        "geometry": {"type": "Point", "coordinates": [e, n]},
        "properties": {
            "number": t.number,
            "lot": r.lot.code,
            "zone": r.lot.zone_name,
            "layer": r.lot.layer_number,
            "tested_at": t.tested_at,
            "method": t.method,
            "chainage": units.chainage(t.chainage_m),
            "chainage_m": t.chainage_m,
            "offset_m": t.offset_m,
            "dry_density_kg_m3": t.dry_density_kg_m3,
            "water_content_pct": t.water_content_pct,
            "relative_compaction_pct": line.relative_compaction_pct,
            "moisture_deviation_pct": line.moisture_deviation_pct,
            "result": result_of(line),
            "retest_of": line.retest_of_number,
        }
    }))
}

fn io(e: impl Into<anyhow::Error>) -> AppError {
    AppError::Internal(e.into())
}

/// Writes the selected tests with coordinates as a FeatureCollection; returns the count.
pub fn write_tests<W: Write>(
    mut out: W,
    units: &Units,
    reports: &[LotReport],
    f: &ExportFilter,
) -> Result<u64> {
    let mut n = 0u64;
    out.write_all(br#"{"type":"FeatureCollection","features":["#)
        .map_err(io)?;
    for r in reports {
        for line in r.tests.iter().filter(|l| f.keeps_test(r, l)) {
            let Some(feat) = feature(units, r, line) else {
                continue;
            };
            out.write_all(if n == 0 { b"\n" } else { b",\n" })
                .map_err(io)?;
            serde_json::to_writer(&mut out, &feat).map_err(io)?;
            n += 1;
        }
    }
    out.write_all(b"\n]}\n").map_err(io)?;
    out.flush().map_err(io)?;
    Ok(n)
}
