//! The one small trait every screen implements: its own state, its key
//! table, how it acts on a key, and how it draws. The model owns one of
//! each; `update` dispatches keys through the table and the help overlay
//! lists the same table.

use crate::tui::keys::Binding;
use crate::tui::model::Shared;
use ratatui::Frame;
use ratatui::layout::Rect;

/// A screen: state, keys, drawing.
pub trait Component {
    /// What the screen's keys do.
    type Action: Copy + 'static;

    /// The screen's keys, declared once: the dispatch and the help read them.
    fn keys(&self) -> &'static [Binding<Self::Action>];

    /// Smallest terminal (columns, rows) the screen can be drawn in whole.
    fn min_size(&self) -> (u16, u16);

    /// Carry out an action (called only from `update`); returns whether
    /// anything visible changed.
    fn act(&mut self, action: Self::Action, shared: &mut Shared) -> bool;

    /// Follow a new live picture (called only from `update`); returns
    /// whether anything visible changed.
    fn follow_live(&mut self, _shared: &mut Shared) -> bool {
        false
    }

    /// Draw the screen's body into `area`; `shared` is read-only here.
    fn draw(&self, shared: &Shared, frame: &mut Frame, area: Rect);
}
