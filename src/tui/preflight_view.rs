//! The Preflight screen: the profile's checklist, automatic items evaluated
//! from the live picture; the result column is the last to go when space
//! is short, and the selected item is shown whole below the table.

use crate::health::Status;
use crate::profile::AutoCheck;
use crate::tui::component::Component;
use crate::tui::keys::{Binding, Key, Move};
use crate::tui::model::{LiveState, Shared};
use crate::tui::table::{self, Column, Window};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Wrap};

/// Result of an automatic check, in words.
pub fn auto_result(model: &Shared, check: AutoCheck) -> (&'static str, String) {
    let live = &model.live;
    match check {
        AutoCheck::OnTakeoffFace => match (live.state, live.face) {
            (LiveState::Resting, Some(f)) if model.takeoff.contains(&f) => {
                ("PASS", format!("resting on {}", model.cage.faces[f].id))
            }
            (LiveState::Resting, Some(f)) => (
                "FAIL",
                format!("resting on {}, not a take-off face", model.cage.faces[f].id),
            ),
            (LiveState::Propped, _) => ("WAIT", "propped, not on a face".to_string()),
            _ => ("WAIT", "not resting".to_string()),
        },
        AutoCheck::LinkFresh => match live.state {
            LiveState::Stale if live.link.age_s.is_none() => ("WAIT", "no data yet".to_string()),
            LiveState::Stale => (
                "FAIL",
                format!(
                    "stale: {}",
                    live.reason.as_deref().unwrap_or("no fresh data")
                ),
            ),
            _ => ("PASS", format!("{:.0} Hz", live.link.rate_hz)),
        },
        AutoCheck::Battery => match live.battery_v {
            Some(v) if v >= model.profile.preflight.min_battery_v => ("PASS", format!("{v:.2} V")),
            Some(v) => (
                "FAIL",
                format!("{v:.2} V < {:.2} V", model.profile.preflight.min_battery_v),
            ),
            None => ("WAIT", "no battery data".to_string()),
        },
        AutoCheck::NoMemberDue => match &model.health {
            None => ("WAIT", format!("no health: {}", model.health_source)),
            Some(h) => {
                let due: Vec<&str> = h
                    .members
                    .iter()
                    .filter(|m| m.status >= Status::Due)
                    .map(|m| m.id.as_str())
                    .collect();
                if due.is_empty() {
                    (
                        "PASS",
                        format!("no member due ({} to inspect)", h.to_act_on().len()),
                    )
                } else {
                    ("FAIL", format!("due or overloaded: {}", due.join(" ")))
                }
            }
        },
    }
}

/// The Preflight screen's own state: the selected item and the first row shown.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct PreflightScreen {
    /// Selected item.
    pub selected: usize,
    /// First item row shown.
    pub offset: usize,
}

/// What the Preflight screen's keys do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PreflightAction {
    /// Move the selection.
    Select(Move),
}

const KEYS: &[Binding<PreflightAction>] = &[
    Binding {
        keys: &[Key::Down, Key::Char('j')],
        action: PreflightAction::Select(Move::Down),
        help: "next item (shown whole below the table)",
    },
    Binding {
        keys: &[Key::Up, Key::Char('k')],
        action: PreflightAction::Select(Move::Up),
        help: "previous item",
    },
];

/// Rows around the table: its border and header, and the detail pane.
const CHROME_ROWS: u16 = 3 + 4;

fn mark_style(shared: &Shared, mark: &str) -> Style {
    let t = &shared.theme;
    match mark {
        "PASS" => t.good,
        "FAIL" => t.alarm,
        _ => t.warn,
    }
}

impl PreflightScreen {
    fn result(shared: &Shared, i: usize) -> Option<(&'static str, String, String)> {
        let item = shared.profile.preflight.items.get(i)?;
        let (mark, detail) = match item.check {
            Some(c) => auto_result(shared, c),
            None => ("HAND", "check by hand".to_string()),
        };
        Some((mark, item.text.clone(), detail))
    }
}

impl Component for PreflightScreen {
    type Action = PreflightAction;

    fn keys(&self) -> &'static [Binding<PreflightAction>] {
        KEYS
    }

    fn min_size(&self) -> (u16, u16) {
        (50, CHROME_ROWS + 3)
    }

    fn act(&mut self, action: PreflightAction, shared: &mut Shared) -> bool {
        let PreflightAction::Select(m) = action;
        let len = shared.profile.preflight.items.len();
        let page = usize::from(shared.size.1.saturating_sub(3 + CHROME_ROWS)).max(1);
        self.selected = m.apply(self.selected, len, page);
        self.offset = Window::new(self.selected, self.offset, page, len).offset;
        true
    }

    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let n = shared.profile.preflight.items.len();
        // The table as tall as its items (no empty rows), the rest for the
        // selected item whole.
        let table_h = (n as u16 + 3).min(area.height.saturating_sub(4)).max(4);
        let [table_area, detail] =
            Layout::vertical([Constraint::Length(table_h), Constraint::Min(4)]).areas(area);
        let visible = usize::from(table_area.height.saturating_sub(3)).max(1);
        let win = Window::new(self.selected, self.offset, visible, n);
        let columns = [
            Column {
                header: "#",
                width: 2,
                rank: 1,
                flex: false,
            },
            Column {
                header: "result",
                width: 6,
                rank: 0,
                flex: false,
            },
            Column {
                header: "item",
                width: 20,
                rank: 0,
                flex: true,
            },
            Column {
                header: "detail",
                width: 18,
                rank: 2,
                flex: true,
            },
        ];
        let (kept, widths) = table::fit(&columns, table_area.width.saturating_sub(2));
        let rows: Vec<Row> = (win.offset..win.offset + win.shown)
            .filter_map(|i| {
                let (mark, text, detail) = Self::result(shared, i)?;
                let style = mark_style(shared, mark);
                let cells = vec![format!("{}", i + 1), mark.to_string(), text, detail];
                Some(table::selectable(
                    Row::new(table::pick(&cells, &kept)),
                    style,
                    i == self.selected,
                ))
            })
            .collect();
        frame.render_widget(
            table::build(
                rows,
                &columns,
                &kept,
                widths,
                t.accent,
                Borders::ALL,
                format!(" Preflight checklist: {} ", win.title("item")),
            ),
            table_area,
        );
        let detail_text = match Self::result(shared, self.selected) {
            Some((mark, text, d)) => Line::from(vec![
                Span::styled(
                    format!("{} {mark}: ", self.selected + 1),
                    mark_style(shared, mark),
                ),
                Span::styled(format!("{text}. "), t.text.add_modifier(Modifier::BOLD)),
                Span::styled(d, t.text),
            ]),
            None => Line::styled("the profile lists no pre-flight items", t.dim),
        };
        frame.render_widget(
            Paragraph::new(detail_text).wrap(Wrap { trim: true }).block(
                Block::default()
                    .borders(Borders::TOP)
                    .title(" Selected item "),
            ),
            detail,
        );
    }
}

#[cfg(test)]
mod tests {
    use crate::tui::model::{Msg, demo_model, update};
    use crate::tui::view::render_text;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    #[test]
    fn the_result_column_stays_when_narrow() {
        let mut m = demo_model();
        update(
            &mut m,
            Msg::Key(KeyEvent::new(KeyCode::Char('4'), KeyModifiers::NONE)),
        );
        let s = render_text(&m, 50, 14);
        assert!(s.contains("result"), "{s}");
        assert!(s.contains("WAIT") || s.contains("HAND"), "{s}");
        assert!(s.contains("Selected item"), "{s}");
    }
}
