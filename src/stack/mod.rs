//! Reading recordings: multi-page TIFF and BigTIFF files, or folders of single-frame TIFFs,
//! streamed one frame at a time so that memory never grows with the frame count.
//!
//! This module owns decoding (through the `tiff` crate: strips, tiles, LZW, Deflate, PackBits,
//! predictors, both byte orders), the mapping of OME-XML planes to TIFF pages, calibration, and
//! the size limits that refuse decompression bombs and truncated files before any large
//! allocation. It never segments.

mod calibration;
mod folder;
mod lenient_lzw;
mod ome;
mod tiff_file;
pub mod write;

pub use calibration::{Calibration, CalibrationSource};
pub use ome::{OmePixels, PlaneIndex};

use crate::error::{Error, Result};
use crate::image2d::{self, Image};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// The sample types Caravan reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SampleType {
    /// 8-bit unsigned integer.
    U8,
    /// 16-bit unsigned integer.
    U16,
    /// 32-bit unsigned integer.
    U32,
    /// 32-bit IEEE float.
    F32,
}

impl SampleType {
    /// Bytes per sample.
    pub fn bytes(self) -> u64 {
        match self {
            SampleType::U8 => 1,
            SampleType::U16 => 2,
            SampleType::U32 | SampleType::F32 => 4,
        }
    }

    /// Whether samples are integers (thresholds then bin one level per integer).
    pub fn is_integer(self) -> bool {
        !matches!(self, SampleType::F32)
    }
}

/// Pixel data of one frame, in its stored type.
#[derive(Debug, Clone, PartialEq)]
pub enum Pixels {
    /// 8-bit unsigned.
    U8(Vec<u8>),
    /// 16-bit unsigned.
    U16(Vec<u16>),
    /// 32-bit unsigned.
    U32(Vec<u32>),
    /// 32-bit float.
    F32(Vec<f32>),
}

impl Pixels {
    /// Whether the samples are whole numbers (no NaN or infinity can be among them).
    pub fn are_whole_numbers(&self) -> bool {
        !matches!(self, Pixels::F32(_))
    }

    /// Number of samples held.
    pub fn len(&self) -> usize {
        match self {
            Pixels::U8(v) => v.len(),
            Pixels::U16(v) => v.len(),
            Pixels::U32(v) => v.len(),
            Pixels::F32(v) => v.len(),
        }
    }

    /// True when no samples are held.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Every sample as `f32` (exact up to 2^24 for integers).
    pub fn to_f32(&self) -> Vec<f32> {
        match self {
            Pixels::U8(v) => v.iter().map(|&p| p as f32).collect(),
            Pixels::U16(v) => v.iter().map(|&p| p as f32).collect(),
            Pixels::U32(v) => v.iter().map(|&p| p as f32).collect(),
            Pixels::F32(v) => v.clone(),
        }
    }
}

/// One decoded frame.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// Frame number, from 0.
    pub index: usize,
    /// Columns.
    pub width: usize,
    /// Rows.
    pub height: usize,
    /// Row-major samples.
    pub pixels: Pixels,
}

impl Frame {
    /// CRC-32 (as `zlib.crc32`) of the frame's decoded samples, little-endian, row-major: what
    /// identifies a frame's content whatever the file's compression or layout. Checkpoints and
    /// shards log it to refuse mixing two recordings.
    pub fn content_crc32(&self) -> u32 {
        self.hash_content(|_| {})
    }

    /// [`Frame::to_image`] and [`Frame::content_crc32`] in one pass over the samples: each
    /// block is converted while the checksum's read of it is still in the first-level cache,
    /// instead of the frame being read twice from further away. The same image and checksum.
    pub fn image_and_content_crc32(&self) -> (Image, u32) {
        let mut values = Vec::with_capacity(self.pixels.len());
        let crc = self.hash_content(|block| match block {
            Samples::U8(b) => values.extend(b.iter().map(|&p| p as f32)),
            Samples::U16(b) => values.extend(b.iter().map(|&p| p as f32)),
            Samples::U32(b) => values.extend(b.iter().map(|&p| p as f32)),
            Samples::F32(b) => values.extend_from_slice(b),
        });
        (image2d::from_vec(self.width, self.height, values), crc)
    }

    /// The content checksum, handing each block of samples to `also` after it is hashed.
    fn hash_content(&self, mut also: impl FnMut(Samples)) -> u32 {
        let mut hasher = crc32fast::Hasher::new();
        match &self.pixels {
            Pixels::U8(v) => v.chunks(HASH_BLOCK).for_each(|block| {
                hasher.update(block);
                also(Samples::U8(block));
            }),
            Pixels::U16(v) => update_little_endian(&mut hasher, v, |p| p.to_le_bytes(), |b| also(Samples::U16(b))),
            Pixels::U32(v) => update_little_endian(&mut hasher, v, |p| p.to_le_bytes(), |b| also(Samples::U32(b))),
            Pixels::F32(v) => update_little_endian(&mut hasher, v, |p| p.to_le_bytes(), |b| also(Samples::F32(b))),
        }
        hasher.finalize()
    }

    /// The frame as a float image for the per-pixel stages.
    pub fn to_image(&self) -> Image {
        image2d::from_vec(self.width, self.height, self.pixels.to_f32())
    }

    /// The `rows` x `columns` window from row `y0` and column `x0` as an image (what cutting
    /// it from [`Frame::to_image`] gives), converting only its samples: the diameter estimate
    /// keeps a quarter of a large frame.
    ///
    /// # Panics
    /// If the window reaches past the frame (a caller's mistake).
    pub fn window_image(&self, (y0, x0): (usize, usize), (rows, columns): (usize, usize)) -> Image {
        assert!(
            y0 + rows <= self.height && x0 + columns <= self.width,
            "window inside the frame"
        );
        let lines = (y0..y0 + rows).map(|y| y * self.width + x0..y * self.width + x0 + columns);
        let values: Vec<f32> = match &self.pixels {
            Pixels::U8(v) => lines.flat_map(|r| v[r].iter().map(|&p| p as f32)).collect(),
            Pixels::U16(v) => lines.flat_map(|r| v[r].iter().map(|&p| p as f32)).collect(),
            Pixels::U32(v) => lines.flat_map(|r| v[r].iter().map(|&p| p as f32)).collect(),
            Pixels::F32(v) => lines.flat_map(|r| v[r].iter().copied()).collect(),
        };
        image2d::from_vec(columns, rows, values)
    }
}

/// How a Z dimension is handled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum ZMode {
    /// Refuse recordings with more than one Z plane (3D is not supported yet).
    #[default]
    Refuse,
    /// Maximum-intensity projection over Z.
    Max,
}

/// Options for opening a recording.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct OpenOptions {
    /// Channel (0-based) when pages hold several samples or OME-XML declares several channels.
    pub channel: Option<usize>,
    /// Z handling.
    pub z: ZMode,
    /// Refuse frames whose decoded size exceeds this many bytes (decompression bombs).
    pub max_frame_bytes: u64,
    /// Pixel size given on the command line; wins over metadata.
    pub pixel_size_um: Option<f64>,
    /// Frame interval given on the command line; wins over metadata.
    pub frame_interval_s: Option<f64>,
}

impl Default for OpenOptions {
    fn default() -> Self {
        OpenOptions {
            channel: None,
            z: ZMode::Refuse,
            max_frame_bytes: 2 << 30,
            pixel_size_um: None,
            frame_interval_s: None,
        }
    }
}

/// What a recording holds, known after opening and before decoding any pixels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StackInfo {
    /// The file or folder opened.
    pub path: PathBuf,
    /// `tiff`, `bigtiff` or `folder`.
    pub container: String,
    /// Columns.
    pub width: usize,
    /// Rows.
    pub height: usize,
    /// Time points.
    pub frames: usize,
    /// Stored sample type.
    pub sample_type: SampleType,
    /// Samples per pixel in each page.
    pub samples_per_pixel: usize,
    /// Channels declared by OME-XML (1 without it).
    pub channels: usize,
    /// Z planes declared by OME-XML (1 without it).
    pub z_planes: usize,
    /// Channel read.
    pub channel: usize,
    /// Compression of the first page, by name.
    pub compression: String,
    /// `strips` or `tiles`.
    pub layout: String,
    /// `little-endian` or `big-endian`.
    pub byte_order: String,
    /// Total bytes on disk.
    pub bytes_on_disk: u64,
    /// Pixel size and frame interval, with where each came from.
    pub calibration: Calibration,
}

/// An open recording, read frame by frame.
pub struct Stack {
    info: StackInfo,
    source: Source,
}

enum Source {
    File(Box<tiff_file::TiffStack>),
    Folder(Box<folder::FolderStack>),
}

impl Stack {
    /// Opens a TIFF/BigTIFF file or a folder of single-frame TIFFs and checks every page's
    /// declared size against the file and the memory limit, before any pixel is decoded.
    ///
    /// # Errors
    /// [`Error::Input`] naming the path (and frame) for anything unreadable or refused.
    pub fn open(path: &Path, options: &OpenOptions) -> Result<Stack> {
        let meta =
            std::fs::metadata(path).map_err(|e| Error::input(path, format!("cannot open: {}", io_reason(&e))))?;
        let (info, source) = if meta.is_dir() {
            let s = folder::FolderStack::open(path, options)?;
            (s.info().clone(), Source::Folder(Box::new(s)))
        } else {
            let s = tiff_file::TiffStack::open(path, options)?;
            (s.info().clone(), Source::File(Box::new(s)))
        };
        Ok(Stack { info, source })
    }

    /// What the recording holds.
    pub fn info(&self) -> &StackInfo {
        &self.info
    }

    /// Decodes frame `t` (0-based).
    ///
    /// # Errors
    /// [`Error::Input`] naming the path and frame when the data cannot be decoded.
    pub fn read_frame(&mut self, t: usize) -> Result<Frame> {
        if t >= self.info.frames {
            return Err(Error::input(
                &self.info.path,
                format!("frame {t} requested but the recording has {} frames", self.info.frames),
            ));
        }
        match &mut self.source {
            Source::File(s) => s.read_frame(t),
            Source::Folder(s) => s.read_frame(t),
        }
    }
}

/// A short reason for an I/O error, without the OS error number noise.
pub(crate) fn io_reason(e: &std::io::Error) -> String {
    match e.kind() {
        std::io::ErrorKind::NotFound => "no such file or folder".into(),
        std::io::ErrorKind::PermissionDenied => "permission denied".into(),
        _ => e.to_string(),
    }
}

/// Feeds `values` to `hasher` as their little-endian bytes, a block of pixels at a time (the
/// bytes of a block written in one vectorised pass, then hashed in one call), handing each
/// block to `also` once hashed.
fn update_little_endian<T: Copy, const N: usize>(
    hasher: &mut crc32fast::Hasher,
    values: &[T],
    bytes_of: impl Fn(T) -> [u8; N],
    mut also: impl FnMut(&[T]),
) {
    let mut buffer = vec![0u8; HASH_BLOCK * N];
    for block in values.chunks(HASH_BLOCK) {
        let bytes = &mut buffer[..block.len() * N];
        for (out, &v) in bytes.chunks_exact_mut(N).zip(block) {
            out.copy_from_slice(&bytes_of(v));
        }
        hasher.update(bytes);
        also(block);
    }
}

/// Samples hashed at a time by [`Frame::content_crc32`]: a block and its bytes stay in the
/// first-level cache.
const HASH_BLOCK: usize = 8192;

/// A block of a frame's samples, of its type.
enum Samples<'a> {
    U8(&'a [u8]),
    U16(&'a [u16]),
    U32(&'a [u32]),
    F32(&'a [f32]),
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_window_is_the_same_pixels_as_cut_from_the_whole_frame() {
        // Source: ndarray's slicing of the whole frame's image (Frame::to_image), for every
        // sample type, windows at the corners, in the middle and the whole frame.
        let (w, h) = (7usize, 5usize);
        let n = w * h;
        for pixels in [
            Pixels::U8((0..n).map(|i| (i * 7 % 256) as u8).collect()),
            Pixels::U16((0..n).map(|i| (i * 977 % 65_536) as u16).collect()),
            Pixels::U32((0..n).map(|i| (i * 1_000_003) as u32).collect()),
            Pixels::F32((0..n).map(|i| i as f32 * -0.37).collect()),
        ] {
            let frame = Frame {
                index: 0,
                width: w,
                height: h,
                pixels,
            };
            let whole = frame.to_image();
            for (y0, x0, rows, columns) in [(0, 0, 2, 3), (3, 4, 2, 3), (1, 2, 3, 1), (0, 0, h, w), (2, 0, 0, 4)] {
                let want = whole.slice(ndarray::s![y0..y0 + rows, x0..x0 + columns]).to_owned();
                assert_eq!(
                    frame.window_image((y0, x0), (rows, columns)),
                    want,
                    "{y0},{x0} {rows}x{columns}"
                );
            }
        }
    }

    #[test]
    fn a_frame_hashes_as_zlib_hashes_its_little_endian_samples() {
        // Source: Python's zlib.crc32 of struct.pack('<20001H', *[(i * 7919) % 65536 ...]), of
        // struct.pack('<9000f', *[i * 0.5 - 3.25 ...]), of bytes((i * 31) % 256 for i in
        // range(20001)) and of struct.pack('<9000I', *[(i * 2654435761) % 2**32 ...]) (more
        // samples than one hashed block, so the blocks' seams are covered).
        // The checksum made with the image (`image_and_content_crc32`) is the same, and the
        // image holds each sample as f32 (exact for these: definition).
        let frame = |pixels: Pixels| Frame {
            index: 0,
            width: pixels.len(),
            height: 1,
            pixels,
        };
        let u16s: Vec<u16> = (0..20001u32).map(|i| ((i * 7919) % 65536) as u16).collect();
        let f32s: Vec<f32> = (0..9000).map(|i| i as f32 * 0.5 - 3.25).collect();
        let u8s: Vec<u8> = (0..20001u32).map(|i| ((i * 31) % 256) as u8).collect();
        let u32s: Vec<u32> = (0..9000u64).map(|i| ((i * 2_654_435_761) % (1 << 32)) as u32).collect();
        let as_f32 = |v: &[u16]| v.iter().map(|&v| f32::from(v)).collect::<Vec<f32>>();
        let (u8_values, u32_values) = (
            u8s.iter().map(|&v| f32::from(v)).collect(),
            u32s.iter().map(|&v| v as f32).collect(),
        );
        for (frame, crc, values) in [
            (frame(Pixels::U16(u16s.clone())), "56bd2204", as_f32(&u16s)),
            (frame(Pixels::F32(f32s.clone())), "42ed730f", f32s),
            (frame(Pixels::U8(u8s)), "b577241e", u8_values),
            (frame(Pixels::U32(u32s)), "bfa0fabe", u32_values),
        ] {
            assert_eq!(format!("{:08x}", frame.content_crc32()), crc);
            let (image, with_image) = frame.image_and_content_crc32();
            assert_eq!(format!("{with_image:08x}"), crc);
            assert_eq!(image.dim(), (1, values.len()));
            assert_eq!(image.as_slice().unwrap(), &values[..]);
        }
    }
}
