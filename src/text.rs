//! Text that came from outside (profile strings, operator names, notes,
//! part numbers, log records) made safe to print. A terminal obeys control
//! sequences in what it prints: an operator name holding `ESC ] 0 ; ... BEL`
//! retitles the window, `ESC [ 2 J` clears the screen and hides what came
//! before, a bidi override makes text read backwards. Every print site of
//! outside text goes through [`terminal`] (or [`terminal_lines`]); the
//! Markdown report goes through [`markdown`].
//!
//! Control characters are not dropped but shown, so nothing is hidden from
//! the reader: `\n`, `\r`, `\t` as those two-character escapes, every other
//! one as `\u{..}` with its code point in hex.

use std::borrow::Cow;
use std::fmt::Write as _;

/// A count and its noun, singular for one: `count(1, "record", "records")`
/// is "1 record", `count(0, ...)` "0 records".
pub fn count<N>(n: N, one: &str, many: &str) -> String
where
    N: std::fmt::Display + PartialEq + From<u8>,
{
    let noun = if n == N::from(1) { one } else { many };
    format!("{n} {noun}")
}

/// Whether a character must not reach a terminal as itself: C0 controls
/// (below U+0020, ESC among them), DEL, C1 controls (U+0080..U+009F, which
/// some terminals read as escape introducers), the line and paragraph
/// separators, and the bidirectional formatting characters that reorder
/// what is shown (Unicode Standard Annex #9, "Explicit Directional
/// Formatting Characters": U+202A..U+202E, U+2066..U+2069, and the marks
/// U+200E, U+200F, U+061C).
pub fn is_unsafe(c: char) -> bool {
    matches!(c,
        '\u{0}'..='\u{1f}'
        | '\u{7f}'..='\u{9f}'
        | '\u{2028}' | '\u{2029}'
        | '\u{202a}'..='\u{202e}'
        | '\u{2066}'..='\u{2069}'
        | '\u{200e}' | '\u{200f}' | '\u{061c}')
}

fn escape_into(out: &mut String, c: char) {
    match c {
        '\n' => out.push_str("\\n"),
        '\r' => out.push_str("\\r"),
        '\t' => out.push_str("\\t"),
        c => {
            let _ = write!(out, "\\u{{{:x}}}", u32::from(c));
        }
    }
}

fn escape(s: &str, keep: impl Fn(char) -> bool) -> Cow<'_, str> {
    if !s.chars().any(|c| is_unsafe(c) && !keep(c)) {
        return Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if is_unsafe(c) && !keep(c) {
            escape_into(&mut out, c);
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// Outside text for one line of a terminal: every control character
/// (newlines too) and bidi override shown as an escape.
pub fn terminal(s: &str) -> Cow<'_, str> {
    escape(s, |_| false)
}

/// As [`terminal`], but line breaks (`\n`) are kept: for messages that are
/// several lines by design, such as an error with its causes.
pub fn terminal_lines(s: &str) -> Cow<'_, str> {
    escape(s, |c| c == '\n')
}

/// Outside text for inline Markdown (a table cell, a list item, a title):
/// controls escaped as for the terminal, HTML's `&`, `<`, `>` as entities
/// (so `<script>` is text, never markup), and the characters that open
/// inline Markdown (code, emphasis, strike-through, links; CommonMark 0.31,
/// "Backslash escapes": any ASCII punctuation may be escaped) escaped with
/// a backslash, `|` included so a table cell cannot be split. Parentheses
/// and `#` stay: with `[` escaped they cannot form a link, and the text is
/// never at the start of a line.
pub fn markdown(s: &str) -> String {
    let safe = terminal(s);
    let mut out = String::with_capacity(safe.len() + 8);
    for c in safe.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '\\' | '`' | '*' | '_' | '[' | ']' | '|' | '~' => {
                out.push('\\');
                out.push(c);
            }
            c => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One takes the singular, every other count the plural (English
    /// grammar; common practice, no published source).
    #[test]
    fn counts_take_the_right_noun() {
        assert_eq!(count(1usize, "record", "records"), "1 record");
        assert_eq!(count(0usize, "record", "records"), "0 records");
        assert_eq!(
            count(2u64, "integrity problem", "integrity problems"),
            "2 integrity problems"
        );
    }
    use proptest::prelude::*;

    #[test]
    fn a_title_sequence_and_a_screen_clear_are_shown_not_obeyed() {
        // ECMA-48: ESC ] (OSC) ... BEL sets the window title; ESC [ 2 J
        // (CSI ED 2) erases the screen.
        let s = "ana\u{1b}]0;owned\u{7}\u{1b}[2J";
        assert_eq!(terminal(s), "ana\\u{1b}]0;owned\\u{7}\\u{1b}[2J");
        assert_eq!(terminal("two\nlines\r\tx"), "two\\nlines\\r\\tx");
        assert_eq!(terminal_lines("two\nlines\r"), "two\nlines\\r");
    }

    #[test]
    fn c1_controls_and_bidi_overrides_are_escaped() {
        // U+009B is the single-character CSI of ECMA-48 (C1 set); U+202E is
        // RIGHT-TO-LEFT OVERRIDE (Unicode Standard Annex #9).
        assert_eq!(terminal("a\u{9b}2Jb"), "a\\u{9b}2Jb");
        assert_eq!(terminal("x\u{202e}gnp.exe"), "x\\u{202e}gnp.exe");
        assert_eq!(terminal("\u{2066}y\u{2069}"), "\\u{2066}y\\u{2069}");
    }

    #[test]
    fn ordinary_text_is_untouched_and_not_copied() {
        let s = "S4 fray near N3 — lot «12» Ø1 mm, 日本";
        assert!(matches!(terminal(s), Cow::Borrowed(_)));
        assert_eq!(terminal(s), s);
    }

    #[test]
    fn markdown_escapes_html_table_pipes_and_controls() {
        let md = markdown("<script>alert(1)</script> | *x* \u{1b}]0;x\u{7}");
        assert!(!md.contains('<') && !md.contains('>'));
        assert!(md.contains("&lt;script&gt;"));
        assert!(!md.contains(" | "), "{md}");
        assert!(md.contains("\\|"));
        assert!(md.contains("\\*x\\*"));
        assert!(!md.contains('\u{1b}') && !md.contains('\u{7}'));
    }

    fn clean(s: &str, allow_newline: bool) -> bool {
        s.chars()
            .all(|c| !is_unsafe(c) || (allow_newline && c == '\n'))
            && !s.contains('\u{1b}')
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(256))]
        #[test]
        fn nothing_unsafe_survives(s in "\\PC*|[\\x00-\\x1f\\x7f-\\u{9f}\\u{2028}-\\u{202e}\\u{2066}-\\u{2069}a-z;\\[\\]]{0,40}") {
            prop_assert!(clean(&terminal(&s), false));
            prop_assert!(clean(&terminal_lines(&s), true));
            let md = markdown(&s);
            prop_assert!(clean(&md, false));
            // No raw markup or cell separator survives in Markdown.
            prop_assert!(!md.contains('<') && !md.contains('>'));
            let unescaped_pipe = md.match_indices('|').any(|(i, _)| i == 0 || md.as_bytes()[i - 1] != b'\\');
            prop_assert!(!unescaped_pipe);
        }

        #[test]
        fn safe_text_passes_unchanged(s in "[a-zA-Z0-9 .,:;'\"/-]{0,40}") {
            let (a, b) = (terminal(&s).into_owned(), terminal_lines(&s).into_owned());
            prop_assert_eq!(&a, &s);
            prop_assert_eq!(&b, &s);
        }

        #[test]
        fn every_char_is_kept_or_shown(s in any::<String>()) {
            // Escaping never loses a printable character.
            let t = terminal(&s);
            for c in s.chars().filter(|c| !is_unsafe(*c)) {
                prop_assert!(t.contains(c));
            }
        }
    }
}
