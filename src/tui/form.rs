//! The log-work forms the screens open (confirm or dismiss a detection, a
//! finding, a replacement, a note, an override reason, the operator's name
//! for a sign-off): fields checked as the operator types, what is wrong said
//! next to the field, nothing typed lost; Enter writes only when every field
//! is right, Esc cancels without writing. A form that passes becomes one
//! [`Work`] the loop carries out against the log (an effect).

use crate::tui::keys::{Binding, Key};
use crate::tui::model::Shared;
use cagehand::impact::ImpactInput;
use cagehand::logbook::{FindingKind, StrikeRef};
use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

/// What a form is for.
#[derive(Debug, Clone, PartialEq)]
pub enum Purpose {
    /// Confirm detection `seq` as an impact.
    Confirm(u64),
    /// Dismiss detection `seq`.
    Dismiss(u64),
    /// A finding on this member.
    Finding(String),
    /// A replacement of this member.
    Replacement(String),
    /// A note.
    Note,
    /// An override reason for pre-flight item `n`.
    Override(u32),
    /// Who signs and a note, then sign the pre-flight.
    Sign,
}

/// How a field's text is checked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Check {
    /// Anything, may be empty.
    Optional,
    /// Not empty.
    Required,
    /// A face or node of this cage.
    Strike,
    /// Empty or a positive number.
    OptPositive,
    /// Empty or a surface preset of the profile.
    Surface,
    /// A finding kind the log accepts.
    Finding,
}

/// One field: its label, what was typed, how it is checked.
#[derive(Debug, Clone, PartialEq)]
pub struct Field {
    /// Label.
    pub label: &'static str,
    /// What was typed.
    pub value: String,
    /// How it is checked.
    pub check: Check,
    /// Where typing goes: how many characters of the value lie after the
    /// cursor (0: at the end, where a field opens; counted from the end so
    /// that a value set afresh keeps the cursor in it).
    pub after_cursor: usize,
}

impl Field {
    /// The cursor's byte offset in the value.
    fn cursor_byte(&self) -> usize {
        let n = self.value.chars().count();
        let at = n - self.after_cursor.min(n);
        self.value
            .char_indices()
            .nth(at)
            .map_or(self.value.len(), |(b, _)| b)
    }

    /// The value split at the cursor: before it, the character under it
    /// (None at the end), after it.
    pub fn at_cursor(&self) -> (&str, Option<char>, &str) {
        let b = self.cursor_byte();
        let (before, rest) = self.value.split_at(b);
        let mut chars = rest.chars();
        let under = chars.next();
        (before, under, chars.as_str())
    }
}

/// A write the operator asked for, ready for the log.
#[derive(Debug, Clone, PartialEq)]
pub enum Work {
    /// Confirm a detection.
    Confirm {
        /// Detection's sequence number.
        seq: u64,
        /// Face or node struck.
        strike: StrikeRef,
        /// Peak acceleration or speed.
        input: ImpactInput,
        /// Note.
        note: Option<String>,
    },
    /// Dismiss a detection.
    Dismiss {
        /// Detection's sequence number.
        seq: u64,
        /// Why.
        reason: String,
    },
    /// A finding.
    Finding {
        /// Member id.
        member: String,
        /// Kind.
        kind: FindingKind,
        /// Note.
        note: Option<String>,
    },
    /// A replacement.
    Replacement {
        /// Member id.
        member: String,
        /// Part or lot.
        part: String,
        /// Note.
        note: Option<String>,
    },
    /// A note.
    Note(String),
    /// Sign the pre-flight with the screen's ticks and overrides.
    Sign(cagehand::preflight::SignOff),
}

/// An open form.
#[derive(Debug, Clone, PartialEq)]
pub struct Form {
    /// What it is for.
    pub purpose: Purpose,
    /// Title.
    pub title: String,
    /// Fields, in order.
    pub fields: Vec<Field>,
    /// Field with the cursor.
    pub focus: usize,
}

/// What the keys in a form do (typed characters go into the field).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FormAction {
    /// Write (when every field is right).
    Submit,
    /// Close without writing.
    Cancel,
    /// Next field.
    Next,
    /// Previous field.
    Previous,
    /// Erase the character before the cursor.
    Erase,
    /// Erase the character under the cursor.
    Delete,
    /// Cursor one character left.
    Left,
    /// Cursor one character right.
    Right,
    /// Cursor to the start of the field.
    Start,
    /// Cursor to the end of the field.
    End,
}

/// The keys of every form; any other printable character is typed.
pub const FORM_KEYS: &[Binding<FormAction>] = &[
    Binding {
        keys: &[Key::Enter],
        action: FormAction::Submit,
        help: "write the record (only when no field is marked)",
    },
    Binding {
        keys: &[Key::Esc],
        action: FormAction::Cancel,
        help: "cancel: nothing is written",
    },
    Binding {
        keys: &[Key::Tab, Key::Down],
        action: FormAction::Next,
        help: "next field",
    },
    Binding {
        keys: &[Key::BackTab, Key::Up],
        action: FormAction::Previous,
        help: "previous field",
    },
    Binding {
        keys: &[Key::Backspace],
        action: FormAction::Erase,
        help: "erase the character before the cursor",
    },
    Binding {
        keys: &[Key::Delete],
        action: FormAction::Delete,
        help: "erase the character under the cursor",
    },
    Binding {
        keys: &[Key::Left],
        action: FormAction::Left,
        help: "cursor left",
    },
    Binding {
        keys: &[Key::Right],
        action: FormAction::Right,
        help: "cursor right",
    },
    Binding {
        keys: &[Key::Home],
        action: FormAction::Start,
        help: "cursor to the start of the field",
    },
    Binding {
        keys: &[Key::End],
        action: FormAction::End,
        help: "cursor to the end of the field",
    },
];

fn field(label: &'static str, value: impl Into<String>, check: Check) -> Field {
    Field {
        label,
        value: value.into(),
        check,
        after_cursor: 0,
    }
}

fn num(v: f64) -> String {
    let s = format!("{v:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

impl Form {
    fn new(purpose: Purpose, title: String, mut fields: Vec<Field>, shared: &Shared) -> Form {
        if shared.operator.is_none() {
            fields.insert(0, field("operator", "", Check::Required));
        }
        Form {
            purpose,
            title,
            fields,
            focus: 0,
        }
    }

    /// Confirm detection `seq`, pre-filled from the detection record (face,
    /// approach speed when known, else the peak).
    pub fn confirm(shared: &Shared, seq: u64) -> Form {
        let d = cagehand::logbook::detection::detection(&shared.records, seq);
        let pending = shared.live.pending.iter().find(|p| p.seq == seq);
        let face = d
            .map(|d| d.face.clone())
            .or_else(|| pending.map(|p| p.face.clone()))
            .unwrap_or_default();
        // The rule `log confirm` follows too (`DetectionEvent::confirm_input`).
        use cagehand::logbook::detection::ConfirmInput;
        let input = d
            .map(|d| d.confirm_input())
            .or_else(|| pending.map(|p| ConfirmInput::from_readings(p.peak_g, p.speed_m_per_s)));
        let (peak_text, speed_text) = match input {
            Some(ConfirmInput::Speed(v)) => (String::new(), num(v)),
            Some(ConfirmInput::PeakG(g)) => (num(g), String::new()),
            None => (String::new(), String::new()),
        };
        let fields = vec![
            field("face or node", face, Check::Strike),
            field("peak g", peak_text, Check::OptPositive),
            field("speed m/s", speed_text, Check::OptPositive),
            field("surface", "", Check::Surface),
            field("note", "", Check::Optional),
        ];
        Form::new(
            Purpose::Confirm(seq),
            format!(" Confirm detection #{seq} as an impact "),
            fields,
            shared,
        )
    }

    /// Dismiss detection `seq` (reason required).
    pub fn dismiss(shared: &Shared, seq: u64) -> Form {
        Form::new(
            Purpose::Dismiss(seq),
            format!(" Dismiss detection #{seq} "),
            vec![field("reason", "", Check::Required)],
            shared,
        )
    }

    /// A finding on `member`.
    pub fn finding(shared: &Shared, member: &str) -> Form {
        Form::new(
            Purpose::Finding(member.to_string()),
            format!(" Finding on {member} "),
            vec![
                field("kind", "", Check::Finding),
                field("note", "", Check::Optional),
            ],
            shared,
        )
    }

    /// A replacement of `member` (part or lot required).
    pub fn replacement(shared: &Shared, member: &str) -> Form {
        Form::new(
            Purpose::Replacement(member.to_string()),
            format!(" Replacement of {member} "),
            vec![
                field("part or lot", "", Check::Required),
                field("note", "", Check::Optional),
            ],
            shared,
        )
    }

    /// A note.
    pub fn note(shared: &Shared) -> Form {
        Form::new(
            Purpose::Note,
            " Note ".to_string(),
            vec![field("text", "", Check::Required)],
            shared,
        )
    }

    /// An override reason for item `n` (kept; written with the sign-off).
    pub fn override_reason(n: u32, current: Option<&str>) -> Form {
        Form {
            purpose: Purpose::Override(n),
            title: format!(" Override item {n}: why it may fly "),
            fields: vec![field("reason", current.unwrap_or(""), Check::Required)],
            focus: 0,
        }
    }

    /// The sign-off: who signs (filled in when known) and a note written
    /// with the record (optional).
    pub fn sign(operator: Option<&str>, note: Option<&str>) -> Form {
        Form {
            purpose: Purpose::Sign,
            title: " Sign the pre-flight ".to_string(),
            fields: vec![
                field("operator", operator.unwrap_or(""), Check::Required),
                field("note", note.unwrap_or(""), Check::Optional),
            ],
            // Straight to the note when the operator is known.
            focus: usize::from(operator.is_some()),
        }
    }

    /// The face or node `text` names, as the cage spells it (`f16` is
    /// F16, as on the command line); None when it names neither.
    fn strike_ref(cage: &cagehand::cage::Cage, text: &str) -> Option<StrikeRef> {
        if let Some(i) = cage.face_named(text) {
            Some(StrikeRef::Face(cage.faces[i].id.clone()))
        } else {
            cage.node_named(text)
                .map(|i| StrikeRef::Node(cage.nodes[i].id.clone()))
        }
    }

    /// What is wrong with field `i`, in words, or None.
    pub fn problem(&self, i: usize, shared: &Shared) -> Option<String> {
        let f = self.fields.get(i)?;
        let v = f.value.trim();
        let own = match f.check {
            Check::Optional => None,
            Check::Required if v.is_empty() => Some("required".to_string()),
            Check::Required => None,
            Check::Strike => {
                let c = &shared.cage;
                if v.is_empty() {
                    Some("required: a face (F1..) or node (N1..)".to_string())
                } else if Self::strike_ref(c, v).is_none() {
                    Some(format!("{v:?} is no face or node of this cage"))
                } else {
                    None
                }
            }
            Check::OptPositive if v.is_empty() => None,
            Check::OptPositive => match v.parse::<f64>() {
                Ok(x) if x.is_finite() && x > 0.0 => None,
                _ => Some("a number above 0".to_string()),
            },
            Check::Surface if v.is_empty() => None,
            Check::Surface => {
                let names = shared.profile.impact.surface_names();
                (!names.contains(&v)).then(|| format!("one of {}", names.join(", ")))
            }
            Check::Finding => FindingKind::parse(v)
                .is_none()
                .then(|| format!("one of {}", FindingKind::ALL.map(|k| k.name()).join(", "))),
        };
        if own.is_some() {
            return own;
        }
        // Peak or speed: exactly one.
        if matches!(self.purpose, Purpose::Confirm(_)) && matches!(f.label, "peak g" | "speed m/s")
        {
            let peak = self.value("peak g").is_empty();
            let speed = self.value("speed m/s").is_empty();
            if peak && speed {
                return Some("give peak g or speed".to_string());
            }
            if !peak && !speed {
                return Some("peak g or speed, not both".to_string());
            }
        }
        if f.label == "surface" && !v.is_empty() && self.value("speed m/s").is_empty() {
            return Some("a surface goes with a speed only".to_string());
        }
        None
    }

    /// Every field's problem, in order.
    pub fn problems(&self, shared: &Shared) -> Vec<(usize, String)> {
        (0..self.fields.len())
            .filter_map(|i| self.problem(i, shared).map(|p| (i, p)))
            .collect()
    }

    /// The trimmed text of the field labelled `label` ("" when absent).
    pub fn value(&self, label: &str) -> &str {
        self.fields
            .iter()
            .find(|f| f.label == label)
            .map_or("", |f| f.value.trim())
    }

    fn opt(&self, label: &str) -> Option<String> {
        Some(self.value(label).to_string()).filter(|s| !s.is_empty())
    }

    /// Type a character into the focused field, at the cursor.
    pub fn type_char(&mut self, c: char) {
        if let Some(f) = self.fields.get_mut(self.focus) {
            let b = f.cursor_byte();
            f.value.insert(b, c);
        }
    }

    /// Act on a form key.
    pub fn act(&mut self, a: FormAction) {
        let n = self.fields.len().max(1);
        match a {
            FormAction::Next => self.focus = (self.focus + 1) % n,
            FormAction::Previous => self.focus = (self.focus + n - 1) % n,
            FormAction::Submit | FormAction::Cancel => {}
            edit => {
                if let Some(f) = self.fields.get_mut(self.focus) {
                    Self::edit(f, edit);
                }
            }
        }
    }

    /// A key that moves the cursor or erases within the focused field.
    fn edit(f: &mut Field, a: FormAction) {
        let len = f.value.chars().count();
        f.after_cursor = f.after_cursor.min(len);
        match a {
            FormAction::Erase if f.after_cursor < len => {
                let b = f.cursor_byte();
                let start = f.value[..b].char_indices().last().map_or(0, |(i, _)| i);
                f.value.replace_range(start..b, "");
            }
            FormAction::Delete if f.after_cursor > 0 => {
                let b = f.cursor_byte();
                let end = f.value[b..].chars().next().map_or(b, |c| b + c.len_utf8());
                f.value.replace_range(b..end, "");
                f.after_cursor -= 1;
            }
            FormAction::Left => f.after_cursor = (f.after_cursor + 1).min(len),
            FormAction::Right => f.after_cursor = f.after_cursor.saturating_sub(1),
            FormAction::Start => f.after_cursor = len,
            FormAction::End => f.after_cursor = 0,
            _ => {}
        }
    }

    /// The operator typed into the form, if it asked for one.
    pub fn operator(&self) -> Option<String> {
        self.fields
            .iter()
            .find(|f| f.label == "operator")
            .map(|f| f.value.trim().to_string())
            .filter(|s| !s.is_empty())
    }

    /// The write this form asks for, once every field is right (None for
    /// the forms that write nothing themselves: override, sign).
    pub fn work(&self, shared: &Shared) -> Result<Option<Work>, String> {
        if let Some((i, p)) = self.problems(shared).into_iter().next() {
            return Err(format!("{}: {p}", self.fields[i].label));
        }
        let note = self.opt("note");
        Ok(match &self.purpose {
            Purpose::Confirm(seq) => {
                let strike = Self::strike_ref(&shared.cage, self.value("face or node"))
                    .ok_or_else(|| "face or node: not of this cage".to_string())?;
                let number = |l: &str| self.value(l).parse::<f64>().ok();
                let input = match (number("peak g"), number("speed m/s")) {
                    (Some(g), _) => ImpactInput::PeakAccel { g },
                    (None, Some(v)) => ImpactInput::Speed {
                        speed_m_per_s: v,
                        surface: self.opt("surface"),
                    },
                    (None, None) => return Err("give peak g or speed".to_string()),
                };
                Some(Work::Confirm {
                    seq: *seq,
                    strike,
                    input,
                    note,
                })
            }
            Purpose::Dismiss(seq) => Some(Work::Dismiss {
                seq: *seq,
                reason: self.value("reason").to_string(),
            }),
            Purpose::Finding(m) => Some(Work::Finding {
                member: m.clone(),
                kind: FindingKind::parse(self.value("kind"))
                    .ok_or_else(|| "kind: not a finding kind".to_string())?,
                note,
            }),
            Purpose::Replacement(m) => Some(Work::Replacement {
                member: m.clone(),
                part: self.value("part or lot").to_string(),
                note,
            }),
            Purpose::Note => Some(Work::Note(self.value("text").to_string())),
            Purpose::Override(_) | Purpose::Sign => None,
        })
    }

    /// Draw the form over the middle of `area`.
    pub fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect) {
        let t = &shared.theme;
        let w = area.width.saturating_sub(4).min(76);
        let mut lines = Vec::new();
        for (i, f) in self.fields.iter().enumerate() {
            let marker = if i == self.focus { "> " } else { "  " };
            let mut spans = vec![Span::styled(format!("{marker}{:<13}", f.label), t.accent)];
            if i == self.focus {
                // The cursor: the character under it in reverse video, or
                // `_` past the end (shows without colour).
                let (before, under, after) = f.at_cursor();
                spans.push(Span::styled(before.to_string(), t.text));
                spans.push(match under {
                    Some(c) => Span::styled(
                        c.to_string(),
                        t.text.add_modifier(ratatui::style::Modifier::REVERSED),
                    ),
                    None => Span::styled("_", t.text),
                });
                spans.push(Span::styled(after.to_string(), t.text));
            } else {
                spans.push(Span::styled(f.value.clone(), t.text));
            }
            lines.push(Line::from(spans));
            if let Some(p) = self.problem(i, shared) {
                lines.push(Line::styled(format!("     ^ {p}"), t.alarm));
            }
        }
        // An override reason is kept for the sign-off, not written yet.
        let enter = match self.purpose {
            Purpose::Override(_) => "Enter keeps the reason for the sign-off",
            _ => "Enter writes",
        };
        lines.push(Line::styled(
            format!("{enter}  Esc cancels  Tab next field"),
            t.dim,
        ));
        // Long values wrap: the height counts the wrapped rows, so the key
        // line at the bottom stays in view.
        let h =
            (crate::tui::table::wrapped_height(&lines, w.saturating_sub(2)) + 2).min(area.height);
        let r = Rect {
            x: area.x + (area.width.saturating_sub(w)) / 2,
            y: area.y + (area.height.saturating_sub(h)) / 2,
            width: w,
            height: h,
        };
        frame.render_widget(Clear, r);
        frame.render_widget(
            Paragraph::new(lines).wrap(Wrap { trim: false }).block(
                Block::default()
                    .borders(Borders::ALL)
                    .title(self.title.clone()),
            ),
            r,
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::model::demo_model;

    #[test]
    fn a_replacement_needs_a_part_and_keeps_what_was_typed() {
        let mut m = demo_model();
        m.shared.operator = Some("ana".into());
        let mut f = Form::replacement(&m.shared, "R1");
        assert!(f.work(&m.shared).unwrap_err().contains("part or lot"));
        f.act(FormAction::Next);
        for c in "bent".chars() {
            f.type_char(c);
        }
        assert!(f.work(&m.shared).is_err(), "the part is still empty");
        assert_eq!(f.value("note"), "bent", "what was typed stays");
        f.act(FormAction::Previous);
        for c in "LOT-7".chars() {
            f.type_char(c);
        }
        assert_eq!(
            f.work(&m.shared).unwrap(),
            Some(Work::Replacement {
                member: "R1".into(),
                part: "LOT-7".into(),
                note: Some("bent".into())
            })
        );
    }

    #[test]
    fn confirm_takes_peak_or_speed_and_a_face_of_this_cage() {
        let mut m = demo_model();
        m.shared.operator = Some("ana".into());
        let mut f = Form::confirm(&m.shared, 3);
        f.fields[0].value = "F999".into();
        assert!(f.problem(0, &m.shared).unwrap().contains("no face or node"));
        f.fields[0].value = "F2".into();
        f.fields[1].value = "5".into();
        f.fields[2].value = "2".into();
        assert!(f.problem(1, &m.shared).unwrap().contains("not both"));
        f.fields[2].value.clear();
        assert_eq!(
            f.work(&m.shared).unwrap(),
            Some(Work::Confirm {
                seq: 3,
                strike: StrikeRef::Face("F2".into()),
                input: ImpactInput::PeakAccel { g: 5.0 },
                note: None
            })
        );
        // Lower case names the same face or node, as on the command line.
        f.fields[0].value = " f2".into();
        assert_eq!(f.problem(0, &m.shared), None);
        f.fields[0].value = "n3".into();
        match f.work(&m.shared).unwrap() {
            Some(Work::Confirm { strike, .. }) => assert_eq!(strike, StrikeRef::Node("N3".into())),
            other => panic!("a confirmation expected: {other:?}"),
        }
    }

    /// A field is edited where its cursor is: arrows, Home and End move it,
    /// Backspace and Delete erase around it, characters go in at it, and
    /// multi-byte characters count as one.
    #[test]
    fn a_field_is_edited_at_its_cursor() {
        let m = demo_model();
        let mut f = Form::note(&m.shared);
        f.focus = f.fields.len() - 1;
        let keys = |f: &mut Form, typed: &str, acts: &[FormAction]| {
            for c in typed.chars() {
                f.type_char(c);
            }
            for &a in acts {
                f.act(a);
            }
        };
        let value = |f: &Form| f.fields[f.focus].value.clone();
        keys(&mut f, "12q?", &[FormAction::Left, FormAction::Left]);
        keys(&mut f, "X", &[FormAction::Start]);
        keys(&mut f, "Y", &[FormAction::End]);
        keys(&mut f, "Z", &[]);
        assert_eq!(value(&f), "Y12Xq?Z");
        keys(&mut f, "", &[FormAction::Start, FormAction::Delete]);
        assert_eq!(value(&f), "12Xq?Z");
        keys(
            &mut f,
            "",
            &[FormAction::Right, FormAction::Right, FormAction::Right],
        );
        keys(&mut f, "", &[FormAction::Erase]);
        assert_eq!(value(&f), "12q?Z");
        // Erasing at the start and deleting at the end change nothing.
        keys(
            &mut f,
            "",
            &[FormAction::Start, FormAction::Erase, FormAction::Left],
        );
        keys(
            &mut f,
            "",
            &[FormAction::End, FormAction::Delete, FormAction::Right],
        );
        assert_eq!(value(&f), "12q?Z");
        // Multi-byte characters: one step each.
        let mut g = Form::note(&m.shared);
        g.focus = g.fields.len() - 1;
        keys(
            &mut g,
            "café✓",
            &[FormAction::Left, FormAction::Left, FormAction::Erase],
        );
        assert_eq!(value(&g), "caé✓");
        assert_eq!(g.fields[g.focus].at_cursor(), ("ca", Some('é'), "✓"));
        keys(&mut g, "f", &[FormAction::Delete]);
        assert_eq!(value(&g), "caf✓");
        assert_eq!(g.fields[g.focus].at_cursor(), ("caf", Some('✓'), ""));
        keys(&mut g, "", &[FormAction::End]);
        assert_eq!(g.fields[g.focus].at_cursor(), ("caf✓", None, ""));
    }

    #[test]
    fn an_unknown_operator_is_asked_for() {
        let m = demo_model();
        let f = Form::note(&m.shared);
        assert_eq!(f.fields[0].label, "operator");
        assert!(f.problem(0, &m.shared).is_some());
    }
}
