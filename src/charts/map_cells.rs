//! Aggregation for the lift map: lots too narrow to draw one by one are gathered into cells, one per
//! pixel bucket per row, each showing the most urgent state inside; neighbouring buckets of the same
//! state merge up to 16 px. The cell width is [`MIN_LOT_PX`], widened only when rows × plot width
//! would need more than [`MAX_CELLS`] cells, which bounds the size of the SVG.

use std::collections::BTreeMap;

use super::frame::Plot;
use super::lift_map::MapLot;
use super::map_state::MapState;

/// Lots narrower than this (CSS px) are always aggregated into cells.
pub const MIN_LOT_PX: f64 = 2.0;
/// Budget of drawn elements per map: when rows × plot width / [`MIN_LOT_PX`] would exceed it, cells
/// (and the width below which lots are aggregated) widen so that the SVG stays small.
pub const MAX_CELLS: usize = 8000;
/// Neighbouring buckets with the same worst state merge into one cell up to this width (px).
const MAX_CELL_PX: f64 = 16.0;

/// A lot placed on the map: its display row and its chainage and pixel extent, clipped to the view.
pub(super) struct Placed<'a> {
    pub(super) lot: &'a MapLot,
    pub(super) rank: usize,
    pub(super) from: f64,
    pub(super) to: f64,
    pub(super) x0: f64,
    pub(super) x1: f64,
}

/// Lots gathered in one pixel bucket of one row: counts per state and the chainage they span.
#[derive(Clone, Copy)]
pub(super) struct Bucket {
    pub(super) counts: [u32; 7],
    pub(super) from: f64,
    pub(super) to: f64,
}

impl Bucket {
    /// The most urgent state present.
    pub(super) fn worst(&self) -> MapState {
        MapState::ALL
            .iter()
            .copied()
            .filter(|s| self.counts[s.index()] > 0)
            .max_by_key(|s| s.severity())
            .unwrap_or(MapState::Certified)
    }

    /// Takes in a neighbouring bucket's lots.
    fn add(&mut self, other: &Bucket) {
        for (a, b) in self.counts.iter_mut().zip(other.counts) {
            *a += b;
        }
        self.from = self.from.min(other.from);
        self.to = self.to.max(other.to);
    }
}

/// One aggregated cell to draw: a row, a pixel extent and the lots inside.
pub(super) struct Cell {
    pub(super) rank: usize,
    pub(super) x0: f64,
    pub(super) x1: f64,
    pub(super) bucket: Bucket,
}

/// Width of an aggregation cell: [`MIN_LOT_PX`], or wider when the map would exceed [`MAX_CELLS`].
pub fn cell_width_px(plot_width: f64, rows: usize) -> f64 {
    MIN_LOT_PX.max(plot_width * rows.max(1) as f64 / MAX_CELLS as f64)
}

/// Splits lots into those drawn one by one (at least a cell wide) and cells aggregating the rest.
pub(super) fn split_and_aggregate<'a>(
    placed: Vec<Placed<'a>>,
    plot: &Plot,
    rows: usize,
) -> (Vec<Placed<'a>>, Vec<Cell>) {
    let bucket_px = cell_width_px(plot.width(), rows);
    let (separate, narrow): (Vec<Placed<'a>>, Vec<Placed<'a>>) =
        placed.into_iter().partition(|p| p.x1 - p.x0 >= bucket_px);
    if narrow.is_empty() {
        return (separate, Vec::new());
    }
    let mut buckets: BTreeMap<(usize, i64), Bucket> = BTreeMap::new();
    for p in &narrow {
        let centre = (p.x0 + p.x1) / 2.0 - plot.left;
        let index = (centre / bucket_px).floor().max(0.0) as i64;
        let bucket = buckets.entry((p.rank, index)).or_insert(Bucket {
            counts: [0; 7],
            from: p.from,
            to: p.to,
        });
        bucket.counts[p.lot.state.index()] += 1;
        bucket.from = bucket.from.min(p.from);
        bucket.to = bucket.to.max(p.to);
    }
    let max_span = (MAX_CELL_PX / bucket_px).floor().max(1.0) as i64;
    let mut cells = Vec::new();
    let mut run: Option<(usize, i64, i64, Bucket)> = None;
    for ((rank, index), bucket) in buckets {
        if let Some((r, start, end, acc)) = run.as_mut()
            && *r == rank
            && index == *end + 1
            && index - *start < max_span
            && acc.worst() == bucket.worst()
        {
            acc.add(&bucket);
            *end = index;
            continue;
        }
        if let Some(done) = run.take() {
            cells.push(make_cell(done, plot, bucket_px));
        }
        run = Some((rank, index, index, bucket));
    }
    if let Some(done) = run {
        cells.push(make_cell(done, plot, bucket_px));
    }
    (separate, cells)
}

fn make_cell(
    (rank, start, end, bucket): (usize, i64, i64, Bucket),
    plot: &Plot,
    bucket_px: f64,
) -> Cell {
    let x0 = (plot.left + start as f64 * bucket_px).min(plot.right);
    let x1 = (plot.left + (end + 1) as f64 * bucket_px).min(plot.right);
    Cell {
        rank,
        x0: x0.min(x1 - 0.5),
        x1,
        bucket,
    }
}

/// Lots counted in all cells.
pub(super) fn counts_total(cells: &[Cell]) -> usize {
    cells
        .iter()
        .map(|c| c.bucket.counts.iter().sum::<u32>() as usize)
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bucket_shows_worst_state() {
        let mut counts = [0; 7];
        counts[MapState::Certified.index()] = 9;
        counts[MapState::OwedTests.index()] = 1;
        let b = Bucket {
            counts,
            from: 0.0,
            to: 1.0,
        };
        assert_eq!(b.worst(), MapState::OwedTests);
    }

    #[test]
    fn cells_widen_only_past_the_budget() {
        assert_eq!(cell_width_px(900.0, 12), MIN_LOT_PX);
        // 30 rows of 1 130 px need 16 950 two-pixel cells; the budget of 8 000 widens them.
        let wide = cell_width_px(1130.0, 30);
        assert!((wide - 1130.0 * 30.0 / 8000.0).abs() < 1e-9);
    }
}
