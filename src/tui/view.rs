//! `view(&Model, &mut Frame)`: the screens as pure functions of the model.

use crate::tui::model::{LiveState, Model, Screen};
use crate::tui::net_view::{NetMarks, NetView};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

/// Draw the whole screen.
pub fn view(model: &Model, frame: &mut Frame) {
    let [tabs, body, status] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Min(3),
        Constraint::Length(1),
    ])
    .areas(frame.area());
    frame.render_widget(tab_line(model), tabs);
    match model.screen {
        Screen::Watch => watch(model, frame, body),
        Screen::Righting => super::righting_view::righting(model, frame, body),
        Screen::Cage => super::cage_view::cage(model, frame, body),
        Screen::Preflight => super::preflight_view::preflight(model, frame, body),
    }
    frame.render_widget(status_line(model), status);
    if model.help {
        help(model, frame);
    }
}

fn tab_line(model: &Model) -> Paragraph<'static> {
    let t = &model.theme;
    let mut spans = vec![Span::styled(" cagehand ", t.accent), Span::raw(" ")];
    for (i, s) in Screen::ALL.iter().enumerate() {
        let label = format!(" {} {} ", i + 1, s.title());
        if *s == model.screen {
            spans.push(Span::styled(
                label,
                t.accent.add_modifier(Modifier::REVERSED),
            ));
        } else {
            spans.push(Span::styled(label, t.dim));
        }
    }
    spans.push(Span::styled("   ? keys  q quit", t.dim));
    Paragraph::new(Line::from(spans))
}

/// Style and word for the live state.
pub fn state_span(model: &Model) -> Span<'static> {
    let t = &model.theme;
    let s = model.live.state;
    let style = match s {
        LiveState::Resting => t.good,
        LiveState::Moving | LiveState::Airborne | LiveState::Waiting => t.warn,
        LiveState::Stale => t.alarm,
    };
    Span::styled(format!(" {} ", s.word()), style)
}

fn status_line(model: &Model) -> Paragraph<'static> {
    let t = &model.theme;
    let l = &model.live.link;
    let age = match l.age_s {
        Some(a) => format!("{:.1} s", a),
        None => "-".to_string(),
    };
    let battery = match model.live.battery_v {
        Some(v) if v < model.profile.preflight.min_battery_v => {
            Span::styled(format!(" {v:.2} V LOW "), t.alarm)
        }
        Some(v) => Span::styled(format!(" {v:.2} V "), t.text),
        None => Span::styled(" battery - ", t.dim),
    };
    let mut spans = vec![
        Span::styled(format!(" {} ", model.profile.vehicle.id), t.accent),
        Span::styled(
            format!(
                "| {} {:.0} Hz age {} frames {} errors {} | ",
                l.source, l.rate_hz, age, l.frames, l.errors
            ),
            t.dim,
        ),
        state_span(model),
        Span::raw(" "),
        battery,
    ];
    if let Some(n) = &model.notice {
        spans.push(Span::styled(format!("  {n}"), t.warn));
    }
    Paragraph::new(Line::from(spans))
}

/// The marks every net shows: resting face and take-off faces.
pub fn base_marks(model: &Model) -> NetMarks {
    NetMarks {
        resting: model.live.face,
        takeoff: model.takeoff.clone(),
        path: Vec::new(),
    }
}

fn watch(model: &Model, frame: &mut Frame, area: Rect) {
    let [net_area, side] =
        Layout::horizontal([Constraint::Min(30), Constraint::Length(34)]).areas(area);
    let marks = base_marks(model);
    frame.render_widget(
        NetView {
            cage: &model.cage,
            net: &model.net,
            marks: &marks,
            theme: &model.theme,
            block: Block::default()
                .borders(Borders::ALL)
                .title(Line::from(" Net of the cage (seen from outside) ")),
        },
        net_area,
    );
    frame.render_widget(watch_panel(model), side);
}

fn watch_panel(model: &Model) -> Paragraph<'static> {
    let t = &model.theme;
    let live = &model.live;
    let face = live.face.map(|f| &model.cage.faces[f]);
    let row = |k: &str, v: String, style: Style| {
        Line::from(vec![
            Span::styled(format!("{k:<11}"), t.dim),
            Span::styled(v, style),
        ])
    };
    let mut lines = vec![
        Line::from(vec![Span::styled("State      ", t.dim), state_span(model)]),
        row(
            "Face",
            match (face, live.state) {
                (Some(f), LiveState::Resting) => f.id.clone(),
                (Some(f), _) => format!("near {}", f.id),
                (None, _) => "-".into(),
            },
            t.text.add_modifier(Modifier::BOLD),
        ),
        row(
            "Off normal",
            live.error_deg.map_or("-".into(), |e| format!("{e:.1} deg")),
            t.text,
        ),
    ];
    if let Some(f) = face {
        let takeoff = live.face.is_some_and(|i| model.takeoff.contains(&i));
        lines.push(row(
            "Take-off",
            if takeoff {
                "yes: this face is a take-off face".into()
            } else {
                "no: see Righting (2)".into()
            },
            if takeoff { t.good } else { t.warn },
        ));
        lines.push(row(
            "Face edges",
            format!(
                "{} strings, {} gaps",
                f.string_edges,
                f.nodes.len() - f.string_edges
            ),
            t.text,
        ));
    }
    lines.push(Line::raw(""));
    match live.rpy_deg {
        Some([r, p, y]) => {
            lines.push(row("Roll", format!("{r:>7.1} deg"), t.text));
            lines.push(row("Pitch", format!("{p:>7.1} deg"), t.text));
            lines.push(row("Yaw", format!("{y:>7.1} deg"), t.text));
        }
        None => lines.push(row("Attitude", "no data".into(), t.warn)),
    }
    lines.push(row(
        "Armed",
        match live.armed {
            Some(true) => "ARMED".into(),
            Some(false) => "disarmed".into(),
            None => "-".into(),
        },
        if live.armed == Some(true) {
            t.alarm
        } else {
            t.text
        },
    ));
    lines.push(Line::raw(""));
    lines.push(Line::styled("Legend", t.dim));
    lines.push(Line::from(vec![
        Span::styled(
            "[F5]",
            t.text.add_modifier(Modifier::BOLD | Modifier::REVERSED),
        ),
        Span::styled(" resting face   ", t.dim),
        Span::styled("F1^", t.good),
        Span::styled(" take-off", t.dim),
    ]));
    lines.push(Line::styled("solid string   dashed rod gap", t.dim));
    Paragraph::new(lines)
        .block(Block::default().borders(Borders::ALL).title(" Vehicle "))
        .wrap(Wrap { trim: true })
}

fn help(model: &Model, frame: &mut Frame) {
    let t = &model.theme;
    let area = frame.area();
    let w = 56.min(area.width);
    let h = 20.min(area.height);
    let popup = Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    );
    let keys = [
        ("1 / w", "Watch: live attitude and resting face"),
        ("2 / r", "Righting: roll plan to a take-off face"),
        ("3 / c", "Cage: members and their health"),
        ("4 / p", "Preflight: checklist"),
        ("Enter", "Righting: command the next step of the plan"),
        ("x", "Righting: abandon stepping and replan"),
        ("< / >", "Righting: turn the view of the vehicle"),
        ("Up/Down", "Cage: scroll the members (PgUp/PgDn by 10)"),
        ("Tab", "next screen (Shift-Tab: previous)"),
        ("Esc", "clear the message line"),
        ("?", "this help; any key closes it"),
        ("q", "quit (Ctrl-C too)"),
    ];
    let mut lines: Vec<Line> = keys
        .iter()
        .map(|(k, v)| {
            Line::from(vec![
                Span::styled(format!(" {k:<8}"), t.accent),
                Span::raw(*v),
            ])
        })
        .collect();
    lines.push(Line::raw(""));
    lines.push(Line::styled(
        " Estimates are not guarantees: inspect the cage, keep clear of propellers.",
        t.warn,
    ));
    frame.render_widget(Clear, popup);
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .block(Block::default().borders(Borders::ALL).title(" Keys ")),
        popup,
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::model::{LiveView, Msg, update};
    use ratatui::Terminal;
    use ratatui::backend::TestBackend;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    fn model() -> Model {
        crate::tui::model::demo_model()
    }

    fn text(m: &Model) -> String {
        let mut term = Terminal::new(TestBackend::new(110, 32)).unwrap();
        term.draw(|f| view(m, f)).unwrap();
        let buf = term.backend().buffer();
        let mut s = String::new();
        for y in 0..buf.area.height {
            for x in 0..buf.area.width {
                s.push_str(buf[(x, y)].symbol());
            }
            s.push('\n');
        }
        s
    }

    #[test]
    fn watch_shows_resting_face_on_the_net_and_in_words() {
        let mut m = model();
        let mut live = LiveView::waiting("sim");
        live.state = LiveState::Resting;
        live.face = Some(4);
        live.error_deg = Some(1.5);
        live.rpy_deg = Some([10.0, -20.0, 30.0]);
        live.battery_v = Some(7.9);
        update(&mut m, Msg::Live(Box::new(live)));
        let s = text(&m);
        assert!(s.contains("[F5]"), "resting face framed on the net:\n{s}");
        assert!(s.contains("F1^"), "take-off face marked:\n{s}");
        assert!(s.contains("RESTING"));
        assert!(s.contains("1.5 deg"));
        assert!(s.contains("7.90 V"));
        assert!(s.contains("no: see Righting"), "F5 is not a take-off face");
    }

    #[test]
    fn stale_is_shown_in_words_not_only_colour() {
        let mut m = model();
        update(&mut m, Msg::LinkEnded("device gone".into()));
        let s = text(&m);
        assert!(s.contains("STALE"));
        assert!(s.contains("link ended: device gone"));
    }

    #[test]
    fn every_screen_and_the_help_draw_with_their_cautions() {
        let mut m = model();
        for (k, want) in [
            ('2', "aviation rules"),
            ('3', "not guarantees"),
            ('4', "Preflight checklist"),
        ] {
            update(
                &mut m,
                Msg::Key(KeyEvent::new(KeyCode::Char(k), KeyModifiers::NONE)),
            );
            let s = text(&m);
            assert!(s.contains(want), "screen {k}:\n{s}");
        }
        update(
            &mut m,
            Msg::Key(KeyEvent::new(KeyCode::Char('?'), KeyModifiers::NONE)),
        );
        let help = text(&m);
        assert!(
            help.contains(" Keys ") && help.contains("command the next step"),
            "{help}"
        );
    }
}
