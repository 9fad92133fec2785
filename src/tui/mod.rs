//! The terminal UI, in the Elm shape: one [`State`], one [`Msg`],
//! [`update`] that changes the state and asks for [`Effect`]s, and a pure
//! [`draw`]. No science in here: every number shown is computed by the library
//! (through [`effects`]) and cached in the state. The terminal itself is driven
//! by the binary (`src/cli/tui.rs`); this module only writes into buffers.

pub mod ask;
pub mod effects;
pub mod form;
pub mod jobs;
pub mod keymap;
pub mod msg;
pub mod state;
pub mod theme;
pub mod update;
pub mod views;

pub use keymap::Action;
pub use msg::{Effect, Msg};
pub use state::State;
pub use update::{Setup, init, update};

use ratatui::Frame;

/// Draw the state into a frame. Reads the state only.
pub fn draw(s: &State, f: &mut Frame) {
    let area = f.area();
    views::render_all(s, area, f.buffer_mut());
}
