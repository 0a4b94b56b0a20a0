//! The Cage screen: every member with its status first, then damage and
//! the reasons, then geometry and capacity as room allows; the selected
//! member is shown whole in a detail pane, so a long reason is never lost
//! to a cut column.

use crate::tui::component::Component;
use crate::tui::form::Form;
use crate::tui::keys::{Binding, Key, Move};
use crate::tui::margin_map;
use crate::tui::model::{Shared, count};
use crate::tui::table::{self, Column, Window, wrapped_height};
use cagehand::cage::MemberKind;
use cagehand::health::{MemberHealth, Status};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Wrap};

/// The Cage screen's own state: the selected member, the first row shown,
/// and whether the margin map is shown instead of the member table.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CageScreen {
    /// Selected member (index into `cage.members`).
    pub selected: usize,
    /// First member row shown.
    pub offset: usize,
    /// The margin map (net shaded by the speed each face takes) instead of
    /// the member table.
    pub margin_map: bool,
}

/// What the Cage screen's keys do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CageAction {
    /// Move the selection.
    Select(Move),
    /// Confirm the selected detection as an impact (a form).
    Confirm,
    /// Dismiss the selected detection, with a reason (a form).
    Dismiss,
    /// Record a finding on the selected member (a form).
    Finding,
    /// Record a replacement of the selected member (a form).
    Replacement,
    /// Add a note (a form).
    Note,
    /// Show the margin map or the member table.
    ToggleMap,
}

const KEYS: &[Binding<CageAction>] = &[
    // Pairs share their words: the help gives each pair one row.
    Binding {
        keys: &[Key::Down, Key::Char('j')],
        action: CageAction::Select(Move::Down),
        help: "next / previous member (detail below the table)",
    },
    Binding {
        keys: &[Key::Up, Key::Char('k')],
        action: CageAction::Select(Move::Up),
        help: "next / previous member (detail below the table)",
    },
    Binding {
        keys: &[Key::PageDown],
        action: CageAction::Select(Move::PageDown),
        help: "a page down / up",
    },
    Binding {
        keys: &[Key::PageUp],
        action: CageAction::Select(Move::PageUp),
        help: "a page down / up",
    },
    Binding {
        keys: &[Key::Home, Key::Char('g')],
        action: CageAction::Select(Move::First),
        help: "first / last member",
    },
    Binding {
        keys: &[Key::End, Key::Char('G')],
        action: CageAction::Select(Move::Last),
        help: "first / last member",
    },
    Binding {
        keys: &[Key::Char('m')],
        action: CageAction::ToggleMap,
        help: "margin map (speed each face takes) or members",
    },
    Binding {
        keys: &[Key::Char('y')],
        action: CageAction::Confirm,
        help: "confirm the oldest pending detection (impact form)",
    },
    Binding {
        keys: &[Key::Char('x')],
        action: CageAction::Dismiss,
        help: "dismiss the oldest pending detection (reason needed)",
    },
    Binding {
        keys: &[Key::Char('f')],
        action: CageAction::Finding,
        help: "record a finding on the selected member",
    },
    Binding {
        keys: &[Key::Char('R')],
        action: CageAction::Replacement,
        help: "replace the selected member (part or lot required)",
    },
    Binding {
        keys: &[Key::Char('n')],
        action: CageAction::Note,
        help: "add a note to the cage log",
    },
];

/// Rows above and below the table inside the body: caution, summary,
/// detail pane, and the table's own border and header.
const CHROME_ROWS: u16 = 3 + 1 + 4 + 3;

/// Member rows the table shows in a body `body_h` rows high.
fn table_rows(body_h: u16) -> usize {
    usize::from(body_h.saturating_sub(CHROME_ROWS)).max(1)
}

fn status_style(shared: &Shared, s: Status) -> Style {
    let t = &shared.theme;
    match s {
        Status::Ok => t.good,
        Status::Inspect => t.warn,
        Status::Due | Status::ReplaceNow => t.alarm,
    }
}

/// A member's kind in a word and its capacity, N (one capacity function
/// for the screens and the statics).
fn kind_and_capacity(
    p: &cagehand::profile::Profile,
    m: &cagehand::cage::Member,
) -> (&'static str, f64) {
    let kind = match m.kind {
        MemberKind::Rod => "rod",
        MemberKind::String => "string",
    };
    (kind, cagehand::statics::capacity_n(p, m.kind, m.length_m))
}

impl CageScreen {
    /// The detection the keys act on: the oldest pending one (the crew
    /// resolves them in the order they happened).
    fn selected_detection(&self, shared: &Shared) -> Option<u64> {
        shared.live.pending.first().map(|d| d.seq)
    }

    /// The pending detections, then the latest records, newest first.
    fn log_lines(&self, shared: &Shared, rows: usize) -> Vec<Line<'static>> {
        let t = &shared.theme;
        let chosen = self.selected_detection(shared);
        let mut lines: Vec<Line> = shared
            .live
            .pending
            .iter()
            .map(|d| {
                let mark = if Some(d.seq) == chosen { ">" } else { " " };
                let speed = d
                    .speed_m_per_s
                    .map_or("speed ?".to_string(), |v| format!("{v:.1} m/s"));
                Line::styled(
                    format!(
                        "{mark}#{} PENDING {:.1} g on {}, {speed}: y confirm, x dismiss",
                        d.seq, d.peak_g, d.face
                    ),
                    t.alarm,
                )
            })
            .collect();
        for r in shared.records.iter().rev() {
            if lines.len() >= rows {
                break;
            }
            let time = r.time.get(11..16).unwrap_or(&r.time);
            lines.push(Line::from(vec![
                Span::styled(format!(" #{} {time} {} ", r.seq, r.operator), t.dim),
                Span::styled(format!("{} ", r.event.name()), t.accent),
                Span::styled(r.event.summary(), t.text),
            ]));
        }
        if lines.is_empty() {
            lines.push(Line::styled(" no records yet", t.dim));
        }
        lines
    }

    fn health<'a>(&self, shared: &'a Shared, i: usize) -> Option<&'a MemberHealth> {
        let m = shared.cage.members.get(i)?;
        shared
            .health
            .as_ref()
            .and_then(|h| h.members.get(i).filter(|mh| mh.id == m.id))
    }
}

impl Component for CageScreen {
    type Action = CageAction;

    fn keys(&self) -> &'static [Binding<CageAction>] {
        KEYS
    }

    fn min_size(&self) -> (u16, u16) {
        (60, CHROME_ROWS + 3)
    }

    fn act(&mut self, action: CageAction, shared: &mut Shared) -> bool {
        let member = shared.cage.members.get(self.selected).map(|m| m.id.clone());
        let detection = self.selected_detection(shared);
        let m = match action {
            CageAction::Select(m) => m,
            CageAction::Confirm | CageAction::Dismiss => {
                match detection {
                    Some(seq) if action == CageAction::Confirm => {
                        shared.form = Some(Form::confirm(shared, seq))
                    }
                    Some(seq) => shared.form = Some(Form::dismiss(shared, seq)),
                    None => shared.notice = Some("no pending detection to act on".into()),
                }
                return true;
            }
            CageAction::Finding | CageAction::Replacement => {
                if let Some(id) = member {
                    shared.form = Some(if action == CageAction::Finding {
                        Form::finding(shared, &id)
                    } else {
                        Form::replacement(shared, &id)
                    });
                }
                return true;
            }
            CageAction::Note => {
                shared.form = Some(Form::note(shared));
                return true;
            }
            CageAction::ToggleMap => {
                self.margin_map = !self.margin_map;
                return true;
            }
        };
        let len = shared.cage.members.len();
        let page = table_rows(shared.size.1.saturating_sub(3));
        self.selected = m.apply(self.selected, len, page);
        self.offset = Window::new(self.selected, self.offset, page, len).offset;
        true
    }

    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        if self.margin_map {
            self.draw_map(shared, frame, area);
            return;
        }
        let t = &shared.theme;
        let detail_line = self.detail(shared);
        // The selected member whole: as many rows as its text needs, up to
        // a third of the body.
        let detail_h = (wrapped_height(std::slice::from_ref(&detail_line), area.width) + 1)
            .clamp(4, (area.height / 3).max(4));
        let log_h = if area.height >= 18 { 5 } else { 0 };
        let [caution, summary, log_area, table_area, detail] = Layout::vertical([
            Constraint::Length(3),
            Constraint::Length(1),
            Constraint::Length(log_h),
            Constraint::Min(4),
            Constraint::Length(detail_h),
        ])
        .areas(area);
        if log_h > 0 {
            frame.render_widget(
                Paragraph::new(self.log_lines(shared, usize::from(log_h - 1))).block(
                    Block::default()
                        .borders(Borders::TOP)
                        .title(" Cage log: pending, then latest (y x f R n) "),
                ),
                log_area,
            );
        }
        caution_and_summary(shared, frame, caution, summary);

        let p = &shared.profile;
        let members = &shared.cage.members;
        let visible = usize::from(table_area.height.saturating_sub(3)).max(1);
        let win = Window::new(self.selected, self.offset, visible, members.len());
        let columns = [
            Column {
                header: "member",
                width: 6,
                rank: 0,
                flex: false,
            },
            Column {
                header: "status",
                width: 11,
                rank: 0,
                flex: false,
            },
            Column {
                header: "damage",
                width: 6,
                rank: 1,
                flex: false,
            },
            Column {
                header: "max u",
                width: 5,
                rank: 2,
                flex: false,
            },
            Column {
                header: "margin",
                width: 8,
                rank: 2,
                flex: false,
            },
            Column {
                header: "kind",
                width: 6,
                rank: 4,
                flex: false,
            },
            Column {
                header: "nodes",
                width: 7,
                rank: 5,
                flex: false,
            },
            Column {
                header: "len mm",
                width: 6,
                rank: 3,
                flex: false,
            },
            Column {
                header: "cap N",
                width: 6,
                rank: 3,
                flex: false,
            },
            Column {
                header: "why",
                width: 12,
                rank: 1,
                flex: true,
            },
        ];
        let (kept, widths) = table::fit(&columns, table_area.width.saturating_sub(2));
        let rows: Vec<Row> = members
            .iter()
            .enumerate()
            .skip(win.offset)
            .take(win.shown)
            .map(|(i, m)| {
                let (kind, cap) = kind_and_capacity(p, m);
                let h = self.health(shared, i);
                let nodes = format!(
                    "{}-{}",
                    shared.cage.nodes[m.nodes[0]].id, shared.cage.nodes[m.nodes[1]].id
                );
                let (status, damage, max_u, why, style) = match h {
                    Some(h) => (
                        h.status.label().to_string(),
                        format!("{:.2}", h.damage),
                        format!("{:.0}%", h.max_utilisation * 100.0),
                        h.reasons.join("; "),
                        status_style(shared, h.status),
                    ),
                    None => (
                        "no log".into(),
                        "-".into(),
                        "-".into(),
                        m.tag.clone().unwrap_or_default(),
                        t.text,
                    ),
                };
                let cells = vec![
                    m.id.clone(),
                    status,
                    damage,
                    max_u,
                    margin_map::member_cell(shared, i),
                    kind.to_string(),
                    nodes,
                    format!("{:.0}", m.length_m * 1e3),
                    format!("{cap:.0}"),
                    why,
                ];
                table::selectable(
                    Row::new(table::pick(&cells, &kept)),
                    style,
                    i == self.selected,
                )
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
                format!(" {} ", win.title("member")),
            ),
            table_area,
        );
        frame.render_widget(
            Paragraph::new(detail_line).wrap(Wrap { trim: true }).block(
                Block::default()
                    .borders(Borders::TOP)
                    .title(" Selected member "),
            ),
            detail,
        );
    }
}

/// The caution (every advising view carries it) and the one-line summary:
/// the worst status, the members to act on, the margin's headline, and
/// where the log was read.
fn caution_and_summary(shared: &Shared, frame: &mut Frame, caution: Rect, summary: Rect) {
    let t = &shared.theme;
    frame.render_widget(
        Paragraph::new(
            cagehand::caution::CAUTION_LINES
                .iter()
                .map(|l| Line::styled(*l, t.warn))
                .collect::<Vec<_>>(),
        )
        .wrap(Wrap { trim: true }),
        caution,
    );
    let mut spans = match &shared.health {
        Some(h) => {
            let act = h.to_act_on();
            vec![
                Span::styled(
                    format!("worst {}", h.worst().label()),
                    status_style(shared, h.worst()),
                ),
                Span::styled(
                    format!("  {} to act on  ", count(act.len(), "member")),
                    t.text,
                ),
            ]
        }
        None => Vec::new(),
    };
    spans.push(margin_map::headline(shared));
    spans.push(Span::styled(
        format!("  cage log: {}", shared.health_source),
        t.dim,
    ));
    frame.render_widget(
        Paragraph::new(Line::from(spans)).wrap(Wrap { trim: true }),
        summary,
    );
}

impl CageScreen {
    /// The margin view: caution, summary, the shaded net with the faces
    /// weakest first, and the member the log keys act on.
    fn draw_map(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let summary_h = if area.width >= 120 { 1 } else { 2 };
        let [caution, summary, map, selected] = Layout::vertical([
            Constraint::Length(3),
            Constraint::Length(summary_h),
            Constraint::Min(6),
            Constraint::Length(1),
        ])
        .areas(area);
        caution_and_summary(shared, frame, caution, summary);
        margin_map::draw(shared, frame, map);
        let member = shared
            .cage
            .members
            .get(self.selected)
            .map_or("none", |m| m.id.as_str());
        frame.render_widget(
            Paragraph::new(Line::from(vec![
                Span::styled(format!("selected member {member}"), t.text),
                Span::styled(
                    "  f finding, R replacement, j/k another, m member table",
                    t.dim,
                ),
            ])),
            selected,
        );
    }

    /// The selected member whole: every column and the full reasons.
    fn detail(&self, shared: &Shared) -> Line<'static> {
        let t = &shared.theme;
        let Some(m) = shared.cage.members.get(self.selected) else {
            return Line::raw("");
        };
        let p = &shared.profile;
        let (kind, cap) = kind_and_capacity(p, m);
        let mut spans = vec![Span::styled(
            format!(
                "{} {kind} {}-{}, {:.0} mm, capacity {cap:.0} N",
                m.id,
                shared.cage.nodes[m.nodes[0]].id,
                shared.cage.nodes[m.nodes[1]].id,
                m.length_m * 1e3
            ),
            t.text.add_modifier(Modifier::BOLD),
        )];
        match self.health(shared, self.selected) {
            Some(h) => {
                spans.push(Span::styled(
                    format!(
                        ": {}, damage {:.2}, max utilisation {:.0}%, {}. ",
                        h.status.label(),
                        h.damage,
                        h.max_utilisation * 100.0,
                        count(h.impacts as usize, "impact")
                    ),
                    status_style(shared, h.status),
                ));
                spans.push(Span::styled(h.reasons.join("; "), t.text));
            }
            None => spans.push(Span::styled(": no health (no cage log read)", t.dim)),
        }
        Line::from(spans)
    }
}

#[cfg(test)]
mod tests {
    use crate::tui::model::{Msg, demo_model, update};
    use crate::tui::view::render_text;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    fn key(c: KeyCode) -> Msg {
        Msg::Key(KeyEvent::new(c, KeyModifiers::NONE))
    }

    #[test]
    fn title_matches_the_rows_shown_and_scrolling_stops_at_the_end() {
        let mut m = demo_model();
        update(&mut m, Msg::Resize(100, 30));
        update(&mut m, key(KeyCode::Char('3')));
        let s = render_text(&m, 100, 30);
        let n = m.shared.cage.members.len();
        // Count the member rows actually drawn.
        let shown = m
            .shared
            .cage
            .members
            .iter()
            .filter(|mem| {
                s.lines().any(|l| {
                    l.trim_start_matches('│')
                        .trim_start()
                        .starts_with(&format!("{} ", mem.id))
                })
            })
            .count();
        assert!(
            s.contains(&format!("embers 1-{shown} of {n}")),
            "title says the {shown} rows shown:\n{s}"
        );
        for _ in 0..100 {
            update(&mut m, key(KeyCode::Down));
        }
        let s = render_text(&m, 100, 30);
        let last = &m.shared.cage.members[n - 1].id;
        assert!(s.contains(&format!("of {n}")), "{s}");
        assert!(s.contains(&format!("{}-{n} of {n}", n - shown + 1)), "{s}");
        assert!(
            s.contains(&format!("{last} ")),
            "last member shown and selected:\n{s}"
        );
    }

    #[test]
    fn status_stays_when_narrow_and_the_detail_shows_the_row_whole() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('3')));
        let s = render_text(&m, 60, 20);
        assert!(s.contains("status"), "{s}");
        assert!(!s.contains("nodes"), "low-rank columns go first:\n{s}");
        assert!(s.contains("Selected member"), "{s}");
        assert!(s.contains("capacity"), "{s}");
    }
}
