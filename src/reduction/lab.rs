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
pub enum EffortPreset {
    /// ASTM D698 standard effort, 4-in mold.
    #[serde(rename = "astm_d698_4in")]
    AstmD698Mold4in,
    /// ASTM D698 standard effort, 6-in mold.
    #[serde(rename = "astm_d698_6in")]
    AstmD698Mold6in,
    /// ASTM D1557 modified effort, 4-in mold.
    #[serde(rename = "astm_d1557_4in")]
    AstmD1557Mold4in,
    /// ASTM D1557 modified effort, 6-in mold.
    #[serde(rename = "astm_d1557_6in")]
    AstmD1557Mold6in,
    /// AASHTO T 99 standard effort, 4-in mold.
    #[serde(rename = "aashto_t99")]
    AashtoT99,
    /// AASHTO T 180 modified effort, 4-in mold.
    #[serde(rename = "aashto_t180")]
    AashtoT180,
    /// BS 1377-4 light compaction, 2.5 kg rammer, 1 L mold.
    #[serde(rename = "bs1377_light")]
    Bs1377Light,
    /// BS 1377-4 heavy compaction, 4.5 kg rammer, 1 L mold.
    #[serde(rename = "bs1377_heavy")]
    Bs1377Heavy,
    /// IS 2720 part 7 light compaction, 1000 ml mold.
    #[serde(rename = "is2720_light")]
    Is2720Light,
    /// IS 2720 part 8 heavy compaction, 1000 ml mold.
    #[serde(rename = "is2720_heavy")]
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

    /// True for the modified/heavy family: nominal energy 2,700 kN·m/m³ (56,000 ft·lbf/ft³,
    /// ASTM D1557) against 600 kN·m/m³ (12,400 ft·lbf/ft³, ASTM D698) for standard effort.
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
        match self {
            Self::AstmD698Mold4in => ASTM_MOLD_4IN,
            Self::AstmD698Mold6in => ASTM_MOLD_6IN,
            Self::AstmD1557Mold4in => modified_rammer(ASTM_MOLD_4IN),
            Self::AstmD1557Mold6in => modified_rammer(ASTM_MOLD_6IN),
            Self::AashtoT99 => AASHTO_T99,
            Self::AashtoT180 => AASHTO_T180,
            Self::Bs1377Light => BS_MOLD,
            // From memory: 4.5 kg rammer, 450 mm drop, 5 layers × 27 blows.
            Self::Bs1377Heavy => PresetData {
                rammer_mass_kg: 4.5,
                drop_m: 0.450,
                layers: 5,
                ..BS_MOLD
            },
            Self::Is2720Light => IS_MOLD,
            // From memory: IS 2720 (Part 8) cl. 3.2 and 5.2: 4.9 kg rammer, 450 mm drop, 5 layers × 25 blows.
            Self::Is2720Heavy => PresetData {
                rammer_mass_kg: 4.9,
                drop_m: 0.450,
                layers: 5,
                ..IS_MOLD
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

// From memory: ASTM 4-in mold 4.000 in × 4.584 in = 1/30 ft³ (944 cm³), standard rammer
// 5.5 lb dropped 12 in, 3 layers × 25 blows.
const ASTM_MOLD_4IN: PresetData = PresetData {
    mold_diameter_mm: 4.0 * 25.4,
    mold_height_mm: 4.584 * 25.4,
    mold_volume_m3: M3_PER_FT3 / 30.0,
    rammer_mass_kg: 5.5 * KG_PER_LB,
    drop_m: 12.0 * M_PER_IN,
    layers: 3,
    blows_per_layer: 25,
};

// From memory: 6-in mold 6.000 in × 4.584 in = 1/13.33 ft³ (2124 cm³), 56 blows per layer.
const ASTM_MOLD_6IN: PresetData = PresetData {
    mold_diameter_mm: 6.0 * 25.4,
    mold_height_mm: 4.584 * 25.4,
    mold_volume_m3: M3_PER_FT3 * 0.075,
    blows_per_layer: 56,
    ..ASTM_MOLD_4IN
};

/// From memory: modified rammer 10 lb dropped 18 in, 5 layers.
const fn modified_rammer(d: PresetData) -> PresetData {
    PresetData {
        rammer_mass_kg: 10.0 * KG_PER_LB,
        drop_m: 18.0 * M_PER_IN,
        layers: 5,
        ..d
    }
}

// From memory: AASHTO T 99 method A, 2.5 kg rammer, 305 mm drop, 944 cm³ mold.
const AASHTO_T99: PresetData = PresetData {
    mold_diameter_mm: 101.6,
    mold_height_mm: 116.4,
    mold_volume_m3: 0.000_944,
    rammer_mass_kg: 2.495,
    drop_m: 0.305,
    layers: 3,
    blows_per_layer: 25,
};

// From memory: AASHTO T 180 method A, 4.54 kg rammer, 457 mm drop, 5 layers.
const AASHTO_T180: PresetData = PresetData {
    rammer_mass_kg: 4.536,
    drop_m: 0.457,
    layers: 5,
    ..AASHTO_T99
};

// From memory: BS 1377-4 1 L mold 105 mm × 115.5 mm, 2.5 kg rammer, 300 mm drop, 27 blows per layer.
const BS_MOLD: PresetData = PresetData {
    mold_diameter_mm: 105.0,
    mold_height_mm: 115.5,
    mold_volume_m3: 0.001,
    rammer_mass_kg: 2.5,
    drop_m: 0.300,
    layers: 3,
    blows_per_layer: 27,
};

// From memory: IS 2720 1000 ml mold 100 mm × 127.3 mm, 2.6 kg rammer, 310 mm drop, 25 blows per layer.
const IS_MOLD: PresetData = PresetData {
    mold_diameter_mm: 100.0,
    mold_height_mm: 127.3,
    mold_volume_m3: 0.001,
    rammer_mass_kg: 2.6,
    drop_m: 0.310,
    layers: 3,
    blows_per_layer: 25,
};

/// The two families of compaction effort a clause can name. A lot's reference curve must be
/// of its clause's family: judging a modified-effort clause on a standard curve reads RC
/// several percent high (common practice).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EffortFamily {
    /// Standard/light effort: ASTM D698, AASHTO T 99, BS 1377-4 2.5 kg, IS 2720-7 (≈ 600 kN·m/m³).
    Standard,
    /// Modified/heavy effort: ASTM D1557, AASHTO T 180, BS 1377-4 4.5 kg, IS 2720-8 (≈ 2,700 kN·m/m³).
    Modified,
}

/// Nominal energy of the standard family, kJ/m³ (ASTM D698: 12,400 ft·lbf/ft³ ≈ 600 kN·m/m³).
pub const STANDARD_NOMINAL_KJ_M3: f64 = 600.0;
/// Nominal energy of the modified family, kJ/m³ (ASTM D1557: 56,000 ft·lbf/ft³ ≈ 2,700 kN·m/m³).
pub const MODIFIED_NOMINAL_KJ_M3: f64 = 2700.0;

impl EffortFamily {
    /// Both families.
    pub const ALL: [EffortFamily; 2] = [Self::Standard, Self::Modified];

    /// Stable code: "standard" or "modified".
    pub fn code(self) -> &'static str {
        match self {
            Self::Standard => "standard",
            Self::Modified => "modified",
        }
    }
    /// Words for refusals and reports.
    pub fn label(self) -> &'static str {
        match self {
            Self::Standard => "standard effort (about 600 kN·m/m³)",
            Self::Modified => "modified effort (about 2,700 kN·m/m³)",
        }
    }
    /// The family of a preset.
    pub fn of_preset(p: EffortPreset) -> Self {
        if p.is_heavy() {
            Self::Modified
        } else {
            Self::Standard
        }
    }
    /// The family a project's own effort belongs to: the nominal energy it is nearer to on a
    /// logarithmic scale (the boundary is the geometric mean of 600 and 2,700, about 1,273 kJ/m³).
    pub fn of_energy(energy_kj_m3: f64) -> Self {
        let boundary = (STANDARD_NOMINAL_KJ_M3 * MODIFIED_NOMINAL_KJ_M3).sqrt();
        if energy_kj_m3 >= boundary {
            Self::Modified
        } else {
            Self::Standard
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::reduction::curve::{CurvePoint, fit_curve};
    use crate::reduction::quantities::SpecificGravity;

    fn within_pct(value: f64, target: f64, pct: f64) -> bool {
        ((value - target) / target).abs() * 100.0 <= pct
    }

    #[test]
    fn effort_families_follow_the_nominal_energies() {
        // ASTM D698 ≈ 600 kN·m/m³ and ASTM D1557 ≈ 2,700 kN·m/m³ (the standards' stated energies).
        assert_eq!(
            EffortFamily::of_preset(EffortPreset::AstmD698Mold4in),
            EffortFamily::Standard
        );
        assert_eq!(
            EffortFamily::of_preset(EffortPreset::Bs1377Heavy),
            EffortFamily::Modified
        );
        assert_eq!(EffortFamily::of_energy(593.0), EffortFamily::Standard);
        assert_eq!(EffortFamily::of_energy(2693.0), EffortFamily::Modified);
        // Boundary √(600 × 2700) = 1272.8 kJ/m³ (geometric mean, worked by hand).
        assert_eq!(EffortFamily::of_energy(1272.0), EffortFamily::Standard);
        assert_eq!(EffortFamily::of_energy(1273.0), EffortFamily::Modified);
    }

    #[test]
    fn modified_4in_preset_matches_the_standard() {
        // ASTM D1557: 10 lb rammer, 18 in drop, 5 layers × 25 blows, 4 in mold of 1/30 ft³ (4.584 in high).
        let d = EffortPreset::AstmD1557Mold4in.data();
        assert!(
            (d.rammer_mass_kg - 4.535_923_7).abs() < 1e-9,
            "10 lb (ASTM D1557)"
        );
        assert!((d.drop_m - 0.4572).abs() < 1e-12, "18 in (ASTM D1557)");
        assert_eq!(
            (d.layers, d.blows_per_layer),
            (5, 25),
            "5 × 25 (ASTM D1557)"
        );
        assert!(
            (d.mold_diameter_mm - 101.6).abs() < 1e-9,
            "4 in mold (ASTM D1557)"
        );
        assert!(
            (d.mold_height_mm - 116.4336).abs() < 1e-9,
            "4.584 in (ASTM D1557)"
        );
        // π/4 × 4² × 4.584 in³ = 57.60 in³ = 1/30 ft³ (ASTM D1557) within 0.1 %.
        let dims_m3 =
            std::f64::consts::PI / 4.0 * (d.mold_diameter_mm / 1000.0).powi(2) * d.mold_height_mm
                / 1000.0;
        assert!(within_pct(dims_m3, d.mold_volume_m3, 0.1));
        assert!(within_pct(d.mold_volume_m3, 0.028_316_846_592 / 30.0, 1e-9));
    }

    #[test]
    fn heavy_is2720_preset_matches_the_standard() {
        // IS 2720 (Part 8):1983, "Determination of water content–dry density relation using
        // heavy compaction": clause 3.1 the 1,000 ml mould, 100 mm internal diameter × 127.3 mm;
        // clause 3.2 the rammer, 4.9 kg falling 450 mm; clause 5.2 five layers of 25 blows.
        // (Clause numbers from memory: check the edition in force.)
        let d = EffortPreset::Is2720Heavy.data();
        assert_eq!(
            (d.mold_diameter_mm, d.mold_height_mm),
            (100.0, 127.3),
            "IS 2720 (Part 8), cl. 3.1"
        );
        assert_eq!(
            (d.rammer_mass_kg, d.drop_m),
            (4.9, 0.450),
            "IS 2720 (Part 8), cl. 3.2"
        );
        assert_eq!(
            (d.layers, d.blows_per_layer),
            (5, 25),
            "IS 2720 (Part 8), cl. 5.2"
        );
        let dims_ml = std::f64::consts::PI / 4.0 * 10.0f64.powi(2) * 12.73;
        assert!(
            within_pct(dims_ml, 1000.0, 0.1),
            "100 mm × 127.3 mm ≈ 1,000 ml (IS 2720 (Part 8), cl. 3.1): {dims_ml}"
        );
        assert!(within_pct(d.mold_volume_m3, 0.001, 1e-9));
    }

    #[test]
    fn standard_and_modified_energies_match_the_published_figures() {
        // ASTM D698: 12,400 ft·lbf/ft³ (600 kN·m/m³); ASTM D1557: 56,000 ft·lbf/ft³ (2,700 kN·m/m³).
        for p in [EffortPreset::AstmD698Mold4in, EffortPreset::AstmD698Mold6in] {
            let e = p.effort();
            assert!(
                within_pct(e.energy_kj_m3(), 600.0, 3.0),
                "{} (ASTM D698): {}",
                p.code(),
                e.energy_kj_m3()
            );
            assert!(
                within_pct(e.energy_ft_lbf_ft3(), 12_400.0, 3.0),
                "{} (ASTM D698): {}",
                p.code(),
                e.energy_ft_lbf_ft3()
            );
        }
        for p in [
            EffortPreset::AstmD1557Mold4in,
            EffortPreset::AstmD1557Mold6in,
        ] {
            let e = p.effort();
            assert!(
                within_pct(e.energy_kj_m3(), 2700.0, 3.0),
                "{} (ASTM D1557): {}",
                p.code(),
                e.energy_kj_m3()
            );
            assert!(
                within_pct(e.energy_ft_lbf_ft3(), 56_000.0, 3.0),
                "{} (ASTM D1557): {}",
                p.code(),
                e.energy_ft_lbf_ft3()
            );
        }
        // The other families land on the same two figures (from memory: about 596 and 2,680 kJ/m³).
        for p in EffortPreset::ALL {
            let target = if p.is_heavy() { 2700.0 } else { 600.0 };
            assert!(
                within_pct(p.effort().energy_kj_m3(), target, 3.0),
                "{}: {}",
                p.code(),
                p.effort().energy_kj_m3()
            );
        }
        // Unit check: 1 ft·lbf/ft³ = 47.880 J/m³ (1.3558179 J over 0.0283168 m³).
        assert!((J_M3_PER_FT_LBF_FT3 - 47.880_259).abs() < 1e-5);
    }

    /// Nominal compactive energies as the standards state them: ASTM D698 §1.1 "12,400 ft-lbf/ft³
    /// (600 kN-m/m³)" and ASTM D1557 §1.1 "56,000 ft-lbf/ft³ (2,700 kN-m/m³)".
    const D698_FT_LBF_FT3: f64 = 12_400.0;
    const D1557_FT_LBF_FT3: f64 = 56_000.0;
    const D698_KN_M3: f64 = 600.0;
    const D1557_KN_M3: f64 = 2_700.0;

    #[test]
    fn modified_energy_matches_d1557_over_d698() {
        // Each preset's energy from its rammer, drop, layers, blows and mold against the
        // nominal figure of ASTM D698 / D1557, which round it to three figures: the 6-in D698
        // mold of 0.075 ft³ gives 5.5 lbf × 1 ft × 3 × 56 / 0.075 = 12,320 ft·lbf/ft³, 0.65 % under
        // 12,400; hence 1 %.
        for (preset, nominal) in [
            (EffortPreset::AstmD698Mold4in, D698_FT_LBF_FT3),
            (EffortPreset::AstmD698Mold6in, D698_FT_LBF_FT3),
            (EffortPreset::AstmD1557Mold4in, D1557_FT_LBF_FT3),
            (EffortPreset::AstmD1557Mold6in, D1557_FT_LBF_FT3),
        ] {
            let e = preset.effort().energy_ft_lbf_ft3();
            assert!(within_pct(e, nominal, 1.0), "{}: {e}", preset.code());
        }
        // The ratio of the two ASTM energies against the ratio of the nominal energies,
        // 56,000 / 12,400 = 4.516 (ft·lbf/ft³); the nominal SI figures give 2,700 / 600 = 4.5.
        // The ASTM pairs share mold and units, so they must agree within 1 % (the nominal
        // figures' own rounding); the SI-drawn families (AASHTO T 99/T 180, BS 1377-4,
        // IS 2720-7/8) with their metric rammers and drops within 1.5 % of 2,700 / 600.
        let astm_ratio = D1557_FT_LBF_FT3 / D698_FT_LBF_FT3;
        let si_ratio = D1557_KN_M3 / D698_KN_M3;
        let pairs = [
            (
                EffortPreset::AstmD698Mold4in,
                EffortPreset::AstmD1557Mold4in,
                astm_ratio,
                1.0,
            ),
            (
                EffortPreset::AstmD698Mold6in,
                EffortPreset::AstmD1557Mold6in,
                astm_ratio,
                1.0,
            ),
            (
                EffortPreset::AashtoT99,
                EffortPreset::AashtoT180,
                si_ratio,
                1.5,
            ),
            (
                EffortPreset::Bs1377Light,
                EffortPreset::Bs1377Heavy,
                si_ratio,
                1.5,
            ),
            (
                EffortPreset::Is2720Light,
                EffortPreset::Is2720Heavy,
                si_ratio,
                1.5,
            ),
        ];
        for (light, heavy, nominal_ratio, tolerance_pct) in pairs {
            let ratio = heavy.effort().energy_kj_m3() / light.effort().energy_kj_m3();
            assert!(
                within_pct(ratio, nominal_ratio, tolerance_pct),
                "{} / {} = {ratio}, nominal {nominal_ratio}",
                heavy.code(),
                light.code()
            );
            assert!(heavy.is_heavy() && !light.is_heavy());
        }
    }

    #[test]
    fn preset_codes_are_unique_and_round_trip() {
        let mut codes: Vec<&str> = EffortPreset::ALL.iter().map(|p| p.code()).collect();
        for p in EffortPreset::ALL {
            assert_eq!(EffortPreset::parse_code(p.code()), Some(p));
            assert_eq!(
                serde_json::to_string(&p).unwrap(),
                format!("\"{}\"", p.code())
            );
            assert_eq!(p.effort().name, p.label());
        }
        codes.sort_unstable();
        codes.dedup();
        assert_eq!(codes.len(), 10);
        assert_eq!(
            EffortPreset::AstmD1557Mold4in.label(),
            "ASTM D1557 modified, 4-in mold"
        );
        assert_eq!(EffortPreset::parse_code("proctor"), None);
        assert_eq!(EffortPreset::ALL.iter().filter(|p| p.is_heavy()).count(), 5);
    }

    #[test]
    fn custom_effort_is_checked_field_by_field() {
        let e = Effort::custom("Site trial", 40, 4, 4.5, 0.45, 0.001).unwrap();
        // E = 40 × 4 × 4.5 × 9.80665 × 0.45 / 0.001 / 1000 = 3177.35 kJ/m³ (the standards' definition).
        assert!((e.energy_kj_m3() - 3177.3546).abs() < 1e-3);
        let cases = [
            (Effort::custom("", 25, 3, 2.5, 0.3, 0.001), "name"),
            (
                Effort::custom("x", 0, 3, 2.5, 0.3, 0.001),
                "blows_per_layer",
            ),
            (Effort::custom("x", 25, 0, 2.5, 0.3, 0.001), "layers"),
            (
                Effort::custom("x", 25, 3, -2.5, 0.3, 0.001),
                "rammer_mass_kg",
            ),
            (Effort::custom("x", 25, 3, 2.5, f64::NAN, 0.001), "drop_m"),
            (Effort::custom("x", 25, 3, 2.5, 0.3, 0.0), "mold_volume_m3"),
            (Effort::custom("x", 25, 3, 2.5, 0.3, 5.0), "mold_volume_m3"),
        ];
        for (result, field) in cases {
            assert_eq!(result.unwrap_err().field(), field);
        }
    }

    #[test]
    fn specimen_reduces_to_wet_and_dry_density() {
        // Worked by hand from ρ = (m₂ − m₁)/V and ρd = ρ/(1 + w): 1900 g / 944 cm³ = 2012.71 kg/m³; / 1.12 = 1797.06.
        let w = WaterContent::new(12.0).unwrap();
        let s = reduce_specimen(6000.0, 4100.0, 944.0, w).unwrap();
        assert!((s.wet_density.kg_m3() - 2012.71186).abs() < 1e-4);
        assert!((s.dry_density.kg_m3() - 1797.06416).abs() < 1e-4);
        let e = reduce_specimen(4000.0, 4100.0, 944.0, w).unwrap_err();
        assert_eq!(e.field(), "mass_mold_and_soil_g");
        assert!(
            e.to_string()
                .contains("not more than the mold alone 4100 g")
        );
        assert_eq!(
            reduce_specimen(6000.0, 4100.0, 0.0, w).unwrap_err().field(),
            "mold_volume_cm3"
        );
        assert_eq!(
            reduce_specimen(9000.0, 4100.0, 944.0, w)
                .unwrap_err()
                .field(),
            "mass_mold_and_soil_g"
        );
    }

    #[test]
    fn heavier_effort_raises_mdd_and_lowers_omc() {
        // Common practice: more effort packs denser at less water. Two invented datasets of one soil.
        let pts = |v: &[(f64, f64)]| -> Vec<CurvePoint> {
            v.iter()
                .map(|&(w, d)| CurvePoint {
                    water_content_pct: w,
                    dry_density_kg_m3: d,
                })
                .collect()
        };
        let gs = Some(SpecificGravity::new(2.70).unwrap());
        let standard = pts(&[
            (10.0, 1720.0),
            (12.0, 1765.0),
            (14.0, 1790.0),
            (16.0, 1772.0),
            (18.0, 1730.0),
        ]);
        let modified = pts(&[
            (7.0, 1880.0),
            (9.0, 1935.0),
            (11.0, 1958.0),
            (13.0, 1942.0),
            (15.0, 1890.0),
        ]);
        let s = fit_curve(&standard, gs).unwrap();
        let m = fit_curve(&modified, gs).unwrap();
        assert!(
            m.max_dry_density > s.max_dry_density,
            "{:?} vs {:?}",
            m.max_dry_density,
            s.max_dry_density
        );
        assert!(m.optimum_water_content < s.optimum_water_content);
        assert!(
            s.warnings.is_empty() && m.warnings.is_empty(),
            "{:?} {:?}",
            s.warnings,
            m.warnings
        );
    }
}
