//! Colours, dash patterns and lot-state fills shared by the charts.
//!
//! Hues come from the Okabe–Ito palette, whose eight colours stay distinct for the common forms of
//! colour-vision deficiency. Colour is never the
//! only cue: lines also differ by dash pattern, markers by shape and fill, lot states by a hatch pattern
//! and a text mark, so every chart also reads when printed in black and white.

use super::map_state::MapState;
use super::svg::SvgWriter;

/// Okabe–Ito orange.
pub const ORANGE: &str = "#E69F00";
/// Okabe–Ito sky blue.
pub const SKY_BLUE: &str = "#56B4E9";
/// Okabe–Ito bluish green.
pub const BLUISH_GREEN: &str = "#009E73";
/// Okabe–Ito yellow.
pub const YELLOW: &str = "#F0E442";
/// Okabe–Ito blue.
pub const BLUE: &str = "#0072B2";
/// Okabe–Ito vermillion.
pub const VERMILLION: &str = "#D55E00";
/// Okabe–Ito reddish purple.
pub const REDDISH_PURPLE: &str = "#CC79A7";

/// Text and strong lines.
pub const INK: &str = "#1d1f21";
/// Axis lines and tick marks.
pub const AXIS: &str = "#555555";
/// Secondary text (axis titles, notes).
pub const MUTED: &str = "#5c5c5c";
/// Grid lines behind the data.
pub const GRID: &str = "#e4e4e4";
/// Background of a map row where no lot has been placed yet.
pub const EMPTY_ROW: &str = "#f1f1f1";
/// Page colour, used for halos behind text.
pub const PAPER: &str = "#ffffff";
/// Dark grey for reference lines that are not data (zero air voids, saturation).
pub const REFERENCE: &str = "#4d4d4d";

/// Dash pattern of a limit line (long dashes).
pub const LIMIT_DASH: &str = "7 4";
/// Dash pattern of a mean line (dots).
pub const MEAN_DASH: &str = "1.5 3";
/// Dash pattern of the zero-air-voids line.
pub const ZAV_DASH: &str = "10 3 2 3";
/// Dash patterns cycled over saturation lines, each distinct from the others and from the ZAV line.
pub const SATURATION_DASHES: [&str; 4] = ["5 3", "1.5 2.5", "8 2 1.5 2 1.5 2", "3 5"];
/// Dash pattern of guide lines (optimum crosshair to the axes).
pub const GUIDE_DASH: &str = "2 3";

/// The texture laid over a state's colour.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Hatch {
    /// Colour only.
    Plain,
    /// Small dots.
    Dots,
    /// Horizontal lines.
    Horizontal,
    /// Vertical lines.
    Vertical,
    /// Lines rising to the right.
    Rising,
    /// Lines falling to the right.
    Falling,
    /// Both diagonals.
    Cross,
}

/// How one lot state is painted.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StateStyle {
    /// Background colour.
    pub fill: &'static str,
    /// Texture over the colour.
    pub hatch: Hatch,
    /// Colour of the texture.
    pub hatch_ink: &'static str,
    /// Opacity of the texture.
    pub hatch_opacity: f64,
    /// Colour of the text mark drawn on the state's fill (chosen for contrast).
    pub mark_ink: &'static str,
}

/// The paint of each lot state: an Okabe–Ito hue plus a distinct texture.
pub fn state_style(state: MapState) -> StateStyle {
    let (fill, hatch, hatch_ink, hatch_opacity, mark_ink) = match state {
        MapState::Open => (SKY_BLUE, Hatch::Dots, "#000", 0.45, INK),
        MapState::OwedTests => (YELLOW, Hatch::Horizontal, "#000", 0.45, INK),
        MapState::Failing => (VERMILLION, Hatch::Cross, "#000", 0.55, INK),
        MapState::Submitted => (ORANGE, Hatch::Vertical, "#000", 0.35, INK),
        MapState::Accepted => (BLUISH_GREEN, Hatch::Rising, "#fff", 0.6, INK),
        MapState::Rejected => (REDDISH_PURPLE, Hatch::Falling, "#000", 0.5, INK),
        MapState::Certified => (BLUE, Hatch::Plain, "#fff", 0.0, "#ffffff"),
    };
    StateStyle {
        fill,
        hatch,
        hatch_ink,
        hatch_opacity,
        mark_ink,
    }
}

/// Size of one pattern tile in user units.
const TILE: f64 = 6.0;

/// Writes a `<pattern>` that paints `style` (colour plus texture) under the given id.
pub fn write_pattern(w: &mut SvgWriter, id: &str, style: &StateStyle) {
    w.start("pattern")
        .attr("id", id)
        .attr("patternUnits", "userSpaceOnUse")
        .num("width", TILE)
        .num("height", TILE)
        .open();
    w.start("rect")
        .num("width", TILE)
        .num("height", TILE)
        .attr("fill", style.fill)
        .leaf();
    let d = match style.hatch {
        Hatch::Plain => None,
        Hatch::Dots => None,
        Hatch::Horizontal => Some("M0 3H6"),
        Hatch::Vertical => Some("M3 0V6"),
        Hatch::Rising => Some("M-1 1L1-1M0 6L6 0M5 7L7 5"),
        Hatch::Falling => Some("M-1 5L1 7M0 0L6 6M5-1L7 1"),
        Hatch::Cross => Some("M-1 1L1-1M0 6L6 0M5 7L7 5M-1 5L1 7M0 0L6 6M5-1L7 1"),
    };
    if let Some(d) = d {
        w.start("path")
            .attr("d", d)
            .attr("stroke", style.hatch_ink)
            .num("stroke-opacity", style.hatch_opacity)
            .num("stroke-width", 1.0)
            .leaf();
    }
    if style.hatch == Hatch::Dots {
        w.start("circle")
            .num("cx", 3.0)
            .num("cy", 3.0)
            .num("r", 1.0)
            .attr("fill", style.hatch_ink)
            .num("fill-opacity", style.hatch_opacity)
            .leaf();
    }
    w.close();
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_state_differs_in_colour_and_texture() {
        let styles: Vec<StateStyle> = MapState::ALL.iter().map(|s| state_style(*s)).collect();
        for (i, a) in styles.iter().enumerate() {
            for b in &styles[i + 1..] {
                assert_ne!(a.fill, b.fill);
                assert_ne!(a.hatch, b.hatch);
            }
        }
    }

    #[test]
    fn pattern_is_well_formed() {
        let mut w = SvgWriter::default();
        w.start("defs").open();
        write_pattern(&mut w, "p1", &state_style(MapState::Failing));
        let out = w.finish();
        let doc = roxmltree::Document::parse(&out).expect("well-formed");
        assert_eq!(
            doc.descendants()
                .filter(|n| n.has_tag_name("pattern"))
                .count(),
            1
        );
    }
}
