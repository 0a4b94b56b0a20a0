//! `view(&Model, &mut Frame)`: the frame around the screens (tabs, the
//! vehicle line, the message line, the help overlay, the too-small notice)
//! as a pure function of the model. Each screen draws its own body.

use crate::tui::component::Component;
use crate::tui::keys::{self, GLOBAL_KEYS};
use crate::tui::model::{LiveState, Model, Screen, Shared};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

/// Draw the whole screen.
pub fn view(model: &Model, frame: &mut Frame) {
    let area = frame.area();
    let (need_w, need_h) = min_size(model);
    if area.width < need_w || area.height < need_h {
        too_small(model, frame, (need_w, need_h));
        return;
    }
    // A long message (a write names the vehicle and the log file) wraps
    // onto up to three rows rather than losing its end.
    let notice_rows = model.shared.notice.as_ref().map_or(0, |n| {
        let chars = n.chars().count() + 16;
        u16::try_from(chars.div_ceil(usize::from(area.width.max(1))))
            .unwrap_or(3)
            .clamp(1, 3)
    });
    let pending_rows = u16::from(!model.shared.live.pending.is_empty());
    let [tabs, vehicle, pending, body, notice] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Length(1),
        Constraint::Length(pending_rows),
        Constraint::Min(3),
        Constraint::Length(notice_rows),
    ])
    .areas(area);
    frame.render_widget(tab_line(model), tabs);
    frame.render_widget(vehicle_line(&model.shared, vehicle.width), vehicle);
    if let Some(line) = pending_line(&model.shared) {
        frame.render_widget(Paragraph::new(line), pending);
    }
    let (s, sh) = (&model.screens, &model.shared);
    match model.screen {
        Screen::Watch => s.watch.draw(sh, frame, body),
        Screen::Righting => s.righting.draw(sh, frame, body),
        Screen::Cage => s.cage.draw(sh, frame, body),
        Screen::Preflight => s.preflight.draw(sh, frame, body),
    }
    if let Some(n) = &model.shared.notice {
        frame.render_widget(
            Paragraph::new(Line::from(vec![
                Span::styled("! ", model.shared.theme.warn),
                Span::styled(n.clone(), model.shared.theme.warn),
                Span::styled("  (Esc clears)", model.shared.theme.dim),
            ]))
            .wrap(Wrap { trim: false }),
            notice,
        );
    }
    if let Some(form) = &model.shared.form {
        form.draw(&model.shared, frame, body);
    }
    if model.help {
        help(model, frame);
    }
}

/// Smallest terminal the current screen (with its frame) can be drawn in.
pub fn min_size(model: &Model) -> (u16, u16) {
    let s = &model.screens;
    let (w, h) = match model.screen {
        Screen::Watch => s.watch.min_size(),
        Screen::Righting => s.righting.min_size(),
        Screen::Cage => s.cage.min_size(),
        Screen::Preflight => s.preflight.min_size(),
    };
    // Tab line, vehicle line, pending-detection line and a message line
    // around the body.
    (w, h + 4)
}

fn too_small(model: &Model, frame: &mut Frame, (w, h): (u16, u16)) {
    let area = frame.area();
    let t = &model.shared.theme;
    let text = format!(
        "{} needs {w}x{h}, the terminal is {}x{}: enlarge it (Tab: next screen, q: quit)",
        model.screen.title(),
        area.width,
        area.height
    );
    // A pending crash is said on every screen, this one too, and first.
    let lines: Vec<Line> = pending_line(&model.shared)
        .into_iter()
        .chain([Line::styled(text, t.warn)])
        .collect();
    frame.render_widget(Paragraph::new(lines).wrap(Wrap { trim: true }), area);
}

fn tab_line(model: &Model) -> Paragraph<'static> {
    let t = &model.shared.theme;
    let mut spans = vec![Span::styled("cagehand ", t.accent)];
    for (i, s) in Screen::ALL.iter().enumerate() {
        if *s == model.screen {
            spans.push(Span::styled(
                format!("[{} {}]", i + 1, s.title()),
                t.accent.add_modifier(Modifier::REVERSED),
            ));
        } else {
            spans.push(Span::styled(format!(" {} {} ", i + 1, s.title()), t.dim));
        }
    }
    spans.push(Span::styled("  ? keys", t.dim));
    Paragraph::new(Line::from(spans))
}

/// Style of a live state.
pub fn state_style(shared: &Shared) -> Style {
    let t = &shared.theme;
    match shared.live.state {
        LiveState::Resting => t.good,
        LiveState::Propped | LiveState::Moving | LiveState::Airborne => t.warn,
        LiveState::Stale => t.alarm,
    }
}

/// The state in a word with its symbol and, for a face, the face: what the
/// vehicle line and the Watch screen lead with. `long` adds how far off the
/// nearest face a propped or moving vehicle lies.
pub fn state_words(shared: &Shared, long: bool) -> String {
    let live = &shared.live;
    let s = live.state;
    let face = live.face.map(|f| shared.face_id(f).to_string());
    match (s, face) {
        (LiveState::Resting, Some(f)) => format!("{} {} on {f}", s.symbol(), s.word()),
        (LiveState::Propped, Some(f)) | (LiveState::Moving, Some(f)) => format!(
            "{} {} near {f}{}",
            s.symbol(),
            s.word(),
            match live.error_deg {
                Some(e) if long => format!(" ({e:.0} deg off)"),
                _ => String::new(),
            }
        ),
        _ => format!("{} {}", s.symbol(), s.word()),
    }
}

/// One line under the tabs: vehicle, state, link, battery. Where it does
/// not fit `width`, the link's details give way first (its age, then the
/// end of its source), so the state and the battery always show.
fn vehicle_line(shared: &Shared, width: u16) -> Paragraph<'static> {
    let t = &shared.theme;
    let l = &shared.live.link;
    let age = l.age_s.map_or("-".to_string(), |a| format!("{a:.1}s"));
    let battery = match shared.live.battery_v {
        Some(v) if v < shared.profile.preflight.min_battery_v => {
            Span::styled(format!("{v:.2}V LOW"), t.alarm)
        }
        Some(v) => Span::styled(format!("{v:.2}V"), t.text),
        None => Span::styled("batt -", t.dim),
    };
    let head = format!("{} ", shared.profile.vehicle.id);
    let state = state_words(shared, false);
    let room = usize::from(width)
        .saturating_sub(head.chars().count() + state.chars().count() + battery.width());
    let full = format!(
        "  link {} {:.0}Hz age {age} err {}  ",
        l.source, l.rate_hz, l.errors
    );
    let link = if full.chars().count() <= room {
        full
    } else {
        // Without the age; the source cut at its end, marked with `~`.
        let rest = format!(" {:.0}Hz err {}  ", l.rate_hz, l.errors);
        let fixed = "  link ".len() + rest.chars().count();
        let source: String = if l.source.chars().count() + fixed <= room {
            l.source.clone()
        } else {
            let keep = room.saturating_sub(fixed + 1);
            let mut cut: String = l.source.chars().take(keep).collect();
            cut.push('~');
            cut
        };
        format!("  link {source}{rest}")
    };
    Paragraph::new(Line::from(vec![
        Span::styled(head, t.accent),
        Span::styled(state, state_style(shared)),
        Span::styled(link, t.dim),
        battery,
    ]))
}

/// Detections not yet confirmed or dismissed, in one line that fits 80
/// columns: what, and what to do. None when there are none.
pub fn pending_line(shared: &Shared) -> Option<Line<'static>> {
    let t = &shared.theme;
    let p = &shared.live.pending;
    let text = match p.as_slice() {
        [] => return None,
        [one] => format!(
            "IMPACT #{} PENDING: {:.1} g on {}; confirm or dismiss it before flying",
            one.seq, one.peak_g, one.face
        ),
        many => format!(
            "{} IMPACTS PENDING ({}): confirm or dismiss each before flying",
            many.len(),
            many.iter()
                .map(|d| format!("#{}", d.seq))
                .collect::<Vec<_>>()
                .join(" ")
        ),
    };
    Some(Line::from(vec![
        Span::styled("!! ", t.alarm),
        Span::styled(text, t.alarm),
    ]))
}

/// The help's sections: the keys of every screen, then the current screen's.
pub fn help_sections(model: &Model) -> Vec<(String, Vec<(String, &'static str)>)> {
    let s = &model.screens;
    let screen_rows = match model.screen {
        Screen::Watch => keys::help_rows(s.watch.keys()),
        Screen::Righting => keys::help_rows(s.righting.keys()),
        Screen::Cage => keys::help_rows(s.cage.keys()),
        Screen::Preflight => keys::help_rows(s.preflight.keys()),
    };
    vec![
        ("Every screen".to_string(), keys::help_rows(GLOBAL_KEYS)),
        (format!("{} screen", model.screen.title()), screen_rows),
    ]
}

fn help(model: &Model, frame: &mut Frame) {
    let t = &model.shared.theme;
    let area = frame.area();
    let mut lines: Vec<Line> = Vec::new();
    let sections = help_sections(model);
    // The key column as wide as its longest entry (shared rows such as
    // `Down / j / Up / k`), at least 16, and always a space before the words.
    let kw = sections
        .iter()
        .flat_map(|(_, rows)| rows.iter().map(|(k, _)| k.chars().count() + 1))
        .max()
        .unwrap_or(0)
        .max(16);
    for (title, rows) in sections {
        lines.push(Line::styled(title, t.accent));
        if rows.is_empty() {
            lines.push(Line::styled("  no keys of its own", t.dim));
        }
        for (k, v) in rows {
            lines.push(Line::from(vec![
                Span::styled(format!("  {k:<kw$}"), t.text.add_modifier(Modifier::BOLD)),
                Span::raw(v),
            ]));
        }
    }
    let w = 78.min(area.width);
    let h = (lines.len() as u16 + 2).min(area.height);
    let popup = Rect::new(
        area.x + (area.width - w) / 2,
        area.y + (area.height - h) / 2,
        w,
        h,
    );
    frame.render_widget(Clear, popup);
    frame.render_widget(
        Paragraph::new(lines).wrap(Wrap { trim: false }).block(
            Block::default()
                .borders(Borders::ALL)
                .title(" Keys ")
                .title_bottom(Line::styled(
                    " Estimates are not guarantees: inspect the cage, keep clear of propellers. ",
                    t.warn,
                )),
        ),
        popup,
    );
}

/// Render a model into text at a size (tests and snapshots).
#[cfg(test)]
pub(crate) fn render_text(m: &Model, w: u16, h: u16) -> String {
    use ratatui::Terminal;
    use ratatui::backend::TestBackend;
    let mut term = Terminal::new(TestBackend::new(w, h)).expect("test backend");
    term.draw(|f| view(m, f)).expect("draw");
    let buf = term.backend().buffer();
    let mut s = String::new();
    for y in 0..buf.area.height {
        let mut line = String::new();
        for x in 0..buf.area.width {
            line.push_str(buf[(x, y)].symbol());
        }
        s.push_str(line.trim_end());
        s.push('\n');
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::model::{Msg, demo_model, update};
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    fn key(c: KeyCode) -> Msg {
        Msg::Key(KeyEvent::new(c, KeyModifiers::NONE))
    }

    #[test]
    fn a_terminal_too_small_still_shows_a_pending_crash() {
        let mut m = demo_model();
        let records = vec![crate::tui::model::detection_record(1)];
        update(&mut m, Msg::Records(records));
        let s = render_text(&m, 40, 10);
        assert!(s.contains("needs"), "{s}");
        assert!(s.contains("PENDING"), "{s}");
    }

    #[test]
    fn the_vehicle_line_keeps_the_battery_when_the_link_is_long() {
        let mut m = demo_model();
        m.shared.live.battery_v = Some(11.92);
        m.shared.live.link.rate_hz = 1012.0;
        m.shared.live.link.age_s = Some(0.8);
        m.shared.live.link.errors = 31;
        for source in [
            "sim",
            "udp:127.0.0.1:14550",
            "serial:/dev/serial/by-id/usb-a-very-long-adapter-name-if00:921600",
        ] {
            m.shared.live.link.source = source.to_string();
            for w in [80, 100] {
                let line = render_text(&m, w, 24)
                    .lines()
                    .nth(1)
                    .unwrap_or("")
                    .to_string();
                assert!(
                    line.trim_end().ends_with("11.92V"),
                    "{source} at {w}: {line:?}"
                );
                assert!(line.contains("err 31"), "{source} at {w}: {line:?}");
            }
        }
        // Where it fits, the whole link line shows.
        m.shared.live.link.source = "sim".to_string();
        let line = render_text(&m, 80, 24)
            .lines()
            .nth(1)
            .unwrap_or("")
            .to_string();
        assert!(line.contains("link sim 1012Hz age 0.8s err 31"), "{line:?}");
    }

    #[test]
    fn every_key_in_every_table_is_in_the_help() {
        let mut m = demo_model();
        for (i, screen) in Screen::ALL.iter().enumerate() {
            m.screen = *screen;
            m.help = true;
            let text = render_text(&m, 80, 24);
            let s = &m.screens;
            let mut names: Vec<String> = Vec::new();
            let mut add = |rows: Vec<(String, &'static str)>| {
                for (k, help) in rows {
                    names.extend(k.split(" / ").map(str::to_string));
                    assert!(text.contains(help), "screen {i}: {help:?} not in\n{text}");
                }
            };
            add(keys::help_rows(GLOBAL_KEYS));
            add(match screen {
                Screen::Watch => keys::help_rows(s.watch.keys()),
                Screen::Righting => keys::help_rows(s.righting.keys()),
                Screen::Cage => keys::help_rows(s.cage.keys()),
                Screen::Preflight => keys::help_rows(s.preflight.keys()),
            });
            for n in names {
                assert!(
                    text.contains(&n),
                    "{}: key {n} not in the help\n{text}",
                    screen.title()
                );
            }
        }
    }

    #[test]
    fn every_bound_key_is_dispatched_not_refused() {
        // Each key in each table reaches its action: none says "not bound".
        let m0 = demo_model();
        for screen in Screen::ALL {
            let s = &m0.screens;
            let table: Vec<crate::tui::keys::Key> = match screen {
                Screen::Watch => s
                    .watch
                    .keys()
                    .iter()
                    .flat_map(|b| b.keys.iter().copied())
                    .collect(),
                Screen::Righting => s
                    .righting
                    .keys()
                    .iter()
                    .flat_map(|b| b.keys.iter().copied())
                    .collect(),
                Screen::Cage => s
                    .cage
                    .keys()
                    .iter()
                    .flat_map(|b| b.keys.iter().copied())
                    .collect(),
                Screen::Preflight => s
                    .preflight
                    .keys()
                    .iter()
                    .flat_map(|b| b.keys.iter().copied())
                    .collect(),
            };
            for k in table {
                let mut m = demo_model();
                m.screen = screen;
                let ev = match k {
                    crate::tui::keys::Key::Char(c) => {
                        KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE)
                    }
                    crate::tui::keys::Key::Enter => {
                        KeyEvent::new(KeyCode::Enter, KeyModifiers::NONE)
                    }
                    crate::tui::keys::Key::Up => KeyEvent::new(KeyCode::Up, KeyModifiers::NONE),
                    crate::tui::keys::Key::Down => KeyEvent::new(KeyCode::Down, KeyModifiers::NONE),
                    crate::tui::keys::Key::PageUp => {
                        KeyEvent::new(KeyCode::PageUp, KeyModifiers::NONE)
                    }
                    crate::tui::keys::Key::PageDown => {
                        KeyEvent::new(KeyCode::PageDown, KeyModifiers::NONE)
                    }
                    crate::tui::keys::Key::Home => KeyEvent::new(KeyCode::Home, KeyModifiers::NONE),
                    crate::tui::keys::Key::End => KeyEvent::new(KeyCode::End, KeyModifiers::NONE),
                    other => panic!("add {other:?} to this test"),
                };
                update(&mut m, Msg::Key(ev));
                assert!(
                    !m.shared
                        .notice
                        .as_deref()
                        .unwrap_or("")
                        .contains("not bound"),
                    "{} key {k:?}",
                    screen.title()
                );
            }
        }
    }

    #[test]
    fn a_terminal_too_small_gets_one_message_with_the_size_needed() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('3')));
        let text = render_text(&m, 30, 8);
        assert!(text.contains("Cage needs"), "{text}");
        assert!(text.contains("30x8"), "{text}");
        assert!(!text.contains("member"), "no mangled table:\n{text}");
    }

    #[test]
    fn every_screen_fits_80x24() {
        let mut m = demo_model();
        for s in Screen::ALL {
            m.screen = s;
            let (w, h) = min_size(&m);
            assert!(w <= 80 && h <= 24, "{} needs {w}x{h}", s.title());
        }
    }
}
