//! The remaining margin as the Cage screen shows it: the table worked out
//! off the screens' thread for the log the screen shows (or that it is
//! still being worked out, or why there is none), the figure per member
//! for the member table, and the margin view: the net shaded by speed
//! band, each face marked with its band digit so it reads without colour,
//! the weakest face called out, the faces weakest first, and a legend.

use crate::tui::model::Shared;
use crate::tui::net_view::{FaceFill, NetMarks, NetView};
use cagehand::logbook::Record;
use cagehand::margin::{Limit, MarginTable};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};
use std::collections::HashMap;

/// What tells one reading of the cage log from another: the record count
/// and the newest sequence number (the log is append-only).
pub type LogMark = (usize, Option<u64>);

/// The mark of a list of records.
pub fn log_mark(records: &[Record]) -> LogMark {
    (records.len(), records.last().map(|r| r.seq))
}

/// The margin as the screens know it.
#[derive(Debug, Clone, PartialEq)]
pub enum MarginState {
    /// Being worked out for the log as the screen shows it.
    Working,
    /// Worked out for the log the screen shows.
    Ready(Box<MarginShown>),
    /// Not worked out, and why (the cage log unreadable, no solution).
    Failed(String),
}

/// A margin table with what the screen needs of it at hand.
#[derive(Debug, Clone, PartialEq)]
pub struct MarginShown {
    /// The table.
    pub table: MarginTable,
    /// Per member (cage order): the lowest speed of the faces on which it
    /// fails first, and that face (index into `table.faces`).
    pub by_member: Vec<Option<(f64, usize)>>,
    /// Face rows weakest first (indices into `table.faces`).
    pub weakest_first: Vec<usize>,
}

impl MarginShown {
    /// Index the table for a cage's members (ids in cage order).
    pub fn new(table: MarginTable, member_ids: &[&str]) -> MarginShown {
        let index: HashMap<&str, usize> = member_ids
            .iter()
            .enumerate()
            .map(|(j, id)| (*id, j))
            .collect();
        let mut by_member: Vec<Option<(f64, usize)>> = vec![None; member_ids.len()];
        for (i, f) in table.faces.iter().enumerate() {
            let Some(j) = f.first_member.as_deref().and_then(|id| index.get(id)) else {
                continue;
            };
            let v = f.failure.speed_m_per_s;
            if by_member[*j].is_none_or(|(w, _)| v < w) {
                by_member[*j] = Some((v, i));
            }
        }
        let mut weakest_first: Vec<usize> = (0..table.faces.len()).collect();
        weakest_first.sort_by(|&a, &b| {
            table.faces[a]
                .failure
                .speed_m_per_s
                .total_cmp(&table.faces[b].failure.speed_m_per_s)
                .then(a.cmp(&b))
        });
        MarginShown {
            table,
            by_member,
            weakest_first,
        }
    }
}

/// The band digit of a speed: whole metres per second, 9 for 9 or more
/// (a speed that is not a number counts as 0: fail safe).
pub fn band_digit(speed_m_per_s: f64) -> u8 {
    if speed_m_per_s.is_nan() || speed_m_per_s <= 0.0 {
        0
    } else {
        // Truncation is the band; the cap keeps it one digit.
        speed_m_per_s.floor().min(9.0) as u8
    }
}

/// How dense a face's shade is, by how near its speed is to the weakest
/// face's: within 5% densest, then 15%, then 30%, beyond that unshaded
/// (the digit gives the speed itself; the shade shows at a glance which
/// faces are nearly as weak as the weakest).
fn shade_level(speed_m_per_s: f64, weakest_m_per_s: f64) -> u8 {
    let w = weakest_m_per_s.max(0.0);
    // A speed that is not a number is shaded densest: fail safe.
    if !speed_m_per_s.is_finite() || speed_m_per_s <= w * 1.05 {
        3
    } else if speed_m_per_s <= w * 1.15 {
        2
    } else if speed_m_per_s <= w * 1.30 {
        1
    } else {
        0
    }
}

/// Inner canvas width from which every face is labelled with its id and
/// digit; narrower maps label the weakest face so and the others with
/// their digit only, so the labels do not run into each other.
const LONG_LABELS_FROM_W: u16 = 90;

/// The headline: grounded and by which members, or the weakest face, or
/// that the margin is being worked out, or why there is none.
pub fn headline(shared: &Shared) -> Span<'static> {
    let t = &shared.theme;
    match &shared.margin {
        MarginState::Working => Span::styled("working out the margin...", t.dim),
        MarginState::Failed(why) => Span::styled(format!("no margin: {why}"), t.warn),
        MarginState::Ready(m) if m.table.grounded() => Span::styled(
            format!(
                "GROUNDED by {}: do not fly until replaced",
                m.table.grounded_by.join(", ")
            ),
            t.alarm,
        ),
        MarginState::Ready(m) => match m.table.weakest_face() {
            Some(w) => Span::styled(
                format!(
                    "{}weakest {} takes {:.1} m/s ({} first)",
                    // A pending crash is not in the log's damage yet: said
                    // first, so a narrow line cuts the figures, not this.
                    if shared.live.pending.is_empty() {
                        ""
                    } else {
                        "before the pending crash: "
                    },
                    w.id,
                    w.failure.speed_m_per_s,
                    w.first_member.as_deref().unwrap_or("no member"),
                ),
                speed_style(shared, w.failure.speed_m_per_s, true),
            ),
            None => Span::styled("no faces to strike", t.dim),
        },
    }
}

/// The style of a speed: alarm below the profile's pre-flight minimum (or
/// for the weakest face when there is none), otherwise plain.
fn speed_style(shared: &Shared, speed_m_per_s: f64, weakest: bool) -> Style {
    let t = &shared.theme;
    match shared.profile.preflight.min_margin_speed_m_per_s {
        Some(min) if speed_m_per_s < min => t.alarm,
        Some(_) => t.good,
        None if weakest => t.warn,
        None => t.text,
    }
}

/// The member table's margin cell: the lowest speed of the faces this
/// member fails first on, with the face; `-` for a member that governs no
/// face, `...` while the margin is worked out.
pub fn member_cell(shared: &Shared, member: usize) -> String {
    match &shared.margin {
        MarginState::Working => "...".to_string(),
        MarginState::Failed(_) => "?".to_string(),
        MarginState::Ready(m) => match m.by_member.get(member).copied().flatten() {
            Some((v, face)) => format!("{v:.1} {}", m.table.faces[face].id),
            None => "-".to_string(),
        },
    }
}

/// The net marks of the margin map: every face shaded by how near it is
/// to the weakest and marked `F4:2` (face, band digit; `2` alone when
/// `long` is false), the weakest `!F4:2` always.
fn fills(shared: &Shared, m: &MarginShown, long: bool) -> Vec<FaceFill> {
    let weakest = m.weakest_first.first().copied();
    let weakest_speed = weakest
        .map(|i| m.table.faces[i].failure.speed_m_per_s)
        .unwrap_or(0.0);
    m.table
        .faces
        .iter()
        .enumerate()
        .filter_map(|(i, f)| {
            let face = match f.strike {
                cagehand::impact::Strike::Face(k) => k,
                cagehand::impact::Strike::Node(_) => return None,
            };
            let digit = band_digit(f.failure.speed_m_per_s);
            let is_weakest = Some(i) == weakest;
            let mark = if is_weakest { "!" } else { "" };
            let style = speed_style(shared, f.failure.speed_m_per_s, is_weakest);
            Some(FaceFill {
                face,
                density: shade_level(f.failure.speed_m_per_s, weakest_speed),
                label: if long || is_weakest {
                    format!("{mark}{}:{digit}", f.id)
                } else {
                    digit.to_string()
                },
                on_top: is_weakest,
                style: if is_weakest {
                    style.add_modifier(Modifier::BOLD | Modifier::REVERSED)
                } else {
                    style
                },
            })
        })
        .collect()
}

/// Width of the list beside the map.
const SIDE_W: u16 = 30;

/// Draw the margin view into `area`: the shaded net on the left, the
/// legend and the faces weakest first on the right.
pub fn draw(shared: &Shared, frame: &mut Frame, area: Rect) {
    let t = &shared.theme;
    let m = match &shared.margin {
        MarginState::Ready(m) => m,
        other => {
            let text = match other {
                MarginState::Failed(why) => format!("No margin map: {why}."),
                _ => "working out the margin... (the map appears when it is ready)".to_string(),
            };
            frame.render_widget(
                Paragraph::new(Line::styled(text, t.dim))
                    .wrap(Wrap { trim: true })
                    .block(Block::default().borders(Borders::ALL).title(" Margin map ")),
                area,
            );
            return;
        }
    };
    let [net_area, side] =
        Layout::horizontal([Constraint::Min(20), Constraint::Length(SIDE_W)]).areas(area);
    let long = net_area.width.saturating_sub(2) >= LONG_LABELS_FROM_W;
    let marks = NetMarks {
        fills: fills(shared, m, long),
        ..NetMarks::default()
    };
    frame.render_widget(
        NetView::framed(
            shared,
            &marks,
            format!(" Margin map on {}, m/s ", m.table.surface),
        ),
        net_area,
    );
    let mut lines = legend(shared, m, long);
    lines.push(Line::styled("face  m/s    g  first", t.accent));
    for &i in &m.weakest_first {
        let f = &m.table.faces[i];
        let why = match f.failure.limit {
            Limit::Member | Limit::Grounded => "",
            Limit::NoEquilibrium => " (collapse?)",
            Limit::NotReached => " (at least)",
        };
        let is_weakest = Some(&i) == m.weakest_first.first();
        lines.push(Line::styled(
            format!(
                "{:<5}{:>4.1} {:>4.0}  {}{why}",
                f.id,
                f.failure.speed_m_per_s,
                f.failure.peak_g,
                f.first_member.as_deref().unwrap_or("-")
            ),
            speed_style(shared, f.failure.speed_m_per_s, is_weakest),
        ));
    }
    frame.render_widget(
        Paragraph::new(lines).block(Block::default().borders(Borders::TOP).title(" Faces ")),
        side,
    );
}

/// The legend: what the digit and the shade say, the derated members.
fn legend(shared: &Shared, m: &MarginShown, long: bool) -> Vec<Line<'static>> {
    let t = &shared.theme;
    let mut lines = vec![
        Line::styled(
            if long {
                "F4:2  F4 takes 2.0-2.9 m/s"
            } else {
                "2     takes 2.0-2.9 m/s"
            },
            t.text,
        ),
        Line::styled("      (9: 9 m/s or more)", t.dim),
        Line::styled("!     marks the weakest face", t.text),
        Line::styled("dots  denser: nearer weakest", t.text),
    ];
    if let Some(min) = shared.profile.preflight.min_margin_speed_m_per_s {
        lines.push(Line::styled(
            format!("pre-flight minimum {min:.1} m/s"),
            t.dim,
        ));
    }
    if m.table.grounded() {
        lines.push(Line::styled(
            format!("GROUNDED by {}", m.table.grounded_by.join(", ")),
            t.alarm,
        ));
    } else if !m.table.derated.is_empty() {
        let d: Vec<String> = m
            .table
            .derated
            .iter()
            .map(|d| format!("{} {:.0}%", d.id, d.factor * 100.0))
            .collect();
        lines.push(Line::styled(format!("derated: {}", d.join(", ")), t.warn));
    }
    lines
}

/// The demo's margin table for `records` (tests).
#[cfg(test)]
pub(crate) fn demo_table(m: &crate::tui::model::Model, records: &[Record]) -> MarginTable {
    use cagehand::margin::{CageCondition, Strikes, margin_table};
    // The undamaged demo's table is worked out once for all the tests (a
    // debug build takes seconds per table).
    static NEW_CAGE: std::sync::OnceLock<MarginTable> = std::sync::OnceLock::new();
    let sh = &m.shared;
    if records.is_empty() && sh.profile.vehicle.id == "kestrel-demo" {
        return NEW_CAGE
            .get_or_init(|| {
                let condition = CageCondition::new_cage(&sh.cage);
                margin_table(&sh.cage, &sh.profile, &condition, None, Strikes::Faces)
                    .expect("the demo's margin table")
            })
            .clone();
    }
    let condition = CageCondition::from_log(records, &sh.cage, &sh.profile.inspection);
    margin_table(&sh.cage, &sh.profile, &condition, None, Strikes::Faces)
        .expect("the demo's margin table")
}

/// The model with the margin worked out for the records it shows, as the
/// margin worker would send it (tests).
#[cfg(test)]
pub(crate) fn with_margin(mut m: crate::tui::model::Model) -> crate::tui::model::Model {
    use crate::tui::model::{Msg, update};
    let table = demo_table(&m, &m.shared.records);
    let mark = log_mark(&m.shared.records);
    update(
        &mut m,
        Msg::Margin {
            mark,
            result: Ok(Box::new(table)),
        },
    );
    m
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::model::{Msg, demo_model, update};
    use crate::tui::view::render_text;
    use cagehand::logbook::{Event, FindingEvent, FindingKind};
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    fn key(c: KeyCode) -> Msg {
        Msg::Key(KeyEvent::new(c, KeyModifiers::NONE))
    }

    fn finding(seq: u64, member: &str, kind: FindingKind) -> Record {
        Record {
            seq,
            time: "2026-12-02T06:00:00Z".into(),
            operator: "ana".into(),
            event: Event::Finding(FindingEvent {
                member: member.into(),
                kind,
                note: None,
            }),
        }
    }

    fn shown(m: &crate::tui::model::Model) -> &MarginShown {
        match &m.shared.margin {
            MarginState::Ready(s) => s,
            other => panic!("no margin shown: {other:?}"),
        }
    }

    #[test]
    fn the_screen_waits_for_the_margin_then_shows_it() {
        let mut m = demo_model();
        update(&mut m, key(KeyCode::Char('3')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("working out the margin..."), "{s}");
        update(&mut m, key(KeyCode::Char('m')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("working out the margin..."), "{s}");
        assert!(!s.contains("Faces"), "no figures before the margin:\n{s}");
        let m = with_margin(m);
        let s = render_text(&m, 80, 24);
        let t = &shown(&m).table;
        let w = t.weakest_face().expect("a weakest face");
        // The headline, the map's mark and the list agree with the table.
        assert!(
            s.contains(&format!("weakest {} takes", w.id)),
            "the weakest face called out:\n{s}"
        );
        let digit = band_digit(w.failure.speed_m_per_s);
        assert!(s.contains(&format!("!{}:{digit}", w.id)), "{s}");
        assert!(s.contains("Margin map"), "{s}");
        // The caution stays on the map view.
        assert!(s.contains("CAUTION"), "{s}");
    }

    #[test]
    fn a_margin_for_another_reading_of_the_log_is_not_shown() {
        let mut m = demo_model();
        let table = demo_table(&m, &[]);
        update(
            &mut m,
            Msg::Margin {
                mark: (3, Some(3)),
                result: Ok(Box::new(table)),
            },
        );
        assert_eq!(m.shared.margin, MarginState::Working);
        let m = with_margin(m);
        assert!(matches!(m.shared.margin, MarginState::Ready(_)));
    }

    #[test]
    fn a_finding_written_shows_working_then_the_lower_margin() {
        let mut m = with_margin(demo_model());
        let before = shown(&m).clone();
        // The member that fails first on the weakest face gets a fray.
        let w = before.table.weakest_face().expect("weakest").clone();
        let member = w.first_member.clone().expect("a member fails first");
        let records = vec![finding(1, &member, FindingKind::Fray)];
        update(&mut m, Msg::Records(records));
        assert_eq!(
            m.shared.margin,
            MarginState::Working,
            "the old margin is not shown for the new log"
        );
        let m = with_margin(m);
        let after = shown(&m);
        // A derated member lowers the margin of the faces it governs and no
        // face's figure rises (the check of issue 15, here on the screen's
        // copy of the table).
        for (b, a) in before.table.faces.iter().zip(&after.table.faces) {
            assert!(
                a.failure.speed_m_per_s <= b.failure.speed_m_per_s + 1e-9,
                "{} rose",
                a.id
            );
        }
        let wa = &after.table.faces[before.weakest_first[0]];
        assert!(wa.failure.speed_m_per_s < w.failure.speed_m_per_s);
        let j = m
            .shared
            .cage
            .members
            .iter()
            .position(|x| x.id == member)
            .expect("member");
        let cell = member_cell(&m.shared, j);
        assert!(cell.ends_with(&w.id), "{cell}");
        let mut m = m;
        update(&mut m, key(KeyCode::Char('3')));
        update(&mut m, key(KeyCode::Char('m')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains(&format!("derated: {member} 50%")), "{s}");
    }

    #[test]
    fn a_failed_member_grounds_the_cage_on_the_screen() {
        let mut m = demo_model();
        update(
            &mut m,
            Msg::Records(vec![finding(1, "R3", FindingKind::Cut)]),
        );
        let m = with_margin(m);
        assert!(shown(&m).table.grounded());
        let mut m = m;
        update(&mut m, key(KeyCode::Char('3')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("GROUNDED by R3"), "{s}");
        update(&mut m, key(KeyCode::Char('m')));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("GROUNDED by R3"), "{s}");
    }

    #[test]
    fn the_member_column_names_the_weakest_face_a_member_governs() {
        let m = with_margin(demo_model());
        let sm = shown(&m);
        for (j, mem) in m.shared.cage.members.iter().enumerate() {
            let governed: Vec<&cagehand::margin::StrikeMargin> = sm
                .table
                .faces
                .iter()
                .filter(|f| f.first_member.as_deref() == Some(mem.id.as_str()))
                .collect();
            let cell = member_cell(&m.shared, j);
            match governed
                .iter()
                .min_by(|a, b| a.failure.speed_m_per_s.total_cmp(&b.failure.speed_m_per_s))
            {
                Some(f) => assert_eq!(
                    cell,
                    format!("{:.1} {}", f.failure.speed_m_per_s, f.id),
                    "{}",
                    mem.id
                ),
                None => assert_eq!(cell, "-", "{}", mem.id),
            }
        }
    }

    #[test]
    fn band_digits_are_whole_metres_per_second_capped_at_nine() {
        assert_eq!(band_digit(0.0), 0);
        assert_eq!(band_digit(2.99), 2);
        assert_eq!(band_digit(3.0), 3);
        assert_eq!(band_digit(42.0), 9);
        assert_eq!(band_digit(f64::NAN), 0, "not a number: fail safe");
        assert_eq!(band_digit(-1.0), 0);
    }

    #[test]
    fn faces_nearer_the_weakest_are_shaded_denser() {
        assert_eq!(shade_level(2.0, 2.0), 3);
        assert_eq!(shade_level(2.1, 2.0), 3);
        assert_eq!(shade_level(2.2, 2.0), 2);
        assert_eq!(shade_level(2.5, 2.0), 1);
        assert_eq!(shade_level(2.7, 2.0), 0);
        assert_eq!(shade_level(0.0, 0.0), 3, "grounded: every face densest");
        assert_eq!(shade_level(f64::NAN, 2.0), 3, "not a number: fail safe");
    }
}
