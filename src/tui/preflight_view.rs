//! The Preflight screen: draws the checklist as the core evaluated it
//! (src/preflight.rs); this view decides nothing. The result column is the
//! last to go when space is short, and the selected item is shown whole
//! below the table.

use crate::tui::component::Component;
use crate::tui::form::{Form, Work};
use crate::tui::keys::{Binding, Key, Move};
use crate::tui::model::Shared;
use crate::tui::table::{self, Column, Window};
use cagehand::preflight::{ItemEval, ItemKind, Outcome, SignOff};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Row, Wrap};

/// The Preflight screen's own state: the selected item and the first row shown.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PreflightScreen {
    /// Selected item.
    pub selected: usize,
    /// First item row shown.
    pub offset: usize,
    /// Hand items ticked, override reasons and the note typed: kept until
    /// the cage log changes (a sign-off included), see [`Self::log_changed`].
    pub signoff: SignOff,
    /// Ticks were dropped by a change to the log and none made since: the
    /// verdict line says so.
    pub cleared: bool,
}

/// What the Preflight screen's keys do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PreflightAction {
    /// Move the selection.
    Select(Move),
    /// Tick or untick the selected hand item.
    Tick,
    /// Type an override reason for the selected automatic item.
    Override,
    /// Sign the checklist off.
    Sign,
}

const KEYS: &[Binding<PreflightAction>] = &[
    Binding {
        keys: &[Key::Down, Key::Char('j')],
        action: PreflightAction::Select(Move::Down),
        help: "next item (shown whole below the table)",
    },
    Binding {
        keys: &[Key::Up, Key::Char('k')],
        action: PreflightAction::Select(Move::Up),
        help: "previous item",
    },
    Binding {
        keys: &[Key::Char(' '), Key::Char('t')],
        action: PreflightAction::Tick,
        help: "tick / untick the selected hand item",
    },
    Binding {
        keys: &[Key::Char('o')],
        action: PreflightAction::Override,
        help: "override a failing or waiting item, with a reason",
    },
    Binding {
        keys: &[Key::Char('s')],
        action: PreflightAction::Sign,
        help: "sign off (written only when nothing blocks)",
    },
];

/// What the screens say when a change to the log dropped the ticks.
pub const CLEARED: &str =
    "pre-flight ticks, overrides and note cleared (the cage log changed): check again";

/// The sign-off the cage log ends with, if its newest record is one (the
/// change that dropped the ticks was then that sign-off: it is named rather
/// than a bare "the log changed").
pub fn newest_sign_off(records: &[cagehand::logbook::Record]) -> Option<u64> {
    records
        .last()
        .filter(|r| matches!(r.event, cagehand::logbook::Event::Preflight(_)))
        .map(|r| r.seq)
}

/// Rows around the table: its border and header, and the detail pane.
const CHROME_ROWS: u16 = 3 + 4;

fn mark_style(shared: &Shared, result: Outcome) -> Style {
    let t = &shared.theme;
    match result {
        Outcome::Pass => t.good,
        Outcome::Fail => t.alarm,
        Outcome::Waiting | Outcome::Hand => t.warn,
    }
}

/// The result in capitals, as the table shows it.
fn mark(result: Outcome) -> String {
    result.name().to_uppercase()
}

impl PreflightScreen {
    /// The evaluated items (none until the feed has evaluated the list).
    fn items(shared: &Shared) -> &[ItemEval] {
        shared
            .live
            .preflight
            .as_ref()
            .map_or(&[], |e| e.items.as_slice())
    }
}

impl PreflightScreen {
    fn tick(&mut self, shared: &mut Shared) {
        let Some(item) = Self::items(shared).get(self.selected) else {
            shared.notice = Some("no item: the checklist is not evaluated yet".into());
            return;
        };
        if item.kind != ItemKind::Hand {
            shared.notice = Some(format!(
                "item {} is checked by the tool, not ticked; o overrides it with a reason",
                item.n
            ));
            return;
        }
        let n = item.n;
        self.signoff.toggle(n);
        self.cleared = false;
        let word = if self.signoff.ticked.contains(&n) {
            "ticked"
        } else {
            "unticked"
        };
        shared.notice = Some(format!("item {n} {word}"));
    }

    fn ask_override(&mut self, shared: &mut Shared) {
        let Some(item) = Self::items(shared).get(self.selected) else {
            shared.notice = Some("no item: the checklist is not evaluated yet".into());
            return;
        };
        let n = item.n;
        if item.kind == ItemKind::Hand {
            shared.notice = Some(format!("item {n} is a hand item: tick it with Space"));
        } else if !item.blocks() {
            shared.notice = Some(format!("item {n} passes: nothing to override"));
        } else if !item.can_override {
            shared.notice = Some(format!("item {n} cannot be overridden: {}", item.detail));
        } else {
            self.cleared = false;
            let current = self.signoff.overrides.get(&n).map(String::as_str);
            shared.form = Some(Form::override_reason(n, current));
        }
    }

    /// The cage log gained records (a crash detected, a finding, a
    /// replacement, a sign-off, another program's write): the ticks,
    /// overrides and note were made against the log as it was, so they are
    /// dropped and must be made again. Fail safe: a check made before a
    /// crash must never go into the sign-off after it.
    pub fn log_changed(&mut self) -> bool {
        if self.signoff == SignOff::default() {
            return false;
        }
        self.signoff = SignOff::default();
        self.cleared = true;
        true
    }

    /// Whether `item` is a hand item ticked on this screen.
    fn ticked(&self, item: &ItemEval) -> bool {
        item.kind == ItemKind::Hand && self.signoff.ticked.contains(&item.n)
    }

    /// Sign off (the key): refused here with every blocking reason, else
    /// the sign form opens (who signs, a note).
    pub fn sign(&mut self, shared: &mut Shared) {
        if self.signable(shared).is_none() {
            return;
        }
        shared.form = Some(Form::sign(
            shared.operator.as_deref(),
            self.signoff.note.as_deref(),
        ));
    }

    /// After the sign form: checked again (the checklist may have moved
    /// while the form was open), then the loop is asked to write.
    pub fn write_sign(&mut self, shared: &mut Shared) {
        let Some(eval) = self.signable(shared) else {
            return;
        };
        crate::tui::model::ask_write(
            shared,
            Work::Sign(self.signoff.clone()),
            Some(Box::new(eval)),
        );
    }

    /// The evaluation to sign against, or None with the reasons on the
    /// message line.
    fn signable(&self, shared: &mut Shared) -> Option<cagehand::preflight::Evaluation> {
        let Some(eval) = shared.live.preflight.clone() else {
            shared.notice = Some("cannot sign: the checklist is not evaluated yet".into());
            return None;
        };
        if let Err(r) = cagehand::preflight::sign(&eval, &self.signoff) {
            shared.notice = Some(format!("NOT signed: {}", r.reasons.join("; ")));
            return None;
        }
        Some(eval)
    }

    /// The result shown for an item: a ticked hand item or an overridden
    /// automatic one says so.
    fn shown(&self, item: &ItemEval) -> String {
        if self.ticked(item) {
            "[x]".to_string()
        } else if item.kind == ItemKind::Hand {
            "[ ]".to_string()
        } else if item.blocks() && self.signoff.overrides.contains_key(&item.n) {
            "OVERRIDE".to_string()
        } else {
            mark(item.result)
        }
    }
}

impl Component for PreflightScreen {
    type Action = PreflightAction;

    fn keys(&self) -> &'static [Binding<PreflightAction>] {
        KEYS
    }

    fn min_size(&self) -> (u16, u16) {
        (50, CHROME_ROWS + 3)
    }

    fn act(&mut self, action: PreflightAction, shared: &mut Shared) -> bool {
        let m = match action {
            PreflightAction::Select(m) => m,
            PreflightAction::Tick => {
                self.tick(shared);
                return true;
            }
            PreflightAction::Override => {
                self.ask_override(shared);
                return true;
            }
            PreflightAction::Sign => {
                self.sign(shared);
                return true;
            }
        };
        let len = Self::items(shared).len();
        let page = usize::from(shared.size.1.saturating_sub(3 + CHROME_ROWS)).max(1);
        self.selected = m.apply(self.selected, len, page);
        self.offset = Window::new(self.selected, self.offset, page, len).offset;
        true
    }

    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let items = Self::items(shared);
        let n = items.len();
        // The table as tall as its items (no empty rows), the rest for the
        // selected item whole.
        let table_h = (n as u16 + 3).min(area.height.saturating_sub(4)).max(4);
        let [table_area, detail] =
            Layout::vertical([Constraint::Length(table_h), Constraint::Min(4)]).areas(area);
        let visible = usize::from(table_area.height.saturating_sub(3)).max(1);
        let win = Window::new(self.selected, self.offset, visible, n);
        let columns = [
            Column {
                header: "#",
                width: 2,
                rank: 1,
                flex: false,
            },
            Column {
                header: "result",
                width: 8,
                rank: 0,
                flex: false,
            },
            Column {
                header: "item",
                width: 20,
                rank: 0,
                flex: true,
            },
            Column {
                header: "detail",
                width: 18,
                rank: 2,
                flex: true,
            },
        ];
        let (kept, widths) = table::fit(&columns, table_area.width.saturating_sub(2));
        let rows: Vec<Row> = (win.offset..win.offset + win.shown)
            .filter_map(|i| {
                let item = items.get(i)?;
                let style = mark_style(shared, item.result);
                let ticked = self.ticked(item);
                let cells = vec![
                    item.n.to_string(),
                    self.shown(item),
                    item.text.clone(),
                    if ticked {
                        "ticked by hand".to_string()
                    } else {
                        item.detail.clone()
                    },
                ];
                Some(table::selectable(
                    Row::new(table::pick(&cells, &kept)),
                    style,
                    i == self.selected,
                ))
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
                format!(" Preflight checklist: {} ", win.title("item")),
            ),
            table_area,
        );
        let detail_text = match items.get(self.selected) {
            Some(item) if self.ticked(item) => Line::from(vec![
                Span::styled(format!("{} [x]: ", item.n), t.good),
                Span::styled(
                    format!("{}. ", item.text),
                    t.text.add_modifier(Modifier::BOLD),
                ),
                Span::styled("Ticked by hand on this screen; Space unticks.", t.text),
            ]),
            Some(item) => Line::from(vec![
                Span::styled(
                    format!("{} {}: ", item.n, mark(item.result)),
                    mark_style(shared, item.result),
                ),
                Span::styled(
                    format!("{}. ", item.text),
                    t.text.add_modifier(Modifier::BOLD),
                ),
                Span::styled(item.detail.clone(), t.text),
                Span::styled(
                    match self.signoff.overrides.get(&item.n) {
                        Some(r) => format!(" Override: {r}."),
                        None => String::new(),
                    },
                    t.warn,
                ),
            ]),
            None => Line::styled("evaluating the checklist: waiting for the feed", t.warn),
        };
        let verdict = match shared.live.preflight.as_ref() {
            None => Line::raw(""),
            Some(eval) => match cagehand::preflight::sign(eval, &self.signoff) {
                Ok(_) => Line::styled(
                    "READY to sign: s opens the sign-off (who signs, a note)",
                    t.good,
                ),
                Err(r) => Line::styled(
                    format!(
                        "BLOCKED ({}): {}{}",
                        r.reasons.len(),
                        match (self.cleared, newest_sign_off(&shared.records)) {
                            (true, Some(seq)) => format!(
                                "signed off as record #{seq}; a new sign-off needs every check again; "
                            ),
                            (true, None) => format!("{CLEARED}; "),
                            (false, _) => String::new(),
                        },
                        r.reasons.first().cloned().unwrap_or_default()
                    ),
                    t.alarm,
                ),
            },
        };
        frame.render_widget(
            Paragraph::new(vec![verdict, detail_text])
                .wrap(Wrap { trim: true })
                .block(
                    Block::default()
                        .borders(Borders::TOP)
                        .title(" Selected item "),
                ),
            detail,
        );
    }
}

#[cfg(test)]
mod tests {
    use crate::tui::model::{Msg, demo_model, tracked, update, with_preflight};
    use crate::tui::view::render_text;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    #[test]
    fn the_result_column_stays_when_narrow() {
        let m = demo_model();
        let st = tracked(&m, &[], 0.0);
        let mut m = with_preflight(m, &st);
        update(
            &mut m,
            Msg::Key(KeyEvent::new(KeyCode::Char('4'), KeyModifiers::NONE)),
        );
        let s = render_text(&m, 50, 14);
        assert!(s.contains("result"), "{s}");
        assert!(
            s.contains("WAITING") && s.contains("[ ]"),
            "hand items show their tick box:\n{s}"
        );
        assert!(s.contains("Selected item"), "{s}");
    }

    #[test]
    fn before_the_feed_evaluates_it_says_so() {
        let mut m = demo_model();
        m.screen = crate::tui::model::Screen::Preflight;
        let s = render_text(&m, 80, 24);
        assert!(s.contains("evaluating the checklist"), "{s}");
    }

    fn key(c: char) -> Msg {
        Msg::Key(KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE))
    }

    /// The demo's checklist with item `n` selected.
    fn on_item(n: u32) -> crate::tui::model::Model {
        let m = demo_model();
        let st = tracked(&m, &[], 0.0);
        let mut m = with_preflight(m, &st);
        update(&mut m, key('4'));
        let items = &m.shared.live.preflight.as_ref().unwrap().items;
        m.screens.preflight.selected = items.iter().position(|i| i.n == n).unwrap();
        m
    }

    #[test]
    fn the_override_form_says_enter_keeps_the_reason_not_writes_it() {
        let mut m = on_item(1);
        m.shared.form = Some(crate::tui::form::Form::override_reason(2, None));
        let s = render_text(&m, 80, 24);
        assert!(s.contains("Enter keeps the reason"), "{s}");
        assert!(!s.contains("Enter writes"), "{s}");
        m.shared.form = Some(crate::tui::form::Form::sign(Some("ana"), None));
        assert!(render_text(&m, 80, 24).contains("Enter writes"));
    }

    /// A sign-off form left open while the log changes (another program
    /// wrote a detection) is closed, so keys typed next do not go into it.
    #[test]
    fn a_change_to_the_log_closes_an_open_sign_off_form() {
        let mut m = on_item(1);
        m.shared.form = Some(crate::tui::form::Form::sign(Some("ana"), None));
        let mut records = m.shared.records.clone();
        records.push(crate::tui::model::detection_record(1));
        update(&mut m, Msg::Records(records));
        assert!(m.shared.form.is_none());
        assert_eq!(m.shared.notice.as_deref(), Some(super::CLEARED));
    }

    /// The safety rule of `log_changed`: a tick made before the log changed
    /// (here a crash detected while the crew ticked) is dropped, the
    /// message line and the verdict say so, and a new tick ends the notice.
    #[test]
    fn a_change_to_the_log_drops_the_ticks_made_before_it() {
        let m = on_item(1);
        let hand = m.shared.live.preflight.clone().unwrap().hand_items();
        let mut m = on_item(hand[0]);
        update(&mut m, key(' '));
        m.screens.preflight.signoff.note = Some("props spun by hand".into());
        assert!(m.screens.preflight.signoff.ticked.contains(&hand[0]));
        let s = render_text(&m, 160, 48);
        assert!(s.contains("Ticked by hand on this screen"), "{s}");
        let mut records = m.shared.records.clone();
        records.push(crate::tui::model::detection_record(1));
        update(&mut m, Msg::Records(records.clone()));
        assert_eq!(m.screens.preflight.signoff, super::SignOff::default());
        assert_eq!(m.shared.notice.as_deref(), Some(super::CLEARED));
        let s = render_text(&m, 160, 48);
        assert!(s.contains("ticks, overrides and note cleared"), "{s}");
        // The same log read again changes nothing; a new tick ends the notice.
        update(&mut m, key(' '));
        update(&mut m, Msg::Records(records));
        assert!(m.screens.preflight.signoff.ticked.contains(&hand[0]));
        assert!(!m.screens.preflight.cleared);
        let s = render_text(&m, 160, 48);
        assert!(!s.contains("note cleared"), "{s}");
        // A sign-off is a record too: the ticks go, and the verdict names
        // the sign-off rather than a bare change (its own message says it
        // was written, so the message line is left to that).
        m.shared.notice = None;
        let mut signed = read_with_detection(&m, 2);
        signed.push(cagehand::logbook::Record {
            seq: 3,
            time: "2026-12-02T05:50:00Z".into(),
            operator: "ana".into(),
            event: cagehand::logbook::Event::Preflight(cagehand::logbook::PreflightEvent {
                items: Vec::new(),
                signed_off: true,
                note: None,
            }),
        });
        update(&mut m, Msg::Records(signed));
        assert_eq!(m.screens.preflight.signoff, super::SignOff::default());
        assert_eq!(m.shared.notice, None);
        let s = render_text(&m, 160, 48);
        assert!(
            s.contains("signed off as record #3; a new sign-off needs every"),
            "{s}"
        );
    }

    /// The records the model has read, with detection `seq` added.
    fn read_with_detection(
        m: &crate::tui::model::Model,
        seq: u64,
    ) -> Vec<cagehand::logbook::Record> {
        let mut r = m.shared.records.clone();
        r.push(crate::tui::model::detection_record(seq));
        r
    }

    #[test]
    fn space_ticks_only_hand_items() {
        let m = on_item(1);
        let eval = m.shared.live.preflight.clone().unwrap();
        let hand = eval.hand_items()[0];
        let mut m = on_item(hand);
        update(&mut m, key(' '));
        assert!(m.screens.preflight.signoff.ticked.contains(&hand));
        update(&mut m, key(' '));
        assert!(!m.screens.preflight.signoff.ticked.contains(&hand));
        let auto = eval
            .items
            .iter()
            .find(|i| i.kind == cagehand::preflight::ItemKind::Auto)
            .unwrap()
            .n;
        let mut m = on_item(auto);
        update(&mut m, key(' '));
        assert!(m.screens.preflight.signoff.ticked.is_empty());
        assert!(m.shared.notice.as_deref().unwrap().contains("not ticked"));
    }

    #[test]
    fn signing_while_blocked_is_refused_here_with_the_reasons() {
        let mut m = on_item(1);
        m.shared.operator = Some("ana".into());
        update(&mut m, key('s'));
        assert!(m.shared.outbox.is_empty(), "nothing asked to be written");
        let notice = m.shared.notice.clone().unwrap();
        assert!(notice.starts_with("NOT signed"), "{notice}");
    }

    #[test]
    fn signing_opens_a_form_whose_note_goes_with_the_record() {
        use crate::tui::model::{LiveState, held, live_on};
        // Ready: resting on a take-off face, every hand item ticked.
        let m = demo_model();
        let face = m.shared.takeoff[0];
        let mut live = live_on(&m, face, 12.0, LiveState::Resting);
        live.battery_v = Some(12.4);
        let q = cagehand::rest::resting_attitude(&m.shared.cage, face);
        let st = tracked(&m, &held(q, Some(12.4), Some(false)), 1.5);
        let health = cagehand::health::assess(&[], &m.shared.cage, &m.shared.profile.inspection);
        let mut m = m.with_health(Some(health), "no records".to_string());
        update(&mut m, Msg::Live(Box::new(live)));
        let mut m = with_preflight(m, &st);
        update(&mut m, key('4'));
        let eval = m.shared.live.preflight.clone().unwrap();
        m.screens.preflight.signoff = cagehand::preflight::SignOff::tick_all(&eval);
        m.shared.operator = Some("ana".into());

        update(&mut m, key('s'));
        let form = m.shared.form.as_ref().expect("the sign form opens");
        assert_eq!(
            form.value("operator"),
            "ana",
            "the known operator is filled in"
        );
        assert!(m.shared.outbox.is_empty(), "nothing written before Enter");
        for c in "props checked".chars() {
            update(&mut m, key(c));
        }
        update(
            &mut m,
            Msg::Key(KeyEvent::new(KeyCode::Enter, KeyModifiers::NONE)),
        );
        assert!(m.shared.form.is_none());
        match m.shared.outbox.as_slice() {
            [crate::tui::model::Effect::Log { operator, work, .. }] => {
                assert_eq!(operator, "ana");
                match work {
                    crate::tui::form::Work::Sign(s) => {
                        assert_eq!(s.note.as_deref(), Some("props checked"));
                    }
                    other => panic!("not a sign-off: {other:?}"),
                }
            }
            other => panic!("one write expected: {other:?}"),
        }
    }

    #[test]
    fn an_item_that_cannot_be_overridden_says_why() {
        let m = on_item(1);
        let eval = m.shared.live.preflight.clone().unwrap();
        let mut checked = 0;
        if let Some(i) = eval.items.iter().find(|i| i.blocks() && !i.can_override) {
            checked += 1;
            let mut m = on_item(i.n);
            update(&mut m, key('o'));
            assert!(m.shared.form.is_none());
            assert!(
                m.shared
                    .notice
                    .as_deref()
                    .unwrap()
                    .contains("cannot be overridden")
            );
        }
        if let Some(i) = eval.items.iter().find(|i| i.blocks() && i.can_override) {
            checked += 1;
            let mut m = on_item(i.n);
            update(&mut m, key('o'));
            assert!(
                m.shared.form.is_some(),
                "an overridable item opens the form"
            );
            for c in "tethered test".chars() {
                update(&mut m, key(c));
            }
            update(
                &mut m,
                Msg::Key(KeyEvent::new(KeyCode::Enter, KeyModifiers::NONE)),
            );
            assert_eq!(
                m.screens
                    .preflight
                    .signoff
                    .overrides
                    .get(&i.n)
                    .map(String::as_str),
                Some("tethered test")
            );
        }
        assert!(checked > 0, "the stale demo has a blocking item: {eval:?}");
    }
}
