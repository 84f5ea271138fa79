//! Laboratory compaction: effort presets and their energy, and the reduction
//! of one compacted specimen to wet and dry density.

use serde::{Deserialize, Serialize};

use super::quantities::{Density, STANDARD_GRAVITY_M_S2, WaterContent, num};
use super::water::{ReductionError, positive};

/// Joules per cubic metre in one ft·lbf/ft³ (1.3558179483 J over 0.028316846592 m³).
pub const J_M3_PER_FT_LBF_FT3: f64 = 1.355_817_948_3 / 0.028_316_846_592;

/// Cubic metres in one cubic foot (exact from the international foot).
const M3_PER_FT3: f64 = 0.028_316_846_592;
/// Kilograms in one pound (exact, international pound).
const KG_PER_LB: f64 = 0.453_592_37;
/// Metres in one inch (exact).
const M_PER_IN: f64 = 0.0254;

/// A compaction effort: how a specimen is rammed into its mold.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Effort {
    /// Name shown on curves and certificates.
    pub name: String,
    /// Rammer blows on each layer.
    pub blows_per_layer: u32,
    /// Number of layers.
    pub layers: u32,
    /// Rammer mass, kg.
    pub rammer_mass_kg: f64,
    /// Free drop of the rammer, m.
    pub drop_m: f64,
    /// Mold volume, m³.
    pub mold_volume_m3: f64,
}

impl Effort {
    /// Energy per unit volume, kJ/m³: blows × layers × m × g × h / V (the standards' definition).
    pub fn energy_kj_m3(&self) -> f64 {
        self.energy_j() / self.mold_volume_m3 / 1000.0
    }
    /// Energy per unit volume, ft·lbf/ft³.
    pub fn energy_ft_lbf_ft3(&self) -> f64 {
        self.energy_kj_m3() * 1000.0 / J_M3_PER_FT_LBF_FT3
    }
    /// Total rammer energy delivered to the specimen, J.
    pub fn energy_j(&self) -> f64 {
        f64::from(self.blows_per_layer)
            * f64::from(self.layers)
            * self.rammer_mass_kg
            * STANDARD_GRAVITY_M_S2
            * self.drop_m
    }
    /// A project's own effort, checked: whole blows and layers, positive mass, drop and volume.
    pub fn custom(
        name: &str,
        blows_per_layer: u32,
        layers: u32,
        rammer_mass_kg: f64,
        drop_m: f64,
        mold_volume_m3: f64,
    ) -> Result<Effort, ReductionError> {
        let name = name.trim();
        if name.is_empty() {
            return Err(ReductionError::Missing {
                field: "name",
                reason: "effort name is empty".to_string(),
            });
        }
        if blows_per_layer == 0 {
            return Err(ReductionError::NotPositive {
                field: "blows_per_layer",
                what: "blows per layer",
                value: 0.0,
            });
        }
        if layers == 0 {
            return Err(ReductionError::NotPositive {
                field: "layers",
                what: "number of layers",
                value: 0.0,
            });
        }
        positive("rammer_mass_kg", "rammer mass", rammer_mass_kg)?;
        positive("drop_m", "rammer drop", drop_m)?;
        positive("mold_volume_m3", "mold volume", mold_volume_m3)?;
        let checks = [
            ("rammer_mass_kg", "rammer mass", rammer_mass_kg, 50.0, "kg"),
            ("drop_m", "rammer drop", drop_m, 2.0, "m"),
            ("mold_volume_m3", "mold volume", mold_volume_m3, 0.1, "m³"),
        ];
        for (field, what, value, max, unit) in checks {
            if value > max {
                return Err(ReductionError::OutOfRange {
                    field,
                    reason: format!(
                        "{what} {} {unit} is more than the {} {unit} a lab mold or rammer could have",
                        num(value),
                        num(max)
                    ),
                });
            }
        }
        Ok(Effort {
            name: name.to_string(),
            blows_per_layer,
            layers,
            rammer_mass_kg,
            drop_m,
            mold_volume_m3,
        })
    }
}

/// The published compaction efforts the service offers by name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EffortPreset {
    /// ASTM D698 standard effort, 4-in mold.
    AstmD698Mold4in,
    /// ASTM D698 standard effort, 6-in mold.
    AstmD698Mold6in,
    /// ASTM D1557 modified effort, 4-in mold.
    AstmD1557Mold4in,
    /// ASTM D1557 modified effort, 6-in mold.
    AstmD1557Mold6in,
    /// AASHTO T 99 standard effort, 4-in mold.
    AashtoT99,
    /// AASHTO T 180 modified effort, 4-in mold.
    AashtoT180,
    /// BS 1377-4 light compaction, 2.5 kg rammer, 1 L mold.
    Bs1377Light,
    /// BS 1377-4 heavy compaction, 4.5 kg rammer, 1 L mold.
    Bs1377Heavy,
    /// IS 2720 part 7 light compaction, 1000 ml mold.
    Is2720Light,
    /// IS 2720 part 8 heavy compaction, 1000 ml mold.
    Is2720Heavy,
}

/// Mold and rammer data of a preset, in the units the standard writes them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PresetData {
    /// Mold inside diameter, mm.
    pub mold_diameter_mm: f64,
    /// Mold height, mm.
    pub mold_height_mm: f64,
    /// Mold volume the standard states, m³.
    pub mold_volume_m3: f64,
    /// Rammer mass, kg.
    pub rammer_mass_kg: f64,
    /// Rammer drop, m.
    pub drop_m: f64,
    /// Layers.
    pub layers: u32,
    /// Blows per layer.
    pub blows_per_layer: u32,
}

impl EffortPreset {
    /// Every preset, in the order shown in pick lists.
    pub const ALL: [EffortPreset; 10] = [
        Self::AstmD698Mold4in,
        Self::AstmD698Mold6in,
        Self::AstmD1557Mold4in,
        Self::AstmD1557Mold6in,
        Self::AashtoT99,
        Self::AashtoT180,
        Self::Bs1377Light,
        Self::Bs1377Heavy,
        Self::Is2720Light,
        Self::Is2720Heavy,
    ];

    /// Stable snake_case code used in JSON and the database.
    pub fn code(self) -> &'static str {
        match self {
            Self::AstmD698Mold4in => "astm_d698_4in",
            Self::AstmD698Mold6in => "astm_d698_6in",
            Self::AstmD1557Mold4in => "astm_d1557_4in",
            Self::AstmD1557Mold6in => "astm_d1557_6in",
            Self::AashtoT99 => "aashto_t99",
            Self::AashtoT180 => "aashto_t180",
            Self::Bs1377Light => "bs1377_light",
            Self::Bs1377Heavy => "bs1377_heavy",
            Self::Is2720Light => "is2720_light",
            Self::Is2720Heavy => "is2720_heavy",
        }
    }

    /// Reads a code written by [`EffortPreset::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        let s = s.trim();
        Self::ALL.into_iter().find(|p| p.code() == s)
    }

    /// Human label, e.g. "ASTM D1557 modified, 4-in mold".
    pub fn label(self) -> &'static str {
        match self {
            Self::AstmD698Mold4in => "ASTM D698 standard, 4-in mold",
            Self::AstmD698Mold6in => "ASTM D698 standard, 6-in mold",
            Self::AstmD1557Mold4in => "ASTM D1557 modified, 4-in mold",
            Self::AstmD1557Mold6in => "ASTM D1557 modified, 6-in mold",
            Self::AashtoT99 => "AASHTO T 99 standard, 4-in mold",
            Self::AashtoT180 => "AASHTO T 180 modified, 4-in mold",
            Self::Bs1377Light => "BS 1377-4 light (2.5 kg rammer)",
            Self::Bs1377Heavy => "BS 1377-4 heavy (4.5 kg rammer)",
            Self::Is2720Light => "IS 2720-7 light compaction",
            Self::Is2720Heavy => "IS 2720-8 heavy compaction",
        }
    }

    /// True for the modified/heavy family (about 4.5 times the standard energy).
    pub fn is_heavy(self) -> bool {
        matches!(
            self,
            Self::AstmD1557Mold4in
                | Self::AstmD1557Mold6in
                | Self::AashtoT180
                | Self::Bs1377Heavy
                | Self::Is2720Heavy
        )
    }

    /// Mold, rammer, layer and blow data. All values are from memory of the standards.
    pub fn data(self) -> PresetData {
        // From memory: ASTM 4-in mold 4.000 in × 4.584 in = 1/30 ft³ (944 cm³);
        // 6-in mold 6.000 in × 4.584 in = 1/13.33 ft³ (2124 cm³).
        let mold_4in = PresetData {
            mold_diameter_mm: 4.0 * 25.4,
            mold_height_mm: 4.584 * 25.4,
            mold_volume_m3: M3_PER_FT3 / 30.0,
            rammer_mass_kg: 5.5 * KG_PER_LB,
            drop_m: 12.0 * M_PER_IN,
            layers: 3,
            blows_per_layer: 25,
        };
        let mold_6in = PresetData {
            mold_diameter_mm: 6.0 * 25.4,
            mold_height_mm: 4.584 * 25.4,
            mold_volume_m3: M3_PER_FT3 * 0.075,
            blows_per_layer: 56,
            ..mold_4in
        };
        // From memory: modified rammer 10 lb dropped 18 in, 5 layers.
        let modified = |d: PresetData| PresetData {
            rammer_mass_kg: 10.0 * KG_PER_LB,
            drop_m: 18.0 * M_PER_IN,
            layers: 5,
            ..d
        };
        // From memory: BS 1377-4 1 L mold 105 mm × 115.5 mm, 27 blows per layer.
        let bs_mold = PresetData {
            mold_diameter_mm: 105.0,
            mold_height_mm: 115.5,
            mold_volume_m3: 0.001,
            rammer_mass_kg: 2.5,
            drop_m: 0.300,
            layers: 3,
            blows_per_layer: 27,
        };
        // From memory: IS 2720 1000 ml mold 100 mm × 127.3 mm, 25 blows per layer.
        let is_mold = PresetData {
            mold_diameter_mm: 100.0,
            mold_height_mm: 127.3,
            mold_volume_m3: 0.001,
            rammer_mass_kg: 2.6,
            drop_m: 0.310,
            layers: 3,
            blows_per_layer: 25,
        };
        match self {
            Self::AstmD698Mold4in => mold_4in,
            Self::AstmD698Mold6in => mold_6in,
            Self::AstmD1557Mold4in => modified(mold_4in),
            Self::AstmD1557Mold6in => modified(mold_6in),
            // From memory: AASHTO T 99 method A, 2.5 kg rammer, 305 mm drop, 944 cm³ mold.
            Self::AashtoT99 => PresetData {
                mold_diameter_mm: 101.6,
                mold_height_mm: 116.4,
                mold_volume_m3: 0.000_944,
                rammer_mass_kg: 2.495,
                drop_m: 0.305,
                layers: 3,
                blows_per_layer: 25,
            },
            // From memory: AASHTO T 180 method A, 4.54 kg rammer, 457 mm drop, 5 layers.
            Self::AashtoT180 => PresetData {
                mold_diameter_mm: 101.6,
                mold_height_mm: 116.4,
                mold_volume_m3: 0.000_944,
                rammer_mass_kg: 4.536,
                drop_m: 0.457,
                layers: 5,
                blows_per_layer: 25,
            },
            Self::Bs1377Light => bs_mold,
            // From memory: 4.5 kg rammer, 450 mm drop, 5 layers × 27 blows.
            Self::Bs1377Heavy => PresetData {
                rammer_mass_kg: 4.5,
                drop_m: 0.450,
                layers: 5,
                ..bs_mold
            },
            Self::Is2720Light => is_mold,
            // From memory: 4.9 kg rammer, 450 mm drop, 5 layers × 25 blows.
            Self::Is2720Heavy => PresetData {
                rammer_mass_kg: 4.9,
                drop_m: 0.450,
                layers: 5,
                ..is_mold
            },
        }
    }

    /// The effort of this preset, named by its label.
    pub fn effort(self) -> Effort {
        let d = self.data();
        Effort {
            name: self.label().to_string(),
            blows_per_layer: d.blows_per_layer,
            layers: d.layers,
            rammer_mass_kg: d.rammer_mass_kg,
            drop_m: d.drop_m,
            mold_volume_m3: d.mold_volume_m3,
        }
    }
}

/// Wet and dry density of one compacted lab specimen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SpecimenResult {
    /// Bulk (wet) density, kg/m³.
    pub wet_density: Density,
    /// Dry density, kg/m³.
    pub dry_density: Density,
}

/// Reduces a specimen: ρ = (m_mold+soil − m_mold) / V_mold; ρd = ρ / (1 + w/100).
pub fn reduce_specimen(
    mass_mold_and_soil_g: f64,
    mass_mold_g: f64,
    mold_volume_cm3: f64,
    water_content: WaterContent,
) -> Result<SpecimenResult, ReductionError> {
    positive(
        "mass_mold_and_soil_g",
        "mass of mold and soil",
        mass_mold_and_soil_g,
    )?;
    positive("mass_mold_g", "mold mass", mass_mold_g)?;
    positive("mold_volume_cm3", "mold volume", mold_volume_cm3)?;
    if mass_mold_and_soil_g <= mass_mold_g {
        return Err(ReductionError::Inconsistent {
            field: "mass_mold_and_soil_g",
            reason: format!(
                "mass of mold and soil {} g is not more than the mold alone {} g",
                num(mass_mold_and_soil_g),
                num(mass_mold_g)
            ),
        });
    }
    let wet = (mass_mold_and_soil_g - mass_mold_g) / mold_volume_cm3 * 1000.0;
    let wet_density = Density::named("wet density", wet)
        .map_err(|e| ReductionError::quantity("mass_mold_and_soil_g", e))?;
    let dry_density = Density::named("dry density", wet / (1.0 + water_content.fraction()))
        .map_err(|e| ReductionError::quantity("water_content_pct", e))?;
    Ok(SpecimenResult {
        wet_density,
        dry_density,
    })
}
