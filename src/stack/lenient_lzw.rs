//! A lenient decoder for LZW-compressed tiles whose streams end before the tile is full, often
//! without the end-of-information code: some writers store only the rows of an edge tile that
//! lie inside the image and leave the end code out (TIFF 6.0 §13 and §15 ask for both). The
//! `tiff` crate (0.11) then stops with "no lzw end code found", while tolerant readers decode
//! what is there; a missing end code alone, on a full tile, the `tiff` crate reads itself.
//! Only single-sample integer pages are handled here, which is where we have met such files
//! (`tests/reading.rs` builds one by hand).

use super::Pixels;
use crate::error::{Error, Result};
use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::path::Path;
use tiff::decoder::Decoder;
use tiff::tags::Tag;

/// Decodes the current page of `decoder` tile by tile.
///
/// # Method
/// LZW as specified for TIFF: T. A. Welch (1984), "A Technique for High-Performance Data
/// Compression", IEEE Computer 17(6):8–19, doi:10.1109/MC.1984.1659158, with TIFF 6.0's
/// MSB-first codes and early change (via the `weezl` crate, without requiring the end code);
/// horizontal differencing (Predictor 2) undone per row of each tile.
pub fn decode_tiles<R: Read + Seek>(
    path: &Path,
    frame: usize,
    decoder: &mut Decoder<R>,
    width: usize,
    height: usize,
    bytes_per_sample: usize,
    big_endian: bool,
) -> Result<Pixels> {
    let tag = |d: &mut Decoder<R>, t: Tag| d.find_tag_unsigned_vec::<u64>(t).ok().flatten().unwrap_or_default();
    let offsets = tag(decoder, Tag::TileOffsets);
    let counts = tag(decoder, Tag::TileByteCounts);
    let tw = decoder
        .find_tag_unsigned::<u64>(Tag::TileWidth)
        .ok()
        .flatten()
        .unwrap_or(0) as usize;
    let th = decoder
        .find_tag_unsigned::<u64>(Tag::TileLength)
        .ok()
        .flatten()
        .unwrap_or(0) as usize;
    let predictor = decoder
        .find_tag_unsigned::<u16>(Tag::Predictor)
        .ok()
        .flatten()
        .unwrap_or(1);
    let bad = |p: &str| Error::input_at(path, frame, p.to_string());
    if tw == 0 || th == 0 || offsets.len() != counts.len() || predictor > 2 {
        return Err(bad(
            "LZW tiles cannot be decoded (unsupported tile layout or predictor)",
        ));
    }
    let across = width.div_ceil(tw);
    if offsets.len() < across * height.div_ceil(th) {
        return Err(bad("declares fewer tiles than the image needs"));
    }
    let mut file = File::open(path).map_err(|e| bad(&e.to_string()))?;
    let mut samples = vec![0u32; width * height];
    let tile_bytes = tw * th * bytes_per_sample;
    for (i, (&offset, &count)) in offsets
        .iter()
        .zip(&counts)
        .enumerate()
        .take(across * height.div_ceil(th))
    {
        let mut compressed = vec![
            0u8;
            usize::try_from(count)
                .map_err(|_| bad("absurd tile size"))?
                .min(16 * tile_bytes + 1024)
        ];
        file.seek(SeekFrom::Start(offset))
            .and_then(|_| file.read_exact(&mut compressed))
            .map_err(|_| bad("is truncated inside an LZW tile"))?;
        let mut raw = Vec::with_capacity(tile_bytes);
        let _ = weezl::decode::Decoder::with_tiff_size_switch(weezl::BitOrder::Msb, 8)
            .into_vec(&mut raw)
            .decode(&compressed);
        raw.resize(tile_bytes, 0);
        let tile: Vec<u32> = raw
            .chunks_exact(bytes_per_sample)
            .map(|c| sample_value(c, big_endian))
            .collect();
        let (x0, y0) = ((i % across) * tw, (i / across) * th);
        for ty in 0..th.min(height - y0) {
            let mut previous = 0u32;
            for tx in 0..tw {
                let mut v = tile[ty * tw + tx];
                if predictor == 2 {
                    v = v.wrapping_add(previous) & mask(bytes_per_sample);
                    previous = v;
                }
                if x0 + tx < width {
                    samples[(y0 + ty) * width + x0 + tx] = v;
                }
            }
        }
    }
    Ok(match bytes_per_sample {
        1 => Pixels::U8(samples.into_iter().map(|v| v as u8).collect()),
        2 => Pixels::U16(samples.into_iter().map(|v| v as u16).collect()),
        _ => Pixels::U32(samples),
    })
}

fn sample_value(c: &[u8], big_endian: bool) -> u32 {
    let mut v = 0u32;
    for k in 0..c.len() {
        let byte = if big_endian { c[k] } else { c[c.len() - 1 - k] };
        v = (v << 8) | byte as u32;
    }
    v
}

fn mask(bytes: usize) -> u32 {
    if bytes >= 4 {
        u32::MAX
    } else {
        (1u32 << (8 * bytes)) - 1
    }
}
