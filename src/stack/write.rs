//! Writing multi-page greyscale TIFF stacks (synthetic recordings, label stacks), streamed one
//! frame at a time and committed atomically.

use crate::error::{Error, Result};
use crate::output::AtomicFile;
use std::path::Path;
use tiff::encoder::{colortype, Compression, DeflateLevel, TiffEncoder};
use tiff::tags::Tag;

/// Compression for written stacks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum TiffCompression {
    /// Uncompressed strips.
    None,
    /// LZW.
    Lzw,
    /// Deflate (zlib), fast level.
    Deflate,
    /// PackBits run-length coding.
    Packbits,
}

impl std::str::FromStr for TiffCompression {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "none" => Ok(TiffCompression::None),
            "lzw" => Ok(TiffCompression::Lzw),
            "deflate" => Ok(TiffCompression::Deflate),
            "packbits" => Ok(TiffCompression::Packbits),
            _ => Err(format!("{s:?}: expected none, lzw, deflate or packbits")),
        }
    }
}

impl TiffCompression {
    fn encoder_setting(self) -> Compression {
        match self {
            TiffCompression::None => Compression::Uncompressed,
            TiffCompression::Lzw => Compression::Lzw,
            TiffCompression::Deflate => Compression::Deflate(DeflateLevel::Fast),
            TiffCompression::Packbits => Compression::Packbits,
        }
    }
}

/// Pixel types a stack can be written in.
pub trait StackSample: Copy {
    /// The `tiff` colour type for one greyscale sample of this type.
    type Color: colortype::ColorType<Inner = Self>;
}
impl StackSample for u16 {
    type Color = colortype::Gray16;
}
impl StackSample for u32 {
    type Color = colortype::Gray32;
}

/// Writes `frames` pages of `width` x `height` greyscale samples, asking `frame(t)` for each in
/// turn; `description` (e.g. OME-XML) goes into the first page's ImageDescription.
///
/// # Errors
/// [`Error::Output`] when the file cannot be written; errors from `frame` are passed on. The
/// final file appears only when every page is written.
pub fn write_stack<T, F>(
    path: &Path,
    width: usize,
    height: usize,
    frames: usize,
    compression: TiffCompression,
    description: Option<&str>,
    mut frame: F,
) -> Result<()>
where
    T: StackSample,
    [T]: tiff::encoder::TiffValue,
    F: FnMut(usize) -> Result<Vec<T>>,
{
    let mut file = AtomicFile::create(path)?;
    let fail = |e: tiff::TiffError| Error::output(path, std::io::Error::other(e.to_string()));
    {
        let mut encoder = TiffEncoder::new(&mut file)
            .map_err(fail)?
            .with_compression(compression.encoder_setting());
        for t in 0..frames {
            let data = frame(t)?;
            let mut image = encoder
                .new_image::<T::Color>(width as u32, height as u32)
                .map_err(fail)?;
            if t == 0 {
                if let Some(d) = description {
                    image.encoder().write_tag(Tag::ImageDescription, d).map_err(fail)?;
                }
            }
            image.write_data(&data).map_err(fail)?;
        }
    }
    file.commit()
}
