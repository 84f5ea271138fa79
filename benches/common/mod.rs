//! Invented demo data for the preview pictures and the benchmark (an imaginary road job).
#![allow(dead_code)]

use liftledger::charts::{
    CurveChartInput, FieldMark, LiftMapInput, MapLot, MapRow, MapState, RcBar, RcChartInput,
    RcStatus, Series,
};

/// Chainage as km+metres, e.g. 12345.4 → "12+345".
pub fn chainage_label(m: f64) -> String {
    let metres = m.round().max(0.0) as u64;
    format!("{}+{:03}", metres / 1000, metres % 1000)
}

/// A tiny deterministic generator (xorshift64*), so pictures and figures repeat exactly.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Self(seed.max(1))
    }
    pub fn next_f64(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn bar(label: &str, rc: f64, status: RcStatus) -> RcBar {
    RcBar {
        label: label.to_string(),
        rc_pct: rc,
        status,
        href: Some(format!("/tests/{label}")),
    }
}

pub fn demo_rc() -> RcChartInput {
    use RcStatus::*;
    let tests = vec![
        bar("101", 97.2, Pass),
        bar("102", 96.1, Pass),
        bar("103", 93.8, Superseded),
        bar("104", 95.4, Pass),
        bar("105", 98.0, Pass),
        bar("106", 94.1, Fail),
        bar("107", 96.7, Pass),
        bar("108", 91.2, Voided),
        bar("109", 97.5, Pass),
    ];
    let counted: Vec<f64> = tests
        .iter()
        .filter(|t| t.status == Pass || t.status == Fail)
        .map(|t| t.rc_pct)
        .collect();
    let mean = counted.iter().sum::<f64>() / counted.len() as f64;
    RcChartInput {
        title: "Lot E-014 · Layer 12 · 12+300 to 12+480".to_string(),
        tests,
        limit_pct: 95.0,
        mean_pct: Some(mean),
    }
}

pub fn big_rc(n: usize) -> RcChartInput {
    let mut rng = Rng::new(7);
    let tests = (0..n)
        .map(|i| {
            let rc = 93.0 + rng.next_f64() * 7.5;
            let status = if i % 97 == 13 {
                RcStatus::Voided
            } else if rc < 95.0 {
                if i % 3 == 0 {
                    RcStatus::Superseded
                } else {
                    RcStatus::Fail
                }
            } else {
                RcStatus::Pass
            };
            bar(&format!("{}", 1001 + i), rc, status)
        })
        .collect();
    RcChartInput {
        title: format!("Embankment fill, all {n} tests"),
        tests,
        limit_pct: 95.0,
        mean_pct: Some(96.6),
    }
}

/// Dry density at saturation `s` (fraction) for water content `w_pct` and solids density `gs`
/// (DOMAIN.md: ρd = Gs ρw / (1 + w Gs / S), any soil mechanics text).
fn saturated_density(w_pct: f64, gs: f64, s: f64) -> f64 {
    gs * 1000.0 / (1.0 + w_pct / 100.0 * gs / s)
}

pub fn demo_curve() -> CurveChartInput {
    let lab = vec![
        (8.0, 1858.0),
        (9.8, 1921.0),
        (11.4, 1962.0),
        (13.0, 1941.0),
        (14.7, 1878.0),
    ];
    // Least-squares quadratic through the lab points (normal equations), demo only.
    let (mut s, mut sx, mut sx2, mut sx3, mut sx4, mut sy, mut sxy, mut sx2y) =
        (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    for (x, y) in &lab {
        s += 1.0;
        sx += x;
        sx2 += x * x;
        sx3 += x * x * x;
        sx4 += x * x * x * x;
        sy += y;
        sxy += x * y;
        sx2y += x * x * y;
    }
    let m = [[s, sx, sx2], [sx, sx2, sx3], [sx2, sx3, sx4]];
    let v = [sy, sxy, sx2y];
    let det = |m: [[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let d = det(m);
    let solve = |col: usize| {
        let mut mm = m;
        for r in 0..3 {
            mm[r][col] = v[r];
        }
        det(mm) / d
    };
    let (a, b, c) = (solve(0), solve(1), solve(2));
    let omc = -b / (2.0 * c);
    let mdd = a + b * omc + c * omc * omc;
    let fitted = (0..=60)
        .map(|i| {
            let x = 7.6 + i as f64 * (15.6 - 7.6) / 60.0;
            (x, a + b * x + c * x * x)
        })
        .collect();
    let gs = 2.70;
    let zav = (0..=50).map(|i| {
        let w = 4.0 + i as f64 * 0.4;
        (w, saturated_density(w, gs, 1.0))
    });
    let sat = |s: f64| Series {
        label: format!("S = {:.0} %", s * 100.0),
        points: (0..=50)
            .map(|i| {
                let w = 4.0 + i as f64 * 0.4;
                (w, saturated_density(w, gs, s))
            })
            .collect(),
    };
    CurveChartInput {
        title: "Borrow B2 · silty sand (SM) · modified effort".to_string(),
        x_label: "Water content (%)".to_string(),
        y_label: "Dry density (kg/m³)".to_string(),
        lab_points: lab,
        fitted,
        optimum: (omc, mdd),
        zero_air_voids: zav.collect(),
        saturation_lines: vec![sat(0.9), sat(0.8)],
        field_points: vec![
            FieldMark {
                label: "T-211".into(),
                x: 10.8,
                y: 1905.0,
                passed: true,
            },
            FieldMark {
                label: "T-212".into(),
                x: 12.4,
                y: 1921.0,
                passed: true,
            },
            FieldMark {
                label: "T-213".into(),
                x: 13.9,
                y: 1852.0,
                passed: false,
            },
            FieldMark {
                label: "T-214".into(),
                x: 9.4,
                y: 1880.0,
                passed: true,
            },
        ],
        optimum_label: String::new(),
    }
}

fn zone_of(row: usize, rows: usize) -> (&'static str, usize) {
    let capping = 3usize.min(rows);
    let subgrade = 5usize.min(rows - capping);
    if row >= rows - capping {
        ("Capping", row - (rows - capping) + 1)
    } else if row >= rows - capping - subgrade {
        ("Subgrade", row - (rows - capping - subgrade) + 1)
    } else {
        ("Embankment fill", row + 1)
    }
}

/// A map of `rows` layers over `length_m`, about `lots` lots; states follow a works front
/// (older, lower layers further on) unless `random_states`.
pub fn map(
    width_px: u32,
    rows: usize,
    length_m: f64,
    lots: usize,
    random_states: bool,
) -> LiftMapInput {
    let mut rng = Rng::new(42);
    let map_rows: Vec<MapRow> = (0..rows)
        .map(|r| {
            let (zone, n) = zone_of(r, rows);
            MapRow {
                zone: zone.to_string(),
                layer: format!("L{n}"),
                row: r,
            }
        })
        .collect();
    let mut out = Vec::with_capacity(lots);
    let mut id = 1u32;
    for r in 0..rows {
        let per_row = lots / rows + usize::from(r < lots % rows);
        let step = length_m / per_row as f64;
        let front = length_m * (1.0 - 0.75 * r as f64 / rows as f64);
        let mut from = 0.0;
        for k in 0..per_row {
            let to = if k + 1 == per_row {
                length_m
            } else {
                ((k + 1) as f64 * step + (rng.next_f64() - 0.5) * step * 0.5).max(from + 1.0)
            };
            let centre = (from + to) / 2.0;
            let roll = rng.next_f64();
            let state = if random_states {
                MapState::ALL[(roll * 7.0) as usize % 7]
            } else if centre > front {
                MapState::Open
            } else if centre > front - length_m * 0.05 {
                match roll {
                    x if x < 0.35 => MapState::Open,
                    x if x < 0.6 => MapState::OwedTests,
                    x if x < 0.75 => MapState::Failing,
                    x if x < 0.85 => MapState::Rejected,
                    _ => MapState::Submitted,
                }
            } else if centre > front - length_m * 0.2 {
                match roll {
                    x if x < 0.5 => MapState::Submitted,
                    x if x < 0.95 => MapState::Accepted,
                    _ => MapState::Failing,
                }
            } else if roll < 0.9 {
                MapState::Certified
            } else {
                MapState::Accepted
            };
            let (zone, n) = zone_of(r, rows);
            out.push(MapLot {
                row: r,
                from_m: from,
                to_m: to,
                state,
                title: format!(
                    "Lot {id} · {zone} L{n} · {} to {}",
                    chainage_label(from),
                    chainage_label(to)
                ),
                href: format!("/lots/{id}"),
            });
            id += 1;
            from = to;
        }
    }
    LiftMapInput {
        chainage_from_m: 0.0,
        chainage_to_m: length_m,
        rows: map_rows,
        lots: out,
        chainage_label: Box::new(chainage_label),
        width_px,
        zoom_href: Some(Box::new(|a, b| format!("/map?from={a:.0}&to={b:.0}"))),
    }
}

/// The 60 km × 30 layer job with 20,000 lots.
pub fn big_map(width_px: u32, random_states: bool) -> LiftMapInput {
    map(width_px, 30, 60_000.0, 20_000, random_states)
}
