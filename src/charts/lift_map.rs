//! The lift map: chainage along x, layers stacked bottom-up and grouped by zone, one rectangle per lot
//! painted by its state (colour + texture + text mark), with its own legend.
//!
//! Lots too narrow to draw one by one are aggregated into cells (see `map_cells`): a cell shows the
//! most urgent state inside it (see [`MapState::severity`]), its tooltip counts the lots of each
//! state, and it links to a zoomed map of its chainage range.

use std::collections::BTreeMap;

use super::axis::{self, LinearScale};
use super::frame::{self, AxisFonts, Plot, TextStyle};
use super::legend::{self, LegendItem, Swatch};
use super::map_cells::{Cell, Placed, counts_total, split_and_aggregate};
use super::palette::{self, state_style};
use super::svg::{self, SvgWriter, bold_text_width, fit_text, text_width, wrap_text};

pub use super::map_state::MapState;

/// Lift map: chainage along x, layers stacked by zone along y, one rectangle per lot, filled by state.
pub struct LiftMapInput {
    /// Start of the chainage shown, in metres.
    pub chainage_from_m: f64,
    /// End of the chainage shown, in metres.
    pub chainage_to_m: f64,
    /// Layers to draw; `row` 0 is the bottom one.
    pub rows: Vec<MapRow>,
    /// Lots to place on the rows.
    pub lots: Vec<MapLot>,
    /// Formats a chainage in the project style, e.g. 12345.6 → "12+345.6".
    pub chainage_label: Box<dyn Fn(f64) -> String + Send + Sync>,
    /// Width the map is drawn for, in CSS pixels (also the viewBox width); 0 means 960.
    pub width_px: u32,
    /// Builds the link of an aggregated cell: a zoomed map from..to (metres). No link when `None`.
    pub zoom_href: Option<Box<dyn Fn(f64, f64) -> String + Send + Sync>>,
}

/// One layer of the map.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct MapRow {
    /// Zone the layer belongs to (embankment fill, subgrade, capping…).
    pub zone: String,
    /// Layer name shown on the left.
    pub layer: String,
    /// Position from the bottom, 0 = bottom.
    pub row: usize,
}

/// One lot of the map.
#[derive(Clone, Debug, PartialEq)]
pub struct MapLot {
    /// The [`MapRow::row`] it lies on.
    pub row: usize,
    /// Start chainage in metres.
    pub from_m: f64,
    /// End chainage in metres.
    pub to_m: f64,
    /// Where it stands in its life.
    pub state: MapState,
    /// Tooltip text describing the lot.
    pub title: String,
    /// Link to the lot's page.
    pub href: String,
}

const FONT: f64 = 12.0;
const FONT_SMALL: f64 = 11.0;
const ZONE_BAND: f64 = 17.0;
const MARGIN: f64 = 8.0;

/// The rows' places, top-down: a band per zone group, then its rows.
struct Rows {
    plot: Plot,
    /// Top of each row, by rank.
    top: Vec<f64>,
    height: f64,
    /// Top and name of each zone's band.
    bands: Vec<(f64, String)>,
}

fn layout_rows(rows: &[&MapRow], width: f64) -> Rows {
    let widest_layer = rows
        .iter()
        .map(|r| text_width(&r.layer, FONT_SMALL))
        .fold(0.0, f64::max);
    let left = (widest_layer + 16.0).clamp(36.0, width * 0.3);
    let height = row_height(rows.len());
    let groups = zone_groups(rows);
    let mut top = vec![0.0; rows.len()];
    let mut bands = Vec::with_capacity(groups.len());
    let mut y = MARGIN;
    for (zone, ranks) in &groups {
        bands.push((y, zone.clone()));
        y += ZONE_BAND;
        for rank in ranks {
            top[*rank] = y;
            y += height;
        }
    }
    Rows {
        plot: Plot {
            left,
            top: MARGIN,
            right: width - 12.0,
            bottom: y.max(MARGIN + 40.0),
        },
        top,
        height,
        bands,
    }
}

/// The note under the legend when some lots are grouped into cells.
fn cells_note(cells: &[Cell], width: f64) -> Vec<String> {
    if cells.is_empty() {
        return Vec::new();
    }
    wrap_text(
        "Lots too narrow to draw one by one are grouped into cells that show the most urgent state \
         inside (failing, rejected, tests owed, open, submitted, accepted, certified); \
         hover a cell for its lot counts, open it to zoom in.",
        FONT_SMALL,
        width,
    )
}

fn draw_note(w: &mut SvgWriter, note: &[String], top: f64) {
    if note.is_empty() {
        return;
    }
    w.start("g").attr("class", "ll-note").open();
    for (i, line) in note.iter().enumerate() {
        let y = top + FONT_SMALL + i as f64 * FONT_SMALL * 1.4;
        frame::text(
            w,
            MARGIN,
            y,
            line,
            TextStyle::new(FONT_SMALL).fill(palette::MUTED),
        );
    }
    w.close();
}

/// "Lift map, 0+000 to 2+400: 36 lots on 12 layers".
fn map_title(from: &str, to: &str, lots: usize, layers: usize) -> String {
    format!(
        "Lift map, {from} to {to}: {lots} lot{} on {layers} layer{}",
        if lots == 1 { "" } else { "s" },
        if layers == 1 { "" } else { "s" }
    )
}

/// Draws the lift map with its legend; narrow lots are aggregated (see the module docs).
pub fn lift_map(input: &LiftMapInput) -> String {
    let width = map_width(input.width_px);
    let rows = ordered_rows(&input.rows);
    let rank_of: BTreeMap<usize, usize> =
        rows.iter().enumerate().map(|(i, r)| (r.row, i)).collect();
    let (from_m, to_m) = chainage_range(input);
    let label = &input.chainage_label;
    let laid = layout_rows(&rows, width);
    let plot = laid.plot;
    let x_scale = LinearScale::new((from_m, to_m), (plot.left, plot.right));
    let ticks = chainage_ticks(label, (from_m, to_m), &plot);

    let placed = place_lots(input, &rank_of, from_m, to_m, &x_scale);
    let (separate, cells) = split_and_aggregate(placed, &plot, rows.len());
    let seed = format!(
        "{from_m}|{to_m}|{width}|{}|{}",
        rows.len(),
        input.lots.len()
    );
    let ids = svg::id_prefix("m", &seed);
    let pattern_id = |s: MapState| format!("{ids}-{}", s.token());

    let fonts = AxisFonts {
        tick: FONT_SMALL,
        title: FONT,
    };
    let legend_items = legend_items(&pattern_id);
    let below = Below::layout(&legend_items, &cells, plot.bottom, width, fonts);

    let lot_count = separate.len() + lots_in(&cells);
    let mut w = SvgWriter::with_capacity(4096 + separate.len() * 170 + cells.len() * 170);
    let title = map_title(&label(from_m), &label(to_m), lot_count, rows.len());
    let desc = describe(input, &separate, &cells);
    frame::open_linked_root(
        &mut w,
        width,
        below.height,
        &title,
        &desc,
        "ll-chart ll-lift-map",
    );
    write_patterns(&mut w, &pattern_id);

    if rows.is_empty() {
        frame::empty_note(&mut w, &plot, "no layers yet", 14.0);
    } else {
        let (row_top, row_h) = (&laid.top, laid.height);
        draw_row_backgrounds(&mut w, &plot, row_top, row_h);
        frame::x_grid(&mut w, &plot, &x_scale, &ticks);
        draw_row_labels(&mut w, &plot, &rows, row_top, row_h, &laid.bands);
        draw_cells(&mut w, input, &cells, row_top, row_h, &pattern_id);
        draw_separate(&mut w, &separate, row_top, row_h, &pattern_id);
        if lot_count == 0 {
            frame::empty_note(&mut w, &plot, "no lots yet", 14.0);
        }
    }
    let x_label = |v| label(v);
    frame::x_axis(
        &mut w, &plot, &x_scale, &ticks, "Chainage", fonts, width, &x_label,
    );
    below.draw(&mut w, &legend_items);
    w.finish()
}

/// The width drawn for: 960 px when unset, otherwise kept within 280–8000 px.
fn map_width(width_px: u32) -> f64 {
    if width_px == 0 {
        960.0
    } else {
        f64::from(width_px).clamp(280.0, 8000.0)
    }
}

/// Chainage ticks as many as the widest end label leaves room for (2 to 12).
fn chainage_ticks(
    label: &dyn Fn(f64) -> String,
    (from_m, to_m): (f64, f64),
    plot: &Plot,
) -> axis::Ticks {
    let tick_room =
        text_width(&label(from_m), FONT_SMALL).max(text_width(&label(to_m), FONT_SMALL)) + 28.0;
    let target = (plot.width() / tick_room).floor().clamp(2.0, 12.0) as usize;
    axis::ticks(from_m, to_m, target)
}

/// How many lots the aggregated cells hold.
fn lots_in(cells: &[Cell]) -> usize {
    cells
        .iter()
        .map(|c| c.bucket.counts.iter().sum::<u32>() as usize)
        .sum()
}

/// One fill pattern per state, in the map's `defs`.
fn write_patterns(w: &mut SvgWriter, pattern_id: &dyn Fn(MapState) -> String) {
    w.start("defs").open();
    for state in MapState::ALL {
        palette::write_pattern(w, &pattern_id(state), &state_style(state));
    }
    w.close();
}

/// What lies under the plot: the legend, then the note on cells; and the map's whole height.
struct Below {
    legend_top: f64,
    legend_width: f64,
    note: Vec<String>,
    note_top: f64,
    height: f64,
}

impl Below {
    fn layout(
        items: &[LegendItem],
        cells: &[Cell],
        plot_bottom: f64,
        width: f64,
        fonts: AxisFonts,
    ) -> Self {
        let legend_top = plot_bottom + frame::x_axis_depth(fonts, true) + 6.0;
        let legend_width = width - 2.0 * MARGIN;
        let legend_rows = legend::layout(items, legend_width, FONT_SMALL).rows;
        let note = cells_note(cells, legend_width);
        let legend_h = legend_rows as f64 * legend::row_height(FONT_SMALL);
        let note_top = legend_top + legend_h + 4.0;
        let height = note_top + note.len() as f64 * (FONT_SMALL * 1.4) + MARGIN;
        Below {
            legend_top,
            legend_width,
            note,
            note_top,
            height,
        }
    }

    /// Draws the legend and the note where `layout` placed them.
    fn draw(&self, w: &mut SvgWriter, items: &[LegendItem]) {
        legend::draw(
            w,
            items,
            MARGIN,
            self.legend_top,
            self.legend_width,
            FONT_SMALL,
        );
        draw_note(w, &self.note, self.note_top);
    }
}

fn ordered_rows(rows: &[MapRow]) -> Vec<&MapRow> {
    let mut sorted: Vec<&MapRow> = rows.iter().collect();
    sorted.sort_by_key(|r| r.row);
    sorted.dedup_by_key(|r| r.row);
    sorted
}

fn chainage_range(input: &LiftMapInput) -> (f64, f64) {
    let (a, b) = (input.chainage_from_m, input.chainage_to_m);
    if a.is_finite() && b.is_finite() && a != b {
        return (a.min(b), a.max(b));
    }
    let ends = input
        .lots
        .iter()
        .flat_map(|l| [l.from_m, l.to_m])
        .filter(|v| v.is_finite());
    let (lo, hi) = ends.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
        (lo.min(v), hi.max(v))
    });
    if lo < hi {
        (lo, hi)
    } else if a.is_finite() {
        (a - 50.0, a + 50.0)
    } else {
        (0.0, 1000.0)
    }
}

/// Row height in px: generous for a few layers, tighter for many, never below 3 px.
fn row_height(rows: usize) -> f64 {
    match rows {
        0..=10 => 22.0,
        11..=20 => 18.0,
        21..=40 => 15.0,
        41..=80 => 10.0,
        n => (800.0 / n as f64).max(3.0),
    }
}

/// Contiguous runs of rows of one zone, from the top row down; each run lists display ranks.
fn zone_groups(rows: &[&MapRow]) -> Vec<(String, Vec<usize>)> {
    let mut groups: Vec<(String, Vec<usize>)> = Vec::new();
    for rank in (0..rows.len()).rev() {
        let zone = &rows[rank].zone;
        match groups.last_mut() {
            Some((name, ranks)) if name == zone => ranks.push(rank),
            _ => groups.push((zone.clone(), vec![rank])),
        }
    }
    groups
}

fn place_lots<'a>(
    input: &'a LiftMapInput,
    rank_of: &BTreeMap<usize, usize>,
    from_m: f64,
    to_m: f64,
    x_scale: &LinearScale,
) -> Vec<Placed<'a>> {
    let mut placed: Vec<Placed<'a>> = input
        .lots
        .iter()
        .filter_map(|lot| {
            let rank = *rank_of.get(&lot.row)?;
            if !lot.from_m.is_finite() || !lot.to_m.is_finite() {
                return None;
            }
            let (a, b) = (lot.from_m.min(lot.to_m), lot.from_m.max(lot.to_m));
            let (from, to) = (a.max(from_m), b.min(to_m));
            if from > to {
                return None;
            }
            Some(Placed {
                lot,
                rank,
                from,
                to,
                x0: x_scale.map(from),
                x1: x_scale.map(to),
            })
        })
        .collect();
    placed.sort_by(|p, q| {
        p.rank
            .cmp(&q.rank)
            .then(p.from.total_cmp(&q.from))
            .then(p.to.total_cmp(&q.to))
    });
    placed
}

fn draw_row_backgrounds(w: &mut SvgWriter, plot: &Plot, row_top: &[f64], row_h: f64) {
    let inset = if row_h >= 8.0 { 1.0 } else { 0.0 };
    let mut d = String::new();
    for top in row_top {
        d.push('M');
        svg::push_num(&mut d, plot.left);
        d.push(' ');
        svg::push_num(&mut d, top + inset);
        d.push('h');
        svg::push_num(&mut d, plot.width());
        d.push('v');
        svg::push_num(&mut d, row_h - 2.0 * inset);
        d.push('h');
        svg::push_num(&mut d, -plot.width());
        d.push('z');
    }
    w.start("path")
        .attr("class", "ll-row-background")
        .attr("d", &d)
        .attr("fill", palette::EMPTY_ROW)
        .leaf();
}

fn draw_row_labels(
    w: &mut SvgWriter,
    plot: &Plot,
    rows: &[&MapRow],
    row_top: &[f64],
    row_h: f64,
    bands: &[(f64, String)],
) {
    w.start("g").attr("class", "ll-zones").open();
    for (top, zone) in bands {
        let name = fit_text(zone, FONT_SMALL * 1.1, plot.right - MARGIN - 40.0);
        let baseline = top + ZONE_BAND - 5.0;
        let rule_x = MARGIN + bold_text_width(&name, FONT_SMALL) + 8.0;
        if rule_x < plot.right {
            w.start("line")
                .num("x1", rule_x)
                .num("y1", baseline - 3.5)
                .num("x2", plot.right)
                .num("y2", baseline - 3.5)
                .attr("stroke", "#c9c9c9")
                .num("stroke-width", 1.0)
                .leaf();
        }
        frame::text(
            w,
            MARGIN,
            baseline,
            &name,
            TextStyle::new(FONT_SMALL).bold().halo(),
        );
    }
    w.close();

    let size = (row_h * 0.8).min(FONT_SMALL);
    let every = if row_h >= 8.0 {
        1
    } else {
        (9.0 / row_h).ceil() as usize
    };
    w.start("g")
        .attr("class", "ll-layers")
        .num("font-size", size)
        .attr("fill", palette::INK)
        .attr("text-anchor", "end")
        .open();
    for (rank, row) in rows.iter().enumerate() {
        if rank % every != 0 {
            continue;
        }
        let text = fit_text(&row.layer, size, plot.left - 10.0);
        w.start("text")
            .num("x", plot.left - 6.0)
            .num("y", row_top[rank] + row_h / 2.0 + size * 0.36)
            .open()
            .text(&text)
            .close();
    }
    w.close();
}

fn draw_cells(
    w: &mut SvgWriter,
    input: &LiftMapInput,
    cells: &[Cell],
    row_top: &[f64],
    row_h: f64,
    pattern_id: &dyn Fn(MapState) -> String,
) {
    if cells.is_empty() {
        return;
    }
    let label = &input.chainage_label;
    let (y_off, h) = bar_band(row_h);
    w.start("g").attr("class", "ll-cells").open();
    for state in MapState::ALL {
        let mine: Vec<&Cell> = cells.iter().filter(|c| c.bucket.worst() == state).collect();
        if mine.is_empty() {
            continue;
        }
        open_state_group(w, state, pattern_id);
        for cell in mine {
            let counts = &cell.bucket.counts;
            let total: u32 = counts.iter().sum();
            let mut by_severity: Vec<MapState> = MapState::ALL.to_vec();
            by_severity.sort_by_key(|s| std::cmp::Reverse(s.severity()));
            let parts: Vec<String> = by_severity
                .iter()
                .filter(|s| counts[s.index()] > 0)
                .map(|s| format!("{} {}", counts[s.index()], s.label()))
                .collect();
            let title = format!(
                "{}–{}: {total} lot{}, {}",
                label(cell.bucket.from),
                label(cell.bucket.to),
                if total == 1 { "" } else { "s" },
                parts.join(", ")
            );
            let href = input
                .zoom_href
                .as_ref()
                .map(|f| f(cell.bucket.from, cell.bucket.to));
            open_link(w, href.as_deref().and_then(svg::safe_href));
            w.simple("title", &title);
            w.start("rect")
                .num("x", tenth(cell.x0))
                .num("y", tenth(row_top[cell.rank] + y_off))
                .num("width", tenth(cell.x1) - tenth(cell.x0))
                .num("height", tenth(h))
                .leaf();
            w.close();
        }
        w.close();
    }
    w.close();
}

fn draw_separate(
    w: &mut SvgWriter,
    lots: &[Placed<'_>],
    row_top: &[f64],
    row_h: f64,
    pattern_id: &dyn Fn(MapState) -> String,
) {
    if lots.is_empty() {
        return;
    }
    let (y_off, h) = bar_band(row_h);
    w.start("g").attr("class", "ll-lots").open();
    for state in MapState::ALL {
        let mine: Vec<&Placed<'_>> = lots.iter().filter(|p| p.lot.state == state).collect();
        if mine.is_empty() {
            continue;
        }
        open_state_group(w, state, pattern_id);
        for p in mine {
            let lot_w = p.x1 - p.x0;
            // A hairline gap shows where one lot ends and the next begins.
            let gap = if lot_w >= 4.0 { 0.6 } else { 0.0 };
            open_link(w, svg::safe_href(&p.lot.href));
            w.simple("title", &lot_title(p.lot));
            w.start("rect")
                .num("x", tenth(p.x0 + gap / 2.0))
                .num("y", tenth(row_top[p.rank] + y_off))
                .num("width", tenth(lot_w - gap))
                .num("height", tenth(h))
                .leaf();
            w.close();
        }
        w.close();
    }
    w.close();

    draw_marks(w, lots, row_top, row_h);
}

/// Where a bar sits in its row (offset from the row's top, height): a 1 px inset when rows are tall.
fn bar_band(row_h: f64) -> (f64, f64) {
    if row_h >= 8.0 {
        (1.0, row_h - 2.0)
    } else {
        (0.0, row_h)
    }
}

/// Opens the group of one state's shapes, filled with its pattern.
fn open_state_group(w: &mut SvgWriter, state: MapState, pattern_id: &dyn Fn(MapState) -> String) {
    w.start("g")
        .attr("class", &format!("ll-{}", state.token()))
        .attr("fill", &format!("url(#{})", pattern_id(state)))
        .open();
}

/// Opens a link to `href`, or a plain group when there is none (or it is not safe).
fn open_link(w: &mut SvgWriter, href: Option<&str>) {
    match href {
        Some(href) => w.start("a").attr("href", href),
        None => w.start("g"),
    };
    w.open();
}

/// Text marks on lots wide enough to hold them; clicks pass through to the lot below.
fn draw_marks(w: &mut SvgWriter, lots: &[Placed<'_>], row_top: &[f64], row_h: f64) {
    let size = (row_h * 0.62).min(10.5);
    if size < 6.0 {
        return;
    }
    w.start("g")
        .attr("class", "ll-marks")
        .attr("pointer-events", "none")
        .num("font-size", size)
        .attr("font-weight", "700")
        .attr("text-anchor", "middle")
        .open();
    for state in MapState::ALL {
        let mark = state.mark();
        let room = text_width(mark, size) + 6.0;
        let mine: Vec<&Placed<'_>> = lots
            .iter()
            .filter(|p| p.lot.state == state && p.x1 - p.x0 >= room)
            .collect();
        if mine.is_empty() {
            continue;
        }
        let style = state_style(state);
        w.start("g")
            .attr("fill", style.mark_ink)
            .attr("stroke", style.fill)
            .num("stroke-width", 2.5)
            .attr("stroke-linejoin", "round")
            .attr("paint-order", "stroke")
            .open();
        for p in mine {
            w.start("text")
                .num("x", tenth((p.x0 + p.x1) / 2.0))
                .num("y", tenth(row_top[p.rank] + row_h / 2.0 + size * 0.36))
                .open()
                .text(mark)
                .close();
        }
        w.close();
    }
    w.close();
}

/// Rounds a coordinate to a tenth of a pixel: finer than any screen, and it keeps big maps small.
fn tenth(v: f64) -> f64 {
    (v * 10.0).round() / 10.0
}

/// The lot's own tooltip, with its state added when the text does not already name it.
fn lot_title(lot: &MapLot) -> String {
    let label = lot.state.label();
    if lot.title.trim().is_empty() {
        return format!("Lot ({label})");
    }
    if lot.title.to_lowercase().contains(label) {
        lot.title.clone()
    } else {
        format!("{} ({label})", lot.title)
    }
}

fn legend_items(pattern_id: &dyn Fn(MapState) -> String) -> Vec<LegendItem> {
    let mut items: Vec<LegendItem> = MapState::ALL
        .iter()
        .map(|s| LegendItem {
            swatch: Swatch::Fill {
                fill: format!("url(#{})", pattern_id(*s)),
                mark: Some((s.mark().to_string(), state_style(*s).mark_ink)),
            },
            label: s.label().to_string(),
        })
        .collect();
    items.push(LegendItem {
        swatch: Swatch::Fill {
            fill: palette::EMPTY_ROW.to_string(),
            mark: None,
        },
        label: "no lot yet".to_string(),
    });
    items
}

fn describe(input: &LiftMapInput, separate: &[Placed<'_>], cells: &[Cell]) -> String {
    let mut counts = [0u32; 7];
    for p in separate {
        counts[p.lot.state.index()] += 1;
    }
    for c in cells {
        for (a, b) in counts.iter_mut().zip(c.bucket.counts) {
            *a += b;
        }
    }
    let parts: Vec<String> = MapState::ALL
        .iter()
        .filter(|s| counts[s.index()] > 0)
        .map(|s| format!("{} {}", counts[s.index()], s.label()))
        .collect();
    let mut text = if parts.is_empty() {
        "No lots placed yet.".to_string()
    } else {
        format!("Lots by state: {}.", parts.join(", "))
    };
    if !cells.is_empty() {
        text.push_str(&format!(
            " Narrow lots are grouped into {} cells showing the most urgent state inside.",
            cells.len()
        ));
    }
    let skipped = input.lots.len() - separate.len() - counts_total(cells);
    if skipped > 0 {
        text.push_str(&format!(
            " {skipped} lots lie outside the rows or chainage shown."
        ));
    }
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zone_groups_run_top_down() {
        let rows = [
            MapRow {
                zone: "fill".into(),
                layer: "1".into(),
                row: 0,
            },
            MapRow {
                zone: "fill".into(),
                layer: "2".into(),
                row: 1,
            },
            MapRow {
                zone: "capping".into(),
                layer: "3".into(),
                row: 2,
            },
        ];
        let refs: Vec<&MapRow> = rows.iter().collect();
        let groups = zone_groups(&refs);
        assert_eq!(
            groups,
            vec![
                ("capping".to_string(), vec![2]),
                ("fill".to_string(), vec![1, 0])
            ]
        );
    }
}
