//! Reading stacks written by a general-purpose reference writer (tifffile, see
//! fixtures/make_fixtures.py for the version and the pixel formulas), back pixel-exact.

use caravan::stack::{CalibrationSource, OpenOptions, Pixels, Stack, ZMode};
use std::path::{Path, PathBuf};

const T: usize = 3;
const H: usize = 29;
const W: usize = 37;

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/tiff").join(name)
}

/// The formulas of fixtures/make_fixtures.py `values()`, recomputed here.
fn expected(dtype: &str, t: usize) -> Pixels {
    let idx = (0..H).flat_map(|y| (0..W).map(move |x| (x as u64, y as u64)));
    let t = t as u64;
    match dtype {
        "u8" => Pixels::U8(idx.map(|(x, y)| ((x * 37 + y * 101 + t * 1009) % 256) as u8).collect()),
        "u16" => Pixels::U16(
            idx.map(|(x, y)| ((x * 2741 + y * 977 + t * 30011) % 65536) as u16)
                .collect(),
        ),
        "u32" => Pixels::U32(
            idx.map(|(x, y)| (((x * 2741 + y * 977 + t * 30011) * 65537) % (1 << 32)) as u32)
                .collect(),
        ),
        _ => Pixels::F32(
            idx.map(|(x, y)| (((x * 37 + y * 101 + t * 1009) % 4099) as f64 / 7.0 - 50.0) as f32)
                .collect(),
        ),
    }
}

fn open(name: &str, options: &OpenOptions) -> caravan::Result<Stack> {
    Stack::open(&fixture(name), options)
}

#[test]
fn every_variant_reads_back_pixel_exact() {
    let mut checked = 0;
    for dtype in ["u8", "u16", "u32", "f32"] {
        for comp in ["none", "lzw", "deflate", "packbits"] {
            for layout in ["strips", "tiles"] {
                for order in ["le", "be"] {
                    for kind in ["classic", "bigtiff"] {
                        let name = format!("{dtype}_{comp}_{layout}_{order}_{kind}.tif");
                        let mut s = open(&name, &OpenOptions::default()).unwrap_or_else(|e| panic!("{name}: {e}"));
                        let info = s.info().clone();
                        assert_eq!((info.width, info.height, info.frames), (W, H, T), "{name}");
                        assert_eq!(info.layout, layout, "{name}");
                        assert_eq!(
                            info.container,
                            if kind == "bigtiff" { "bigtiff" } else { "tiff" },
                            "{name}"
                        );
                        assert_eq!(
                            info.byte_order,
                            if order == "le" { "little-endian" } else { "big-endian" },
                            "{name}"
                        );
                        assert_eq!(info.compression, comp, "{name}");
                        for t in 0..T {
                            assert_eq!(s.read_frame(t).unwrap().pixels, expected(dtype, t), "{name} frame {t}");
                        }
                        checked += 1;
                    }
                }
            }
        }
    }
    assert_eq!(checked, 128);
}

#[test]
fn predictors_are_undone() {
    for (name, dtype) in [
        ("u16_deflate_predictor2.tif", "u16"),
        ("f32_deflate_predictor3.tif", "f32"),
    ] {
        let mut s = open(name, &OpenOptions::default()).unwrap();
        for t in 0..T {
            assert_eq!(s.read_frame(t).unwrap().pixels, expected(dtype, t), "{name}");
        }
    }
}

#[test]
fn ome_xml_channels_z_and_calibration() {
    // Fixture: TZCYX, 4 x 3 x 2, value = t*1000 + z*100 + c*10 + (x+y)%7; 0.5 µm, 2 min.
    let e = open("ome_tzcyx.ome.tif", &OpenOptions::default())
        .err()
        .unwrap()
        .to_string();
    assert!(e.contains("2 channels") && e.contains("--channel"), "{e}");
    let one_channel = OpenOptions {
        channel: Some(1),
        ..OpenOptions::default()
    };
    let e = open("ome_tzcyx.ome.tif", &one_channel).err().unwrap().to_string();
    assert!(e.contains("3 Z planes") && e.contains("--z max"), "{e}");
    let mut s = open(
        "ome_tzcyx.ome.tif",
        &OpenOptions {
            z: ZMode::Max,
            ..one_channel
        },
    )
    .unwrap();
    let info = s.info().clone();
    assert_eq!((info.frames, info.channels, info.z_planes), (4, 2, 3));
    assert_eq!(info.calibration.pixel_size_um, Some(0.5));
    assert_eq!(info.calibration.pixel_size_source, CalibrationSource::OmeXml);
    assert_eq!(info.calibration.frame_interval_s, Some(120.0));
    let Pixels::U16(p) = s.read_frame(3).unwrap().pixels else {
        panic!()
    };
    // Maximum over z = 0..2 at channel 1, time 3: 3000 + 200 + 10 + (x+y)%7.
    for y in 0..H {
        for x in 0..W {
            assert_eq!(p[y * W + x] as usize, 3210 + (x + y) % 7);
        }
    }
}

#[test]
fn plane_delta_t_and_resolution_tags_and_overrides() {
    let s = open("ome_deltat.ome.tif", &OpenOptions::default()).unwrap();
    assert_eq!(s.info().calibration.frame_interval_s, Some(1.5));
    assert_eq!(
        s.info().calibration.frame_interval_source,
        CalibrationSource::OmePlaneDeltaT
    );
    let s = open("resolution_cm.tif", &OpenOptions::default()).unwrap();
    // Source: fixtures/methods/check_values.md §10, 20000 px per cm -> 0.5 µm.
    assert_eq!(s.info().calibration.pixel_size_um, Some(0.5));
    assert_eq!(
        s.info().calibration.pixel_size_source,
        CalibrationSource::ResolutionTags
    );
    let s = open(
        "resolution_cm.tif",
        &OpenOptions {
            pixel_size_um: Some(0.65),
            frame_interval_s: Some(60.0),
            ..OpenOptions::default()
        },
    )
    .unwrap();
    assert_eq!(s.info().calibration.pixel_size_um, Some(0.65));
    assert_eq!(s.info().calibration.pixel_size_source, CalibrationSource::CommandLine);
}

#[test]
fn rgb_pages_need_a_channel() {
    for name in ["rgb_interleaved.tif", "rgb_planar.tif"] {
        let e = open(name, &OpenOptions::default()).err().unwrap().to_string();
        assert!(e.contains("3 samples per pixel") && e.contains("--channel"), "{e}");
        let mut s = open(
            name,
            &OpenOptions {
                channel: Some(1),
                ..OpenOptions::default()
            },
        )
        .unwrap();
        // Channel 1 was written from the u8 formula at t = 1.
        assert_eq!(s.read_frame(0).unwrap().pixels, expected("u8", 1), "{name}");
    }
}

#[test]
fn folder_is_read_in_natural_order() {
    let mut s = open("folder", &OpenOptions::default()).unwrap();
    assert_eq!(s.info().frames, 12);
    for t in 0..12 {
        let Pixels::U16(p) = s.read_frame(t).unwrap().pixels else {
            panic!()
        };
        assert_eq!(p[0] as usize, (t + 1) * 100, "frame {t} must be file t{}", t + 1);
    }
}

#[test]
fn unsupported_sample_type_is_named() {
    let e = open("i16.tif", &OpenOptions::default()).err().unwrap().to_string();
    assert!(e.contains("16-bit signed integer samples are not supported"), "{e}");
}

/// The minimal 3x2 uint16 TIFF of fixtures/methods/check_values.md §10 (146 bytes, 10 tags, one strip), built by hand.
fn minimal_tiff(big_endian: bool, width: u32, height: u32) -> Vec<u8> {
    let mut b: Vec<u8> = Vec::new();
    let u16b = |v: u16| if big_endian { v.to_be_bytes() } else { v.to_le_bytes() };
    let u32b = |v: u32| if big_endian { v.to_be_bytes() } else { v.to_le_bytes() };
    b.extend(if big_endian { *b"MM" } else { *b"II" });
    b.extend(u16b(42));
    b.extend(u32b(8));
    let entries: [(u16, u16, u32); 10] = [
        (256, 3, width),
        (257, 3, height),
        (258, 3, 16),
        (259, 3, 1),
        (262, 3, 1),
        (273, 4, 134),
        (277, 3, 1),
        (278, 3, height),
        (279, 4, 12),
        (284, 3, 1),
    ];
    b.extend(u16b(entries.len() as u16));
    for (tag, ty, value) in entries {
        b.extend(u16b(tag));
        b.extend(u16b(ty));
        b.extend(u32b(1));
        if ty == 3 {
            b.extend(u16b(value as u16));
            b.extend([0, 0]);
        } else {
            b.extend(u32b(value));
        }
    }
    b.extend(u32b(0));
    for v in [1u16, 2, 3, 256, 513, 65535] {
        b.extend(u16b(v));
    }
    b
}

#[test]
fn hand_built_minimal_tiff_in_both_byte_orders() {
    // Source: fixtures/methods/check_values.md §10 check (own writer, read back by Pillow 13): 146 bytes, pixels
    // [[1,2,3],[256,513,65535]], headers 49 49 2a 00 08 00 00 00 / 4d 4d 00 2a 00 00 00 08.
    let dir = tempfile::tempdir().unwrap();
    for be in [false, true] {
        let bytes = minimal_tiff(be, 3, 2);
        assert_eq!(bytes.len(), 146);
        let p = dir.path().join(format!("min{be}.tif"));
        std::fs::write(&p, &bytes).unwrap();
        let mut s = Stack::open(&p, &OpenOptions::default()).unwrap();
        assert_eq!(
            s.read_frame(0).unwrap().pixels,
            Pixels::U16(vec![1, 2, 3, 256, 513, 65535])
        );
    }
}

#[test]
fn bombs_and_truncations_are_errors_not_panics() {
    let dir = tempfile::tempdir().unwrap();
    // A header that declares 100000 x 100000 16-bit pixels (20 GB) over 12 bytes of data.
    let bomb = dir.path().join("bomb.tif");
    std::fs::write(&bomb, minimal_tiff(false, 100_000, 100_000)).unwrap();
    let e = Stack::open(&bomb, &OpenOptions::default())
        .err()
        .expect("refused")
        .to_string();
    assert!(
        e.starts_with(&format!("{}, frame 0:", bomb.display())) && e.contains("limit"),
        "{e}"
    );
    // Truncations of a real stack at the header, inside directories and inside pixel data.
    let good = std::fs::read(fixture("u16_none_strips_le_classic.tif")).unwrap();
    for cut in [0, 3, 9, 200, 3000, 6700] {
        let p = dir.path().join(format!("cut{cut}.tif"));
        std::fs::write(&p, &good[..cut]).unwrap();
        let result = Stack::open(&p, &OpenOptions::default())
            .and_then(|mut s| (0..s.info().frames).try_for_each(|t| s.read_frame(t).map(|_| ())));
        let e = result
            .err()
            .unwrap_or_else(|| panic!("cut at {cut} must fail"))
            .to_string();
        assert!(e.starts_with(&p.display().to_string()), "{e}");
    }
    let not_tiff = dir.path().join("notes.tif");
    std::fs::write(&not_tiff, b"these are my notes").unwrap();
    assert!(Stack::open(&not_tiff, &OpenOptions::default())
        .err()
        .unwrap()
        .to_string()
        .contains("is not a TIFF file"));
}

/// A little-endian uint16 TIFF of `pages` (NewSubfileType, PhotometricInterpretation, 3x2
/// pixels), each page one uncompressed strip, IFDs chained in order; built by hand after
/// TIFF 6.0 (the layout of `minimal_tiff`, plus tag 254 and one IFD per page).
fn tiff_pages(pages: &[(u32, u16, [u16; 6])]) -> Vec<u8> {
    const ENTRIES: usize = 11;
    let ifd_len = 2 + ENTRIES * 12 + 4;
    let page_len = ifd_len + 12; // the IFD, then its 6 pixels
    let mut b: Vec<u8> = b"II".to_vec();
    b.extend(42u16.to_le_bytes());
    b.extend(8u32.to_le_bytes());
    for (k, &(subfile, photometric, pixels)) in pages.iter().enumerate() {
        let ifd = 8 + k * page_len;
        let strip = (ifd + ifd_len) as u32;
        let entries: [(u16, u16, u32); ENTRIES] = [
            (254, 4, subfile),
            (256, 3, 3),
            (257, 3, 2),
            (258, 3, 16),
            (259, 3, 1),
            (262, 3, photometric as u32),
            (273, 4, strip),
            (277, 3, 1),
            (278, 3, 2),
            (279, 4, 12),
            (284, 3, 1),
        ];
        b.extend((ENTRIES as u16).to_le_bytes());
        for (tag, ty, value) in entries {
            b.extend(tag.to_le_bytes());
            b.extend(ty.to_le_bytes());
            b.extend(1u32.to_le_bytes());
            if ty == 3 {
                b.extend((value as u16).to_le_bytes());
                b.extend([0, 0]);
            } else {
                b.extend(value.to_le_bytes());
            }
        }
        let next = if k + 1 < pages.len() {
            (ifd + page_len) as u32
        } else {
            0
        };
        b.extend(next.to_le_bytes());
        for v in pixels {
            b.extend(v.to_le_bytes());
        }
    }
    b
}

#[test]
fn white_is_zero_pages_are_inverted_and_reduced_resolution_pages_skipped() {
    // Source: TIFF 6.0, PhotometricInterpretation (tag 262): 0 = WhiteIsZero, so a stored v
    // is the brightness 65535 − v in BlackIsZero terms; NewSubfileType (tag 254) bit 0 marks a
    // reduced-resolution version of another page, which is not a frame of the recording.
    let dir = tempfile::tempdir().unwrap();
    let pixels = [1u16, 2, 3, 256, 513, 65535];
    let p = dir.path().join("white.tif");
    std::fs::write(&p, tiff_pages(&[(0, 0, pixels), (0, 0, pixels)])).unwrap();
    let mut s = Stack::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!(s.info().frames, 2);
    assert_eq!(
        s.read_frame(1).unwrap().pixels,
        Pixels::U16(vec![65534, 65533, 65532, 65279, 65022, 0])
    );
    // Frame, its reduced-resolution copy, frame: two frames, the second the third page.
    let second = [7u16, 8, 9, 10, 11, 12];
    let p = dir.path().join("pyramid.tif");
    std::fs::write(&p, tiff_pages(&[(0, 1, pixels), (1, 1, [0; 6]), (0, 1, second)])).unwrap();
    let mut s = Stack::open(&p, &OpenOptions::default()).unwrap();
    assert_eq!(s.info().frames, 2);
    assert_eq!(s.read_frame(0).unwrap().pixels, Pixels::U16(pixels.to_vec()));
    assert_eq!(s.read_frame(1).unwrap().pixels, Pixels::U16(second.to_vec()));
}

/// TIFF LZW (TIFF 6.0 §13): MSB-first codes, Clear (256) first, End of Information (257)
/// last when `end_code`, new entries from 258, codes one bit wider once the encoder's next
/// entry reaches 512, 1024 or 2048 (which a decoder, one entry behind, meets as TIFF's "early
/// change"). Written here from
/// the specification so that the end code can be left out; the tiles it writes are checked
/// against the `tiff` crate's own decoder before they are trusted.
fn tiff_lzw(data: &[u8], end_code: bool) -> Vec<u8> {
    struct Bits {
        out: Vec<u8>,
        acc: u64,
        n: u32,
    }
    impl Bits {
        fn put(&mut self, code: u16, width: u32) {
            self.acc = (self.acc << width) | code as u64;
            self.n += width;
            while self.n >= 8 {
                self.out.push((self.acc >> (self.n - 8)) as u8);
                self.n -= 8;
            }
        }
    }
    let mut bits = Bits {
        out: Vec::new(),
        acc: 0,
        n: 0,
    };
    let mut table: std::collections::HashMap<(u16, u8), u16> = Default::default();
    let (mut next, mut width) = (258u16, 9u32);
    bits.put(256, width);
    let grow = |next: &mut u16, width: &mut u32| {
        *next += 1;
        if *next == 1 << *width {
            *width += 1;
        }
    };
    let mut current: Option<u16> = None;
    for &byte in data {
        current = Some(match current {
            None => byte as u16,
            Some(prefix) => match table.get(&(prefix, byte)) {
                Some(&code) => code,
                None => {
                    bits.put(prefix, width);
                    table.insert((prefix, byte), next);
                    grow(&mut next, &mut width);
                    assert!(next < 4094, "test tiles stay below the table's size");
                    byte as u16
                }
            },
        });
    }
    if let Some(code) = current {
        bits.put(code, width);
        grow(&mut next, &mut width);
    }
    if end_code {
        bits.put(257, width);
    }
    if bits.n > 0 {
        let pad = 8 - bits.n;
        bits.put(0, pad);
    }
    bits.out
}

/// A little-endian uint16 TIFF whose pages are LZW-compressed 16 x 16 tiles (TIFF 6.0 tags
/// 322–325), with the given predictor (1 none, 2 horizontal differencing) and photometric
/// interpretation; built by hand so that the tiles' end codes can be left out and the tiles
/// of the bottom row can hold only their rows inside the image (`short_edge`).
fn lzw_tiled_tiff(
    pages: &[Vec<u16>],
    (width, height): (usize, usize),
    (predictor, photometric): (u16, u16),
    (end_code, short_edge): (bool, bool),
) -> Vec<u8> {
    const TILE: usize = 16;
    let (across, down) = (width.div_ceil(TILE), height.div_ceil(TILE));
    let mut b: Vec<u8> = b"II".to_vec();
    b.extend(42u16.to_le_bytes());
    let mut link_at = b.len();
    b.extend(0u32.to_le_bytes());
    for page in pages {
        let (mut offsets, mut counts) = (Vec::new(), Vec::new());
        for tile in 0..across * down {
            let (x0, y0) = ((tile % across) * TILE, (tile / across) * TILE);
            let mut raw = Vec::with_capacity(TILE * TILE * 2);
            let rows = if short_edge { TILE.min(height - y0) } else { TILE };
            for y in y0..y0 + rows {
                let mut previous = 0u16;
                for x in x0..x0 + TILE {
                    let v = if x < width && y < height {
                        page[y * width + x]
                    } else {
                        0
                    };
                    let stored = if predictor == 2 { v.wrapping_sub(previous) } else { v };
                    previous = v;
                    raw.extend(stored.to_le_bytes());
                }
            }
            let packed = tiff_lzw(&raw, end_code);
            offsets.push(b.len() as u32);
            counts.push(packed.len() as u32);
            b.extend(packed);
            if b.len() % 2 == 1 {
                b.push(0);
            }
        }
        let arrays = b.len() as u32;
        for v in offsets.iter().chain(&counts) {
            b.extend(v.to_le_bytes());
        }
        let tiles = offsets.len() as u32;
        let entries: [(u16, u16, u32, u32); 12] = [
            (256, 3, 1, width as u32),
            (257, 3, 1, height as u32),
            (258, 3, 1, 16),
            (259, 3, 1, 5),
            (262, 3, 1, photometric as u32),
            (277, 3, 1, 1),
            (284, 3, 1, 1),
            (317, 3, 1, predictor as u32),
            (322, 3, 1, TILE as u32),
            (323, 3, 1, TILE as u32),
            (324, 4, tiles, if tiles == 1 { offsets[0] } else { arrays }),
            (325, 4, tiles, if tiles == 1 { counts[0] } else { arrays + 4 * tiles }),
        ];
        let ifd = b.len() as u32;
        b[link_at..link_at + 4].copy_from_slice(&ifd.to_le_bytes());
        b.extend((entries.len() as u16).to_le_bytes());
        for (tag, ty, count, value) in entries {
            b.extend(tag.to_le_bytes());
            b.extend(ty.to_le_bytes());
            b.extend(count.to_le_bytes());
            if ty == 3 {
                b.extend((value as u16).to_le_bytes());
                b.extend([0, 0]);
            } else {
                b.extend(value.to_le_bytes());
            }
        }
        link_at = b.len();
        b.extend(0u32.to_le_bytes());
    }
    b
}

/// Every frame of `path` as the `tiff` crate alone decodes it, or its first error.
fn tiff_crate_frames(path: &Path) -> Result<Vec<Vec<u16>>, String> {
    let mut d = tiff::decoder::Decoder::new(std::fs::File::open(path).unwrap()).map_err(|e| e.to_string())?;
    let mut frames = Vec::new();
    loop {
        match d.read_image().map_err(|e| e.to_string())? {
            tiff::decoder::DecodingResult::U16(v) => frames.push(v),
            _ => return Err("not uint16".into()),
        }
        if !d.more_images() {
            return Ok(frames);
        }
        d.next_image().map_err(|e| e.to_string())?;
    }
}

#[test]
fn lzw_tiles_without_their_end_code_are_read_leniently() {
    // Source: TIFF 6.0 §13 requires each LZW strip or tile to end with the End of Information
    // code, and §15 each tile to hold TileWidth x TileLength samples even at the image's edge;
    // some writers store only an edge tile's rows inside the image and leave the end code
    // out, and tolerant readers decode what is there. The tiles are first checked whole, with
    // their end codes, against the `tiff` crate's own decoder (the outside reference for the
    // hand-written encoder); short and without end codes the `tiff` crate refuses them ("no
    // lzw end code found"), and Caravan must read the same pixels through its lenient path,
    // with predictors undone (TIFF 6.0 §14) and WhiteIsZero inverted once (tag 262).
    let (width, height) = (37, 21); // three tiles across, two down, partly outside the image
    let mut rng = 12345u64;
    let pages: Vec<Vec<u16>> = (0..2)
        .map(|t| {
            (0..width * height)
                .map(|i| {
                    rng = rng.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                    // a smooth ramp with noise, so that both predictors meet real runs
                    (1000 + 37 * t + (i % width) * 20 + (rng >> 58) as usize) as u16
                })
                .collect()
        })
        .collect();
    let dir = tempfile::tempdir().unwrap();
    for predictor in [1u16, 2] {
        let whole = dir.path().join(format!("whole{predictor}.tif"));
        let tiff =
            |end_code, short_edge| lzw_tiled_tiff(&pages, (width, height), (predictor, 1), (end_code, short_edge));
        std::fs::write(&whole, tiff(true, false)).unwrap();
        assert_eq!(
            tiff_crate_frames(&whole).unwrap(),
            pages,
            "the encoder agrees with the tiff crate"
        );
        let cut = dir.path().join(format!("cut{predictor}.tif"));
        std::fs::write(&cut, tiff(false, true)).unwrap();
        let refused = tiff_crate_frames(&cut).unwrap_err();
        assert!(refused.contains("no lzw end code"), "{refused}");
        let mut s = Stack::open(&cut, &OpenOptions::default()).unwrap();
        assert_eq!(s.info().frames, 2);
        for (t, page) in pages.iter().enumerate() {
            assert_eq!(
                s.read_frame(t).unwrap().pixels,
                Pixels::U16(page.clone()),
                "predictor {predictor}, frame {t}"
            );
        }
    }
    let white = dir.path().join("white.tif");
    std::fs::write(&white, lzw_tiled_tiff(&pages, (width, height), (2, 0), (false, true))).unwrap();
    let mut s = Stack::open(&white, &OpenOptions::default()).unwrap();
    let inverted: Vec<u16> = pages[1].iter().map(|v| 65535 - v).collect();
    assert_eq!(s.read_frame(1).unwrap().pixels, Pixels::U16(inverted));
}
