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
        /// Sand that fills the cone and plate (calibrated), g.
        mass_sand_in_cone_g: f64,
        /// Calibrated bulk density of the sand, kg/m³.
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
    /// "gauge", "oven" or "entered".
    pub moisture_source: &'static str,
}

/// Wet density from a mass and a volume (g and cm³ → kg/m³), naming `mass_field` if implausible.
fn wet_from_mass_volume(
    mass_g: f64,
    volume_cm3: f64,
    mass_field: &'static str,
) -> Result<Density, ReductionError> {
    let rho = mass_g / volume_cm3 * 1000.0;
    Density::named("wet density", rho).map_err(|e| ReductionError::Inconsistent {
        field: mass_field,
        reason: format!(
            "{} g of soil in {} cm³ gives {e}",
            num(mass_g),
            num((volume_cm3 * 10.0).round() / 10.0)
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
        } => {
            positive("mass_sand_used_g", "sand used", *mass_sand_used_g)?;
            finite(
                "mass_sand_in_cone_g",
                "cone sand mass",
                *mass_sand_in_cone_g,
            )?;
            if *mass_sand_in_cone_g < 0.0 {
                return Err(ReductionError::OutOfRange {
                    field: "mass_sand_in_cone_g",
                    reason: format!(
                        "cone sand mass {} g must not be negative",
                        num(*mass_sand_in_cone_g)
                    ),
                });
            }
            if *mass_sand_in_cone_g >= *mass_sand_used_g {
                return Err(ReductionError::Inconsistent {
                    field: "mass_sand_in_cone_g",
                    reason: format!(
                        "cone sand mass {} g is not less than sand used {} g",
                        num(*mass_sand_in_cone_g),
                        num(*mass_sand_used_g)
                    ),
                });
            }
            within(
                "sand_density_kg_m3",
                "sand density",
                *sand_density_kg_m3,
                SAND_DENSITY_MIN_KG_M3,
                SAND_DENSITY_MAX_KG_M3,
                "kg/m³",
            )?;
            positive("mass_wet_soil_g", "wet soil mass", *mass_wet_soil_g)?;
            let w = water_field("water_content_pct", *water_content_pct)?;
            // V_hole (cm³) = sand in hole (g) / ρ_sand (g/cm³).
            let sand_in_hole_g = mass_sand_used_g - mass_sand_in_cone_g;
            let volume_cm3 = sand_in_hole_g / (sand_density_kg_m3 / 1000.0);
            let wet = wet_from_mass_volume(*mass_wet_soil_g, volume_cm3, "mass_wet_soil_g")?;
            let dry = dry_from_wet(wet, w, "water_content_pct")?;
            Ok(FieldDensity {
                wet_density: wet,
                water_content: w,
                dry_density: dry,
                moisture_source: "entered",
            })
        }
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
        moisture_source: "entered",
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
            moisture_source: "oven",
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
            moisture_source: "gauge",
        });
    }
    if let Some(gauge_w) = water_content_pct {
        let w = water_field("water_content_pct", gauge_w)?;
        let dry = dry_from_wet(wet, w, "water_content_pct")?;
        return Ok(FieldDensity {
            wet_density: wet,
            water_content: w,
            dry_density: dry,
            moisture_source: "gauge",
        });
    }
    Err(ReductionError::Missing {
        field: "moisture_density_kg_m3",
        reason: "a nuclear test needs the gauge moisture density, the gauge water content or an oven water content"
            .to_string(),
    })
}
