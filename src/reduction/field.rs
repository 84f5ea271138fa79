//! Field density reductions: nuclear gauge (ASTM D6938), sand cone (ASTM D1556;
//! AASHTO T 191), rubber balloon (ASTM D2167) and drive cylinder (ASTM D2937).
//! Errors name the JSON field of the reading at fault.

use serde::{Deserialize, Serialize};

use super::quantities::{Density, WaterContent, num};
use super::water::{ReductionError, finite, positive, water_field, within};

/// Lowest calibrated sand density accepted, kg/m³ (common practice: uniform sands run 1300–1700).
pub const SAND_DENSITY_MIN_KG_M3: f64 = 1000.0;
/// Highest calibrated sand density accepted, kg/m³.
pub const SAND_DENSITY_MAX_KG_M3: f64 = 2000.0;
/// Deepest nuclear probe depth accepted, mm (common practice: rods reach 300 mm).
pub const PROBE_DEPTH_MAX_MM: f64 = 400.0;

/// What the technician read in the field, by method (the JSON body of a field test).
#[derive(Serialize, Deserialize, Clone, Debug, PartialEq)]
#[serde(tag = "method", rename_all = "snake_case")]
pub enum FieldReadings {
    /// Nuclear gauge (ASTM D6938).
    Nuclear {
        /// Wet (bulk) density read by the gauge, kg/m³.
        wet_density_kg_m3: f64,
        /// Moisture density read by the gauge (mass of water per volume), kg/m³.
        moisture_density_kg_m3: Option<f64>,
        /// Water content shown by the gauge, percent.
        water_content_pct: Option<f64>,
        /// Oven water content of a sample from the test spot (ASTM D2216), percent; replaces the gauge moisture.
        oven_water_content_pct: Option<f64>,
        /// Gauge serial number.
        gauge_serial: Option<String>,
        /// Probe depth, mm (0 for backscatter).
        probe_depth_mm: Option<f64>,
    },
    /// Sand cone (ASTM D1556).
    SandCone {
        /// Sand poured from the jar in total, g.
        mass_sand_used_g: f64,
        /// Sand that fills the cone and plate (calibrated), g. Absent (0): taken from
        /// the registered cone's calibration in force on the test's date.
        #[serde(default)]
        mass_sand_in_cone_g: f64,
        /// Calibrated bulk density of the sand, kg/m³. Absent (0): taken from the sand
        /// batch on the project on the test's date.
        #[serde(default)]
        sand_density_kg_m3: f64,
        /// Wet soil dug from the hole, g.
        mass_wet_soil_g: f64,
        /// Water content of that soil, percent.
        water_content_pct: f64,
    },
    /// Rubber balloon (ASTM D2167).
    Balloon {
        /// Hole volume from the balloon readings, cm³.
        hole_volume_cm3: f64,
        /// Wet soil dug from the hole, g.
        mass_wet_soil_g: f64,
        /// Water content of that soil, percent.
        water_content_pct: f64,
    },
    /// Drive cylinder (ASTM D2937).
    DriveCylinder {
        /// Inside volume of the cylinder, cm³.
        cylinder_volume_cm3: f64,
        /// Wet soil in the cylinder, g.
        mass_wet_soil_g: f64,
        /// Water content of that soil, percent.
        water_content_pct: f64,
    },
}

impl FieldReadings {
    /// Stable method code: "nuclear", "sand_cone", "balloon", "drive_cylinder".
    pub fn method_code(&self) -> &'static str {
        match self {
            Self::Nuclear { .. } => "nuclear",
            Self::SandCone { .. } => "sand_cone",
            Self::Balloon { .. } => "balloon",
            Self::DriveCylinder { .. } => "drive_cylinder",
        }
    }
    /// Method name with its standard, for reports.
    pub fn method_label(&self) -> &'static str {
        match self {
            Self::Nuclear { .. } => "Nuclear gauge (ASTM D6938)",
            Self::SandCone { .. } => "Sand cone (ASTM D1556)",
            Self::Balloon { .. } => "Rubber balloon (ASTM D2167)",
            Self::DriveCylinder { .. } => "Drive cylinder (ASTM D2937)",
        }
    }
}

/// A reduced field test: the three numbers every method yields, and where the moisture came from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FieldDensity {
    /// Wet (bulk) density in place.
    pub wet_density: Density,
    /// Water content used for the dry density.
    pub water_content: WaterContent,
    /// Dry density in place.
    pub dry_density: Density,
    /// Where the water content came from.
    pub moisture_source: MoistureSource,
}

/// Where a field test's water content came from: the nuclear gauge, an oven-dried sample
/// (ASTM D2216, which takes precedence over the gauge), or entered as a value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MoistureSource {
    /// The gauge's own moisture reading.
    Gauge,
    /// An oven-dried sample's water content.
    Oven,
    /// A water content entered as a value.
    Entered,
}

impl MoistureSource {
    /// Every source.
    pub const ALL: [MoistureSource; 3] = [Self::Gauge, Self::Oven, Self::Entered];

    /// Stable code used in JSON and the database.
    pub fn code(self) -> &'static str {
        match self {
            Self::Gauge => "gauge",
            Self::Oven => "oven",
            Self::Entered => "entered",
        }
    }

    /// Reads a code written by [`MoistureSource::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|m| m.code() == s)
    }
}

impl std::fmt::Display for MoistureSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.code())
    }
}

/// Wet density from a mass and a volume (g and cm³ → kg/m³), naming `mass_field` if implausible.
fn wet_from_mass_volume(
    mass_g: f64,
    volume_cm3: f64,
    mass_field: &'static str,
) -> Result<Density, ReductionError> {
    let rho = mass_g / volume_cm3 * 1000.0;
    Density::named("wet density", rho).map_err(|_| ReductionError::Inconsistent {
        field: mass_field,
        reason: format!(
            "{} g of wet soil in a volume of {:.1} cm³ gives a wet density of {rho:.0} kg/m³, outside 500–3000 kg/m³; check the masses and the volume",
            num(mass_g),
            volume_cm3
        ),
    })
}

/// Dry density ρd = ρ / (1 + w/100), naming `water_field_name` if implausible.
fn dry_from_wet(
    wet: Density,
    w: WaterContent,
    water_field_name: &'static str,
) -> Result<Density, ReductionError> {
    Density::named("dry density", wet.kg_m3() / (1.0 + w.fraction()))
        .map_err(|e| ReductionError::quantity(water_field_name, e))
}

/// Reduces field readings to wet density, water content and dry density; errors name the JSON field.
pub fn reduce_field(readings: &FieldReadings) -> Result<FieldDensity, ReductionError> {
    match readings {
        FieldReadings::Nuclear {
            wet_density_kg_m3,
            moisture_density_kg_m3,
            water_content_pct,
            oven_water_content_pct,
            gauge_serial: _,
            probe_depth_mm,
        } => reduce_nuclear(
            *wet_density_kg_m3,
            *moisture_density_kg_m3,
            *water_content_pct,
            *oven_water_content_pct,
            *probe_depth_mm,
        ),
        FieldReadings::SandCone {
            mass_sand_used_g,
            mass_sand_in_cone_g,
            sand_density_kg_m3,
            mass_wet_soil_g,
            water_content_pct,
        } => reduce_sand_cone(
            *mass_sand_used_g,
            *mass_sand_in_cone_g,
            *sand_density_kg_m3,
            *mass_wet_soil_g,
            *water_content_pct,
        ),
        FieldReadings::Balloon {
            hole_volume_cm3,
            mass_wet_soil_g,
            water_content_pct,
        } => by_volume(
            *hole_volume_cm3,
            "hole_volume_cm3",
            "hole volume",
            *mass_wet_soil_g,
            *water_content_pct,
        ),
        FieldReadings::DriveCylinder {
            cylinder_volume_cm3,
            mass_wet_soil_g,
            water_content_pct,
        } => by_volume(
            *cylinder_volume_cm3,
            "cylinder_volume_cm3",
            "cylinder volume",
            *mass_wet_soil_g,
            *water_content_pct,
        ),
    }
}

/// Sand cone (ASTM D1556): the hole's volume from the sand that filled it, then ρ = m / V.
fn reduce_sand_cone(
    mass_sand_used_g: f64,
    mass_sand_in_cone_g: f64,
    sand_density_kg_m3: f64,
    mass_wet_soil_g: f64,
    water_content_pct: f64,
) -> Result<FieldDensity, ReductionError> {
    positive("mass_sand_used_g", "sand used", mass_sand_used_g)?;
    finite("mass_sand_in_cone_g", "cone sand mass", mass_sand_in_cone_g)?;
    if mass_sand_in_cone_g < 0.0 {
        return Err(ReductionError::OutOfRange {
            field: "mass_sand_in_cone_g",
            reason: format!(
                "cone sand mass {} g must not be negative",
                num(mass_sand_in_cone_g)
            ),
        });
    }
    if mass_sand_in_cone_g >= mass_sand_used_g {
        return Err(ReductionError::Inconsistent {
            field: "mass_sand_in_cone_g",
            reason: format!(
                "cone sand mass {} g is not less than sand used {} g",
                num(mass_sand_in_cone_g),
                num(mass_sand_used_g)
            ),
        });
    }
    within(
        "sand_density_kg_m3",
        "sand density",
        sand_density_kg_m3,
        SAND_DENSITY_MIN_KG_M3,
        SAND_DENSITY_MAX_KG_M3,
        "kg/m³",
    )?;
    positive("mass_wet_soil_g", "wet soil mass", mass_wet_soil_g)?;
    let w = water_field("water_content_pct", water_content_pct)?;
    // V_hole (cm³) = sand in hole (g) / ρ_sand (g/cm³).
    let sand_in_hole_g = mass_sand_used_g - mass_sand_in_cone_g;
    let volume_cm3 = sand_in_hole_g / (sand_density_kg_m3 / 1000.0);
    let wet = wet_from_mass_volume(mass_wet_soil_g, volume_cm3, "mass_wet_soil_g")?;
    let dry = dry_from_wet(wet, w, "water_content_pct")?;
    Ok(FieldDensity {
        wet_density: wet,
        water_content: w,
        dry_density: dry,
        moisture_source: MoistureSource::Entered,
    })
}

/// Balloon and drive cylinder: ρ = m / V, ρd = ρ / (1 + w/100).
fn by_volume(
    volume_cm3: f64,
    volume_field: &'static str,
    volume_what: &'static str,
    mass_wet_soil_g: f64,
    water_content_pct: f64,
) -> Result<FieldDensity, ReductionError> {
    positive(volume_field, volume_what, volume_cm3)?;
    positive("mass_wet_soil_g", "wet soil mass", mass_wet_soil_g)?;
    let w = water_field("water_content_pct", water_content_pct)?;
    let wet = wet_from_mass_volume(mass_wet_soil_g, volume_cm3, "mass_wet_soil_g")?;
    let dry = dry_from_wet(wet, w, "water_content_pct")?;
    Ok(FieldDensity {
        wet_density: wet,
        water_content: w,
        dry_density: dry,
        moisture_source: MoistureSource::Entered,
    })
}

/// Nuclear gauge (ASTM D6938): an oven moisture replaces the gauge's; else ρd = ρ − ρm and
/// w = ρm / ρd × 100 from the moisture density; else the gauge's water content. When the gauge
/// gives both moisture density and water content, the moisture density (the direct reading) rules.
fn reduce_nuclear(
    wet_density_kg_m3: f64,
    moisture_density_kg_m3: Option<f64>,
    water_content_pct: Option<f64>,
    oven_water_content_pct: Option<f64>,
    probe_depth_mm: Option<f64>,
) -> Result<FieldDensity, ReductionError> {
    finite("wet_density_kg_m3", "wet density", wet_density_kg_m3)?;
    let wet = Density::named("wet density", wet_density_kg_m3)
        .map_err(|e| ReductionError::quantity("wet_density_kg_m3", e))?;
    if let Some(depth) = probe_depth_mm {
        within(
            "probe_depth_mm",
            "probe depth",
            depth,
            0.0,
            PROBE_DEPTH_MAX_MM,
            "mm",
        )?;
    }
    if let Some(oven) = oven_water_content_pct {
        let w = water_field("oven_water_content_pct", oven)?;
        let dry = dry_from_wet(wet, w, "oven_water_content_pct")?;
        return Ok(FieldDensity {
            wet_density: wet,
            water_content: w,
            dry_density: dry,
            moisture_source: MoistureSource::Oven,
        });
    }
    if let Some(rho_m) = moisture_density_kg_m3 {
        finite("moisture_density_kg_m3", "moisture density", rho_m)?;
        if rho_m < 0.0 {
            return Err(ReductionError::OutOfRange {
                field: "moisture_density_kg_m3",
                reason: format!("moisture density {} kg/m³ must not be negative", num(rho_m)),
            });
        }
        if rho_m >= wet.kg_m3() {
            return Err(ReductionError::Inconsistent {
                field: "moisture_density_kg_m3",
                reason: format!(
                    "moisture density {} kg/m³ is not less than wet density {} kg/m³",
                    num(rho_m),
                    num(wet.kg_m3())
                ),
            });
        }
        let dry_value = wet.kg_m3() - rho_m;
        let dry = Density::named("dry density", dry_value)
            .map_err(|e| ReductionError::quantity("moisture_density_kg_m3", e))?;
        let w = WaterContent::named("water content", rho_m / dry_value * 100.0)
            .map_err(|e| ReductionError::quantity("moisture_density_kg_m3", e))?;
        return Ok(FieldDensity {
            wet_density: wet,
            water_content: w,
            dry_density: dry,
            moisture_source: MoistureSource::Gauge,
        });
    }
    if let Some(gauge_w) = water_content_pct {
        let w = water_field("water_content_pct", gauge_w)?;
        let dry = dry_from_wet(wet, w, "water_content_pct")?;
        return Ok(FieldDensity {
            wet_density: wet,
            water_content: w,
            dry_density: dry,
            moisture_source: MoistureSource::Gauge,
        });
    }
    Err(missing_nuclear_moisture())
}

/// The refusal of a nuclear test given no moisture at all (also named by
/// `crate::readings` while a form or a CSV row is read, in these words).
pub fn missing_nuclear_moisture() -> ReductionError {
    ReductionError::Missing {
        field: "moisture_density_kg_m3",
        reason: "a nuclear test needs the gauge moisture density, the gauge water content or an oven water content"
            .to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn nuclear(moisture: Option<f64>, gauge_w: Option<f64>, oven: Option<f64>) -> FieldReadings {
        FieldReadings::Nuclear {
            wet_density_kg_m3: 2100.0,
            moisture_density_kg_m3: moisture,
            water_content_pct: gauge_w,
            oven_water_content_pct: oven,
            gauge_serial: Some("G-1042".to_string()),
            probe_depth_mm: Some(200.0),
        }
    }

    fn sand_cone() -> FieldReadings {
        FieldReadings::SandCone {
            mass_sand_used_g: 6000.0,
            mass_sand_in_cone_g: 1600.0,
            sand_density_kg_m3: 1500.0,
            mass_wet_soil_g: 5900.0,
            water_content_pct: 10.0,
        }
    }

    #[test]
    fn nuclear_from_moisture_density() {
        // ASTM D6938: ρd = ρ − ρm = 2100 − 200 = 1900; w = 200 / 1900 × 100 = 10.526 %.
        let r = reduce_field(&nuclear(Some(200.0), Some(9.0), None)).unwrap();
        assert_eq!(r.dry_density.kg_m3(), 1900.0);
        assert!((r.water_content.pct() - 10.526_315_8).abs() < 1e-6);
        assert_eq!(r.wet_density.kg_m3(), 2100.0);
        assert_eq!(r.moisture_source, MoistureSource::Gauge);
    }

    #[test]
    fn nuclear_from_gauge_water_content() {
        // ρd = ρ / (1 + w) = 2100 / 1.10 = 1909.09 kg/m³ (ASTM D6938).
        let r = reduce_field(&nuclear(None, Some(10.0), None)).unwrap();
        assert!((r.dry_density.kg_m3() - 1909.090909).abs() < 1e-5);
        assert_eq!(r.moisture_source, MoistureSource::Gauge);
    }

    #[test]
    fn oven_moisture_overrides_the_gauge() {
        // ASTM D6938 with an ASTM D2216 moisture: ρd = 2100 / 1.12 = 1875 kg/m³.
        let r = reduce_field(&nuclear(Some(200.0), Some(10.5), Some(12.0))).unwrap();
        assert!((r.dry_density.kg_m3() - 1875.0).abs() < 1e-9);
        assert_eq!(r.water_content.pct(), 12.0);
        assert_eq!(r.moisture_source, MoistureSource::Oven);
    }

    #[test]
    fn sand_cone_reduction() {
        // ASTM D1556: sand in hole 6000 − 1600 = 4400 g; V = 4400 / 1.500 = 2933.33 cm³;
        // ρ = 5900 / 2933.33 = 2011.36 kg/m³; ρd = 2011.36 / 1.10 = 1828.51 kg/m³.
        let r = reduce_field(&sand_cone()).unwrap();
        assert!((r.wet_density.kg_m3() - 2011.363636).abs() < 1e-5);
        assert!((r.dry_density.kg_m3() - 1828.512397).abs() < 1e-5);
        assert_eq!(r.moisture_source, MoistureSource::Entered);
    }

    #[test]
    fn balloon_and_drive_cylinder_reductions() {
        // ASTM D2167: 2050 g in 1000 cm³ → 2050 kg/m³; / 1.08 = 1898.15 kg/m³.
        let b = FieldReadings::Balloon {
            hole_volume_cm3: 1000.0,
            mass_wet_soil_g: 2050.0,
            water_content_pct: 8.0,
        };
        let r = reduce_field(&b).unwrap();
        assert_eq!(r.wet_density.kg_m3(), 2050.0);
        assert!((r.dry_density.kg_m3() - 1898.148148).abs() < 1e-5);
        // ASTM D2937: 1850 g in 943.9 cm³ → 1959.95 kg/m³; / 1.15 = 1704.30 kg/m³.
        let d = FieldReadings::DriveCylinder {
            cylinder_volume_cm3: 943.9,
            mass_wet_soil_g: 1850.0,
            water_content_pct: 15.0,
        };
        let r = reduce_field(&d).unwrap();
        assert!((r.wet_density.kg_m3() - 1959.953385).abs() < 1e-5);
        assert!((r.dry_density.kg_m3() - 1704.307291).abs() < 1e-5);
    }

    #[test]
    fn cone_sand_heavier_than_sand_used_is_refused_in_words() {
        let r = FieldReadings::SandCone {
            mass_sand_used_g: 1900.0,
            mass_sand_in_cone_g: 2100.0,
            sand_density_kg_m3: 1500.0,
            mass_wet_soil_g: 3000.0,
            water_content_pct: 10.0,
        };
        let e = reduce_field(&r).unwrap_err();
        assert_eq!(e.field(), "mass_sand_in_cone_g");
        assert_eq!(
            e.to_string(),
            "cone sand mass 2100 g is not less than sand used 1900 g"
        );
    }

    /// Sand-cone readings from the passing set (used, cone, sand, wet soil, w) with one change.
    fn sand_cone_with(change: &dyn Fn(&mut [f64; 5])) -> FieldReadings {
        let mut v = [6000.0, 1600.0, 1500.0, 5900.0, 10.0];
        change(&mut v);
        FieldReadings::SandCone {
            mass_sand_used_g: v[0],
            mass_sand_in_cone_g: v[1],
            sand_density_kg_m3: v[2],
            mass_wet_soil_g: v[3],
            water_content_pct: v[4],
        }
    }

    fn nuclear_at(
        wet: f64,
        moisture: Option<f64>,
        w: Option<f64>,
        oven: Option<f64>,
        depth: Option<f64>,
    ) -> FieldReadings {
        FieldReadings::Nuclear {
            wet_density_kg_m3: wet,
            moisture_density_kg_m3: moisture,
            water_content_pct: w,
            oven_water_content_pct: oven,
            gauge_serial: None,
            probe_depth_mm: depth,
        }
    }

    fn balloon(
        hole_volume_cm3: f64,
        mass_wet_soil_g: f64,
        water_content_pct: f64,
    ) -> FieldReadings {
        FieldReadings::Balloon {
            hole_volume_cm3,
            mass_wet_soil_g,
            water_content_pct,
        }
    }

    fn cylinder(volume_cm3: f64, mass_wet_soil_g: f64, water_content_pct: f64) -> FieldReadings {
        FieldReadings::DriveCylinder {
            cylinder_volume_cm3: volume_cm3,
            mass_wet_soil_g,
            water_content_pct,
        }
    }

    /// Each case is refused, naming the field given beside it, with a message.
    fn assert_refused_at(cases: Vec<(FieldReadings, &str)>) {
        for (readings, field) in cases {
            let e = reduce_field(&readings).unwrap_err();
            assert_eq!(e.field(), field, "{readings:?}: {e}");
            assert!(!e.to_string().is_empty());
        }
    }

    #[test]
    fn nuclear_errors_name_their_field() {
        let m = "moisture_density_kg_m3";
        assert_refused_at(vec![
            (
                nuclear_at(f64::NAN, Some(200.0), None, None, None),
                "wet_density_kg_m3",
            ),
            (
                nuclear_at(4200.0, Some(200.0), None, None, None),
                "wet_density_kg_m3",
            ),
            (nuclear_at(2100.0, Some(-1.0), None, None, None), m),
            (nuclear_at(2100.0, Some(2100.0), None, None, None), m),
            (nuclear_at(2100.0, Some(f64::NAN), None, None, None), m),
            (nuclear_at(2100.0, Some(1700.0), None, None, None), m),
            (
                nuclear_at(2100.0, None, Some(140.0), None, None),
                "water_content_pct",
            ),
            (
                nuclear_at(2100.0, None, None, Some(-2.0), None),
                "oven_water_content_pct",
            ),
            (nuclear_at(2100.0, None, None, None, None), m),
            (
                nuclear_at(2100.0, Some(200.0), None, None, Some(900.0)),
                "probe_depth_mm",
            ),
        ]);
        let e = reduce_field(&nuclear_at(2100.0, None, None, None, None)).unwrap_err();
        assert!(
            e.to_string().contains("needs the gauge moisture density"),
            "{e}"
        );
    }

    #[test]
    fn sand_cone_errors_name_their_field() {
        assert_refused_at(vec![
            (sand_cone_with(&|v| v[0] = 0.0), "mass_sand_used_g"),
            (sand_cone_with(&|v| v[1] = -3.0), "mass_sand_in_cone_g"),
            (sand_cone_with(&|v| v[1] = f64::NAN), "mass_sand_in_cone_g"),
            (sand_cone_with(&|v| v[2] = 3100.0), "sand_density_kg_m3"),
            (sand_cone_with(&|v| v[3] = -5.0), "mass_wet_soil_g"),
            (sand_cone_with(&|v| v[3] = 59_000.0), "mass_wet_soil_g"),
            (
                sand_cone_with(&|v| v[4] = f64::INFINITY),
                "water_content_pct",
            ),
        ]);
        let e = reduce_field(&sand_cone_with(&|v| v[2] = 3100.0)).unwrap_err();
        assert_eq!(
            e.to_string(),
            "sand density 3100 kg/m³ is outside 1000–2000 kg/m³"
        );
    }

    #[test]
    fn balloon_and_drive_cylinder_errors_name_their_field() {
        assert_refused_at(vec![
            (balloon(0.0, 2000.0, 8.0), "hole_volume_cm3"),
            (balloon(1000.0, f64::NAN, 8.0), "mass_wet_soil_g"),
            (balloon(1000.0, 2000.0, 101.0), "water_content_pct"),
            (cylinder(-9.0, 1800.0, 8.0), "cylinder_volume_cm3"),
            (cylinder(944.0, 100.0, 8.0), "mass_wet_soil_g"),
            (cylinder(944.0, 1800.0, -8.0), "water_content_pct"),
        ]);
    }

    #[test]
    fn json_shape_is_tagged_by_method() {
        let json = r#"{"method":"sand_cone","mass_sand_used_g":6000,"mass_sand_in_cone_g":1600,
            "sand_density_kg_m3":1500,"mass_wet_soil_g":5900,"water_content_pct":10}"#;
        let r: FieldReadings = serde_json::from_str(json).unwrap();
        assert_eq!(r, sand_cone());
        assert_eq!(r.method_code(), "sand_cone");
        let n: FieldReadings = serde_json::from_str(
            r#"{"method":"nuclear","wet_density_kg_m3":2100,"moisture_density_kg_m3":200}"#,
        )
        .unwrap();
        assert_eq!(n.method_code(), "nuclear");
        assert_eq!(serde_json::to_value(&n).unwrap()["method"], "nuclear");
        for (r, code) in [
            (
                FieldReadings::Balloon {
                    hole_volume_cm3: 1.0,
                    mass_wet_soil_g: 1.0,
                    water_content_pct: 1.0,
                },
                "balloon",
            ),
            (
                FieldReadings::DriveCylinder {
                    cylinder_volume_cm3: 1.0,
                    mass_wet_soil_g: 1.0,
                    water_content_pct: 1.0,
                },
                "drive_cylinder",
            ),
        ] {
            assert_eq!(r.method_code(), code);
            assert_eq!(serde_json::to_value(&r).unwrap()["method"], code);
            assert!(!r.method_label().is_empty());
        }
    }

    proptest::proptest! {
        #[test]
        fn reduction_never_panics_and_results_stay_in_bounds(
            a in proptest::num::f64::ANY, b in proptest::num::f64::ANY, c in -10.0f64..4000.0,
            m in proptest::num::f64::ANY, w in -5.0f64..120.0, kind in 0u8..4,
        ) {
            let r = match kind {
                0 => FieldReadings::Nuclear { wet_density_kg_m3: c, moisture_density_kg_m3: Some(a), water_content_pct: None,
                    oven_water_content_pct: (b > 0.0).then_some(w), gauge_serial: None, probe_depth_mm: None },
                1 => FieldReadings::SandCone { mass_sand_used_g: a, mass_sand_in_cone_g: b, sand_density_kg_m3: c,
                    mass_wet_soil_g: m, water_content_pct: w },
                2 => FieldReadings::Balloon { hole_volume_cm3: a, mass_wet_soil_g: m, water_content_pct: w },
                _ => FieldReadings::DriveCylinder { cylinder_volume_cm3: b, mass_wet_soil_g: m, water_content_pct: w },
            };
            if let Ok(fd) = reduce_field(&r) {
                proptest::prop_assert!(fd.dry_density <= fd.wet_density);
                proptest::prop_assert!((500.0..=3000.0).contains(&fd.dry_density.kg_m3()));
            }
        }
    }
}
