//! LZW compression of the movie's frames, as GIF stores them: the same code stream, byte for
//! byte, as the `gif` crate's own pre-compression (which uses the `weezl` crate), with about
//! half its instructions (benches/SPEED.md). The movie pass spent more time there than on
//! drawing the frames.
//!
//! # Method
//! T. A. Welch (1984), "A technique for high-performance data compression", IEEE Computer
//! 17(6):8–19, doi:10.1109/MC.1984.1659158, with the GIF conventions (CompuServe, "Graphics
//! Interchange Format, Version 89a", 1990, appendix F; year and appendix from memory) as the
//! `gif` crate applies them: codes packed least significant bit first, a clear code first, the
//! code width grown when the next code would not fit and the table restarted with a clear code
//! once 4096 codes exist; the end code, then padding to a whole byte. The dictionary is a table
//! indexed directly by (palette index, next byte) for the one-byte strings, and a hash table of
//! (prefix code, next byte) pairs for the longer ones, each slot holding the pair and its code
//! in one 32-bit word (one load per probe), emptied in one pass when the table restarts.

/// Codes a GIF table can hold (12-bit codes).
const MAX_CODES: usize = 4096;
/// Slots of the hash table: twice the codes, so that it stays at most half full.
const SLOTS: usize = 2 * MAX_CODES;
/// The `weezl` encoder keeps a string's first 16 extensions in a short list and then moves
/// them to a full table of 256, without the extension whose arrival made it move: that string
/// gets its code (the decoder defines it) but is never matched. Kept, so that the stream is
/// the same bytes (a little longer than it could be).
const SHORT_LIST: u8 = 16;

/// `data` (palette indices) compressed for a GIF image: the minimum code size byte, then the
/// LZW code stream (not yet cut into sub-blocks), as `gif::Frame::make_lzw_pre_encoded`
/// leaves it.
pub fn gif_lzw(data: &[u8]) -> Vec<u8> {
    let min_size = minimum_code_size(data);
    let mut out = Vec::with_capacity(data.len() / 2 + 16);
    out.push(min_size);
    Encoder::new(min_size, out).encode(data)
}

/// The GIF minimum code size for `data`: enough bits for its largest index, at least 2, as
/// the `gif` crate chooses it (the next power of two at or above max + 1, at least 4).
fn minimum_code_size(data: &[u8]) -> u8 {
    let top = u32::from(data.iter().copied().max().unwrap_or(0));
    (top + 1).max(4).next_power_of_two().trailing_zeros() as u8
}

/// The state of one compression: the dictionary, the bit writer and the code width.
struct Encoder {
    clear: u16,
    min_size: u8,
    /// Bits per code now.
    width: u8,
    /// Codes defined so far (the next code to assign).
    defined: usize,
    /// Hash table of the strings of two bytes or more: `key << 12 | code` per slot, 0 for an
    /// empty one (no string is given code 0: codes start past the clear and end codes).
    slots: Box<[u32; SLOTS]>,
    /// The extensions of the one-byte strings (the palette indices), indexed directly by
    /// `index << 8 | byte`: `epoch << 12 | code`, valid only when its epoch is the current
    /// one, so that a restart empties it by counting up instead of clearing 256 KB. Every code
    /// written starts the next look-up from a single byte: about a third of a movie frame's.
    /// Sized for the largest palette, so that a key (below 2^16) indexes it without a check.
    roots: Box<[u32; 1 << 16]>,
    /// Restarts so far, plus one (never 0, so a zeroed entry is never valid).
    epoch: u32,
    /// Extensions defined per code since the last clear (up to `SHORT_LIST` + 1), indexed by
    /// a code (below 2^12).
    extensions: Box<[u8; MAX_CODES]>,
    bits: u64,
    pending: u8,
    out: Vec<u8>,
}

impl Encoder {
    fn new(min_size: u8, out: Vec<u8>) -> Encoder {
        let clear = 1u16 << min_size;
        Encoder {
            clear,
            min_size,
            width: min_size + 1,
            defined: usize::from(clear) + 2,
            slots: zeroed_on_the_heap(),
            roots: zeroed_on_the_heap(),
            epoch: 1,
            extensions: zeroed_on_the_heap(),
            bits: 0,
            pending: 0,
            out,
        }
    }

    fn encode(mut self, data: &[u8]) -> Vec<u8> {
        self.put(self.clear);
        let Some((&first, rest)) = data.split_first() else {
            self.put(self.clear + 1);
            return self.finish();
        };
        let mut current = u16::from(first);
        for &byte in rest {
            let key = (u32::from(current) << 8) | u32::from(byte);
            let root = current < self.clear;
            let mut slot = 0;
            let known = if root {
                let entry = self.roots[key as u16 as usize];
                (entry >> 12 == self.epoch).then_some(entry & 0xFFF)
            } else {
                slot = slot_of(key);
                let mut entry = self.slots[slot];
                while entry != 0 && entry >> 12 != key {
                    slot = (slot + 1) % SLOTS;
                    entry = self.slots[slot];
                }
                (entry != 0).then_some(entry & 0xFFF)
            };
            if let Some(code) = known {
                current = code as u16;
                continue;
            }
            // A new string: its code is defined, the known prefix is written.
            let extended = &mut self.extensions[usize::from(current) % MAX_CODES];
            // Code 4096 is defined only to be cleared at once (the table restarts below): it
            // is never stored, so every stored code fits its 12 bits.
            if *extended != SHORT_LIST && self.defined < MAX_CODES {
                if root {
                    self.roots[key as u16 as usize] = self.epoch << 12 | self.defined as u32;
                } else {
                    self.slots[slot] = key << 12 | self.defined as u32;
                }
            }
            *extended = extended.saturating_add(1).min(SHORT_LIST + 1);
            self.defined += 1;
            self.put(current);
            if self.defined > 1 << self.width && self.width < 12 {
                self.width += 1;
            }
            if self.defined > MAX_CODES {
                self.put(self.clear);
                self.restart();
            }
            current = u16::from(byte);
        }
        self.put(current);
        // The decoder defines one more code on reading the last one; the end code is read at
        // the width that follows from it.
        if self.defined >= 1 << self.width && self.width < 12 {
            self.width += 1;
        }
        self.put(self.clear + 1);
        self.finish()
    }

    /// Empties the dictionary after a clear code.
    fn restart(&mut self) {
        self.slots.iter_mut().for_each(|k| *k = 0);
        self.epoch += 1;
        if self.epoch >= 1 << 20 {
            // The epoch would overflow its 20 bits: empty the table for real.
            self.roots.iter_mut().for_each(|r| *r = 0);
            self.epoch = 1;
        }
        self.extensions.iter_mut().for_each(|e| *e = 0);
        self.defined = usize::from(self.clear) + 2;
        self.width = self.min_size + 1;
    }

    /// Appends `code` at the current width, least significant bit first; four whole bytes
    /// are written at a time (the same bytes as one at a time).
    fn put(&mut self, code: u16) {
        self.bits |= u64::from(code) << self.pending;
        self.pending += self.width;
        if self.pending >= 32 {
            self.out.extend_from_slice(&(self.bits as u32).to_le_bytes());
            self.bits >>= 32;
            self.pending -= 32;
        }
    }

    /// The stream with its last bits padded to a whole byte.
    fn finish(mut self) -> Vec<u8> {
        while self.pending > 0 {
            self.out.push(self.bits as u8);
            self.bits >>= 8;
            self.pending = self.pending.saturating_sub(8);
        }
        self.out
    }
}

/// A zeroed array made on the heap (not built on the stack first: the root table is 256 KB).
fn zeroed_on_the_heap<T: Copy + Default, const N: usize>() -> Box<[T; N]> {
    vec![T::default(); N]
        .into_boxed_slice()
        .try_into()
        .unwrap_or_else(|_| unreachable!("N values"))
}

/// The first slot to look at for `key` (Fibonacci hashing: the top bits of the product with
/// 2³² / φ spread neighbouring keys over the table).
fn slot_of(key: u32) -> usize {
    (key.wrapping_mul(0x9E37_79B1) >> (32 - SLOTS.trailing_zeros())) as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The `gif` crate's own pre-compression (weezl's LZW): the reference.
    fn by_the_gif_crate(data: &[u8]) -> Vec<u8> {
        let mut frame = gif::Frame {
            width: 1,
            height: 1,
            buffer: std::borrow::Cow::Owned(data.to_vec()),
            ..gif::Frame::default()
        };
        frame.make_lzw_pre_encoded();
        frame.buffer.into_owned()
    }

    #[test]
    fn the_code_stream_is_the_gif_crates_byte_for_byte() {
        // Source: the gif crate (0.14, LZW by weezl 0.1), a general-purpose GIF library: for
        // empty and one-byte inputs, every minimum code size (largest index 0 to 255), runs
        // (long strings, the table filled and restarted many times), noise (short strings,
        // the table restarted often) and image-like rows, our bytes must equal its bytes.
        let mut rng = crate::numeric::Rng::new(17);
        let mut cases: Vec<Vec<u8>> = vec![vec![], vec![0], vec![255], vec![7, 7]];
        for top in [1u32, 2, 3, 4, 7, 8, 15, 16, 31, 63, 64, 127, 128, 200, 255] {
            for len in [2usize, 3, 100, 5000, 70_000] {
                cases.push((0..len).map(|_| (rng.uniform() * (top + 1) as f64) as u8).collect());
            }
        }
        cases.push(vec![42; 100_000]);
        cases.push((0..200_000).map(|i| ((i / 37) % 240) as u8).collect());
        cases.push(
            (0..512 * 300)
                .map(|i| {
                    let (x, y) = ((i % 512) as f64, (i / 512) as f64);
                    ((x * 0.05).sin() * (y * 0.03).cos() * 100.0 + 110.0 + rng.uniform() * 6.0) as u8
                })
                .collect(),
        );
        for (k, data) in cases.iter().enumerate() {
            assert_eq!(gif_lzw(data), by_the_gif_crate(data), "case {k}, {} bytes", data.len());
        }
    }
}
