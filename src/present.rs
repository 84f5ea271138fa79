//! Formatting stored SI values for people, in the project's units and chainage style.
//! Conversions come from `crate::reduction`; this module only chooses and prints.

use crate::reduction::{Chainage, ChainageStyle, Density, UnitSystem};

/// How one project shows its numbers.
#[derive(Debug, Clone, Copy)]
pub struct Units {
    pub system: UnitSystem,
    pub chainage: ChainageStyle,
}

impl Units {
    /// The display settings of a stored project (not in the WebAssembly build, which has no store).
    #[cfg(not(target_arch = "wasm32"))]
    pub fn of(project: &crate::db::projects::Project) -> Self {
        Self {
            system: UnitSystem::parse_code(&project.unit_system).unwrap_or(UnitSystem::Si),
            chainage: ChainageStyle::parse_code(&project.chainage_style)
                .unwrap_or(ChainageStyle::KmMetre),
        }
    }

    /// The density unit label.
    pub fn density_unit(&self) -> &'static str {
        match self.system {
            UnitSystem::Si => "kg/m³",
            UnitSystem::Us => "lb/ft³",
        }
    }

    /// A density in the project's unit, without the unit.
    pub fn density(&self, kg_m3: f64) -> String {
        match (self.system, Density::new(kg_m3)) {
            (UnitSystem::Si, _) => format!("{kg_m3:.0}"),
            (UnitSystem::Us, Ok(d)) => format!("{:.1}", d.lb_ft3()),
            (UnitSystem::Us, Err(_)) => format!("{kg_m3:.0} kg/m³"),
        }
    }

    /// A density with its unit.
    pub fn density_with_unit(&self, kg_m3: f64) -> String {
        format!("{} {}", self.density(kg_m3), self.density_unit())
    }

    /// A chainage in the project's style.
    pub fn chainage(&self, metres: f64) -> String {
        Chainage::new(metres)
            .map(|c| c.format(self.chainage))
            .unwrap_or_else(|_| format!("{metres:.3} m"))
    }

    /// A length in the project's unit.
    pub fn length(&self, metres: f64) -> String {
        match self.system {
            UnitSystem::Si => format!("{metres:.1} m"),
            UnitSystem::Us => format!("{:.1} ft", metres / 0.3048),
        }
    }

    /// An area in the project's unit.
    pub fn area(&self, m2: f64) -> String {
        match self.system {
            UnitSystem::Si => format!("{m2:.0} m²"),
            UnitSystem::Us => format!("{:.0} ft²", m2 / (0.3048 * 0.3048)),
        }
    }

    /// The offset unit label.
    pub fn offset_unit(&self) -> &'static str {
        match self.system {
            UnitSystem::Si => "m",
            UnitSystem::Us => "ft",
        }
    }

    /// An offset without its unit, for narrow columns: `5.6 L`, `CL`, `2.0 R`.
    pub fn offset_short(&self, metres: f64) -> String {
        let full = self.offset(metres);
        full.replace(" m ", " ").replace(" ft ", " ")
    }

    /// A signed offset: negative is left of the centreline.
    pub fn offset(&self, metres: f64) -> String {
        let (v, u) = match self.system {
            UnitSystem::Si => (metres, "m"),
            UnitSystem::Us => (metres / 0.3048, "ft"),
        };
        let side = if v < 0.0 {
            "L"
        } else if v > 0.0 {
            "R"
        } else {
            "CL"
        };
        if side == "CL" {
            "CL".to_string()
        } else {
            format!("{:.1} {u} {side}", v.abs())
        }
    }
}

/// A percentage with one decimal, or a dash.
pub fn pct(v: Option<f64>) -> String {
    v.map_or_else(|| "–".to_string(), |v| format!("{v:.1}"))
}

/// A signed deviation in points with one decimal, or a dash.
pub fn signed(v: Option<f64>) -> String {
    v.map_or_else(|| "–".to_string(), |v| format!("{v:+.1}"))
}

/// A count with its thousands separated by commas: 90000 → "90,000".
pub fn grouped(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// The cautions shown wherever a verdict is shown.
pub const CAUTIONS: [&str; 3] = [
    "Results describe the tested points only.",
    "liftledger reduces and records; it does not replace the engineer's judgement, the contract \
     specification or local codes, which rule wherever they differ from a default here.",
    "Nuclear gauges carry radioactive sources: their use needs licensed, trained operators.",
];

/// A record falling due, in words: "GX-101 calibration due 2026-12-13 (in 10 days)".
pub fn due_words(serial: &str, record: &str, due: Option<&str>, days: i64) -> String {
    let when = match days {
        d if d < 0 => format!("{} days overdue", -d),
        0 => "today".to_string(),
        1 => "in 1 day".to_string(),
        d => format!("in {d} days"),
    };
    format!(
        "{serial} {} due {} ({when})",
        record.replace('_', " "),
        due.unwrap_or("")
    )
}
