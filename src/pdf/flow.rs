//! Places blocks one under another and starts a new page when the next block
//! does not fit. A block is measured on a non-recording canvas first.

use super::blocks::Column;
use super::canvas::Canvas;
use super::layout::PageGeometry;

/// A block: draws itself in `Column` with its top at the given y, returns its height.
pub(super) type Block<'a> = Box<dyn Fn(&mut Canvas, Column, f32) -> f32 + 'a>;

/// Pages filled so far and the cursor on the last one.
pub(super) struct Flow<'g> {
    geometry: &'g PageGeometry,
    pages: Vec<Canvas>,
    y: f32,
    page_is_empty: bool,
}

impl<'g> Flow<'g> {
    /// Starts on the first page, at the top of the text area.
    pub(super) fn new(geometry: &'g PageGeometry) -> Self {
        Self {
            geometry,
            pages: vec![Canvas::page()],
            y: geometry.top,
            page_is_empty: true,
        }
    }

    fn column(&self) -> Column {
        Column {
            x: self.geometry.left,
            width: self.geometry.content_width(),
        }
    }

    /// Places `block` `gap` below the previous one, on a new page if it does not fit.
    pub(super) fn place(&mut self, gap: f32, block: &Block<'_>) {
        let col = self.column();
        let height = block(&mut Canvas::measuring(), col, self.y);
        let mut gap = if self.page_is_empty { 0.0 } else { gap };
        if !self.page_is_empty && self.y - gap - height < self.geometry.bottom {
            self.new_page();
            gap = 0.0;
        }
        let top = self.y - gap;
        if let Some(page) = self.pages.last_mut() {
            block(page, col, top);
        }
        self.y = top - height;
        self.page_is_empty = false;
    }

    fn new_page(&mut self) {
        self.pages.push(Canvas::page());
        self.y = self.geometry.top_below_running_header();
        self.page_is_empty = true;
    }

    /// The pages, in order.
    pub(super) fn into_pages(self) -> Vec<Canvas> {
        self.pages
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pdf::model::Paper;

    #[test]
    fn a_block_that_does_not_fit_starts_a_new_page() {
        let g = PageGeometry::for_paper(Paper::A4);
        let room = g.top - g.bottom;
        let mut flow = Flow::new(&g);
        let big: Block<'_> = Box::new(move |_, _, _| room * 0.6);
        flow.place(0.0, &big);
        flow.place(10.0, &big);
        flow.place(10.0, &big);
        assert_eq!(flow.into_pages().len(), 3);
    }

    #[test]
    fn small_blocks_share_a_page() {
        let g = PageGeometry::for_paper(Paper::Letter);
        let mut flow = Flow::new(&g);
        let small: Block<'_> = Box::new(|_, _, _| 40.0);
        for _ in 0..5 {
            flow.place(8.0, &small);
        }
        assert_eq!(flow.into_pages().len(), 1);
    }
}
