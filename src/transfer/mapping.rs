//! Column mappings: which column of a file holds which liftledger field, and how the
//! file writes its numbers (unit system, chainage style, separator). Serialisable, so a
//! project can keep its mappings by name.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::readings::ReadingField;
use crate::reduction::{ChainageStyle, UnitSystem};

/// A liftledger field a file column can fill (field tests).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Target {
    /// Test number, unique in the project; a re-upload is matched by it.
    Number,
    /// When the test was taken (RFC 3339, `YYYY-MM-DD` or `YYYY-MM-DDTHH:MM`, UTC).
    TestedAt,
    Technician,
    InstrumentSerial,
    /// The lot's code (may be empty on a retest: the failed test's lot is used).
    Lot,
    /// Chainage in the file's style (km+m or 100-ft stations) or plain metres/feet.
    Chainage,
    /// Offset from the centreline in metres (negative left).
    OffsetM,
    /// Offset from the centreline in feet (negative left).
    OffsetFt,
    /// Test depth, mm (also the nuclear probe depth).
    DepthMm,
    /// nuclear, sand_cone, balloon or drive_cylinder (spaces, hyphens and case are forgiven).
    Method,
    /// Nuclear wet density, in the file's density unit.
    WetDensity,
    /// Nuclear moisture density, in the file's density unit.
    MoistureDensity,
    /// Water content shown by the nuclear gauge, %.
    GaugeWaterContentPct,
    /// Oven water content of a sample from a nuclear test spot, %.
    OvenWaterContentPct,
    /// Sand cone: sand poured in total, g.
    MassSandUsedG,
    /// Sand cone: sand filling the cone and plate, g.
    MassSandInConeG,
    /// Sand cone: calibrated sand density, in the file's density unit.
    SandDensity,
    /// Rubber balloon: hole volume, cm³.
    HoleVolumeCm3,
    /// Drive cylinder: cylinder volume, cm³.
    CylinderVolumeCm3,
    /// Sand cone, balloon, cylinder: wet soil from the hole, g.
    MassWetSoilG,
    /// Sand cone, balloon, cylinder: water content of that soil, %.
    WaterContentPct,
    /// Coarse (oversize) fraction, % by dry mass.
    CoarsePct,
    /// Water content of the coarse fraction, %.
    CoarseWaterContentPct,
    /// Project grid easting, as entered (no transformation).
    Easting,
    /// Project grid northing, as entered (no transformation).
    Northing,
    /// The number of the failed test this one retests.
    RetestOf,
    /// The technician confirms a point far above zero air voids was read as recorded
    /// (yes/true/1; empty or no/false/0 leaves it unconfirmed, and such a row is refused).
    ConfirmImplausible,
}

impl Target {
    /// Every target, in the order a report lists them.
    pub const ALL: [Target; 27] = [
        Target::Number,
        Target::TestedAt,
        Target::Technician,
        Target::InstrumentSerial,
        Target::Lot,
        Target::Chainage,
        Target::OffsetM,
        Target::OffsetFt,
        Target::DepthMm,
        Target::Method,
        Target::WetDensity,
        Target::MoistureDensity,
        Target::GaugeWaterContentPct,
        Target::OvenWaterContentPct,
        Target::MassSandUsedG,
        Target::MassSandInConeG,
        Target::SandDensity,
        Target::HoleVolumeCm3,
        Target::CylinderVolumeCm3,
        Target::MassWetSoilG,
        Target::WaterContentPct,
        Target::CoarsePct,
        Target::CoarseWaterContentPct,
        Target::Easting,
        Target::Northing,
        Target::RetestOf,
        Target::ConfirmImplausible,
    ];

    /// Stable code, as written in a mapping.
    pub fn code(self) -> &'static str {
        match self {
            Target::Number => "number",
            Target::TestedAt => "tested_at",
            Target::Technician => "technician",
            Target::InstrumentSerial => "instrument_serial",
            Target::Lot => "lot",
            Target::Chainage => "chainage",
            Target::OffsetM => "offset_m",
            Target::OffsetFt => "offset_ft",
            Target::DepthMm => "depth_mm",
            Target::Method => "method",
            Target::WetDensity => "wet_density",
            Target::MoistureDensity => "moisture_density",
            Target::GaugeWaterContentPct => "gauge_water_content_pct",
            Target::OvenWaterContentPct => "oven_water_content_pct",
            Target::MassSandUsedG => "mass_sand_used_g",
            Target::MassSandInConeG => "mass_sand_in_cone_g",
            Target::SandDensity => "sand_density",
            Target::HoleVolumeCm3 => "hole_volume_cm3",
            Target::CylinderVolumeCm3 => "cylinder_volume_cm3",
            Target::MassWetSoilG => "mass_wet_soil_g",
            Target::WaterContentPct => "water_content_pct",
            Target::CoarsePct => "coarse_pct",
            Target::CoarseWaterContentPct => "coarse_water_content_pct",
            Target::Easting => "easting",
            Target::Northing => "northing",
            Target::RetestOf => "retest_of",
            Target::ConfirmImplausible => "confirm_implausible",
        }
    }

    /// The target that fills a field named by the ledger's validation (`chainage_m`,
    /// `readings.wet_density_kg_m3`, …), so a refusal can name the file's column.
    pub fn for_ledger_field(field: &str, method: &str) -> Option<Target> {
        Some(match field {
            "number" => Target::Number,
            "tested_at" => Target::TestedAt,
            "technician" => Target::Technician,
            "instrument_serial" => Target::InstrumentSerial,
            "lot" | "lot_id" => Target::Lot,
            "chainage_m" | "chainage" => Target::Chainage,
            "offset_m" => Target::OffsetM,
            "depth_mm" | "readings.probe_depth_mm" => Target::DepthMm,
            "method" => Target::Method,
            "coarse_pct" => Target::CoarsePct,
            "coarse_water_content_pct" => Target::CoarseWaterContentPct,
            "easting" => Target::Easting,
            "northing" => Target::Northing,
            "retest_of" | "test_id" => Target::RetestOf,
            "confirm_implausible" => Target::ConfirmImplausible,
            "readings.wet_density_kg_m3" => Target::WetDensity,
            "readings.moisture_density_kg_m3" => Target::MoistureDensity,
            "readings.oven_water_content_pct" => Target::OvenWaterContentPct,
            "readings.water_content_pct" if method == "nuclear" => Target::GaugeWaterContentPct,
            "readings.water_content_pct" => Target::WaterContentPct,
            "readings.mass_sand_used_g" => Target::MassSandUsedG,
            "readings.mass_sand_in_cone_g" => Target::MassSandInConeG,
            "readings.sand_density_kg_m3" => Target::SandDensity,
            "readings.hole_volume_cm3" => Target::HoleVolumeCm3,
            "readings.cylinder_volume_cm3" => Target::CylinderVolumeCm3,
            "readings.mass_wet_soil_g" => Target::MassWetSoilG,
            _ => return None,
        })
    }
}

impl From<ReadingField> for Target {
    /// The column that holds a reading of the one readings parser.
    fn from(field: ReadingField) -> Self {
        match field {
            ReadingField::Method => Target::Method,
            ReadingField::WetDensity => Target::WetDensity,
            ReadingField::MoistureDensity => Target::MoistureDensity,
            ReadingField::GaugeWaterContent => Target::GaugeWaterContentPct,
            ReadingField::OvenWaterContent => Target::OvenWaterContentPct,
            ReadingField::MassSandUsed => Target::MassSandUsedG,
            ReadingField::MassSandInCone => Target::MassSandInConeG,
            ReadingField::SandDensity => Target::SandDensity,
            ReadingField::HoleVolume => Target::HoleVolumeCm3,
            ReadingField::CylinderVolume => Target::CylinderVolumeCm3,
            ReadingField::MassWetSoil => Target::MassWetSoilG,
            ReadingField::WaterContent => Target::WaterContentPct,
        }
    }
}

/// The character between fields.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Separator {
    /// Chosen from the header line: whichever of comma, semicolon and tab occurs most.
    #[default]
    Auto,
    Comma,
    Semicolon,
    Tab,
}

impl Separator {
    /// The byte, or `None` for auto-detection.
    pub fn byte(self) -> Option<u8> {
        match self {
            Separator::Auto => None,
            Separator::Comma => Some(b','),
            Separator::Semicolon => Some(b';'),
            Separator::Tab => Some(b'\t'),
        }
    }

    /// Reads `comma`, `semicolon`, `tab` or `auto`.
    pub fn parse_code(s: &str) -> Option<Self> {
        match s.trim() {
            "auto" => Some(Separator::Auto),
            "comma" | "," => Some(Separator::Comma),
            "semicolon" | ";" => Some(Separator::Semicolon),
            "tab" | "\\t" => Some(Separator::Tab),
            _ => None,
        }
    }
}

fn default_units() -> UnitSystem {
    UnitSystem::Si
}

fn default_chainage() -> ChainageStyle {
    ChainageStyle::KmMetre
}

/// How to read a field-test file: its columns and how it writes numbers.
///
/// Densities (wet, moisture, sand) are in the file's unit system (kg/m³ or lb/ft³);
/// masses g, volumes cm³, water contents %, offsets per their target, as the site
/// entry form takes them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ImportMapping {
    /// File column name (as in the header row) → field it fills.
    pub columns: BTreeMap<String, Target>,
    /// The method of every row when the file has no method column.
    #[serde(default)]
    pub method: Option<String>,
    /// Unit system of the file's densities.
    #[serde(default = "default_units")]
    pub units: UnitSystem,
    /// How the file writes chainage.
    #[serde(default = "default_chainage")]
    pub chainage: ChainageStyle,
    #[serde(default)]
    pub separator: Separator,
}

impl ImportMapping {
    /// A mapping from (column, target) pairs with default format (SI, km+m, auto separator).
    pub fn new<'a>(pairs: impl IntoIterator<Item = (&'a str, Target)>) -> Self {
        Self {
            columns: pairs.into_iter().map(|(c, t)| (c.to_string(), t)).collect(),
            method: None,
            units: default_units(),
            chainage: default_chainage(),
            separator: Separator::Auto,
        }
    }

    /// The column mapped to a target, if any.
    pub fn column_of(&self, target: Target) -> Option<&str> {
        self.columns
            .iter()
            .find(|(_, t)| **t == target)
            .map(|(c, _)| c.as_str())
    }

    /// What makes the mapping unusable before any row is read (empty when usable).
    pub fn problems(&self) -> Vec<String> {
        let mut out = Vec::new();
        for t in Target::ALL {
            let n = self.columns.values().filter(|v| **v == t).count();
            if n > 1 {
                out.push(format!("{n} columns are mapped to {}; map one", t.code()));
            }
        }
        for t in [
            Target::Number,
            Target::TestedAt,
            Target::Technician,
            Target::Lot,
            Target::Chainage,
        ] {
            if self.column_of(t).is_none() {
                out.push(format!("no column is mapped to {}", t.code()));
            }
        }
        if self.column_of(Target::OffsetM).is_some() && self.column_of(Target::OffsetFt).is_some() {
            out.push("map offset_m or offset_ft, not both".to_string());
        }
        match &self.method {
            Some(m) if parse_method(m).is_none() => out.push(format!(
                "method '{m}' is not one of nuclear, sand_cone, balloon, drive_cylinder"
            )),
            None if self.column_of(Target::Method).is_none() => {
                out.push("no column is mapped to method and no method is given".to_string())
            }
            _ => {}
        }
        out
    }
}

/// Reads a method name forgivingly: `Nuclear`, `sand cone`, `drive-cylinder`.
pub fn parse_method(s: &str) -> Option<&'static str> {
    let norm: String = s
        .trim()
        .chars()
        .map(|c| match c {
            ' ' | '-' => '_',
            c => c.to_ascii_lowercase(),
        })
        .collect();
    match norm.as_str() {
        "nuclear" | "nuclear_gauge" | "ndg" => Some("nuclear"),
        "sand_cone" | "sandcone" => Some("sand_cone"),
        "balloon" | "rubber_balloon" => Some("balloon"),
        "drive_cylinder" | "drivecylinder" | "cylinder" => Some("drive_cylinder"),
        _ => None,
    }
}

/// A field of a lab compaction point a column can fill.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LabTarget {
    WaterContentPct,
    /// Dry density, in the file's density unit.
    DryDensity,
    MassMoldAndSoilG,
    MassMoldG,
    MoldVolumeCm3,
    MassWetG,
    MassDryG,
    MassTareG,
}

impl LabTarget {
    /// Stable code, as written in a mapping.
    pub fn code(self) -> &'static str {
        match self {
            LabTarget::WaterContentPct => "water_content_pct",
            LabTarget::DryDensity => "dry_density",
            LabTarget::MassMoldAndSoilG => "mass_mold_and_soil_g",
            LabTarget::MassMoldG => "mass_mold_g",
            LabTarget::MoldVolumeCm3 => "mold_volume_cm3",
            LabTarget::MassWetG => "mass_wet_g",
            LabTarget::MassDryG => "mass_dry_g",
            LabTarget::MassTareG => "mass_tare_g",
        }
    }

    /// The target behind a lab point field named by the ledger (`dry_density_kg_m3`, …).
    pub fn for_ledger_field(field: &str) -> Option<LabTarget> {
        Some(match field {
            "water_content_pct" => LabTarget::WaterContentPct,
            "dry_density_kg_m3" => LabTarget::DryDensity,
            "mass_mold_and_soil_g" => LabTarget::MassMoldAndSoilG,
            "mass_mold_g" => LabTarget::MassMoldG,
            "mold_volume_cm3" => LabTarget::MoldVolumeCm3,
            "mass_wet_g" => LabTarget::MassWetG,
            "mass_dry_g" => LabTarget::MassDryG,
            "mass_tare_g" => LabTarget::MassTareG,
            _ => return None,
        })
    }
}

/// How to read a file of lab compaction points (one specimen a row).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LabPointMapping {
    /// File column name → point field.
    pub columns: BTreeMap<String, LabTarget>,
    /// Unit system of the file's dry densities.
    #[serde(default = "default_units")]
    pub units: UnitSystem,
    #[serde(default)]
    pub separator: Separator,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mapping_round_trips_through_json() {
        let mut m = ImportMapping::new([
            ("Test No", Target::Number),
            ("Date", Target::TestedAt),
            ("Tech", Target::Technician),
            ("Lot", Target::Lot),
            ("Station", Target::Chainage),
            ("Method", Target::Method),
        ]);
        m.units = UnitSystem::Us;
        m.chainage = ChainageStyle::FeetStation;
        m.separator = Separator::Semicolon;
        let json = serde_json::to_string(&m).unwrap();
        assert!(json.contains("\"Test No\":\"number\""), "{json}");
        assert!(json.contains("\"units\":\"us\""), "{json}");
        let back: ImportMapping = serde_json::from_str(&json).unwrap();
        assert_eq!(back, m);
        assert!(m.problems().is_empty(), "{:?}", m.problems());
    }

    #[test]
    fn defaults_fill_the_format() {
        let m: ImportMapping =
            serde_json::from_str(r#"{"columns": {"No": "number"}, "method": "nuclear"}"#).unwrap();
        assert_eq!(m.units, UnitSystem::Si);
        assert_eq!(m.chainage, ChainageStyle::KmMetre);
        assert_eq!(m.separator, Separator::Auto);
        let p = m.problems();
        assert!(p.iter().any(|p| p.contains("tested_at")), "{p:?}");
        assert!(!p.iter().any(|p| p.contains("method")), "{p:?}");
        assert!(
            serde_json::from_str::<ImportMapping>(r#"{"columns": {"a": "nonsense"}}"#).is_err()
        );
    }

    #[test]
    fn twice_mapped_targets_and_unknown_methods_are_named() {
        let mut m = ImportMapping::new([("A", Target::Number), ("B", Target::Number)]);
        m.method = Some("pogo stick".into());
        let p = m.problems().join("; ");
        assert!(p.contains("2 columns are mapped to number"), "{p}");
        assert!(p.contains("pogo stick"), "{p}");
    }

    #[test]
    fn methods_are_read_forgivingly() {
        assert_eq!(parse_method(" Sand Cone "), Some("sand_cone"));
        assert_eq!(parse_method("drive-cylinder"), Some("drive_cylinder"));
        assert_eq!(parse_method("NUCLEAR"), Some("nuclear"));
        assert_eq!(parse_method("shovel"), None);
    }

    #[test]
    fn ledger_fields_lead_back_to_targets() {
        assert_eq!(
            Target::for_ledger_field("readings.water_content_pct", "nuclear"),
            Some(Target::GaugeWaterContentPct)
        );
        assert_eq!(
            Target::for_ledger_field("readings.water_content_pct", "balloon"),
            Some(Target::WaterContentPct)
        );
        assert_eq!(
            Target::for_ledger_field("chainage_m", "nuclear"),
            Some(Target::Chainage)
        );
        for t in Target::ALL {
            let back: Target = serde_json::from_value(serde_json::json!(t.code())).unwrap();
            assert_eq!(back, t);
        }
    }
}
