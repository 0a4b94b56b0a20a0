//! The Cage screen: every member with its geometry and capacity.

use crate::cage::MemberKind;
use crate::tui::model::Model;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Paragraph, Row, Table};

/// Draw the Cage screen.
pub fn cage(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let [caution, table] =
        Layout::vertical([Constraint::Length(2), Constraint::Min(3)]).areas(area);
    frame.render_widget(
        Paragraph::new(vec![
            Line::styled(
                " Computed estimates, not guarantees. Inspect every rod and string by eye and hand after a crash;",
                t.warn,
            ),
            Line::styled(" structural decisions rest with the maker and a qualified engineer.", t.warn),
        ]),
        caution,
    );
    let p = &model.profile;
    let rows = model.cage.members.iter().map(|m| {
        let (kind, cap) = match m.kind {
            MemberKind::Rod => ("rod", p.rod.capacity_n(m.length_m)),
            MemberKind::String => ("string", p.string.capacity_n()),
        };
        Row::new(vec![
            m.id.clone(),
            kind.to_string(),
            format!(
                "{}-{}",
                model.cage.nodes[m.nodes[0]].id, model.cage.nodes[m.nodes[1]].id
            ),
            format!("{:.0}", m.length_m * 1e3),
            format!("{cap:.0}"),
            m.tag.clone().unwrap_or_default(),
        ])
    });
    frame.render_widget(
        Table::new(
            rows,
            [
                Constraint::Length(6),
                Constraint::Length(7),
                Constraint::Length(10),
                Constraint::Length(8),
                Constraint::Length(10),
                Constraint::Min(8),
            ],
        )
        .header(
            Row::new(vec![
                "member",
                "kind",
                "nodes",
                "len mm",
                "capacity N",
                "tag",
            ])
            .style(t.accent),
        )
        .block(Block::default().borders(Borders::ALL).title(" Members ")),
        table,
    );
}
