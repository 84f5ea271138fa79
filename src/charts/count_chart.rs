//! A gauge's standard counts as a control chart: each count's deviation from its
//! reference (the mean of the last four accepted counts), with the tolerance band.
//! Pure: takes figures computed in `reduction::instruments`, returns SVG text.

use super::svg::{escape, num};

/// One count on the chart.
#[derive(Debug, Clone)]
pub struct CountPoint {
    pub day: String,
    /// Density deviation from the reference, percent (None for a baseline count).
    pub density_deviation_pct: Option<f64>,
    pub moisture_deviation_pct: Option<f64>,
    /// "baseline", "accepted" or "failed".
    pub outcome: String,
}

const W: f64 = 640.0;
const H: f64 = 260.0;
const LEFT: f64 = 48.0;
const RIGHT: f64 = 16.0;
const TOP: f64 = 24.0;
const BOTTOM: f64 = 40.0;

/// The chart: density deviations as circles inside the shaded density band (± its
/// tolerance), moisture deviations as squares against dashed lines at ± their tolerance;
/// failed counts drawn filled red, baseline counts as hollow marks on the zero line.
pub fn count_chart(points: &[CountPoint], density_tol_pct: f64, moisture_tol_pct: f64) -> String {
    let extreme = points
        .iter()
        .flat_map(|p| [p.density_deviation_pct, p.moisture_deviation_pct])
        .flatten()
        .map(f64::abs)
        .fold(density_tol_pct.max(moisture_tol_pct) * 1.5, f64::max);
    let span = extreme.max(1.0);
    let plot_h = H - TOP - BOTTOM;
    let y = |v: f64| TOP + plot_h / 2.0 - v / span * (plot_h / 2.0);
    let step = (W - LEFT - RIGHT) / (points.len().max(1) as f64);
    let x = |i: usize| LEFT + step * (i as f64 + 0.5);
    let mut s = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" class="count-chart" viewBox="0 0 {W} {H}" role="img" aria-label="Standard counts against the tolerance band">"#
    );
    s.push_str(&format!(
        r##"<rect class="tolerance-band" x="{LEFT}" y="{}" width="{}" height="{}" fill="#d8efd8"/>"##,
        num(y(density_tol_pct)),
        num(W - LEFT - RIGHT),
        num(y(-density_tol_pct) - y(density_tol_pct))
    ));
    for v in [moisture_tol_pct, -moisture_tol_pct] {
        s.push_str(&format!(
            r##"<line class="moisture-limit" x1="{LEFT}" x2="{}" y1="{y}" y2="{y}" stroke="#5577aa" stroke-dasharray="4 3"/>"##,
            num(W - RIGHT),
            y = num(y(v))
        ));
    }
    s.push_str(&format!(
        r##"<line x1="{LEFT}" x2="{}" y1="{y0}" y2="{y0}" stroke="#444"/>"##,
        num(W - RIGHT),
        y0 = num(y(0.0))
    ));
    for v in [span, density_tol_pct, 0.0, -density_tol_pct, -span] {
        s.push_str(&format!(
            r#"<text x="{}" y="{}" font-size="10" text-anchor="end">{:+.1} %</text>"#,
            num(LEFT - 4.0),
            num(y(v) + 3.0),
            v
        ));
    }
    for (i, p) in points.iter().enumerate() {
        let colour = if p.outcome == "failed" {
            "#c0392b"
        } else {
            "#2d6a2d"
        };
        let fill = if p.outcome == "baseline" {
            "none"
        } else {
            colour
        };
        let d = p.density_deviation_pct.unwrap_or(0.0);
        let m = p.moisture_deviation_pct.unwrap_or(0.0);
        s.push_str(&format!(
            r#"<g class="count {}"><title>{}: {} (density {:+.2} %, moisture {:+.2} %)</title><circle cx="{}" cy="{}" r="4" fill="{fill}" stroke="{colour}"/><rect x="{}" y="{}" width="7" height="7" fill="{fill}" stroke="{colour}" opacity="0.7"/></g>"#,
            escape(&p.outcome),
            escape(&p.day),
            escape(&p.outcome),
            d,
            m,
            num(x(i)),
            num(y(d)),
            num(x(i) - 3.5),
            num(y(m) - 3.5)
        ));
    }
    if let (Some(first), Some(last)) = (points.first(), points.last()) {
        s.push_str(&format!(
            r#"<text x="{LEFT}" y="{}" font-size="10">{}</text><text x="{}" y="{}" font-size="10" text-anchor="end">{}</text>"#,
            num(H - 12.0),
            escape(&first.day),
            num(W - RIGHT),
            num(H - 12.0),
            escape(&last.day)
        ));
    }
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_chart_draws_a_band_and_one_mark_per_count() {
        let pts = vec![
            CountPoint {
                day: "2026-11-16".into(),
                density_deviation_pct: None,
                moisture_deviation_pct: None,
                outcome: "baseline".into(),
            },
            CountPoint {
                day: "2026-11-20".into(),
                density_deviation_pct: Some(0.5),
                moisture_deviation_pct: Some(-1.0),
                outcome: "accepted".into(),
            },
            CountPoint {
                day: "2026-11-21".into(),
                density_deviation_pct: Some(-1.8),
                moisture_deviation_pct: Some(0.0),
                outcome: "failed".into(),
            },
        ];
        let svg = count_chart(&pts, 1.0, 2.0);
        assert_eq!(svg.matches("<circle").count(), 3);
        assert!(svg.contains("tolerance-band"));
        assert_eq!(svg.matches("moisture-limit").count(), 2);
        assert!(svg.contains("class=\"count failed\""));
        assert!(
            svg.contains("+1.0 %") && svg.contains("-1.0 %"),
            "band limits labelled"
        );
    }
}
