//! What the screens' tables share: which rows fit and which are shown (so
//! the title says exactly the rows on screen and scrolling stops at the
//! last row), and which columns fit when space is short (the most important
//! kept first, never a column cut to a letter).

use ratatui::layout::Constraint;
use ratatui::style::Style;
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Row, Table};

/// The rows of a list shown in a window of `visible` rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Window {
    /// First row shown.
    pub offset: usize,
    /// Rows shown (at most `visible`, fewer at the end of a short list).
    pub shown: usize,
    /// Rows in the list.
    pub len: usize,
}

impl Window {
    /// The window that shows `selected`, moved as little as possible from
    /// `offset`, and never scrolled past the last row.
    pub fn new(selected: usize, offset: usize, visible: usize, len: usize) -> Window {
        let visible = visible.max(1);
        let max_offset = len.saturating_sub(visible);
        let mut offset = offset.min(max_offset);
        if selected < offset {
            offset = selected;
        } else if selected >= offset + visible {
            offset = selected + 1 - visible;
        }
        let offset = offset.min(max_offset);
        Window {
            offset,
            shown: visible.min(len - offset.min(len)),
            len,
        }
    }

    /// "Members 11-30 of 30", "All 8 members", "1 step", "No members":
    /// the rows actually shown, for a table's title. `noun` is singular.
    pub fn title(&self, noun: &str) -> String {
        if self.len == 0 || self.shown == 0 {
            return format!("No {noun}s");
        }
        let first = self.offset + 1;
        let last = self.offset + self.shown;
        if self.len == 1 {
            format!("1 {noun}")
        } else if first == 1 && last == self.len {
            format!("All {} {noun}s", self.len)
        } else {
            let mut c = noun.chars();
            let noun: String = c
                .next()
                .map_or(String::new(), |f| f.to_uppercase().chain(c).collect());
            format!("{noun}s {first}-{last} of {}", self.len)
        }
    }
}

/// One column of a table.
#[derive(Debug, Clone, Copy)]
pub struct Column {
    /// Header text.
    pub header: &'static str,
    /// Width in cells (the least width for a `flex` column).
    pub width: u16,
    /// Rank when space is short: 0 is kept first.
    pub rank: u8,
    /// Takes the room left over.
    pub flex: bool,
}

/// Spacing between columns, as ratatui's `Table` uses by default.
pub const COLUMN_SPACING: u16 = 1;

/// Indices (in table order) of the columns that fit in `width`, taken by
/// rank; and their constraints. Columns that do not fit are left out whole.
pub fn fit(columns: &[Column], width: u16) -> (Vec<usize>, Vec<Constraint>) {
    let mut by_rank: Vec<usize> = (0..columns.len()).collect();
    by_rank.sort_by_key(|&i| (columns[i].rank, i));
    let mut used: u16 = 0;
    let mut kept = Vec::new();
    for i in by_rank {
        let need = columns[i].width + if kept.is_empty() { 0 } else { COLUMN_SPACING };
        if used.saturating_add(need) <= width {
            used += need;
            kept.push(i);
        }
    }
    kept.sort_unstable();
    let constraints = kept
        .iter()
        .map(|&i| {
            let c = columns[i];
            if c.flex {
                Constraint::Min(c.width)
            } else {
                Constraint::Length(c.width)
            }
        })
        .collect();
    (kept, constraints)
}

/// Pick the kept cells of a row.
pub fn pick<T: Clone>(cells: &[T], kept: &[usize]) -> Vec<T> {
    kept.iter().filter_map(|&i| cells.get(i).cloned()).collect()
}

/// A table of the kept columns: their headers in `header_style`, the
/// rows, and a block with `borders` and `title` (the rows shown).
pub fn build<'a>(
    rows: Vec<Row<'a>>,
    columns: &[Column],
    kept: &[usize],
    widths: Vec<Constraint>,
    header_style: Style,
    borders: Borders,
    title: String,
) -> Table<'a> {
    let header: Vec<&str> = kept.iter().map(|&i| columns[i].header).collect();
    Table::new(rows, widths)
        .header(Row::new(header).style(header_style))
        .block(Block::default().borders(borders).title(title))
}

/// A row in `style`; the selected one has its reverse video swapped and is
/// underlined, so it stands out where colour cannot, even among rows that
/// an alarm already shows reversed (a FAIL item, a member to REPLACE NOW).
pub fn selectable(row: Row<'_>, style: Style, selected: bool) -> Row<'_> {
    row.style(selected_style(style, selected))
}

/// The style of a row, selected or not (see [`selectable`]).
pub fn selected_style(style: Style, selected: bool) -> Style {
    use ratatui::style::Modifier;
    if !selected {
        style
    } else if style.add_modifier.contains(Modifier::REVERSED) {
        style
            .remove_modifier(Modifier::REVERSED)
            .add_modifier(Modifier::UNDERLINED)
    } else {
        style.add_modifier(Modifier::REVERSED | Modifier::UNDERLINED)
    }
}

/// Rows a paragraph of `lines` takes when wrapped at `width` (an estimate
/// that errs high: word wrap can only add a row per line).
pub fn wrapped_height(lines: &[Line], width: u16) -> u16 {
    let w = usize::from(width.max(1));
    lines
        .iter()
        .map(|l| {
            let n = l.width();
            if n == 0 {
                1
            } else {
                n.div_ceil(w) + usize::from(n > w)
            }
        })
        .sum::<usize>()
        .try_into()
        .unwrap_or(u16::MAX)
}

#[cfg(test)]
mod tests {

    /// The selection shows without colour, and differs from an alarm row
    /// that is reversed already.
    #[test]
    fn a_selected_row_differs_from_every_unselected_one_without_colour() {
        use ratatui::style::Modifier;
        let plain = Style::default();
        let alarm = Style::default().add_modifier(Modifier::BOLD | Modifier::REVERSED);
        for style in [plain, alarm] {
            let on = selected_style(style, true);
            assert_ne!(on, selected_style(plain, false));
            assert_ne!(on, selected_style(alarm, false));
            assert!(on.add_modifier.contains(Modifier::UNDERLINED));
        }
    }
    use super::*;

    #[test]
    fn window_keeps_the_selection_in_view_and_stops_at_the_end() {
        let w = Window::new(0, 0, 20, 30);
        assert_eq!((w.offset, w.shown), (0, 20));
        assert_eq!(w.title("member"), "Members 1-20 of 30");
        let w = Window::new(29, 0, 20, 30);
        assert_eq!((w.offset, w.shown), (10, 20));
        assert_eq!(w.title("member"), "Members 11-30 of 30");
        // An offset past the end is pulled back: no empty rows after the last.
        let w = Window::new(29, 25, 20, 30);
        assert_eq!(w.offset, 10);
        let w = Window::new(3, 0, 40, 30);
        assert_eq!(w.title("member"), "All 30 members");
        assert_eq!(Window::new(0, 0, 5, 0).title("member"), "No members");
        assert_eq!(Window::new(0, 0, 5, 1).title("step"), "1 step");
        // Moving up inside the window does not scroll.
        let w = Window::new(12, 10, 20, 30);
        assert_eq!(w.offset, 10);
    }

    #[test]
    fn columns_drop_by_rank_and_keep_order() {
        let cols = [
            Column {
                header: "id",
                width: 6,
                rank: 0,
                flex: false,
            },
            Column {
                header: "kind",
                width: 6,
                rank: 3,
                flex: false,
            },
            Column {
                header: "status",
                width: 8,
                rank: 1,
                flex: false,
            },
            Column {
                header: "why",
                width: 10,
                rank: 2,
                flex: true,
            },
        ];
        let (kept, c) = fit(&cols, 80);
        assert_eq!(kept, vec![0, 1, 2, 3]);
        assert_eq!(c.len(), 4);
        let (kept, _) = fit(&cols, 26);
        assert_eq!(kept, vec![0, 2, 3], "kind goes first");
        let (kept, _) = fit(&cols, 15);
        assert_eq!(kept, vec![0, 2], "id and status stay");
        assert_eq!(pick(&["a", "b", "c", "d"], &kept), vec!["a", "c"]);
    }
}
