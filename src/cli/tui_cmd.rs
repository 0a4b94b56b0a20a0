//! Opening the screens: build the model, start the feeds, hand over to the
//! terminal loop.

use super::Loaded;
use crate::tui::model::{Model, Msg};
use crate::tui::theme::{ColourDepth, Theme};
use std::process::ExitCode;
use std::sync::mpsc;

/// Open the screens on a loaded profile, fed from `source`.
pub fn run(loaded: Loaded, source: &str) -> anyhow::Result<ExitCode> {
    let theme = Theme::new(ColourDepth::from_env());
    let model = Model::new(loaded.profile, loaded.cage, source, theme);
    let (tx, rx) = mpsc::channel::<Msg>();
    crate::tui::run(model, tx, rx)?;
    Ok(ExitCode::SUCCESS)
}
