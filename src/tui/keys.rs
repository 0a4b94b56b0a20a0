//! Key tables: each screen declares its keys once, as a table of bindings;
//! the dispatch in `update` and the help overlay are both read from it, so
//! the two cannot drift apart.

use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// A key as the tables name it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Key {
    /// A printable character (no Ctrl or Alt).
    Char(char),
    /// Ctrl plus a character.
    Ctrl(char),
    /// A function key.
    F(u8),
    /// Enter.
    Enter,
    /// Escape.
    Esc,
    /// Tab.
    Tab,
    /// Shift-Tab.
    BackTab,
    /// Arrow up.
    Up,
    /// Arrow down.
    Down,
    /// Page up.
    PageUp,
    /// Page down.
    PageDown,
    /// Home.
    Home,
    /// End.
    End,
    /// Backspace.
    Backspace,
    /// Delete (the character under the cursor).
    Delete,
    /// Arrow left.
    Left,
    /// Arrow right.
    Right,
}

impl Key {
    /// Whether a terminal key event is this key.
    pub fn matches(self, ev: &KeyEvent) -> bool {
        let ctrl = ev.modifiers.contains(KeyModifiers::CONTROL);
        let alt = ev.modifiers.contains(KeyModifiers::ALT);
        match (self, ev.code) {
            (Key::Char(c), KeyCode::Char(e)) => !ctrl && !alt && c == e,
            (Key::Ctrl(c), KeyCode::Char(e)) => ctrl && c.eq_ignore_ascii_case(&e),
            (Key::F(n), KeyCode::F(e)) => n == e,
            (Key::Enter, KeyCode::Enter) => true,
            (Key::Esc, KeyCode::Esc) => true,
            (Key::Tab, KeyCode::Tab) => !ev.modifiers.contains(KeyModifiers::SHIFT),
            (Key::BackTab, KeyCode::BackTab) => true,
            (Key::BackTab, KeyCode::Tab) => ev.modifiers.contains(KeyModifiers::SHIFT),
            (Key::Up, KeyCode::Up) => true,
            (Key::Down, KeyCode::Down) => true,
            (Key::PageUp, KeyCode::PageUp) => true,
            (Key::PageDown, KeyCode::PageDown) => true,
            (Key::Home, KeyCode::Home) => true,
            (Key::End, KeyCode::End) => true,
            (Key::Backspace, KeyCode::Backspace) => true,
            (Key::Delete, KeyCode::Delete) => true,
            (Key::Left, KeyCode::Left) => true,
            (Key::Right, KeyCode::Right) => true,
            _ => false,
        }
    }

    /// The key's name in the help.
    pub fn name(self) -> String {
        match self {
            Key::Char(' ') => "Space".to_string(),
            Key::Char(c) => c.to_string(),
            Key::Ctrl(c) => format!("Ctrl-{}", c.to_ascii_uppercase()),
            Key::F(n) => format!("F{n}"),
            Key::Enter => "Enter".to_string(),
            Key::Esc => "Esc".to_string(),
            Key::Tab => "Tab".to_string(),
            Key::BackTab => "Shift-Tab".to_string(),
            Key::Up => "Up".to_string(),
            Key::Down => "Down".to_string(),
            Key::PageUp => "PgUp".to_string(),
            Key::PageDown => "PgDn".to_string(),
            Key::Home => "Home".to_string(),
            Key::End => "End".to_string(),
            Key::Backspace => "Backspace".to_string(),
            Key::Delete => "Delete".to_string(),
            Key::Left => "Left".to_string(),
            Key::Right => "Right".to_string(),
        }
    }
}

/// One row of a key table: the keys, what they do, and the words for the help.
#[derive(Debug, Clone, Copy)]
pub struct Binding<A: 'static> {
    /// Keys that trigger the action (all listed in the help).
    pub keys: &'static [Key],
    /// The action.
    pub action: A,
    /// What it does, for the help.
    pub help: &'static str,
}

impl<A: Copy> Binding<A> {
    /// The keys' names joined for the help, e.g. `Down / j`.
    pub fn key_names(&self) -> String {
        self.keys
            .iter()
            .map(|k| k.name())
            .collect::<Vec<_>>()
            .join(" / ")
    }
}

/// The action a key event triggers in `table`, if any.
pub fn find<A: Copy>(table: &[Binding<A>], ev: &KeyEvent) -> Option<A> {
    table
        .iter()
        .find(|b| b.keys.iter().any(|k| k.matches(ev)))
        .map(|b| b.action)
}

/// The help rows of a table: key names and what they do. Neighbouring
/// bindings with the same words (next / previous) share one row, so a
/// screen's help stays within 24 rows.
pub fn help_rows<A: Copy>(table: &[Binding<A>]) -> Vec<(String, &'static str)> {
    let mut rows: Vec<(String, &'static str)> = Vec::new();
    for b in table {
        match rows.last_mut() {
            Some((keys, help)) if *help == b.help => {
                keys.push_str(" / ");
                keys.push_str(&b.key_names());
            }
            _ => rows.push((b.key_names(), b.help)),
        }
    }
    rows
}

/// What the keys that work on every screen do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GlobalAction {
    /// Leave the program.
    Quit,
    /// Open the help overlay.
    Help,
    /// Go to the screen at this tab index.
    Go(usize),
    /// Next screen.
    Next,
    /// Previous screen.
    Previous,
    /// Clear the message line.
    ClearNotice,
}

/// Keys on every screen. Screen keys are looked up after these, so a
/// screen cannot rebind them.
pub const GLOBAL_KEYS: &[Binding<GlobalAction>] = &[
    Binding {
        keys: &[Key::Char('1'), Key::Char('w')],
        action: GlobalAction::Go(0),
        help: "Watch: live state, resting face, link",
    },
    Binding {
        keys: &[Key::Char('2'), Key::Char('r')],
        action: GlobalAction::Go(1),
        help: "Righting: roll plan to a take-off face",
    },
    Binding {
        keys: &[Key::Char('3'), Key::Char('c')],
        action: GlobalAction::Go(2),
        help: "Cage: members and their health",
    },
    Binding {
        keys: &[Key::Char('4'), Key::Char('p')],
        action: GlobalAction::Go(3),
        help: "Preflight: checklist",
    },
    Binding {
        keys: &[Key::Tab],
        action: GlobalAction::Next,
        help: "next screen",
    },
    Binding {
        keys: &[Key::BackTab],
        action: GlobalAction::Previous,
        help: "previous screen",
    },
    Binding {
        keys: &[Key::Esc],
        action: GlobalAction::ClearNotice,
        help: "clear the message line",
    },
    Binding {
        keys: &[Key::Char('?'), Key::F(1)],
        action: GlobalAction::Help,
        help: "this help; any other key closes it, q quits",
    },
    Binding {
        keys: &[Key::Char('q'), Key::Ctrl('c')],
        action: GlobalAction::Quit,
        help: "quit",
    },
];

/// Keys that move a selection in a list, shared by the screens with tables.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Move {
    /// One row up.
    Up,
    /// One row down.
    Down,
    /// A page up.
    PageUp,
    /// A page down.
    PageDown,
    /// First row.
    First,
    /// Last row.
    Last,
}

impl Move {
    /// The new selection in a list of `len` rows, `page` rows to a page;
    /// never past the last row.
    pub fn apply(self, selected: usize, len: usize, page: usize) -> usize {
        let last = len.saturating_sub(1);
        let page = page.max(1);
        match self {
            Move::Up => selected.saturating_sub(1),
            Move::Down => (selected + 1).min(last),
            Move::PageUp => selected.saturating_sub(page),
            Move::PageDown => (selected + page).min(last),
            Move::First => 0,
            Move::Last => last,
        }
        .min(last)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ev(code: KeyCode, m: KeyModifiers) -> KeyEvent {
        KeyEvent::new(code, m)
    }

    #[test]
    fn keys_match_only_their_events() {
        let none = KeyModifiers::NONE;
        assert!(Key::Char('q').matches(&ev(KeyCode::Char('q'), none)));
        assert!(!Key::Char('c').matches(&ev(KeyCode::Char('c'), KeyModifiers::CONTROL)));
        assert!(Key::Ctrl('c').matches(&ev(KeyCode::Char('c'), KeyModifiers::CONTROL)));
        assert!(Key::BackTab.matches(&ev(KeyCode::BackTab, KeyModifiers::SHIFT)));
        assert!(!Key::Tab.matches(&ev(KeyCode::Tab, KeyModifiers::SHIFT)));
        assert_eq!(
            find(GLOBAL_KEYS, &ev(KeyCode::Char('3'), none)),
            Some(GlobalAction::Go(2))
        );
        assert_eq!(find(GLOBAL_KEYS, &ev(KeyCode::Char('z'), none)), None);
    }

    #[test]
    fn neighbours_with_the_same_words_share_a_help_row() {
        const T: &[Binding<u8>] = &[
            Binding {
                keys: &[Key::Down, Key::Char('j')],
                action: 0,
                help: "next / previous",
            },
            Binding {
                keys: &[Key::Up],
                action: 1,
                help: "next / previous",
            },
            Binding {
                keys: &[Key::Char('x')],
                action: 2,
                help: "other",
            },
        ];
        assert_eq!(
            help_rows(T),
            vec![
                ("Down / j / Up".to_string(), "next / previous"),
                ("x".to_string(), "other"),
            ]
        );
    }

    #[test]
    fn selection_stops_at_both_ends() {
        assert_eq!(Move::Down.apply(29, 30, 10), 29);
        assert_eq!(Move::PageDown.apply(25, 30, 10), 29);
        assert_eq!(Move::PageUp.apply(3, 30, 10), 0);
        assert_eq!(Move::Last.apply(0, 30, 10), 29);
        assert_eq!(
            Move::Down.apply(0, 0, 10),
            0,
            "an empty list selects nothing past 0"
        );
    }

    #[test]
    fn no_key_is_bound_twice_in_the_global_table() {
        let mut seen = Vec::new();
        for b in GLOBAL_KEYS {
            for k in b.keys {
                assert!(!seen.contains(k), "{k:?} bound twice");
                seen.push(*k);
            }
        }
    }
}
