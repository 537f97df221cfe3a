//! Drawing for people: the preview PNG of one frame with its segmentation outlines, the QC
//! movie with its contact sheet, the review page and the analysis report. Analysis is never
//! done here.

mod font;
pub mod jpeg;
pub mod lookalike;
pub mod lzw;
pub mod movie;
pub mod plots;
mod preview;
pub mod report;
pub mod review;

pub use crate::image2d::box_average;
pub use preview::{caption, is_edge, outline_preview, stretch_to_u8, DisplayRange, PALETTE};
