//! The single-channel float image used by every per-pixel stage: an `ndarray` of shape
//! `(rows, columns)` = `(y, x)`.

/// A single-channel image of `f32`, indexed `[[row, column]]`.
pub type Image = ndarray::Array2<f32>;

/// Builds an [`Image`] from a row-major buffer.
///
/// # Panics
/// If `data.len() != width * height` (a caller bug).
pub fn from_vec(width: usize, height: usize, data: Vec<f32>) -> Image {
    ndarray::Array2::from_shape_vec((height, width), data).expect("buffer matches shape")
}
