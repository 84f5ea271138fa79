//! Typed quantities that parse rather than validate: a value of these types is
//! always finite and inside a plausible range, so downstream math need not check.

use serde::{Deserialize, Serialize};

/// Standard gravity used for unit weight, m/s² (CGPM 1901 conventional value).
pub const STANDARD_GRAVITY_M_S2: f64 = 9.80665;
/// Kilograms per cubic metre in one pound per cubic foot (exact from the international pound and foot).
pub const KG_M3_PER_LB_FT3: f64 = 16.018463;
/// Metres in one international foot (exact by definition).
pub const METRES_PER_FOOT: f64 = 0.3048;

/// Lowest density accepted, kg/m³ (common practice: nothing compacted is lighter).
pub const DENSITY_MIN_KG_M3: f64 = 500.0;
/// Highest density accepted, kg/m³ (common practice: heavier than any soil or rockfill).
pub const DENSITY_MAX_KG_M3: f64 = 3000.0;
/// Lowest specific gravity of solids accepted (common practice).
pub const SPECIFIC_GRAVITY_MIN: f64 = 2.0;
/// Highest specific gravity of solids accepted (common practice).
pub const SPECIFIC_GRAVITY_MAX: f64 = 3.2;
/// Largest chainage accepted, metres (10,000 km: any longer value is a typing slip).
pub const CHAINAGE_MAX_M: f64 = 10_000_000.0;
/// Largest offset from the centreline accepted either side, metres.
pub const OFFSET_MAX_M: f64 = 1000.0;

/// A quantity that could not be built, naming the quantity, the value and the bound it broke.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{quantity} {reason}")]
pub struct QuantityError {
    /// Plain-words name of the quantity, e.g. "dry density".
    pub quantity: &'static str,
    /// The refused value (NaN when the text could not be read as a number).
    pub value: f64,
    /// Why it was refused, e.g. "4200 kg/m³ is outside 500–3000 kg/m³".
    pub reason: String,
}

/// Formats a number for a message without trailing zeros ("4200", "12.5").
pub(crate) fn num(v: f64) -> String {
    if v.is_finite() && (v - v.round()).abs() < 1e-9 && v.abs() < 1e15 {
        format!("{}", v.round() as i64)
    } else if v.is_finite() {
        let s = format!("{v:.4}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        format!("{v}")
    }
}

/// Checks a value is finite and within `[min, max]`, building the error otherwise.
fn bounded(
    quantity: &'static str,
    value: f64,
    min: f64,
    max: f64,
    unit: &str,
) -> Result<f64, QuantityError> {
    let sep = if unit.is_empty() || unit == "%" {
        ""
    } else {
        " "
    };
    if !value.is_finite() {
        return Err(QuantityError {
            quantity,
            value,
            reason: format!(
                "must be a finite number (got {value}); allowed {min}–{max}{sep}{unit}"
            ),
        });
    }
    if value < min || value > max {
        return Err(QuantityError {
            quantity,
            value,
            reason: format!(
                "{}{sep}{unit} is outside {}–{}{sep}{unit}",
                num(value),
                num(min),
                num(max)
            ),
        });
    }
    Ok(value)
}

macro_rules! plain_f64_serde {
    ($t:ident) => {
        impl TryFrom<f64> for $t {
            type Error = QuantityError;
            fn try_from(v: f64) -> Result<Self, Self::Error> {
                $t::new(v)
            }
        }
        impl From<$t> for f64 {
            fn from(q: $t) -> f64 {
                q.0
            }
        }
    };
}

/// Bulk density in kg/m³ (wet or dry), always within 500–3000 kg/m³.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct Density(f64);

impl Density {
    /// Builds a density from kg/m³, refusing NaN, infinities and values outside 500–3000.
    pub fn new(kg_m3: f64) -> Result<Self, QuantityError> {
        Self::named("density", kg_m3)
    }
    /// Builds a density whose error names the given quantity, e.g. "dry density".
    pub fn named(quantity: &'static str, kg_m3: f64) -> Result<Self, QuantityError> {
        bounded(
            quantity,
            kg_m3,
            DENSITY_MIN_KG_M3,
            DENSITY_MAX_KG_M3,
            "kg/m³",
        )
        .map(Self)
    }
    /// Builds a density from Mg/m³ (= g/cm³).
    pub fn from_mg_m3(v: f64) -> Result<Self, QuantityError> {
        Self::new(v * 1000.0)
    }
    /// Builds a density from lb/ft³ (1 lb/ft³ = 16.018463 kg/m³).
    pub fn from_lb_ft3(v: f64) -> Result<Self, QuantityError> {
        if !v.is_finite() {
            return Err(QuantityError {
                quantity: "density",
                value: v,
                reason: format!("must be a finite number (got {v})"),
            });
        }
        Self::new(v * KG_M3_PER_LB_FT3)
    }
    /// The density in kg/m³.
    pub fn kg_m3(self) -> f64 {
        self.0
    }
    /// The density in Mg/m³ (= g/cm³).
    pub fn mg_m3(self) -> f64 {
        self.0 / 1000.0
    }
    /// The unit weight in kN/m³ (ρ × g / 1000, g = 9.80665 m/s²).
    pub fn kn_m3(self) -> f64 {
        self.0 * STANDARD_GRAVITY_M_S2 / 1000.0
    }
    /// The density in lb/ft³.
    pub fn lb_ft3(self) -> f64 {
        self.0 / KG_M3_PER_LB_FT3
    }
}
plain_f64_serde!(Density);

/// Water content in percent of dry mass, always within 0–100 %.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct WaterContent(f64);

impl WaterContent {
    /// Builds a water content from percent, refusing NaN, infinities and values outside 0–100 %.
    pub fn new(pct: f64) -> Result<Self, QuantityError> {
        Self::named("water content", pct)
    }
    /// Builds a water content whose error names the given quantity.
    pub fn named(quantity: &'static str, pct: f64) -> Result<Self, QuantityError> {
        bounded(quantity, pct, 0.0, 100.0, "%").map(Self)
    }
    /// The water content in percent.
    pub fn pct(self) -> f64 {
        self.0
    }
    /// The water content as a fraction (percent / 100).
    pub fn fraction(self) -> f64 {
        self.0 / 100.0
    }
}
plain_f64_serde!(WaterContent);

/// Specific gravity of soil solids (ASTM D854), always within 2.0–3.2.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct SpecificGravity(f64);

impl SpecificGravity {
    /// Builds a specific gravity, refusing NaN, infinities and values outside 2.0–3.2.
    pub fn new(v: f64) -> Result<Self, QuantityError> {
        Self::named("specific gravity", v)
    }
    /// Builds a specific gravity whose error names the given quantity.
    pub fn named(quantity: &'static str, v: f64) -> Result<Self, QuantityError> {
        bounded(quantity, v, SPECIFIC_GRAVITY_MIN, SPECIFIC_GRAVITY_MAX, "").map(Self)
    }
    /// The dimensionless value.
    pub fn value(self) -> f64 {
        self.0
    }
}
plain_f64_serde!(SpecificGravity);

/// How a chainage is written: kilometres+metres or 100-ft stations.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ChainageStyle {
    /// "12+345.600": kilometres, plus, metres to the millimetre.
    KmMetre,
    /// "123+45.67": hundreds of feet, plus, feet to the hundredth.
    FeetStation,
}

impl ChainageStyle {
    /// Stable code used in JSON and the database.
    pub fn code(self) -> &'static str {
        match self {
            Self::KmMetre => "km_metre",
            Self::FeetStation => "feet_station",
        }
    }
    /// Reads a code written by [`ChainageStyle::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        match s.trim() {
            "km_metre" => Some(Self::KmMetre),
            "feet_station" => Some(Self::FeetStation),
            _ => None,
        }
    }
}

/// Distance along the alignment in metres, finite and ≥ 0.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct Chainage(f64);

/// Reads an unsigned decimal made of digits with at most one point ("345.600", "12").
fn unsigned_decimal(s: &str) -> Option<f64> {
    let mut dots = 0;
    let mut digits = 0;
    for c in s.chars() {
        match c {
            '0'..='9' => digits += 1,
            '.' => dots += 1,
            _ => return None,
        }
    }
    if digits == 0 || dots > 1 {
        return None;
    }
    s.parse::<f64>().ok()
}

impl Chainage {
    /// Builds a chainage from metres, refusing NaN, infinities, negatives and more than 10,000 km.
    pub fn new(m: f64) -> Result<Self, QuantityError> {
        bounded("chainage", m, 0.0, CHAINAGE_MAX_M, "m").map(Self)
    }
    /// The chainage in metres.
    pub fn metres(self) -> f64 {
        self.0
    }
    /// The chainage in international feet.
    pub fn feet(self) -> f64 {
        self.0 / METRES_PER_FOOT
    }

    /// Reads "12+345.600" (km+m) or "123+45.67" (100-ft stations, stored as metres).
    ///
    /// A plain number without "+" is read in the style's own unit: metres for
    /// km+m, feet for stations; a trailing " m" or " ft" overrides that
    /// ("12345.6 m"). Anything else is refused with the reason.
    pub fn parse(s: &str, style: ChainageStyle) -> Result<Self, QuantityError> {
        let refuse = |reason: String| QuantityError {
            quantity: "chainage",
            value: f64::NAN,
            reason,
        };
        let text = s.trim();
        if text.is_empty() {
            return Err(refuse("is empty".to_string()));
        }
        if let Some((left, right)) = text.split_once('+') {
            let (big, small_unit, digits) = match style {
                ChainageStyle::KmMetre => (1000.0, "metres", 3),
                ChainageStyle::FeetStation => (100.0, "feet", 2),
            };
            let head = left.trim();
            let tail = right.trim();
            if head.is_empty() || !head.chars().all(|c| c.is_ascii_digit()) {
                return Err(refuse(format!(
                    "\"{text}\" is not readable: expected whole {} before \"+\"",
                    match style {
                        ChainageStyle::KmMetre => "kilometres",
                        ChainageStyle::FeetStation => "stations",
                    }
                )));
            }
            let whole_len = tail.split('.').next().map(str::len).unwrap_or(0);
            let small = unsigned_decimal(tail).filter(|_| whole_len == digits);
            let Some(small) = small else {
                return Err(refuse(format!(
                    "\"{text}\" is not readable: expected {digits} digits of {small_unit} after \"+\" (e.g. {})",
                    match style {
                        ChainageStyle::KmMetre => "12+345.600",
                        ChainageStyle::FeetStation => "123+45.67",
                    }
                )));
            };
            if small >= big {
                return Err(refuse(format!(
                    "\"{text}\" has {} {small_unit} after \"+\"; it must be less than {}",
                    num(small),
                    num(big)
                )));
            }
            let head: f64 = head
                .parse()
                .map_err(|_| refuse(format!("\"{text}\" is not readable")))?;
            let metres = match style {
                ChainageStyle::KmMetre => head * big + small,
                ChainageStyle::FeetStation => (head * big + small) * METRES_PER_FOOT,
            };
            return Self::new(metres);
        }
        let (number, unit_metres) = if let Some(n) = text.strip_suffix("ft") {
            (n.trim(), false)
        } else if let Some(n) = text.strip_suffix('m') {
            (n.trim(), true)
        } else {
            (text, style == ChainageStyle::KmMetre)
        };
        let Some(v) = unsigned_decimal(number) else {
            return Err(refuse(format!(
                "\"{text}\" is not readable: write km+m like 12+345.600, stations like 123+45.67, or plain metres like 12345.6"
            )));
        };
        Self::new(if unit_metres { v } else { v * METRES_PER_FOOT })
    }

    /// Writes the chainage: km+m with 3 decimals ("12+345.600") or stations with 2 ("123+45.67").
    pub fn format(self, style: ChainageStyle) -> String {
        match style {
            ChainageStyle::KmMetre => {
                let mm = (self.0 * 1000.0).round() as u64;
                let km = mm / 1_000_000;
                let rest = mm % 1_000_000;
                format!("{km}+{:03}.{:03}", rest / 1000, rest % 1000)
            }
            ChainageStyle::FeetStation => {
                let hundredths = (self.0 / METRES_PER_FOOT * 100.0).round() as u64;
                let station = hundredths / 10_000;
                let rest = hundredths % 10_000;
                format!("{station}+{:02}.{:02}", rest / 100, rest % 100)
            }
        }
    }
}
plain_f64_serde!(Chainage);

/// Distance from the centreline in metres: negative left, positive right, |x| ≤ 1000.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct Offset(f64);

impl Offset {
    /// Builds an offset from metres, refusing NaN, infinities and more than 1000 m either side.
    pub fn new(m: f64) -> Result<Self, QuantityError> {
        bounded("offset", m, -OFFSET_MAX_M, OFFSET_MAX_M, "m").map(Self)
    }
    /// The offset in metres (negative = left).
    pub fn metres(self) -> f64 {
        self.0
    }
}
plain_f64_serde!(Offset);

/// A percentage within 0–100 (e.g. a coarse fraction or a percent within limits).
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(try_from = "f64", into = "f64")]
pub struct Percent(f64);

impl Percent {
    /// Builds a percentage, refusing NaN, infinities and values outside 0–100.
    pub fn new(v: f64) -> Result<Self, QuantityError> {
        Self::named("percentage", v)
    }
    /// Builds a percentage whose error names the given quantity.
    pub fn named(quantity: &'static str, v: f64) -> Result<Self, QuantityError> {
        bounded(quantity, v, 0.0, 100.0, "%").map(Self)
    }
    /// The value in percent.
    pub fn value(self) -> f64 {
        self.0
    }
}
plain_f64_serde!(Percent);

/// Which units a project shows: SI (kg/m³, metres) or US customary (lb/ft³, feet).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum UnitSystem {
    /// kg/m³ or Mg/m³, chainage in km+m.
    Si,
    /// lb/ft³, chainage in 100-ft stations.
    Us,
}

impl UnitSystem {
    /// Stable code used in JSON and the database ("si", "us").
    pub fn code(self) -> &'static str {
        match self {
            Self::Si => "si",
            Self::Us => "us",
        }
    }
    /// Reads a code written by [`UnitSystem::code`].
    pub fn parse_code(s: &str) -> Option<Self> {
        match s.trim() {
            "si" => Some(Self::Si),
            "us" => Some(Self::Us),
            _ => None,
        }
    }
    /// The chainage style that goes with this unit system.
    pub fn chainage_style(self) -> ChainageStyle {
        match self {
            Self::Si => ChainageStyle::KmMetre,
            Self::Us => ChainageStyle::FeetStation,
        }
    }
}
