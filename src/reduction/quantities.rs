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
    (min, max): (f64, f64),
    unit: &str,
    bound_decimals: usize,
) -> Result<f64, QuantityError> {
    let sep = if unit.is_empty() { "" } else { " " };
    let bound = |b: f64| {
        if bound_decimals == 0 {
            num(b)
        } else {
            format!("{b:.bound_decimals$}")
        }
    };
    if !value.is_finite() {
        return Err(QuantityError {
            quantity,
            value,
            reason: format!(
                "must be a finite number (got {value}); allowed {}–{}{sep}{unit}",
                bound(min),
                bound(max)
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
                bound(min),
                bound(max)
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
            (DENSITY_MIN_KG_M3, DENSITY_MAX_KG_M3),
            "kg/m³",
            0,
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
        bounded(quantity, pct, (0.0, 100.0), "%", 0).map(Self)
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
        bounded(
            quantity,
            v,
            (SPECIFIC_GRAVITY_MIN, SPECIFIC_GRAVITY_MAX),
            "",
            1,
        )
        .map(Self)
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
    /// Both styles.
    pub const ALL: [ChainageStyle; 2] = [Self::KmMetre, Self::FeetStation];

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
        bounded("chainage", m, (0.0, CHAINAGE_MAX_M), "m", 0).map(Self)
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
        bounded("offset", m, (-OFFSET_MAX_M, OFFSET_MAX_M), "m", 0).map(Self)
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
        bounded(quantity, v, (0.0, 100.0), "%", 0).map(Self)
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
    /// Both systems.
    pub const ALL: [UnitSystem; 2] = [Self::Si, Self::Us];

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

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn density_converts_between_units() {
        let d = Density::new(2000.0).unwrap();
        assert_eq!(d.kg_m3(), 2000.0);
        // 1 Mg/m³ = 1000 kg/m³ (SI definition).
        assert!(close(d.mg_m3(), 2.0, 1e-12));
        // γ = ρ g / 1000 with g = 9.80665 m/s² (CGPM conventional gravity): 19.6133 kN/m³.
        assert!(close(d.kn_m3(), 19.6133, 1e-9));
        // 1 lb/ft³ = 16.018463 kg/m³ (international pound and foot): 2000 / 16.018463 = 124.8559.
        assert!(close(d.lb_ft3(), 124.8559, 1e-4));
        // 120 lb/ft³ × 16.018463 = 1922.2156 kg/m³ (same definition).
        assert!(close(
            Density::from_lb_ft3(120.0).unwrap().kg_m3(),
            1922.2156,
            1e-4
        ));
        assert!(close(
            Density::from_mg_m3(1.85).unwrap().kg_m3(),
            1850.0,
            1e-9
        ));
    }

    #[test]
    fn density_refuses_nonsense_naming_quantity_and_bound() {
        let e = Density::new(4200.0).unwrap_err();
        assert_eq!(e.quantity, "density");
        assert_eq!(e.value, 4200.0);
        assert_eq!(
            e.to_string(),
            "density 4200 kg/m³ is outside 500–3000 kg/m³"
        );
        let e = Density::named("dry density", 4200.0).unwrap_err();
        assert_eq!(
            e.to_string(),
            "dry density 4200 kg/m³ is outside 500–3000 kg/m³"
        );
        for bad in [
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            -1.0,
            0.0,
            499.9,
            3000.1,
        ] {
            let e = Density::new(bad).unwrap_err();
            assert_eq!(e.quantity, "density", "value {bad}");
            assert!(e.to_string().contains("500–3000 kg/m³"), "value {bad}: {e}");
        }
        assert!(Density::from_lb_ft3(f64::NAN).is_err());
        assert!(Density::new(500.0).is_ok() && Density::new(3000.0).is_ok());
    }

    #[test]
    fn water_content_and_gravity_refuse_with_bounds() {
        let e = WaterContent::new(101.0).unwrap_err();
        assert_eq!(e.quantity, "water content");
        assert_eq!(e.to_string(), "water content 101 % is outside 0–100 %");
        assert!(WaterContent::new(-0.1).is_err());
        assert!(
            WaterContent::new(f64::NAN)
                .unwrap_err()
                .to_string()
                .contains("0–100 %")
        );
        let w = WaterContent::new(12.5).unwrap();
        assert!(close(w.fraction(), 0.125, 1e-15));
        let e = SpecificGravity::new(3.5).unwrap_err();
        assert_eq!(e.quantity, "specific gravity");
        assert_eq!(e.to_string(), "specific gravity 3.5 is outside 2.0–3.2");
        assert!(SpecificGravity::new(1.99).is_err());
        assert_eq!(SpecificGravity::new(2.65).unwrap().value(), 2.65);
    }

    #[test]
    fn offset_percent_and_chainage_bounds() {
        assert_eq!(Offset::new(-12.5).unwrap().metres(), -12.5);
        let e = Offset::new(1000.5).unwrap_err();
        assert_eq!(e.quantity, "offset");
        assert!(e.to_string().contains("−1000") || e.to_string().contains("-1000"));
        assert!(
            Percent::new(100.1)
                .unwrap_err()
                .to_string()
                .contains("0–100 %")
        );
        assert_eq!(Percent::new(40.0).unwrap().value(), 40.0);
        let e = Chainage::new(-1.0).unwrap_err();
        assert_eq!(e.quantity, "chainage");
        assert!(e.to_string().contains("is outside 0–10000000 m"), "{e}");
        assert!(Chainage::new(f64::INFINITY).is_err());
    }

    #[test]
    fn chainage_reads_and_writes_km_metre() {
        let c = Chainage::parse("12+345.600", ChainageStyle::KmMetre).unwrap();
        assert!(close(c.metres(), 12_345.6, 1e-9));
        assert_eq!(c.format(ChainageStyle::KmMetre), "12+345.600");
        assert_eq!(
            Chainage::new(0.0).unwrap().format(ChainageStyle::KmMetre),
            "0+000.000"
        );
        assert_eq!(
            Chainage::new(5.0).unwrap().format(ChainageStyle::KmMetre),
            "0+005.000"
        );
        // Rounding to the millimetre carries into the next kilometre.
        assert_eq!(
            Chainage::new(1999.9996)
                .unwrap()
                .format(ChainageStyle::KmMetre),
            "2+000.000"
        );
        // Plain metres are read too, with or without a unit.
        assert!(close(
            Chainage::parse("12345.6", ChainageStyle::KmMetre)
                .unwrap()
                .metres(),
            12_345.6,
            1e-9
        ));
        assert!(close(
            Chainage::parse(" 12345.6 m ", ChainageStyle::FeetStation)
                .unwrap()
                .metres(),
            12_345.6,
            1e-9
        ));
        assert!(close(
            Chainage::parse("0+000", ChainageStyle::KmMetre)
                .unwrap()
                .metres(),
            0.0,
            0.0
        ));
    }

    #[test]
    fn chainage_reads_and_writes_feet_stations() {
        // 123+45.67 = 12,345.67 ft × 0.3048 m/ft (international foot) = 3762.9602 m.
        let c = Chainage::parse("123+45.67", ChainageStyle::FeetStation).unwrap();
        assert!(close(c.metres(), 3762.960216, 1e-6));
        assert_eq!(c.format(ChainageStyle::FeetStation), "123+45.67");
        assert!(close(c.feet(), 12_345.67, 1e-9));
        // A plain number in station style is feet; "ft" says so explicitly.
        assert!(close(
            Chainage::parse("12345.67", ChainageStyle::FeetStation)
                .unwrap()
                .metres(),
            3762.960216,
            1e-6
        ));
        assert!(close(
            Chainage::parse("100 ft", ChainageStyle::KmMetre)
                .unwrap()
                .metres(),
            30.48,
            1e-9
        ));
        assert_eq!(
            Chainage::new(30.48)
                .unwrap()
                .format(ChainageStyle::FeetStation),
            "1+00.00"
        );
    }

    #[test]
    fn chainage_refuses_garbage_with_a_reason() {
        let cases = [
            ("", ChainageStyle::KmMetre, "is empty"),
            ("abc", ChainageStyle::KmMetre, "is not readable"),
            (
                "12+34",
                ChainageStyle::KmMetre,
                "expected 3 digits of metres",
            ),
            ("12+3x5.600", ChainageStyle::KmMetre, "expected 3 digits"),
            ("12+345.6.7", ChainageStyle::KmMetre, "expected 3 digits"),
            ("+345.600", ChainageStyle::KmMetre, "before \"+\""),
            ("1a+345.600", ChainageStyle::KmMetre, "before \"+\""),
            ("12+-45.600", ChainageStyle::KmMetre, "expected 3 digits"),
            (
                "123+456.7",
                ChainageStyle::FeetStation,
                "expected 2 digits of feet",
            ),
            ("-5", ChainageStyle::KmMetre, "is not readable"),
            ("1e5", ChainageStyle::KmMetre, "is not readable"),
            ("nan", ChainageStyle::KmMetre, "is not readable"),
            ("inf", ChainageStyle::KmMetre, "is not readable"),
            ("99999999", ChainageStyle::KmMetre, "is outside"),
        ];
        for (text, style, expected) in cases {
            let e = Chainage::parse(text, style).unwrap_err();
            assert_eq!(e.quantity, "chainage", "{text}");
            assert!(e.to_string().contains(expected), "{text}: {e}");
        }
    }

    #[test]
    fn codes_round_trip_and_serde_is_plain() {
        for s in [ChainageStyle::KmMetre, ChainageStyle::FeetStation] {
            assert_eq!(ChainageStyle::parse_code(s.code()), Some(s));
            assert_eq!(
                serde_json::to_string(&s).unwrap(),
                format!("\"{}\"", s.code())
            );
        }
        for u in [UnitSystem::Si, UnitSystem::Us] {
            assert_eq!(UnitSystem::parse_code(u.code()), Some(u));
            assert_eq!(
                serde_json::to_string(&u).unwrap(),
                format!("\"{}\"", u.code())
            );
        }
        assert_eq!(UnitSystem::Us.chainage_style(), ChainageStyle::FeetStation);
        assert_eq!(ChainageStyle::parse_code("miles"), None);
        let d = Density::new(1850.5).unwrap();
        assert_eq!(serde_json::to_string(&d).unwrap(), "1850.5");
        assert_eq!(serde_json::from_str::<Density>("1850.5").unwrap(), d);
        assert!(serde_json::from_str::<Density>("4200").is_err());
        assert!(serde_json::from_str::<WaterContent>("-3").is_err());
    }

    proptest! {
        #[test]
        fn km_metre_format_parse_round_trips(m in 0.0f64..5_000_000.0) {
            let c = Chainage::new(m).unwrap();
            let text = c.format(ChainageStyle::KmMetre);
            let back = Chainage::parse(&text, ChainageStyle::KmMetre).unwrap();
            prop_assert!((back.metres() - m).abs() <= 0.000_500_1, "{m} -> {text}");
            prop_assert_eq!(back.format(ChainageStyle::KmMetre), text);
        }

        #[test]
        fn feet_station_format_parse_round_trips(m in 0.0f64..1_500_000.0) {
            let c = Chainage::new(m).unwrap();
            let text = c.format(ChainageStyle::FeetStation);
            let back = Chainage::parse(&text, ChainageStyle::FeetStation).unwrap();
            prop_assert!((back.metres() - m).abs() <= 0.005 * METRES_PER_FOOT + 1e-9, "{m} -> {text}");
            prop_assert_eq!(back.format(ChainageStyle::FeetStation), text);
        }

        #[test]
        fn density_never_holds_out_of_bounds(v in proptest::num::f64::ANY) {
            match Density::new(v) {
                Ok(d) => prop_assert!((500.0..=3000.0).contains(&d.kg_m3())),
                Err(e) => prop_assert_eq!(e.quantity, "density"),
            }
        }
    }

    proptest! {
        #[test]
        fn chainage_parse_never_panics(text in "\\PC{0,16}", plus in "[0-9]{0,4}\\+[0-9.]{0,7}") {
            for style in [ChainageStyle::KmMetre, ChainageStyle::FeetStation] {
                if let Ok(c) = Chainage::parse(&text, style) {
                    prop_assert!(c.metres().is_finite() && c.metres() >= 0.0);
                }
                let _ = Chainage::parse(&plus, style);
            }
        }
    }
}
