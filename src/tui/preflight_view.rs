//! The Preflight screen: the profile's checklist, automatic items evaluated
//! from the live picture.

use crate::health::Status;
use crate::profile::AutoCheck;
use crate::tui::model::{LiveState, Model};
use ratatui::Frame;
use ratatui::layout::{Constraint, Rect};
use ratatui::widgets::{Block, Borders, Row, Table};

/// Result of an automatic check, in words.
pub fn auto_result(model: &Model, check: AutoCheck) -> (&'static str, String) {
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
            _ => ("WAIT", "not resting".to_string()),
        },
        AutoCheck::LinkFresh => match live.state {
            LiveState::Stale => ("FAIL", "data is stale".to_string()),
            LiveState::Waiting => ("WAIT", "no data yet".to_string()),
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

/// Draw the Preflight screen.
pub fn preflight(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let rows = model
        .profile
        .preflight
        .items
        .iter()
        .enumerate()
        .map(|(i, item)| {
            let (mark, detail) = match item.check {
                Some(c) => auto_result(model, c),
                None => ("HAND", "check by hand".to_string()),
            };
            let style = match mark {
                "PASS" => t.good,
                "FAIL" => t.alarm,
                _ => t.warn,
            };
            Row::new(vec![
                format!("{}", i + 1),
                mark.to_string(),
                item.text.clone(),
                detail,
            ])
            .style(style)
        });
    frame.render_widget(
        Table::new(
            rows,
            [
                Constraint::Length(3),
                Constraint::Length(5),
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
