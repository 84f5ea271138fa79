//! GeoJSON (RFC 7946) FeatureCollection of the field tests that carry coordinates.
//!
//! Coordinates are the project grid easting and northing exactly as entered: no
//! coordinate reference system is assumed and no transformation is made. RFC 7946
//! expects WGS 84 longitude/latitude, so a GIS reading this file must be told the
//! project's grid (the file names it nowhere); every point is `[easting, northing]`.

use serde_json::{Value, json};

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
            "result": line.result(),
            "retest_of": line.retest_of_number,
        }
    }))
}
