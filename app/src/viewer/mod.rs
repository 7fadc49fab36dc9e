//! The desktop viewer: a pure [`state::ViewState`] changed only by [`state::Action`]s, drawn by
//! a pure function of the state through the figure scene ([`draw`]); the window glue
//! ([`window`]) only turns OS events into actions and shows the pixels.

pub mod data;
pub mod draw;
pub mod export;
pub mod heat;
pub mod interim;
pub mod keys;
pub mod layers;
pub mod lod;
pub mod project;
pub mod state;
pub mod window;

#[cfg(test)]
mod tests;
