//! Colours, resolved once at start-up. Meaning never rests on colour alone:
//! every state also has a word or a symbol, and bold or reverse carry it
//! where colour cannot (NO_COLOR, 16-colour terminals).

use ratatui::style::{Color, Modifier, Style};

/// When to use colour (`--color`). Defined with the screens, whose
/// colours it governs; the command line re-exports it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ColorChoice {
    /// Colour when the output is a terminal and NO_COLOR is not set.
    Auto,
    /// Colour even when NO_COLOR is set.
    Always,
    /// No colour at all.
    Never,
}

/// What the terminal can show.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColourDepth {
    /// No colour at all (NO_COLOR set).
    None,
    /// The 16 basic colours.
    Basic,
    /// 24-bit colour.
    True,
}

impl ColourDepth {
    /// Decide from the environment: NO_COLOR wins, then COLORTERM.
    pub fn detect(no_color: Option<&str>, colorterm: Option<&str>) -> ColourDepth {
        if no_color.is_some_and(|v| !v.is_empty()) {
            ColourDepth::None
        } else if colorterm.is_some_and(|v| v == "truecolor" || v == "24bit") {
            ColourDepth::True
        } else {
            ColourDepth::Basic
        }
    }

    /// Decide from the `--color` choice: `never` is no colour, `always`
    /// ignores NO_COLOR, `auto` reads the environment.
    pub fn for_choice(choice: ColorChoice) -> ColourDepth {
        match choice {
            ColorChoice::Never => ColourDepth::None,
            ColorChoice::Always => {
                ColourDepth::detect(None, std::env::var("COLORTERM").ok().as_deref())
            }
            ColorChoice::Auto => ColourDepth::from_env(),
        }
    }

    /// Decide from this process's environment.
    pub fn from_env() -> ColourDepth {
        ColourDepth::detect(
            std::env::var("NO_COLOR").ok().as_deref(),
            std::env::var("COLORTERM").ok().as_deref(),
        )
    }
}

/// The resolved styles the screens use.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Theme {
    /// Depth the theme was resolved for.
    pub depth: ColourDepth,
    /// Ordinary text.
    pub text: Style,
    /// Secondary text (labels, units).
    pub dim: Style,
    /// Titles and the selected tab.
    pub accent: Style,
    /// Good news: fresh data, on a take-off face, ok members.
    pub good: Style,
    /// Needs attention: moving, inspect, old data.
    pub warn: Style,
    /// Act now: stale, replace, infeasible.
    pub alarm: Style,
    /// String edges on the net.
    pub string_colour: Color,
    /// Rod-gap edges on the net.
    pub gap_colour: Color,
    /// The resting face's outline on the net.
    pub rest_colour: Color,
    /// The planned path on the net.
    pub path_colour: Color,
}

impl Theme {
    /// The theme for a colour depth.
    pub fn new(depth: ColourDepth) -> Theme {
        let bold = Style::default().add_modifier(Modifier::BOLD);
        match depth {
            ColourDepth::None => Theme {
                depth,
                text: Style::default(),
                dim: Style::default(),
                accent: bold,
                good: bold,
                warn: bold,
                alarm: bold.add_modifier(Modifier::REVERSED),
                string_colour: Color::Reset,
                gap_colour: Color::Reset,
                rest_colour: Color::Reset,
                path_colour: Color::Reset,
            },
            ColourDepth::Basic => Theme {
                depth,
                text: Style::default(),
                dim: Style::default().fg(Color::DarkGray),
                accent: bold.fg(Color::Cyan),
                good: bold.fg(Color::Green),
                warn: bold.fg(Color::Yellow),
                alarm: bold.fg(Color::Red).add_modifier(Modifier::REVERSED),
                string_colour: Color::Cyan,
                gap_colour: Color::DarkGray,
                rest_colour: Color::Yellow,
                path_colour: Color::Magenta,
            },
            ColourDepth::True => Theme {
                depth,
                text: Style::default(),
                dim: Style::default().fg(Color::Rgb(130, 138, 150)),
                accent: bold.fg(Color::Rgb(110, 190, 230)),
                good: bold.fg(Color::Rgb(120, 200, 120)),
                warn: bold.fg(Color::Rgb(235, 190, 80)),
                alarm: bold
                    .fg(Color::Rgb(240, 90, 80))
                    .add_modifier(Modifier::REVERSED),
                string_colour: Color::Rgb(110, 190, 230),
                gap_colour: Color::Rgb(110, 110, 120),
                rest_colour: Color::Rgb(235, 190, 80),
                path_colour: Color::Rgb(210, 120, 220),
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_color_wins_and_basic_is_the_fallback() {
        assert_eq!(
            ColourDepth::detect(Some("1"), Some("truecolor")),
            ColourDepth::None
        );
        assert_eq!(
            ColourDepth::detect(None, Some("truecolor")),
            ColourDepth::True
        );
        assert_eq!(ColourDepth::detect(None, None), ColourDepth::Basic);
        assert_eq!(ColourDepth::detect(Some(""), None), ColourDepth::Basic);
        let t = Theme::new(ColourDepth::None);
        assert!(t.alarm.add_modifier.contains(Modifier::REVERSED));
    }
}
