//! The Cage screen: every member with its capacity and, where a cage log
//! was read, its status, damage and the reasons in words.

use crate::tui::model::Model;
use cagehand::cage::MemberKind;
use cagehand::health::Status;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Table};

/// Draw the Cage screen.
pub fn cage(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let [caution, summary, table] = Layout::vertical([
        Constraint::Length(3),
        Constraint::Length(2),
        Constraint::Min(3),
    ])
    .areas(area);
    frame.render_widget(
        Paragraph::new(
            cagehand::caution::CAUTION_LINES
                .iter()
                .map(|l| Line::styled(format!(" {l}"), t.warn))
                .collect::<Vec<_>>(),
        ),
        caution,
    );
    let status_style = |s: Status| match s {
        Status::Ok => t.good,
        Status::Inspect => t.warn,
        Status::Due | Status::ReplaceNow => t.alarm,
    };
    let summary_line = match &model.health {
        Some(h) => {
            let act = h.to_act_on();
            Line::from(vec![
                Span::styled(format!(" Cage log: {}  ", model.health_source), t.dim),
                Span::styled(
                    format!(" worst {} ", h.worst().label()),
                    status_style(h.worst()),
                ),
                Span::styled(format!("  {} members to act on", act.len()), t.text),
            ])
        }
        None => Line::styled(format!(" Cage log: {}", model.health_source), t.dim),
    };
    frame.render_widget(Paragraph::new(summary_line), summary);

    let p = &model.profile;
    let rows = model
        .cage
        .members
        .iter()
        .enumerate()
        .skip(model.cage_scroll)
        .map(|(i, m)| {
            let kind = match m.kind {
                MemberKind::Rod => "rod",
                MemberKind::String => "string",
            };
            let cap = cagehand::statics::capacity_n(p, m.kind, m.length_m);
            let h = model
                .health
                .as_ref()
                .and_then(|h| h.members.get(i).filter(|mh| mh.id == m.id));
            let mut cells = vec![
                m.id.clone(),
                kind.to_string(),
                format!(
                    "{}-{}",
                    model.cage.nodes[m.nodes[0]].id, model.cage.nodes[m.nodes[1]].id
                ),
                format!("{:.0}", m.length_m * 1e3),
                format!("{cap:.0}"),
            ];
            match h {
                Some(h) => {
                    cells.push(h.status.label().to_string());
                    cells.push(format!("{:.2}", h.damage));
                    cells.push(format!("{:.0}%", h.max_utilisation * 100.0));
                    cells.push(h.reasons.join("; "));
                    Row::new(cells).style(status_style(h.status))
                }
                None => {
                    cells.extend([
                        "-".into(),
                        "-".into(),
                        "-".into(),
                        m.tag.clone().unwrap_or_default(),
                    ]);
                    Row::new(cells).style(t.text)
                }
            }
        });
    frame.render_widget(
        Table::new(
            rows,
            [
                Constraint::Length(6),
                Constraint::Length(7),
                Constraint::Length(9),
                Constraint::Length(7),
                Constraint::Length(9),
                Constraint::Length(12),
                Constraint::Length(7),
                Constraint::Length(6),
                Constraint::Min(10),
            ],
        )
        .header(
            Row::new(vec![
                "member", "kind", "nodes", "len mm", "cap N", "status", "damage", "max u", "why",
            ])
            .style(t.accent),
        )
        .block(Block::default().borders(Borders::ALL).title(format!(
            " Members {}-{} of {} (arrows scroll) ",
            model.cage_scroll + 1,
            model.cage.members.len(),
            model.cage.members.len()
        ))),
        table,
    );
}
