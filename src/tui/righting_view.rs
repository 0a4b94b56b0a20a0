//! The Righting screen: where the vehicle rests and which faces it can take
//! off from, on the net.

use crate::tui::model::Model;
use crate::tui::net_view::NetView;
use crate::tui::view::base_marks;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

/// Draw the Righting screen.
pub fn righting(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let [net_area, side] =
        Layout::horizontal([Constraint::Min(30), Constraint::Length(44)]).areas(area);
    let marks = base_marks(model);
    frame.render_widget(
        NetView {
            cage: &model.cage,
            net: &model.net,
            marks: &marks,
            theme: t,
            block: Block::default().borders(Borders::ALL).title(" Net "),
        },
        net_area,
    );
    let ids: Vec<&str> = model
        .takeoff
        .iter()
        .map(|&i| model.cage.faces[i].id.as_str())
        .collect();
    let lines = vec![
        Line::styled("CAUTION", t.alarm),
        Line::styled(
            "Keep clear of propellers. Disarm before you touch the vehicle.",
            t.warn,
        ),
        Line::styled(
            "Plans are estimates from the profile, not guarantees.",
            t.warn,
        ),
        Line::raw(""),
        Line::from(format!(
            "Take-off faces: {}",
            if ids.is_empty() {
                "none".to_string()
            } else {
                ids.join(" ")
            }
        )),
    ];
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: true })
            .block(Block::default().borders(Borders::ALL).title(" Recovery ")),
        side,
    );
}
