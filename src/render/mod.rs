//! Drawing for people: the preview PNG of one frame with its segmentation outlines. Analysis
//! is never done here.

mod font;
mod preview;

pub use preview::{outline_preview, stretch_to_u8, PALETTE};
