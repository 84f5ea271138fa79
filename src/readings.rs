//! Field readings typed as text (the entry form's inputs, a CSV row's cells) read into the
//! [`FieldReadings`] an API client sends as JSON. One parser for every way readings arrive,
//! so the same text gets the same answer and the same refusal, naming the same field, on
//! the form, in an import and (once typed) through the API.
//!
//! It decides only what text can decide: is it a number, is a reading the method cannot do
//! without there at all, which unit a density was typed in. Everything a reading must
//! satisfy beyond that (ranges, a moisture for a nuclear test, cone sand less than sand
//! used) is the reduction's, which the API's JSON meets as well. The one exception is
//! asked of the reduction here: a nuclear test with no moisture at all is named at parse
//! time with the reduction's own words, so a form shows it beside the other problems.
//!
//! Pure: compiled into the site app's WebAssembly with `site_form` (see `wasm/`).

use crate::reduction::field::{FieldReadings, missing_nuclear_moisture};
use crate::reduction::{Density, KG_M3_PER_LB_FT3, UnitSystem};

/// One typed input of a field test's readings, whatever it is called where it was typed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ReadingField {
    /// The test method (`nuclear`, `sand_cone`, `balloon`, `drive_cylinder`).
    Method,
    WetDensity,
    MoistureDensity,
    /// The water content a nuclear gauge shows.
    GaugeWaterContent,
    OvenWaterContent,
    MassSandUsed,
    MassSandInCone,
    SandDensity,
    HoleVolume,
    CylinderVolume,
    MassWetSoil,
    /// The water content of the soil from the hole (sand cone, balloon, drive cylinder).
    WaterContent,
}

impl ReadingField {
    /// The field's name in the API's JSON body, as the ledger names it in a refusal
    /// (`readings.wet_density_kg_m3`; `method` for the method).
    pub fn api_field(self) -> &'static str {
        match self {
            Self::Method => "method",
            Self::WetDensity => "readings.wet_density_kg_m3",
            Self::MoistureDensity => "readings.moisture_density_kg_m3",
            Self::GaugeWaterContent | Self::WaterContent => "readings.water_content_pct",
            Self::OvenWaterContent => "readings.oven_water_content_pct",
            Self::MassSandUsed => "readings.mass_sand_used_g",
            Self::MassSandInCone => "readings.mass_sand_in_cone_g",
            Self::SandDensity => "readings.sand_density_kg_m3",
            Self::HoleVolume => "readings.hole_volume_cm3",
            Self::CylinderVolume => "readings.cylinder_volume_cm3",
            Self::MassWetSoil => "readings.mass_wet_soil_g",
        }
    }
}

/// What was wrong with one typed reading.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingProblem {
    pub field: ReadingField,
    /// The text as typed (empty when the reading was missing).
    pub value: String,
    pub reason: String,
}

/// The units the densities were typed in: wet and moisture densities in `bulk`, the
/// calibrated sand density in `sand` (the entry form asks for it in kg/m³ always).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DensityUnits {
    pub bulk: UnitSystem,
    pub sand: UnitSystem,
}

/// Reads a number written with a decimal point or comma ("1.5", "1,5"); finite only.
pub fn parse_number(raw: &str) -> Option<f64> {
    match raw.trim().replace(',', ".").parse::<f64>() {
        Ok(x) if x.is_finite() => Some(x),
        _ => None,
    }
}

/// Reads the readings of a test by `method` from the text of each field (`text` returns
/// `None` or blank for a field left empty), collecting every problem at once. The probe
/// depth of a nuclear test is the test's depth, read with the test's other fields.
pub fn parse_readings<'a>(
    method: &str,
    units: DensityUnits,
    probe_depth_mm: Option<f64>,
    text: impl Fn(ReadingField) -> Option<&'a str>,
) -> Result<FieldReadings, Vec<ReadingProblem>> {
    let mut r = Reader {
        method,
        units,
        text: &text,
        problems: Vec::new(),
    };
    let readings = match method {
        "nuclear" => r.nuclear(probe_depth_mm),
        "sand_cone" => r.sand_cone(),
        "balloon" | "drive_cylinder" => r.by_volume(),
        _ => {
            r.problem(ReadingField::Method, "choose a test method".into());
            None
        }
    };
    match readings {
        Some(readings) if r.problems.is_empty() => Ok(readings),
        _ => Err(r.problems),
    }
}

/// The fields of one test as they are read, and the problems found so far.
struct Reader<'t, 'a, F: Fn(ReadingField) -> Option<&'a str>> {
    method: &'t str,
    units: DensityUnits,
    text: &'t F,
    problems: Vec<ReadingProblem>,
}

impl<'a, F: Fn(ReadingField) -> Option<&'a str>> Reader<'_, 'a, F> {
    fn raw(&self, field: ReadingField) -> Option<&'a str> {
        (self.text)(field).map(str::trim).filter(|t| !t.is_empty())
    }

    fn problem(&mut self, field: ReadingField, reason: String) {
        let value = self.raw(field).unwrap_or("").to_string();
        self.problems.push(ReadingProblem {
            field,
            value,
            reason,
        });
    }

    /// A number if one was typed; a problem if the text is not one.
    fn optional(&mut self, field: ReadingField) -> Option<f64> {
        let raw = self.raw(field)?;
        let x = parse_number(raw);
        if x.is_none() {
            self.problem(field, format!("'{raw}' is not a number"));
        }
        x
    }

    /// A number the method cannot do without.
    fn required(&mut self, field: ReadingField) -> Option<f64> {
        if self.raw(field).is_none() {
            let method = self.method.replace('_', " ");
            self.problem(field, format!("is required for a {method} test"));
            return None;
        }
        self.optional(field)
    }

    /// A bulk density in `system`, as kg/m³ (in US units it must be a plausible one).
    fn density(&mut self, field: ReadingField, x: f64, system: UnitSystem) -> Option<f64> {
        match system {
            UnitSystem::Si => Some(x),
            UnitSystem::Us => match Density::from_lb_ft3(x) {
                Ok(d) => Some(d.kg_m3()),
                Err(e) => {
                    self.problem(field, e.to_string());
                    None
                }
            },
        }
    }

    fn nuclear(&mut self, probe_depth_mm: Option<f64>) -> Option<FieldReadings> {
        let wet = self.required(ReadingField::WetDensity);
        let wet = wet.and_then(|x| self.density(ReadingField::WetDensity, x, self.units.bulk));
        // Water per volume lies far below any bulk density: converted, not range-checked
        // here (the reduction checks it against the wet density).
        let moisture =
            self.optional(ReadingField::MoistureDensity)
                .map(|x| match self.units.bulk {
                    UnitSystem::Si => x,
                    UnitSystem::Us => x * KG_M3_PER_LB_FT3,
                });
        let gauge_w = self.optional(ReadingField::GaugeWaterContent);
        let oven_w = self.optional(ReadingField::OvenWaterContent);
        let typed = |f| self.raw(f).is_some();
        if !typed(ReadingField::MoistureDensity)
            && !typed(ReadingField::GaugeWaterContent)
            && !typed(ReadingField::OvenWaterContent)
        {
            self.problem(
                ReadingField::MoistureDensity,
                missing_nuclear_moisture().to_string(),
            );
        }
        Some(FieldReadings::Nuclear {
            wet_density_kg_m3: wet?,
            moisture_density_kg_m3: moisture,
            water_content_pct: gauge_w,
            oven_water_content_pct: oven_w,
            gauge_serial: None,
            probe_depth_mm,
        })
    }

    fn sand_cone(&mut self) -> Option<FieldReadings> {
        let used = self.required(ReadingField::MassSandUsed);
        // Left empty, the cone's and the sand batch's calibrations in force are used
        // (the API's 0), see `ledger::instruments::check`.
        let cone = self.optional(ReadingField::MassSandInCone);
        let sand = self.optional(ReadingField::SandDensity);
        let sand = sand.and_then(|x| self.density(ReadingField::SandDensity, x, self.units.sand));
        let soil = self.required(ReadingField::MassWetSoil);
        let w = self.required(ReadingField::WaterContent);
        let cone_typed = self.raw(ReadingField::MassSandInCone).is_some();
        let sand_typed = self.raw(ReadingField::SandDensity).is_some();
        if (cone_typed && cone.is_none()) || (sand_typed && sand.is_none()) {
            return None;
        }
        Some(FieldReadings::SandCone {
            mass_sand_used_g: used?,
            mass_sand_in_cone_g: cone.unwrap_or(0.0),
            sand_density_kg_m3: sand.unwrap_or(0.0),
            mass_wet_soil_g: soil?,
            water_content_pct: w?,
        })
    }

    /// Rubber balloon and drive cylinder: a volume, the soil from it and its water.
    fn by_volume(&mut self) -> Option<FieldReadings> {
        let balloon = self.method == "balloon";
        let volume = self.required(if balloon {
            ReadingField::HoleVolume
        } else {
            ReadingField::CylinderVolume
        });
        let soil = self.required(ReadingField::MassWetSoil);
        let w = self.required(ReadingField::WaterContent);
        let (volume, soil, w) = (volume?, soil?, w?);
        Some(if balloon {
            FieldReadings::Balloon {
                hole_volume_cm3: volume,
                mass_wet_soil_g: soil,
                water_content_pct: w,
            }
        } else {
            FieldReadings::DriveCylinder {
                cylinder_volume_cm3: volume,
                mass_wet_soil_g: soil,
                water_content_pct: w,
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const SI: DensityUnits = DensityUnits {
        bulk: UnitSystem::Si,
        sand: UnitSystem::Si,
    };

    fn parse(
        method: &str,
        cells: &[(ReadingField, &'static str)],
    ) -> Result<FieldReadings, Vec<ReadingProblem>> {
        parse_readings(method, SI, None, |f| {
            cells.iter().find(|(k, _)| *k == f).map(|(_, v)| *v)
        })
    }

    #[test]
    fn a_nuclear_test_with_only_an_oven_water_content_parses() {
        let r = parse(
            "nuclear",
            &[
                (ReadingField::WetDensity, "2100"),
                (ReadingField::OvenWaterContent, "11,5"),
            ],
        )
        .unwrap();
        assert_eq!(
            r,
            FieldReadings::Nuclear {
                wet_density_kg_m3: 2100.0,
                moisture_density_kg_m3: None,
                water_content_pct: None,
                oven_water_content_pct: Some(11.5),
                gauge_serial: None,
                probe_depth_mm: None,
            }
        );
    }

    #[test]
    fn a_nuclear_test_without_any_moisture_is_refused_in_the_reductions_words() {
        let e = parse("nuclear", &[(ReadingField::WetDensity, "2100")]).unwrap_err();
        assert_eq!(e.len(), 1, "{e:?}");
        assert_eq!(e[0].field, ReadingField::MoistureDensity);
        assert_eq!(e[0].reason, missing_nuclear_moisture().to_string());
    }

    #[test]
    fn every_problem_is_named_at_once() {
        let e = parse(
            "balloon",
            &[
                (ReadingField::HoleVolume, "big"),
                (ReadingField::WaterContent, " "),
            ],
        )
        .unwrap_err();
        let named: Vec<_> = e.iter().map(|p| (p.field, p.reason.as_str())).collect();
        assert_eq!(
            named,
            [
                (ReadingField::HoleVolume, "'big' is not a number"),
                (ReadingField::MassWetSoil, "is required for a balloon test"),
                (ReadingField::WaterContent, "is required for a balloon test"),
            ]
        );
    }

    #[test]
    fn a_sand_cone_left_without_calibrated_values_takes_the_registers() {
        let r = parse(
            "sand_cone",
            &[
                (ReadingField::MassSandUsed, "5200"),
                (ReadingField::MassWetSoil, "3100"),
                (ReadingField::WaterContent, "10.2"),
            ],
        )
        .unwrap();
        let FieldReadings::SandCone {
            mass_sand_in_cone_g,
            sand_density_kg_m3,
            ..
        } = r
        else {
            panic!("sand cone expected: {r:?}");
        };
        assert_eq!((mass_sand_in_cone_g, sand_density_kg_m3), (0.0, 0.0));
    }

    #[test]
    fn us_densities_are_converted_and_moisture_density_is_not_range_checked() {
        // 131.1 lb/ft³ × 16.018463 = 2100.0 kg/m³ (conversion factor: exact definition of
        // the pound and foot); 13.1 lb/ft³ of water lies below any bulk density.
        let us = DensityUnits {
            bulk: UnitSystem::Us,
            sand: UnitSystem::Si,
        };
        let cells = [
            (ReadingField::WetDensity, "131.1"),
            (ReadingField::MoistureDensity, "13.1"),
        ];
        let r = parse_readings("nuclear", us, Some(200.0), |f| {
            cells.iter().find(|(k, _)| *k == f).map(|(_, v)| *v)
        })
        .unwrap();
        let FieldReadings::Nuclear {
            wet_density_kg_m3,
            moisture_density_kg_m3,
            probe_depth_mm,
            ..
        } = r
        else {
            panic!("nuclear expected: {r:?}");
        };
        assert!(
            (wet_density_kg_m3 - 2100.02).abs() < 0.05,
            "{wet_density_kg_m3}"
        );
        assert!((moisture_density_kg_m3.unwrap() - 209.84).abs() < 0.05);
        assert_eq!(probe_depth_mm, Some(200.0));
    }
}
