//! Multi-page TIFF and BigTIFF files. Every page is described and checked when the file is
//! opened (dimensions, sample type, memory limit, data extents inside the file); pixels are
//! decoded one frame at a time, straight into the frame's own vector where a page holds one
//! sample per pixel, otherwise through a buffer that is reused.

use super::calibration::pixel_size_from_resolution;
use super::ome::{OmePixels, PlaneIndex};
use super::{io_reason, Calibration, CalibrationSource, Frame, OpenOptions, Pixels, SampleType, StackInfo, ZMode};
use crate::error::{Error, Result};
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};
use tiff::decoder::{Decoder, DecodingResult, Limits};
use tiff::tags::Tag;
use tiff::ColorType;

type TiffDecoder = Decoder<BufReader<File>>;

/// What one page (IFD) declares, read from its tags without decoding pixels.
#[derive(Debug, Clone, PartialEq)]
struct PageInfo {
    width: usize,
    height: usize,
    samples_per_pixel: usize,
    sample_type: std::result::Result<SampleType, String>,
    reduced_resolution: bool,
    data_end: u64,
}

/// An open TIFF or BigTIFF stack.
pub struct TiffStack {
    info: StackInfo,
    decoder: TiffDecoder,
    /// For each time point, the IFDs (one per Z plane) of the chosen channel.
    frame_ifds: Vec<Vec<usize>>,
    /// The sample of each pixel to keep when pages hold several samples.
    sample: usize,
    planar: bool,
    white_is_zero: bool,
    buffer: DecodingResult,
}

impl TiffStack {
    /// Opens and checks a TIFF or BigTIFF file.
    pub fn open(path: &Path, options: &OpenOptions) -> Result<TiffStack> {
        let file_len = std::fs::metadata(path)
            .map_err(|e| Error::input(path, io_reason(&e)))?
            .len();
        let container = sniff_container(path, file_len)?;
        let file = File::open(path).map_err(|e| Error::input(path, format!("cannot open: {}", io_reason(&e))))?;
        let mut limits = Limits::default();
        limits.decoding_buffer_size = usize::try_from(options.max_frame_bytes).unwrap_or(usize::MAX);
        limits.intermediate_buffer_size = limits.decoding_buffer_size;
        limits.ifd_value_size = 64 << 20;
        let mut decoder = Decoder::new(BufReader::new(file))
            .map_err(|e| tiff_error(path, None, e))?
            .with_limits(limits);
        let byte_order = match decoder.byte_order() {
            tiff::tags::ByteOrder::LittleEndian => "little-endian",
            tiff::tags::ByteOrder::BigEndian => "big-endian",
        };
        let description = decoder.get_tag_ascii_string(Tag::ImageDescription).ok();
        let compression = compression_name(
            decoder
                .find_tag_unsigned::<u16>(Tag::Compression)
                .ok()
                .flatten()
                .unwrap_or(1),
        );
        let layout = if decoder.find_tag(Tag::TileWidth).ok().flatten().is_some() {
            "tiles"
        } else {
            "strips"
        };
        let planar = decoder
            .find_tag_unsigned::<u16>(Tag::PlanarConfiguration)
            .ok()
            .flatten()
            == Some(2);
        let white_is_zero = decoder
            .find_tag_unsigned::<u16>(Tag::PhotometricInterpretation)
            .ok()
            .flatten()
            == Some(0);
        let pixel_size_from_tags = resolution_pixel_size(&mut decoder);
        let pages = describe_pages(path, &mut decoder)?;
        let ome = match description.as_deref().map(OmePixels::parse) {
            Some(Ok(o)) => o,
            Some(Err(problem)) => return Err(Error::input(path, problem)),
            None => None,
        };
        if let Some(problem) = ome
            .as_ref()
            .and_then(OmePixels::non_square)
            .filter(|_| options.pixel_size_um.is_none())
        {
            return Err(Error::input(path, problem));
        }
        let layout_plan = plan_frames(path, &pages, ome.as_ref(), options)?;
        check_pages(path, &pages, &layout_plan.frame_ifds, options, file_len)?;
        let first = &pages[layout_plan.frame_ifds[0][0]];
        let calibration = calibrate(ome.as_ref(), pixel_size_from_tags)
            .with_overrides(options.pixel_size_um, options.frame_interval_s);
        let info = StackInfo {
            path: path.to_path_buf(),
            container: container.to_string(),
            width: first.width,
            height: first.height,
            frames: layout_plan.frame_ifds.len(),
            sample_type: first.sample_type.clone().map_err(|p| Error::input(path, p))?,
            samples_per_pixel: first.samples_per_pixel,
            channels: layout_plan.channels,
            z_planes: layout_plan.z_planes,
            channel: layout_plan.channel,
            compression,
            layout: layout.to_string(),
            byte_order: byte_order.to_string(),
            bytes_on_disk: file_len,
            calibration,
        };
        Ok(TiffStack {
            info,
            decoder,
            frame_ifds: layout_plan.frame_ifds,
            sample: layout_plan.sample,
            planar,
            white_is_zero,
            buffer: DecodingResult::U8(Vec::new()),
        })
    }

    /// What the file holds.
    pub fn info(&self) -> &StackInfo {
        &self.info
    }

    /// Decodes time point `t`, projecting over Z when asked to.
    pub fn read_frame(&mut self, t: usize) -> Result<Frame> {
        let ifds = self.frame_ifds[t].clone();
        let mut projected: Option<Pixels> = None;
        for ifd in ifds {
            let plane = self.read_plane(t, ifd)?;
            projected = Some(match projected {
                None => plane,
                Some(acc) => max_pixels(acc, plane),
            });
        }
        Ok(Frame {
            index: t,
            width: self.info.width,
            height: self.info.height,
            pixels: projected.expect("every frame has at least one plane"),
        })
    }

    /// Whether a failed decode may be retried with the lenient LZW tile decoder.
    fn lzw_tiles_fallback(&self) -> bool {
        self.info.compression == "lzw"
            && self.info.layout == "tiles"
            && self.info.samples_per_pixel == 1
            && self.info.sample_type.is_integer()
    }

    fn read_plane(&mut self, t: usize, ifd: usize) -> Result<Pixels> {
        let path = self.info.path.clone();
        self.decoder
            .seek_to_image(ifd)
            .map_err(|e| tiff_error(&path, Some(t), e))?;
        let pick = Picker {
            pixels: self.info.width * self.info.height,
            samples: self.info.samples_per_pixel,
            sample: self.sample,
            planar: self.planar,
        };
        if pick.samples == 1 {
            match self.decode_into_place(pick.pixels) {
                Ok(Some(pixels)) => return Ok(pixels),
                Ok(None) => {}
                Err(e) => return self.after_failed_decode(t, e),
            }
        }
        if let Err(e) = self.decoder.read_image_to_buffer(&mut self.buffer) {
            return self.after_failed_decode(t, e);
        }
        let pixels = match &self.buffer {
            DecodingResult::U8(v) => Pixels::U8(pick.pick(v)),
            DecodingResult::U16(v) => Pixels::U16(pick.pick(v)),
            DecodingResult::U32(v) => Pixels::U32(pick.pick(v)),
            DecodingResult::F32(v) => Pixels::F32(pick.pick(v)),
            _ => return Err(Error::input_at(&path, t, UNREAD_SAMPLE_TYPE)),
        };
        if pixels.len() != pick.pixels {
            return Err(Error::input_at(
                &path,
                t,
                "decoded fewer samples than the page declares",
            ));
        }
        // The tiff crate (0.11) already turns WhiteIsZero samples into BlackIsZero ones as it
        // decodes; only the lenient LZW path below, which decodes on its own, inverts here.
        Ok(pixels)
    }

    /// A page of one sample per pixel decoded straight into the vector the frame keeps, for
    /// the sample types Caravan reads: the same bytes as through the decoder's own buffer
    /// (the crate fills both with `read_image_bytes`), without the copy out of it (2 MB per
    /// 1024 x 1024 16-bit frame, on the reading thread). `None` where the page's layout is
    /// not that of `pixels` samples of one of those types; the caller then decodes as before.
    fn decode_into_place(&mut self, pixels: usize) -> tiff::TiffResult<Option<Pixels>> {
        use tiff::decoder::DecodingSampleType as Type;
        fn decoded<T: bytemuck::Pod>(decoder: &mut TiffDecoder, pixels: usize) -> tiff::TiffResult<Vec<T>> {
            let mut samples = vec![T::zeroed(); pixels];
            decoder.read_image_bytes(bytemuck::cast_slice_mut(&mut samples))?;
            Ok(samples)
        }
        let layout = self.decoder.image_buffer_layout()?;
        let Some(kind) = layout.sample_type.filter(|_| layout.planes == 1) else {
            return Ok(None);
        };
        let size = match kind {
            Type::U8 => 1,
            Type::U16 => 2,
            Type::U32 | Type::F32 => 4,
            _ => return Ok(None),
        };
        if layout.len != pixels * size {
            return Ok(None);
        }
        let decoder = &mut self.decoder;
        Ok(Some(match kind {
            Type::U8 => Pixels::U8(decoded(decoder, pixels)?),
            Type::U16 => Pixels::U16(decoded(decoder, pixels)?),
            Type::U32 => Pixels::U32(decoded(decoder, pixels)?),
            _ => Pixels::F32(decoded(decoder, pixels)?),
        }))
    }

    /// What a failed decode of frame `t` becomes: LZW tiles the crate rejects are decoded
    /// again by the lenient decoder; anything else is an error naming the file and frame.
    fn after_failed_decode(&mut self, t: usize, e: tiff::TiffError) -> Result<Pixels> {
        let path = self.info.path.clone();
        if !self.lzw_tiles_fallback() {
            return Err(tiff_error(&path, Some(t), e));
        }
        let big_endian = self.info.byte_order == "big-endian";
        let bytes = self.info.sample_type.bytes() as usize;
        let pixels = super::lenient_lzw::decode_tiles(
            &path,
            t,
            &mut self.decoder,
            self.info.width,
            self.info.height,
            bytes,
            big_endian,
        )?;
        Ok(if self.white_is_zero { invert(pixels) } else { pixels })
    }
}

/// Where each frame's planes live, and which channel/sample is read.
struct FramePlan {
    frame_ifds: Vec<Vec<usize>>,
    channels: usize,
    z_planes: usize,
    channel: usize,
    sample: usize,
}

fn plan_frames(path: &Path, pages: &[PageInfo], ome: Option<&OmePixels>, options: &OpenOptions) -> Result<FramePlan> {
    let main: Vec<usize> = (0..pages.len()).filter(|&i| !pages[i].reduced_resolution).collect();
    if main.is_empty() {
        return Err(Error::input(path, "holds no full-resolution image"));
    }
    let spp = pages[main[0]].samples_per_pixel;
    let Some(ome) = ome else {
        let sample = choose_channel(path, spp, options.channel, "samples per pixel")?;
        return Ok(FramePlan {
            frame_ifds: main.iter().map(|&i| vec![i]).collect(),
            channels: spp,
            z_planes: 1,
            channel: sample,
            sample,
        });
    };
    let interleaved_channels = spp > 1 && spp == ome.size_c;
    let (channel, sample) = if interleaved_channels || spp > 1 {
        let s = choose_channel(path, spp, options.channel, "samples per pixel")?;
        (s, s)
    } else {
        (
            choose_channel(path, ome.size_c, options.channel, "channels (OME-XML SizeC)")?,
            0,
        )
    };
    if ome.size_z > 1 && options.z == ZMode::Refuse {
        return Err(Error::input(
            path,
            format!("holds {} Z planes per time point; 3D segmentation is not supported yet (use --z max for a maximum projection)", ome.size_z),
        ));
    }
    let plane_c = if interleaved_channels { 0 } else { channel };
    let mut frame_ifds = Vec::with_capacity(ome.size_t);
    for t in 0..ome.size_t {
        let mut ifds = Vec::with_capacity(ome.size_z);
        for z in 0..ome.size_z {
            let ifd = ome
                .ifd_of(PlaneIndex { z, c: plane_c, t })
                .filter(|&i| i < pages.len())
                .ok_or_else(|| {
                    Error::input(
                        path,
                        format!(
                            "OME-XML declares {} planes but the file has {} pages",
                            ome.plane_total(),
                            pages.len()
                        ),
                    )
                })?;
            ifds.push(ifd);
        }
        frame_ifds.push(ifds);
    }
    let channels = if interleaved_channels { spp } else { ome.size_c };
    Ok(FramePlan {
        frame_ifds,
        channels,
        z_planes: ome.size_z,
        channel,
        sample,
    })
}

fn choose_channel(path: &Path, available: usize, chosen: Option<usize>, what: &str) -> Result<usize> {
    match (available, chosen) {
        (1, None) | (1, Some(0)) => Ok(0),
        (_, Some(c)) if c < available => Ok(c),
        (1, Some(c)) => Err(Error::input(
            path,
            format!("--channel {c} asked for, but the recording has a single channel"),
        )),
        (n, Some(c)) => Err(Error::input(
            path,
            format!(
                "--channel {c} asked for, but the recording has {n} {what} (0..{})",
                n - 1
            ),
        )),
        (n, None) => Err(Error::input(
            path,
            format!(
                "has {n} {what}; segmentation needs one: choose it with --channel 0..{}",
                n - 1
            ),
        )),
    }
}

fn check_pages(
    path: &Path,
    pages: &[PageInfo],
    frame_ifds: &[Vec<usize>],
    options: &OpenOptions,
    file_len: u64,
) -> Result<()> {
    let first = &pages[frame_ifds[0][0]];
    for (t, ifds) in frame_ifds.iter().enumerate() {
        for &i in ifds {
            let p = &pages[i];
            let sample_type = p
                .sample_type
                .clone()
                .map_err(|problem| Error::input_at(path, t, problem))?;
            if (p.width, p.height) != (first.width, first.height) {
                return Err(Error::input_at(
                    path,
                    t,
                    format!(
                        "is {}x{} but frame 0 is {}x{}; all frames must have one size",
                        p.width, p.height, first.width, first.height
                    ),
                ));
            }
            if p.sample_type != first.sample_type || p.samples_per_pixel != first.samples_per_pixel {
                return Err(Error::input_at(path, t, "has a different sample type from frame 0"));
            }
            let bytes = (p.width as u64) * (p.height as u64) * (p.samples_per_pixel as u64) * sample_type.bytes();
            if bytes > options.max_frame_bytes {
                return Err(Error::input_at(
                    path,
                    t,
                    format!("declares {}x{}x{} samples = {} MiB per plane, above the {} MiB limit (a damaged header or a decompression bomb; raise --max-frame-mb if real)", p.width, p.height, p.samples_per_pixel, bytes >> 20, options.max_frame_bytes >> 20),
                ));
            }
            if p.data_end > file_len {
                return Err(Error::input_at(
                    path,
                    t,
                    format!(
                        "is truncated: its pixel data ends at byte {} but the file has {} bytes",
                        p.data_end, file_len
                    ),
                ));
            }
        }
    }
    Ok(())
}

fn describe_pages(path: &Path, decoder: &mut TiffDecoder) -> Result<Vec<PageInfo>> {
    let mut pages = vec![describe_page(path, decoder, 0)?];
    while decoder.more_images() {
        let index = pages.len();
        decoder.next_image().map_err(|e| tiff_error(path, Some(index), e))?;
        pages.push(describe_page(path, decoder, index)?);
    }
    Ok(pages)
}

fn describe_page(path: &Path, decoder: &mut TiffDecoder, index: usize) -> Result<PageInfo> {
    let (width, height) = decoder.dimensions().map_err(|e| tiff_error(path, Some(index), e))?;
    if width == 0 || height == 0 {
        return Err(Error::input_at(path, index, "declares an empty (0-pixel) image"));
    }
    let format = decoder
        .find_tag_unsigned::<u16>(Tag::SampleFormat)
        .ok()
        .flatten()
        .unwrap_or(1);
    let (samples_per_pixel, sample_type) = match decoder.colortype() {
        Ok(c) => sample_layout(c, format),
        Err(e) => (1, Err(format!("unsupported pixel layout: {e}"))),
    };
    let subfile = decoder
        .find_tag_unsigned::<u32>(Tag::NewSubfileType)
        .ok()
        .flatten()
        .unwrap_or(0);
    Ok(PageInfo {
        width: width as usize,
        height: height as usize,
        samples_per_pixel,
        sample_type,
        reduced_resolution: subfile & 1 == 1,
        data_end: data_end(decoder),
    })
}

/// The furthest byte any strip or tile of the current page reaches.
fn data_end(decoder: &mut TiffDecoder) -> u64 {
    let pairs = [
        (Tag::StripOffsets, Tag::StripByteCounts),
        (Tag::TileOffsets, Tag::TileByteCounts),
    ];
    let mut end = 0;
    for (offsets, counts) in pairs {
        let o = decoder
            .find_tag_unsigned_vec::<u64>(offsets)
            .ok()
            .flatten()
            .unwrap_or_default();
        let c = decoder
            .find_tag_unsigned_vec::<u64>(counts)
            .ok()
            .flatten()
            .unwrap_or_default();
        for (a, b) in o.iter().zip(&c) {
            end = end.max(a.saturating_add(*b));
        }
    }
    end
}

fn sample_layout(color: ColorType, format: u16) -> (usize, std::result::Result<SampleType, String>) {
    let (samples, bits) = match color {
        ColorType::Gray(b) => (1, b),
        ColorType::GrayA(b) => (2, b),
        ColorType::RGB(b) => (3, b),
        ColorType::RGBA(b) => (4, b),
        ColorType::Multiband { bit_depth, num_samples } => (num_samples as usize, bit_depth),
        other => {
            return (
                1,
                Err(format!(
                    "pixel layout {other:?} is not supported (needs greyscale or separate channels)"
                )),
            )
        }
    };
    let sample_type = match (bits, format) {
        (8, 1) => Ok(SampleType::U8),
        (16, 1) => Ok(SampleType::U16),
        (32, 1) => Ok(SampleType::U32),
        (32, 3) => Ok(SampleType::F32),
        (b, f) => Err(format!(
            "{b}-bit {} samples are not supported (Caravan reads 8/16/32-bit unsigned integers and 32-bit floats)",
            match f {
                2 => "signed integer",
                3 => "float",
                1 => "unsigned integer",
                _ => "untyped",
            }
        )),
    };
    (samples, sample_type)
}

fn resolution_pixel_size(decoder: &mut TiffDecoder) -> Option<f64> {
    let unit = decoder.find_tag_unsigned::<u16>(Tag::ResolutionUnit).ok().flatten()?;
    let value = match decoder.find_tag(Tag::XResolution).ok().flatten()? {
        tiff::decoder::ifd::Value::Rational(n, d) if d != 0 => n as f64 / d as f64,
        _ => return None,
    };
    pixel_size_from_tags(value, unit)
}

/// The pixel size resolution tags give, except the display and print defaults: 72, 96 and
/// 300 pixels per inch are written by programs that know nothing of the optics (common
/// practice), not a microscope calibration.
fn pixel_size_from_tags(pixels_per_unit: f64, unit: u16) -> Option<f64> {
    if unit == 2 && [72.0, 96.0, 300.0].contains(&pixels_per_unit) {
        return None;
    }
    pixel_size_from_resolution(pixels_per_unit, unit)
}

fn calibrate(ome: Option<&OmePixels>, pixel_size_from_tags: Option<f64>) -> Calibration {
    let mut c = Calibration::unknown();
    if let Some(p) = ome.and_then(|o| o.physical_size_x_um) {
        c.pixel_size_um = Some(p);
        c.pixel_size_source = CalibrationSource::OmeXml;
    } else if let Some(p) = pixel_size_from_tags {
        c.pixel_size_um = Some(p);
        c.pixel_size_source = CalibrationSource::ResolutionTags;
    }
    if let Some(t) = ome.and_then(|o| o.time_increment_s) {
        c.frame_interval_s = Some(t);
        c.frame_interval_source = CalibrationSource::OmeXml;
    } else if let Some(t) = ome.and_then(|o| o.median_delta_t_s) {
        c.frame_interval_s = Some(t);
        c.frame_interval_source = CalibrationSource::OmePlaneDeltaT;
    }
    c
}

/// Reads the first bytes and names the container, refusing anything that is not TIFF.
pub(crate) fn sniff_container(path: &Path, file_len: u64) -> Result<&'static str> {
    if file_len == 0 {
        return Err(Error::input(path, "is empty (0 bytes)"));
    }
    let mut head = [0u8; 4];
    let mut f = File::open(path).map_err(|e| Error::input(path, format!("cannot open: {}", io_reason(&e))))?;
    let n = f.read(&mut head).map_err(|e| Error::input(path, io_reason(&e)))?;
    match (&head[..n.min(4)], n) {
        (b"II*\0", 4) | (b"MM\0*", 4) => Ok("tiff"),
        (b"II+\0", 4) | (b"MM\0+", 4) => Ok("bigtiff"),
        _ => Err(Error::input(path, "is not a TIFF file (no TIFF or BigTIFF header)")),
    }
}

fn compression_name(code: u16) -> String {
    match code {
        1 => "none".into(),
        5 => "lzw".into(),
        8 | 32946 => "deflate".into(),
        32773 => "packbits".into(),
        7 => "jpeg".into(),
        50000 => "zstd".into(),
        other => format!("code {other}"),
    }
}

fn tiff_error(path: &Path, frame: Option<usize>, e: tiff::TiffError) -> Error {
    use tiff::TiffError as E;
    let problem = match e {
        E::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "is truncated: the file ends inside a directory or pixel data".to_string()
        }
        E::IoError(io) => format!("read failed: {}", io_reason(&io)),
        E::LimitsExceeded => {
            "declares data larger than the memory limit (a damaged header or a decompression bomb)".to_string()
        }
        E::UnsupportedError(u) => format!("uses a TIFF feature Caravan cannot decode: {u}"),
        E::FormatError(f) => format!("is not a valid TIFF: {f}"),
        other => format!("cannot be decoded: {other}"),
    };
    Error::Input {
        path: PathBuf::from(path),
        frame,
        problem,
    }
}

/// The error for a page that decodes to a sample type outside those of [`Pixels`].
const UNREAD_SAMPLE_TYPE: &str = "decoded to a sample type Caravan does not read";

/// Selects one sample of every pixel from an interleaved or planar buffer.
struct Picker {
    pixels: usize,
    samples: usize,
    sample: usize,
    planar: bool,
}

impl Picker {
    fn pick<T: Copy>(&self, buffer: &[T]) -> Vec<T> {
        if self.samples == 1 {
            return buffer[..self.pixels.min(buffer.len())].to_vec();
        }
        if self.planar {
            let start = (self.sample * self.pixels).min(buffer.len());
            let end = (start + self.pixels).min(buffer.len());
            return buffer[start..end].to_vec();
        }
        buffer
            .iter()
            .skip(self.sample)
            .step_by(self.samples)
            .take(self.pixels)
            .copied()
            .collect()
    }
}

fn max_pixels(a: Pixels, b: Pixels) -> Pixels {
    fn zip<T: Copy>(mut a: Vec<T>, b: &[T], max: fn(T, T) -> T) -> Vec<T> {
        a.iter_mut().zip(b).for_each(|(x, &y)| *x = max(*x, y));
        a
    }
    match (a, b) {
        (Pixels::U8(a), Pixels::U8(b)) => Pixels::U8(zip(a, &b, Ord::max)),
        (Pixels::U16(a), Pixels::U16(b)) => Pixels::U16(zip(a, &b, Ord::max)),
        (Pixels::U32(a), Pixels::U32(b)) => Pixels::U32(zip(a, &b, Ord::max)),
        (Pixels::F32(a), Pixels::F32(b)) => Pixels::F32(zip(a, &b, f32::max)),
        (a, _) => a,
    }
}

/// Photometric WhiteIsZero (TIFF 6.0 tag 262 = 0): stored 0 is white, so flip to BlackIsZero
/// (for the lenient LZW decoder; the tiff crate does it itself).
fn invert(p: Pixels) -> Pixels {
    match p {
        Pixels::U8(v) => Pixels::U8(v.into_iter().map(|x| u8::MAX - x).collect()),
        Pixels::U16(v) => Pixels::U16(v.into_iter().map(|x| u16::MAX - x).collect()),
        Pixels::U32(v) => Pixels::U32(v.into_iter().map(|x| u32::MAX - x).collect()),
        Pixels::F32(v) => Pixels::F32(v.into_iter().map(|x| -x).collect()),
    }
}

#[cfg(test)]
mod calibration_tests {
    use super::*;

    fn ome(pixel_um: Option<f64>, interval_s: Option<f64>) -> OmePixels {
        let size = pixel_um.map_or(String::new(), |p| {
            format!(" PhysicalSizeX=\"{p}\" PhysicalSizeY=\"{p}\"")
        });
        let time = interval_s.map_or(String::new(), |t| format!(" TimeIncrement=\"{t}\""));
        let xml = format!(
            "<?xml version=\"1.0\"?><OME xmlns=\"http://www.openmicroscopy.org/Schemas/OME/2016-06\"><Image ID=\"Image:0\"><Pixels ID=\"Pixels:0\" DimensionOrder=\"XYCZT\" Type=\"uint16\" SizeX=\"8\" SizeY=\"8\" SizeZ=\"1\" SizeC=\"1\" SizeT=\"2\"{size}{time}><Channel ID=\"Channel:0:0\" SamplesPerPixel=\"1\"/></Pixels></Image></OME>"
        );
        OmePixels::parse(&xml).unwrap().unwrap()
    }

    #[test]
    fn ome_xml_wins_over_resolution_tags_and_screen_defaults_are_no_calibration() {
        // Source: the OME data model (PhysicalSizeX in µm is the calibration of record) over
        // TIFF 6.0 resolution tags; 72/96/300 per inch are display defaults (common practice).
        let c = calibrate(Some(&ome(Some(0.65), Some(300.0))), Some(2.0));
        assert_eq!(
            (c.pixel_size_um, c.pixel_size_source),
            (Some(0.65), CalibrationSource::OmeXml)
        );
        assert_eq!(c.frame_interval_s, Some(300.0));
        let c = calibrate(Some(&ome(None, None)), Some(2.0));
        assert_eq!(
            (c.pixel_size_um, c.pixel_size_source),
            (Some(2.0), CalibrationSource::ResolutionTags)
        );
        assert_eq!(c.frame_interval_s, None);
        let c = calibrate(None, None);
        assert_eq!(c.pixel_size_um, None);
        for dpi in [72.0, 96.0, 300.0] {
            assert_eq!(pixel_size_from_tags(dpi, 2), None, "{dpi} per inch");
        }
        // 25 400 per inch is 1 µm (definition of the inch); 300 per centimetre is not a default.
        assert_eq!(pixel_size_from_tags(25_400.0, 2), Some(1.0));
        assert!((pixel_size_from_tags(300.0, 3).unwrap() - 10_000.0 / 300.0).abs() < 1e-12);
    }
}
