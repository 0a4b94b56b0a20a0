//! The Righting screen: the roll plan from where the vehicle rests to a
//! take-off face, on the net as numbered hinges and as a table, stepped by
//! hand with Enter and verified against live attitude.

use crate::tui::model::Model;
use crate::tui::net_view::NetView;
use crate::tui::view::base_marks;
use cagehand::attitude::{rpy_deg, whole_deg};
use cagehand::righting::stepper::Phase;
use cagehand::righting::{MoveKind, Plan};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::Modifier;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Table, Wrap};

/// Faces along a plan, start first.
pub fn path_faces(plan: &Plan) -> Vec<usize> {
    let mut v = vec![plan.from];
    v.extend(plan.steps.iter().map(|s| s.to));
    v
}

/// Draw the Righting screen.
pub fn righting(model: &Model, frame: &mut Frame, area: Rect) {
    let t = &model.theme;
    let [net_area, side] =
        Layout::horizontal([Constraint::Min(30), Constraint::Length(58)]).areas(area);
    let plan = model.shown_plan();
    let mut marks = base_marks(model);
    if let Some(p) = plan {
        marks.path = path_faces(p);
    }
    frame.render_widget(
        NetView {
            cage: &model.cage,
            net: &model.net,
            marks: &marks,
            theme: t,
            block: Block::default()
                .borders(Borders::ALL)
                .title(" Net: numbered hinges are the planned rolls "),
        },
        net_area,
    );

    let side_block = Block::default().borders(Borders::ALL).title(" Recovery ");
    let side_inner = side_block.inner(side);
    frame.render_widget(side_block, side);
    let [caution, head, table, foot] = Layout::vertical([
        Constraint::Length(6),
        Constraint::Length(3),
        Constraint::Min(4),
        Constraint::Length(9),
    ])
    .areas(side_inner);
    frame.render_widget(
        Paragraph::new(
            cagehand::caution::CAUTION_LINES
                .iter()
                .enumerate()
                .map(|(i, l)| Line::styled(*l, if i == 0 { t.alarm } else { t.warn }))
                .collect::<Vec<_>>(),
        )
        .wrap(Wrap { trim: true }),
        caution,
    );

    let cage = &model.cage;
    let fid = |i: usize| cage.faces.get(i).map_or("?", |f| f.id.as_str());
    let stepping = model.righting.as_ref().and_then(|r| r.stepper.as_ref());
    let head_lines = match plan {
        None => vec![Line::styled(
            "No plan yet: waiting for the vehicle to rest on a face.",
            t.dim,
        )],
        Some(p) if !p.reachable => vec![
            Line::from(vec![
                Span::styled(format!("From {}: ", fid(p.from)), t.text),
                Span::styled("NO ROUTE", t.alarm),
            ]),
            Line::styled(p.reason.clone().unwrap_or_default(), t.warn),
        ],
        Some(p) if p.steps.is_empty() => vec![Line::styled(
            format!("On take-off face {}: no roll needed.", fid(p.from)),
            t.good,
        )],
        Some(p) => vec![
            Line::from(vec![Span::styled(
                format!(
                    "From {} to {}: {} steps, {:.0} deg",
                    fid(p.from),
                    p.goal.map_or("?", fid),
                    p.steps.len(),
                    p.total_angle_deg
                ),
                t.text.add_modifier(Modifier::BOLD),
            )]),
            Line::styled(p.note.clone().unwrap_or_default(), t.warn),
        ],
    };
    frame.render_widget(Paragraph::new(head_lines).wrap(Wrap { trim: true }), head);

    let current = stepping.and_then(|s| match s.phase() {
        Phase::Waiting { step } | Phase::Commanded { step, .. } | Phase::Rolling { step } => {
            Some(step)
        }
        _ => None,
    });
    let rows: Vec<Row> = plan
        .map(|p| {
            p.steps
                .iter()
                .enumerate()
                .map(|(k, s)| {
                    let pivot: Vec<&str> =
                        s.pivot.iter().map(|&i| cage.nodes[i].id.as_str()).collect();
                    let [r, pi, y] = rpy_deg(&s.target);
                    let marker = if current == Some(k) { ">" } else { " " };
                    let row = Row::new(vec![
                        format!("{marker}{}", k + 1),
                        match s.kind {
                            MoveKind::Edge => "roll".to_string(),
                            MoveKind::Vertex => "pivot".to_string(),
                        },
                        pivot.join("-"),
                        format!("{:.1}", s.angle_deg),
                        format!("{:.0}%", s.thrust_fraction * 100.0),
                        fid(s.to).to_string(),
                        format!(
                            "{:.0} {:.0} {:.0}",
                            whole_deg(r),
                            whole_deg(pi),
                            whole_deg(y)
                        ),
                    ]);
                    if current == Some(k) {
                        row.style(t.accent.add_modifier(Modifier::REVERSED))
                    } else {
                        row.style(t.text)
                    }
                })
                .collect()
        })
        .unwrap_or_default();
    frame.render_widget(
        Table::new(
            rows,
            [
                Constraint::Length(3),
                Constraint::Length(5),
                Constraint::Length(8),
                Constraint::Length(6),
                Constraint::Length(6),
                Constraint::Length(4),
                Constraint::Min(11),
            ],
        )
        .header(
            Row::new(vec![
                "#",
                "move",
                "pivot",
                "deg",
                "thrust",
                "to",
                "expect r p y",
            ])
            .style(t.accent),
        )
        .block(Block::default().borders(Borders::TOP).title(" Steps ")),
        table,
    );

    let action = match stepping.map(|s| s.phase()) {
        None if plan.is_some_and(|p| p.reachable && !p.steps.is_empty()) => {
            "Enter: command step 1 (the tool watches the roll)".to_string()
        }
        None => "Nothing to command.".to_string(),
        Some(Phase::Waiting { step }) => format!("Enter: command step {}", step + 1),
        Some(Phase::Commanded { step, .. }) => {
            format!("Step {} commanded: waiting for motion", step + 1)
        }
        Some(Phase::Rolling { step }) => format!("Step {}: rolling, waiting to settle", step + 1),
        Some(Phase::Done) => "Righting complete: run the Preflight check (4).".to_string(),
        Some(Phase::NoRoute) => "No route from here: see the reason above.".to_string(),
    };
    let mut foot_lines = vec![
        Line::styled(action, t.accent),
        Line::styled("x: abandon stepping and replan", t.dim),
    ];
    if let Some(r) = &model.righting {
        foot_lines.extend(r.log.iter().map(|l| Line::styled(l.clone(), t.text)));
    }
    frame.render_widget(
        Paragraph::new(foot_lines)
            .wrap(Wrap { trim: true })
            .block(Block::default().borders(Borders::TOP).title(" Stepping ")),
        foot,
    );
}
