//! The Preflight screen: draws the checklist as the core evaluated it
//! (src/preflight.rs); this view decides nothing.

use crate::tui::model::Model;
use cagehand::preflight::Outcome;
use ratatui::Frame;
use ratatui::layout::{Constraint, Rect};
use ratatui::widgets::{Block, Borders, Row, Table};

/// Draw the Preflight screen.
pub fn preflight(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let rows: Vec<Row> = match &model.live.preflight {
        None => vec![
            Row::new(vec![
                String::new(),
                "WAIT".to_string(),
                "evaluating the checklist".to_string(),
                String::new(),
            ])
            .style(t.warn),
        ],
        Some(eval) => eval
            .items
            .iter()
            .map(|item| {
                let style = match item.result {
                    Outcome::Pass => t.good,
                    Outcome::Fail => t.alarm,
                    Outcome::Waiting | Outcome::Hand => t.warn,
                };
                Row::new(vec![
                    item.n.to_string(),
                    item.result.name().to_uppercase(),
                    item.text.clone(),
                    item.detail.clone(),
                ])
                .style(style)
            })
            .collect(),
    };
    frame.render_widget(
        Table::new(
            rows,
            [
                Constraint::Length(3),
                Constraint::Length(7),
                Constraint::Min(30),
                Constraint::Min(20),
            ],
        )
        .header(Row::new(vec!["#", "", "item", "detail"]).style(t.accent))
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(" Preflight checklist "),
        ),
        area,
    );
}
