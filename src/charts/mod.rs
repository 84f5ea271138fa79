//! Server-side SVG charts for lot sheets, compaction curves and the lift map.
//!
//! Every chart is a pure function from numbers already reduced elsewhere to a standalone, well-formed
//! `<svg>` string: `viewBox` set, `width="100%"`, `role="img"` with a `<title>` and `<desc>`, all text
//! XML-escaped, output byte-for-byte deterministic. Colours are colour-blind safe and never the only
//! cue (see [`palette`]), so the charts also read on a phone and on a black-and-white print.

pub mod axis;
pub mod frame;
pub mod legend;
pub mod marks;
pub mod palette;
pub mod placement;
pub mod svg;

mod control_chart;
pub mod count_chart;
mod curve_chart;
mod lift_map;
mod map_cells;
mod map_state;
mod rc_chart;

#[cfg(test)]
mod tests;

pub use control_chart::{ControlPanel, FamilyLine, control_panel, family_chart};
pub use curve_chart::{CurveChartInput, FieldMark, curve_chart};
pub use lift_map::{LiftMapInput, MapLot, MapRow, MapState, lift_map};
pub use map_cells::{MAX_CELLS, MIN_LOT_PX, cell_width_px};
pub use rc_chart::{RcBar, RcChartInput, RcStatus, rc_chart};

/// A labelled line of (x, y) points, e.g. a saturation line "S = 80 %".
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Series {
    /// Text written at the line's visible end.
    pub label: String,
    /// Points in data units, in drawing order.
    pub points: Vec<(f64, f64)>,
}
