//! The Watch screen: the net with the state and the face beside it as the
//! most prominent thing on screen, then the attitude, then the link in its
//! own compact block. Only a resting vehicle gets a face framed on the net
//! and a take-off verdict.

use crate::tui::component::Component;
use crate::tui::keys::{Binding, Key};
use crate::tui::model::{LiveState, Shared, count};
use crate::tui::net_view::{NetMarks, NetView};
use crate::tui::view::{state_style, state_words};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

/// The Watch screen's own state.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WatchScreen {
    /// Legend shown under the link block.
    pub legend: bool,
}

impl Default for WatchScreen {
    fn default() -> Self {
        WatchScreen { legend: true }
    }
}

/// What the Watch screen's keys do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WatchAction {
    /// Show or hide the legend.
    ToggleLegend,
}

const KEYS: &[Binding<WatchAction>] = &[Binding {
    keys: &[Key::Char('l')],
    action: WatchAction::ToggleLegend,
    help: "show or hide the legend of the net",
}];

/// Width of the column beside the net.
const SIDE_W: u16 = 36;

impl Component for WatchScreen {
    type Action = WatchAction;

    fn keys(&self) -> &'static [Binding<WatchAction>] {
        KEYS
    }

    fn min_size(&self) -> (u16, u16) {
        (SIDE_W + 24, 16)
    }

    fn act(&mut self, action: WatchAction, _shared: &mut Shared) -> bool {
        match action {
            WatchAction::ToggleLegend => self.legend = !self.legend,
        }
        true
    }

    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let [net_area, side] =
            Layout::horizontal([Constraint::Min(20), Constraint::Length(SIDE_W)]).areas(area);
        let marks = NetMarks::live(shared);
        frame.render_widget(
            NetView::framed(shared, &marks, " Net of the cage, seen from outside "),
            net_area,
        );
        let [lies, attitude, link, legend] = Layout::vertical([
            Constraint::Length(6),
            Constraint::Length(5),
            Constraint::Length(4),
            Constraint::Min(0),
        ])
        .areas(side);
        frame.render_widget(lies_block(shared), lies);
        frame.render_widget(attitude_block(shared), attitude);
        frame.render_widget(link_block(shared), link);
        if self.legend && legend.height >= 3 {
            frame.render_widget(legend_block(shared), legend);
        }
    }
}

fn label(shared: &Shared, k: &str) -> Span<'static> {
    Span::styled(format!("{k:<9}"), shared.theme.dim)
}

/// Where the vehicle lies: state, face, and the take-off verdict, which only
/// a resting vehicle gets.
fn lies_block(shared: &Shared) -> Paragraph<'static> {
    let t = &shared.theme;
    let live = &shared.live;
    let big = state_style(shared).add_modifier(Modifier::BOLD);
    let mut lines = vec![Line::from(Span::styled(
        format!(" {} ", state_words(shared, true)),
        big.add_modifier(Modifier::REVERSED),
    ))];
    let off = live
        .error_deg
        .map_or("-".to_string(), |e| format!("{e:.1} deg"));
    match (live.state, live.face) {
        (LiveState::Resting, Some(f)) => {
            let face = &shared.cage.faces[f];
            lines.push(Line::from(vec![
                label(shared, "off flat"),
                Span::styled(off, t.text),
            ]));
            let takeoff = shared.takeoff.contains(&f);
            lines.push(Line::from(vec![
                label(shared, "take-off"),
                if takeoff {
                    Span::styled("yes, a take-off face", t.good)
                } else {
                    Span::styled("no: see 2 Righting", t.warn)
                },
            ]));
            let gaps = face.nodes.len().saturating_sub(face.string_edges);
            lines.push(Line::from(vec![
                label(shared, "edges"),
                Span::styled(
                    format!(
                        "{}, {}",
                        count(face.string_edges, "string"),
                        count(gaps, "rod gap")
                    ),
                    t.text,
                ),
            ]));
        }
        (LiveState::Propped, Some(_)) => {
            lines.push(Line::from(vec![
                label(shared, "off face"),
                Span::styled(off, t.warn),
            ]));
            lines.push(Line::styled("still, but not flat on any face:", t.text));
            lines.push(Line::styled("no take-off verdict, no plan", t.dim));
        }
        (LiveState::Moving, _) => {
            lines.push(Line::from(vec![
                label(shared, "off face"),
                Span::styled(off, t.text),
            ]));
            lines.push(Line::styled("not settled: no take-off verdict", t.dim));
        }
        (LiveState::Airborne, _) => {
            lines.push(Line::styled("flying: no face, no verdict", t.text));
        }
        _ => {
            lines.push(Line::styled(
                live.reason
                    .clone()
                    .unwrap_or_else(|| "no fresh data".into()),
                t.warn,
            ));
            lines.push(Line::styled("nothing shown is current", t.dim));
        }
    }
    Paragraph::new(lines).wrap(Wrap { trim: true }).block(
        Block::default()
            .borders(Borders::ALL)
            .title(" Where it lies "),
    )
}

/// Rounded to a tenth, with -0.0 made 0.0 (adding +0.0 does that), so a
/// level vehicle never reads "-0.0".
fn tenth(v: f64) -> f64 {
    (v * 10.0).round() / 10.0 + 0.0
}

fn attitude_block(shared: &Shared) -> Paragraph<'static> {
    let t = &shared.theme;
    let live = &shared.live;
    let mut lines = Vec::new();
    match live.rpy_deg {
        Some([r, p, y]) => lines.push(Line::from(vec![
            label(shared, "r p y"),
            Span::styled(
                format!("{:.1} {:.1} {:.1} deg", tenth(r), tenth(p), tenth(y)),
                t.text,
            ),
        ])),
        None => lines.push(Line::from(vec![
            label(shared, "r p y"),
            Span::styled("no data", t.dim),
        ])),
    }
    let (motors, style): (&str, Style) = match live.armed {
        Some(true) => ("armed: keep clear", t.alarm),
        Some(false) => ("not armed", t.text),
        None => ("not reported", t.dim),
    };
    lines.push(Line::from(vec![
        label(shared, "motors"),
        Span::styled(motors, style),
    ]));
    let battery = match live.battery_v {
        Some(v) if v < shared.profile.preflight.min_battery_v => Span::styled(
            format!(
                "{v:.2} V, below {:.2} V",
                shared.profile.preflight.min_battery_v
            ),
            t.alarm,
        ),
        Some(v) => Span::styled(format!("{v:.2} V"), t.text),
        None => Span::styled("not reported", t.dim),
    };
    lines.push(Line::from(vec![label(shared, "battery"), battery]));
    Paragraph::new(lines).block(Block::default().borders(Borders::ALL).title(" Vehicle "))
}

fn link_block(shared: &Shared) -> Paragraph<'static> {
    let t = &shared.theme;
    let l = &shared.live.link;
    let age = l.age_s.map_or("-".to_string(), |a| format!("{a:.1} s"));
    let fresh = shared.live.state != LiveState::Stale;
    Paragraph::new(vec![
        Line::from(vec![
            Span::styled(
                format!("{:.0} Hz", l.rate_hz),
                if fresh { t.good } else { t.alarm },
            ),
            Span::styled(format!("  age {age}"), t.text),
            Span::styled(
                if fresh { "  fresh" } else { "  NOT FRESH" },
                if fresh { t.dim } else { t.alarm },
            ),
        ]),
        Line::from(vec![Span::styled(
            format!("{} frames, {} bad", l.frames, l.errors),
            t.dim,
        )]),
    ])
    .block(
        Block::default()
            .borders(Borders::ALL)
            .title(format!(" Link {} ", l.source)),
    )
}

fn legend_block(shared: &Shared) -> Paragraph<'static> {
    let t = &shared.theme;
    Paragraph::new(vec![
        Line::from(vec![
            Span::styled(
                "[F5]",
                t.text.add_modifier(Modifier::BOLD | Modifier::REVERSED),
            ),
            Span::styled(" resting on   ", t.dim),
            Span::styled("(F5)", t.warn),
            Span::styled(" nearest", t.dim),
        ]),
        Line::from(vec![
            Span::styled("F1^", t.good),
            Span::styled(" take-off face", t.dim),
        ]),
        Line::styled("solid: string  dashed: rod gap", t.dim),
    ])
    .wrap(Wrap { trim: true })
    .block(Block::default().borders(Borders::TOP).title(" Legend "))
}

#[cfg(test)]
mod tests {
    use crate::tui::model::{LiveState, Msg, demo_model, live_on, update};
    use crate::tui::view::render_text;

    #[test]
    fn resting_is_framed_and_gets_a_verdict() {
        let mut m = demo_model();
        let mut live = live_on(&m, 4, 1.0, LiveState::Resting);
        live.battery_v = Some(7.9);
        update(&mut m, Msg::Live(Box::new(live)));
        let s = render_text(&m, 110, 32);
        assert!(s.contains("[F5]"), "resting face framed on the net:\n{s}");
        assert!(s.contains("F1^"), "take-off face marked:\n{s}");
        assert!(s.contains("RESTING on F5"), "{s}");
        assert!(s.contains("7.90 V"), "{s}");
        assert!(
            s.contains("no: see 2 Righting"),
            "F5 is not a take-off face:\n{s}"
        );
    }

    #[test]
    fn airborne_and_propped_are_never_framed_or_given_a_verdict() {
        for state in [LiveState::Airborne, LiveState::Propped, LiveState::Moving] {
            let mut m = demo_model();
            // F1 is a take-off face: framing it would claim "resting, ready".
            let live = live_on(&m, 0, 1.0, state);
            update(&mut m, Msg::Live(Box::new(live)));
            let s = render_text(&m, 110, 32);
            assert!(!s.contains("[F1^]"), "{state:?}:\n{s}");
            assert!(!s.contains("yes, a take-off"), "{state:?}:\n{s}");
            assert!(s.contains(state.word()), "{state:?}:\n{s}");
        }
    }

    #[test]
    fn stale_is_shown_in_words_with_its_reason() {
        let mut m = demo_model();
        let s = render_text(&m, 80, 24);
        assert!(s.contains("STALE") && s.contains("no data yet"), "{s}");
        update(&mut m, Msg::LinkEnded("device gone".into()));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("STALE"));
        assert!(s.contains("link ended: device gone"), "{s}");
    }
}
