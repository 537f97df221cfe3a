//! Baseline greyscale JPEG for the review page's frames: the same bytes as the `image`
//! crate's encoder writes for a greyscale image (tested against it), at a fraction of its
//! time. The review's frames were the movie pass's largest single cost (benches/SPEED.md):
//! that encoder reads each pixel through a generic accessor, divides and rounds every
//! coefficient in floating point through a library call, and writes the bit stream a byte at
//! a time through `io::Write`.
//!
//! # Method
//! ITU-T Recommendation T.81 (1992) | ISO/IEC 10918-1, "Digital compression and coding of
//! continuous-tone still images": baseline sequential DCT, one component, the example
//! luminance quantisation and Huffman tables of its Annex K (K.1, K.3, K.5), canonical codes
//! by its Annex C; the quality scaling of the Independent JPEG Group's libjpeg
//! (`jpeg_quality_scaling`); the forward DCT is the IJG's accurate integer one (`jfdctint.c`,
//! after C. Loeffler, A. Ligtenberg & G. S. Moschytz (1989), "Practical fast 1-D DCT
//! algorithms with 11 multiplications", Proc. ICASSP 2:988–991,
//! doi:10.1109/ICASSP.1989.266596), with the `image` crate's fudge terms, so that every
//! coefficient is the same integer. "This software is based in part on the work of the
//! Independent JPEG Group." Departure from one-block-at-a-time code: the 1-D transforms run
//! across eight rows (then eight columns) at once as vector lanes, and the quantiser divides by
//! an exact reciprocal; integer arithmetic, so every instruction level gives the same bytes.

/// Coefficients of one 8 x 8 block, eight lanes per step of a 1-D transform.
type Lanes = [[i32; 8]; 8];

/// Table K.1: the example luminance quantisation table, row by row.
#[rustfmt::skip]
const LUMINANCE_QUANTISATION: [u8; 64] = [
    16, 11, 10, 16,  24,  40,  51,  61,
    12, 12, 14, 19,  26,  58,  60,  55,
    14, 13, 16, 24,  40,  57,  69,  56,
    14, 17, 22, 29,  51,  87,  80,  62,
    18, 22, 37, 56,  68, 109, 103,  77,
    24, 35, 55, 64,  81, 104, 113,  92,
    49, 64, 78, 87, 103, 121, 120, 101,
    72, 92, 95, 98, 112, 100, 103,  99,
];

/// Table K.3: codes of each length 1..=16, then the DC categories they stand for.
const DC_COUNTS: [u8; 16] = [0, 1, 5, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0, 0, 0];
const DC_SYMBOLS: [u8; 12] = [0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11];

/// Table K.5: codes of each length 1..=16, then the AC run/size symbols they stand for.
const AC_COUNTS: [u8; 16] = [0, 2, 1, 3, 3, 2, 4, 3, 5, 5, 4, 4, 0, 0, 1, 0x7d];
#[rustfmt::skip]
const AC_SYMBOLS: [u8; 162] = [
    0x01, 0x02, 0x03, 0x00, 0x04, 0x11, 0x05, 0x12, 0x21, 0x31, 0x41, 0x06, 0x13, 0x51, 0x61, 0x07,
    0x22, 0x71, 0x14, 0x32, 0x81, 0x91, 0xa1, 0x08, 0x23, 0x42, 0xb1, 0xc1, 0x15, 0x52, 0xd1, 0xf0,
    0x24, 0x33, 0x62, 0x72, 0x82, 0x09, 0x0a, 0x16, 0x17, 0x18, 0x19, 0x1a, 0x25, 0x26, 0x27, 0x28,
    0x29, 0x2a, 0x34, 0x35, 0x36, 0x37, 0x38, 0x39, 0x3a, 0x43, 0x44, 0x45, 0x46, 0x47, 0x48, 0x49,
    0x4a, 0x53, 0x54, 0x55, 0x56, 0x57, 0x58, 0x59, 0x5a, 0x63, 0x64, 0x65, 0x66, 0x67, 0x68, 0x69,
    0x6a, 0x73, 0x74, 0x75, 0x76, 0x77, 0x78, 0x79, 0x7a, 0x83, 0x84, 0x85, 0x86, 0x87, 0x88, 0x89,
    0x8a, 0x92, 0x93, 0x94, 0x95, 0x96, 0x97, 0x98, 0x99, 0x9a, 0xa2, 0xa3, 0xa4, 0xa5, 0xa6, 0xa7,
    0xa8, 0xa9, 0xaa, 0xb2, 0xb3, 0xb4, 0xb5, 0xb6, 0xb7, 0xb8, 0xb9, 0xba, 0xc2, 0xc3, 0xc4, 0xc5,
    0xc6, 0xc7, 0xc8, 0xc9, 0xca, 0xd2, 0xd3, 0xd4, 0xd5, 0xd6, 0xd7, 0xd8, 0xd9, 0xda, 0xe1, 0xe2,
    0xe3, 0xe4, 0xe5, 0xe6, 0xe7, 0xe8, 0xe9, 0xea, 0xf1, 0xf2, 0xf3, 0xf4, 0xf5, 0xf6, 0xf7, 0xf8,
    0xf9, 0xfa,
];

/// Figure A.6: the position (row-major) of each coefficient in zig-zag order.
#[rustfmt::skip]
const ZIGZAG: [usize; 64] = [
     0,  1,  8, 16,  9,  2,  3, 10, 17, 24, 32, 25, 18, 11,  4,  5,
    12, 19, 26, 33, 40, 48, 41, 34, 27, 20, 13,  6,  7, 14, 21, 28,
    35, 42, 49, 56, 57, 50, 43, 36, 29, 22, 15, 23, 30, 37, 44, 51,
    58, 59, 52, 45, 38, 31, 39, 46, 53, 60, 61, 54, 47, 55, 62, 63,
];

/// [`ZIGZAG`] inverted: the zig-zag index of each coefficient, by its row-major position.
const ZIGZAG_INDEX: [u8; 64] = {
    let mut index = [0u8; 64];
    let mut z = 0;
    while z < 64 {
        index[ZIGZAG[z]] = z as u8;
        z += 1;
    }
    index
};

/// Largest side a baseline JPEG can state (16-bit fields of the frame header).
pub const MAX_SIDE: usize = u16::MAX as usize;

/// `grey` (`width` x `height`, row-major) as a baseline JPEG file at `quality` (1-100, the
/// IJG scale); `None` when a side is 0 or over [`MAX_SIDE`]. Edge blocks repeat the last
/// column and row.
pub fn grey_jpeg(grey: &[u8], width: usize, height: usize, quality: u8) -> Option<Vec<u8>> {
    if width == 0 || height == 0 || width > MAX_SIDE || height > MAX_SIDE || grey.len() != width * height {
        return None;
    }
    let quantisation = scaled_quantisation(quality);
    let mut out = Vec::with_capacity(width * height / 4 + 1024);
    write_headers(&mut out, width as u16, height as u16, &quantisation);
    let divisors = Divisors::of(&quantisation);
    let (dc, ac) = (
        HuffmanCodes::of(&DC_COUNTS, &DC_SYMBOLS),
        HuffmanCodes::of(&AC_COUNTS, &AC_SYMBOLS),
    );
    let blocks_across = width.div_ceil(8);
    let mut band = vec![0u8; blocks_across * 64];
    let mut blocks = vec![[0i32; 64]; blocks_across];
    let mut bits = BitSink::new(out);
    let mut previous_dc = 0;
    for band_top in (0..height).step_by(8) {
        gather_band(grey, width, height, band_top, &mut band);
        transform_band(&band, &divisors, &mut blocks);
        for block in &blocks {
            previous_dc = bits.block(block, previous_dc, &dc, &ac);
        }
    }
    let mut out = bits.finish();
    out.extend_from_slice(&[0xff, 0xd9]);
    Some(out)
}

/// Table K.1 scaled for `quality` as libjpeg scales it (50 keeps the table; 5000 / q below,
/// 200 − 2q above), each entry rounded and kept within 1..=255.
fn scaled_quantisation(quality: u8) -> [u8; 64] {
    let q = u32::from(quality.clamp(1, 100));
    let scale = if q < 50 { 5000 / q } else { 200 - 2 * q };
    LUMINANCE_QUANTISATION.map(|v| ((u32::from(v) * scale + 50) / 100).clamp(1, 255) as u8)
}

/// SOI, the JFIF APP0 segment (version 1.2, aspect ratio 1:1, no thumbnail), the frame header
/// (SOF0: 8 bits, one component, sampling 1x1, table 0), the quantisation table in zig-zag
/// order (DQT), the two Huffman tables (DHT) and the scan header (SOS), as the `image` crate
/// writes them.
fn write_headers(out: &mut Vec<u8>, width: u16, height: u16, quantisation: &[u8; 64]) {
    out.extend_from_slice(&[0xff, 0xd8]);
    segment(out, 0xe0, &[b'J', b'F', b'I', b'F', 0, 1, 2, 0, 0, 1, 0, 1, 0, 0]);
    let [hh, hl] = height.to_be_bytes();
    let [wh, wl] = width.to_be_bytes();
    segment(out, 0xc0, &[8, hh, hl, wh, wl, 1, 1, 0x11, 0]);
    let mut table = vec![0u8];
    table.extend(ZIGZAG.iter().map(|&k| quantisation[k]));
    segment(out, 0xdb, &table);
    for (class, counts, symbols) in [(0x00, &DC_COUNTS, &DC_SYMBOLS[..]), (0x10, &AC_COUNTS, &AC_SYMBOLS[..])] {
        let mut table = vec![class];
        table.extend_from_slice(counts);
        table.extend_from_slice(symbols);
        segment(out, 0xc4, &table);
    }
    segment(out, 0xda, &[1, 1, 0x00, 0, 63, 0]);
}

/// A marker segment: the marker, the length (counting itself) and `data`.
fn segment(out: &mut Vec<u8>, marker: u8, data: &[u8]) {
    out.extend_from_slice(&[0xff, marker]);
    out.extend_from_slice(&(data.len() as u16 + 2).to_be_bytes());
    out.extend_from_slice(data);
}

/// The eight rows from `top` of `grey`, cut into 8 x 8 blocks laid out one after another
/// (block `b`'s row `y` at `b · 64 + y · 8`); columns and rows past the image repeat its last.
fn gather_band(grey: &[u8], width: usize, height: usize, top: usize, band: &mut [u8]) {
    for y in 0..8 {
        let row = &grey[(top + y).min(height - 1) * width..][..width];
        for (b, block) in band.chunks_exact_mut(64).enumerate() {
            let line = &mut block[y * 8..y * 8 + 8];
            let x0 = b * 8;
            if x0 + 8 <= width {
                line.copy_from_slice(&row[x0..x0 + 8]);
            } else {
                for (x, v) in line.iter_mut().enumerate() {
                    *v = row[(x0 + x).min(width - 1)];
                }
            }
        }
    }
}

crate::multiversioned! {
    /// Forward DCT and quantisation of every block of a band ([`gather_band`]'s layout), the
    /// quantised coefficients in row-major order (one vectorised loop; the entropy coder
    /// visits the few non-zero ones in zig-zag order, [`BitSink::block`]: putting all 64 in
    /// that order here was over a quarter of this function's time).
    fn transform_band / transform_band_with(band: &[u8], divisors: &Divisors, blocks: &mut [[i32; 64]]) {
        for (samples, block) in band.chunks_exact(64).zip(blocks.iter_mut()) {
            *block = divisors.quantise_block(&forward_dct(samples));
        }
    }
}

/// The IJG integer DCT of one block, scaled by 8 as `jfdctint.c` leaves it: rows first (each
/// step across the eight rows at once), then columns (across the eight columns). Returns the
/// coefficients as `[v][u]` (row-major).
#[inline(always)]
fn forward_dct(samples: &[u8]) -> Lanes {
    // Row pass: lane = row y, position = column x.
    let mut columns = [[0i32; 8]; 8];
    for (y, row) in samples.chunks_exact(8).enumerate() {
        for (x, &s) in row.iter().enumerate() {
            columns[x][y] = i32::from(s);
        }
    }
    let rows = transform_1d::<true>(&columns);
    // Column pass: lane = column u, position = row y; `rows[u][y]` is row y's coefficient u.
    let mut by_row = [[0i32; 8]; 8];
    for (u, coefficient) in rows.iter().enumerate() {
        for (y, &c) in coefficient.iter().enumerate() {
            by_row[y][u] = c;
        }
    }
    transform_1d::<false>(&by_row)
}

/// One 1-D pass of the IJG integer DCT over eight lanes: `v[x][lane]` in, coefficient `k` of
/// each lane out as `[k][lane]`. `ROWS` selects the first pass (level shift by −128 per sample,
/// results kept ×4) or the second (descaled by 4 and the constants' 2^13). The second pass's
/// odd part adds the first pass's rounding term, as the `image` crate's translation does.
#[inline(always)]
fn transform_1d<const ROWS: bool>(v: &Lanes) -> Lanes {
    const CONST_BITS: i32 = 13;
    const PASS1_BITS: i32 = 2;
    const F_0_298: i32 = 2446;
    const F_0_390: i32 = 3196;
    const F_0_541: i32 = 4433;
    const F_0_765: i32 = 6270;
    const F_0_899: i32 = 7373;
    const F_1_175: i32 = 9633;
    const F_1_501: i32 = 12299;
    const F_1_847: i32 = 15137;
    const F_1_961: i32 = 16069;
    const F_2_053: i32 = 16819;
    const F_2_562: i32 = 20995;
    const F_3_072: i32 = 25172;
    let shift = if ROWS {
        CONST_BITS - PASS1_BITS
    } else {
        CONST_BITS + PASS1_BITS
    };
    let odd_round = 1 << (CONST_BITS - PASS1_BITS - 1);
    let mut out = [[0i32; 8]; 8];
    for l in 0..8 {
        let (e0, e1, e2, e3) = (
            v[0][l] + v[7][l],
            v[1][l] + v[6][l],
            v[2][l] + v[5][l],
            v[3][l] + v[4][l],
        );
        let (d0, d1, d2, d3) = (
            v[0][l] - v[7][l],
            v[1][l] - v[6][l],
            v[2][l] - v[5][l],
            v[3][l] - v[4][l],
        );
        let (t10, t12, t11, t13) = (e0 + e3, e0 - e3, e1 + e2, e1 - e2);
        if ROWS {
            out[0][l] = (t10 + t11 - 8 * 128) << PASS1_BITS;
            out[4][l] = (t10 - t11) << PASS1_BITS;
        } else {
            let t10 = t10 + (1 << (PASS1_BITS - 1));
            out[0][l] = (t10 + t11) >> PASS1_BITS;
            out[4][l] = (t10 - t11) >> PASS1_BITS;
        }
        let z1 = (t12 + t13) * F_0_541 + (1 << (shift - 1));
        out[2][l] = (z1 + t12 * F_0_765) >> shift;
        out[6][l] = (z1 - t13 * F_1_847) >> shift;
        let (s12, s13) = (d0 + d2, d1 + d3);
        let z1 = (s12 + s13) * F_1_175 + odd_round;
        let (s12, s13) = (s12 * -F_0_390 + z1, s13 * -F_1_961 + z1);
        let z1 = (d0 + d3) * -F_0_899;
        let (o0, o3) = (d0 * F_1_501 + (z1 + s12), d3 * F_0_298 + (z1 + s13));
        let z1 = (d1 + d2) * -F_2_562;
        let (o1, o2) = (d1 * F_3_072 + (z1 + s13), d2 * F_2_053 + (z1 + s12));
        out[1][l] = o0 >> shift;
        out[3][l] = o1 >> shift;
        out[5][l] = o2 >> shift;
        out[7][l] = o3 >> shift;
    }
    out
}

/// The quantiser of each coefficient as an exact reciprocal: `round(trunc(c / 8) / q)`, half
/// away from zero, is `(2|c'| + q) div 2q` with the sign of `c' = trunc(c / 8)`, and that
/// integer division is a multiplication by `⌈2^32 / 2q⌉` and a shift (exact while
/// `(2|c'| + q) · 2q < 2^32`, far beyond the ±2^11 of 8-bit samples).
struct Divisors {
    /// `⌈2^32 / 2q⌉`: at most 2^31 (q = 1), so 32 bits hold it and the product with a 32-bit
    /// numerator is one unsigned 32 x 32 → 64-bit multiplication, which vector units have.
    reciprocal: [u32; 64],
    quantiser: [u32; 64],
}

impl Divisors {
    fn of(quantisation: &[u8; 64]) -> Divisors {
        Divisors {
            reciprocal: quantisation.map(|q| (1u64 << 32).div_ceil(2 * u64::from(q)) as u32),
            quantiser: quantisation.map(u32::from),
        }
    }

    /// Coefficient `c` (scaled by 8) at row-major position `k`, quantised.
    #[inline(always)]
    fn quantise(&self, c: i32, k: usize) -> i32 {
        let v = c / 8;
        let numerator = 2 * v.unsigned_abs() + self.quantiser[k];
        let q = ((u64::from(numerator) * u64::from(self.reciprocal[k])) >> 32) as i32;
        if v < 0 {
            -q
        } else {
            q
        }
    }

    /// A block's coefficients (`[v][u]`, scaled by 8) quantised, in row-major order.
    #[inline(always)]
    fn quantise_block(&self, coefficients: &Lanes) -> [i32; 64] {
        let mut out = [0i32; 64];
        for (k, (o, &c)) in out.iter_mut().zip(coefficients.as_flattened()).enumerate() {
            *o = self.quantise(c, k);
        }
        out
    }
}

/// A Huffman table as (code length, code) per symbol, built canonically from the counts of
/// codes of each length (T.81 Annex C, figures C.1 to C.3).
struct HuffmanCodes {
    codes: [(u8, u16); 256],
}

impl HuffmanCodes {
    fn of(counts: &[u8; 16], symbols: &[u8]) -> HuffmanCodes {
        let mut codes = [(0u8, 0u16); 256];
        let mut code = 0u16;
        let mut next = symbols.iter();
        for (length, &count) in (1u8..).zip(counts) {
            for _ in 0..count {
                let &symbol = next.next().expect("counts sum to the symbols");
                codes[symbol as usize] = (length, code);
                code += 1;
            }
            code <<= 1;
        }
        HuffmanCodes { codes }
    }
}

/// The entropy-coded segment: bits gathered most significant first in a 64-bit word and
/// written out four bytes at a time, each 0xFF byte followed by a stuffed 0x00 (T.81
/// F.1.2.3).
struct BitSink {
    out: Vec<u8>,
    word: u64,
    /// Bits of `word` not written yet (fewer than 32 between calls).
    filled: u32,
}

impl BitSink {
    fn new(out: Vec<u8>) -> BitSink {
        BitSink {
            out,
            word: 0,
            filled: 0,
        }
    }

    /// Appends the low `length` bits of `bits` (`length` ≤ 32; higher bits zero): fewer than
    /// 32 bits wait between calls, so the 64-bit word holds them and these.
    #[inline(always)]
    fn put(&mut self, bits: u32, length: u32) {
        self.word = (self.word << length) | u64::from(bits);
        self.filled += length;
        if self.filled >= 32 {
            self.filled -= 32;
            self.write_four((self.word >> self.filled) as u32);
        }
    }

    /// Writes four bytes, most significant first, stuffing a 0x00 after each 0xFF: copied at
    /// once when none is 0xFF, that is when the complement has no zero byte (the has-zero-byte
    /// test of S. E. Anderson's "Bit Twiddling Hacks", from memory).
    #[inline(always)]
    fn write_four(&mut self, four: u32) {
        let complement = !four;
        let has_ff = complement.wrapping_sub(0x0101_0101) & !complement & 0x8080_8080 != 0;
        if has_ff {
            four.to_be_bytes().into_iter().for_each(|byte| self.push_stuffed(byte));
        } else {
            self.out.extend_from_slice(&four.to_be_bytes());
        }
    }

    /// Writes one byte, and a stuffed 0x00 after a 0xFF.
    #[inline(always)]
    fn push_stuffed(&mut self, byte: u8) {
        self.out.push(byte);
        if byte == 0xff {
            self.out.push(0);
        }
    }

    /// One block (its coefficients row-major), coded in zig-zag order (T.81 F.1.2.1 and
    /// F.1.2.2): the DC difference from `previous_dc` as a category and its bits, then each
    /// non-zero AC coefficient with the run of zeros before it (runs over 15 as ZRL symbols),
    /// and end-of-block if the last is zero. The non-zero coefficients are found as the set
    /// bits of one mask, not by testing each, and that mask put in zig-zag order bit by bit.
    /// Returns this block's DC.
    fn block(&mut self, block: &[i32; 64], previous_dc: i32, dc: &HuffmanCodes, ac: &HuffmanCodes) -> i32 {
        let (size, bits) = category(block[0] - previous_dc);
        self.symbol_and_bits(dc, size, (size, bits));
        let mut nonzero = in_zigzag_order(nonzero_mask(block)) & !1;
        let mut last = 0;
        while nonzero != 0 {
            let k = nonzero.trailing_zeros();
            let mut run = k - last - 1;
            while run > 15 {
                self.symbol(ac, 0xf0);
                run -= 16;
            }
            let (size, bits) = category(block[ZIGZAG[k as usize]]);
            self.symbol_and_bits(ac, ((run as u8) << 4) | size, (size, bits));
            last = k;
            nonzero &= nonzero - 1;
        }
        if last != 63 {
            self.symbol(ac, 0x00);
        }
        block[0]
    }

    /// Appends the Huffman code of `symbol`.
    #[inline(always)]
    fn symbol(&mut self, table: &HuffmanCodes, symbol: u8) {
        let (length, code) = table.codes[symbol as usize];
        self.put(u32::from(code), u32::from(length));
    }

    /// Appends the Huffman code of `symbol`, then the `size` additional bits `bits`, as one
    /// word (a code of at most 16 bits and at most 11 additional bits: the same bits as two
    /// appends, half the writes).
    #[inline(always)]
    fn symbol_and_bits(&mut self, table: &HuffmanCodes, symbol: u8, (size, bits): (u8, u32)) {
        let (length, code) = table.codes[symbol as usize];
        self.put((u32::from(code) << size) | bits, u32::from(length) + u32::from(size));
    }

    /// The stream closed as the `image` crate closes it: seven 1-bits, of which only those
    /// that complete a byte are kept (T.81 F.1.2.3 pads the last byte with 1-bits).
    fn finish(mut self) -> Vec<u8> {
        self.put(0x7f, 7);
        while self.filled >= 8 {
            self.filled -= 8;
            self.push_stuffed((self.word >> self.filled) as u8);
        }
        self.out
    }
}

/// Bit `i` set where coefficient `i` of `block` is not zero. Eight coefficients at a time:
/// their flags as the bytes of one word, gathered into its top byte by one multiplication
/// (byte `i`'s low bit lands on bit 56 + `i`, no two products overlap, so nothing carries).
#[inline(always)]
fn nonzero_mask(block: &[i32; 64]) -> u64 {
    let mut mask = 0u64;
    for (k, eight) in block.chunks_exact(8).enumerate() {
        let mut flags = [0u8; 8];
        for (f, &c) in flags.iter_mut().zip(eight) {
            *f = u8::from(c != 0);
        }
        let gathered = u64::from_le_bytes(flags).wrapping_mul(0x0102_0408_1020_4080) >> 56;
        mask |= gathered << (8 * k);
    }
    mask
}

/// A mask over a block's coefficients in row-major order (bit `r` for position `r`) as the
/// same mask in zig-zag order (bit `z` for the `z`-th coefficient of [`ZIGZAG`]): one step per
/// set bit, and a block at review quality has a handful.
#[inline(always)]
fn in_zigzag_order(mut row_major: u64) -> u64 {
    let mut zigzag = 0u64;
    while row_major != 0 {
        zigzag |= 1 << ZIGZAG_INDEX[row_major.trailing_zeros() as usize];
        row_major &= row_major - 1;
    }
    zigzag
}

/// The magnitude category of a coefficient (its bit length) and its additional bits: the
/// value itself if positive, its ones' complement in that many bits if negative (T.81
/// F.1.2.1.1, table F.1).
#[inline(always)]
fn category(c: i32) -> (u8, u32) {
    let size = 32 - c.unsigned_abs().leading_zeros();
    let mask = (1u32 << size) - 1;
    let bits = if c < 0 { (c - 1) as u32 & mask } else { c as u32 & mask };
    (size as u8, bits)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The `image` crate's encoding of the same pixels: the reference, byte for byte.
    fn reference(grey: &[u8], w: usize, h: usize, quality: u8) -> Vec<u8> {
        let mut out = Vec::new();
        image::codecs::jpeg::JpegEncoder::new_with_quality(&mut out, quality)
            .encode(grey, w as u32, h as u32, image::ExtendedColorType::L8)
            .expect("in-memory encode");
        out
    }

    /// A deterministic mix of smooth structure and noise, so that every category, long zero
    /// runs and 0xFF bytes in the stream all occur.
    fn picture(w: usize, h: usize, seed: u64) -> Vec<u8> {
        let mut state = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (0..w * h)
            .map(|i| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                let smooth = 128.0 + 100.0 * ((x / 7.0).sin() * (y / 11.0).cos());
                let noise = ((state >> 33) % 61) as f64 - 30.0;
                let v = if seed.is_multiple_of(3) { smooth } else { smooth + noise };
                v.clamp(0.0, 255.0) as u8
            })
            .collect()
    }

    #[test]
    fn the_nonzero_mask_is_one_bit_per_nonzero_coefficient() {
        // Source: definition (bit i set exactly where coefficient i is not zero), for blocks
        // with each density of non-zero coefficients, of every sign and size, and the two
        // extremes (all zero, none zero).
        let mut rng = crate::numeric::Rng::new(3);
        let mut blocks = vec![[0i32; 64], [-2047i32; 64]];
        for density in [0.02, 0.1, 0.5, 0.9] {
            for _ in 0..200 {
                let mut b = [0i32; 64];
                for c in b.iter_mut() {
                    if rng.uniform() < density {
                        *c = ((rng.uniform() - 0.5) * 4096.0) as i32 | 1;
                    }
                }
                blocks.push(b);
            }
        }
        for b in &blocks {
            let defined = (0..64).filter(|&i| b[i] != 0).fold(0u64, |m, i| m | 1 << i);
            assert_eq!(nonzero_mask(b), defined, "{b:?}");
        }
    }

    #[test]
    fn the_same_bytes_as_the_image_crate() {
        // Source: the `image` crate's JPEG encoder (a general-purpose library) on the same
        // pixels, sizes that are and are not multiples of 8, flat, extreme and noisy content,
        // and qualities across the IJG scale.
        for (w, h) in [(1usize, 1usize), (8, 8), (13, 7), (64, 48), (100, 37), (257, 129)] {
            for seed in 0..3u64 {
                let grey = picture(w, h, seed);
                for quality in [1u8, 25, 50, 75, 90, 100] {
                    assert_eq!(
                        grey_jpeg(&grey, w, h, quality).unwrap(),
                        reference(&grey, w, h, quality),
                        "{w}x{h} seed {seed} quality {quality}"
                    );
                }
            }
        }
        for fill in [0u8, 255] {
            let grey = vec![fill; 40 * 24];
            assert_eq!(grey_jpeg(&grey, 40, 24, 75).unwrap(), reference(&grey, 40, 24, 75));
        }
    }

    #[test]
    fn every_instruction_level_gives_the_same_coefficients() {
        // Source: integer arithmetic is exact, so each level's copy must agree with the
        // portable one bit for bit (crate::simd's contract).
        let grey = picture(96, 8, 1);
        let divisors = Divisors::of(&scaled_quantisation(75));
        let mut portable = vec![[0i32; 64]; 12];
        let mut band = vec![0u8; 12 * 64];
        gather_band(&grey, 96, 8, 0, &mut band);
        transform_band_with(crate::simd::Level::Portable, &band, &divisors, &mut portable);
        assert!(portable.iter().any(|b| b[1..].iter().any(|&c| c != 0)));
        for level in crate::simd::levels() {
            let mut got = vec![[0i32; 64]; 12];
            transform_band_with(level, &band, &divisors, &mut got);
            assert_eq!(got, portable, "{level:?}");
        }
    }

    #[test]
    fn the_reciprocal_quantiser_rounds_as_floating_division() {
        // Source: the `image` crate's quantiser, `((c / 8) as f32 / q as f32).round()`, for
        // every quantiser and every coefficient an 8-bit block can give (|c / 8| ≤ 2^11) and
        // beyond, to 2^13.
        for q in 1u8..=255 {
            let mut table = [1u8; 64];
            table[5] = q;
            let divisors = Divisors::of(&table);
            for c in -(1i32 << 16)..=(1 << 16) {
                let want = ((c / 8) as f32 / f32::from(q)).round() as i32;
                assert_eq!(divisors.quantise(c, 5), want, "c {c} q {q}");
            }
        }
    }

    #[test]
    fn impossible_sizes_are_refused() {
        // Source: T.81 B.2.2, the frame header states each side in 16 bits, and a side of 0
        // lines is only allowed with a DNL marker, which baseline writers do not emit.
        assert!(grey_jpeg(&[], 0, 0, 75).is_none());
        assert!(grey_jpeg(&[0; 3], 3, 2, 75).is_none());
        let wide = vec![0u8; MAX_SIDE + 1];
        assert!(grey_jpeg(&wide, MAX_SIDE + 1, 1, 75).is_none());
        assert!(grey_jpeg(&wide[..MAX_SIDE], MAX_SIDE, 1, 75).is_some());
    }
}
