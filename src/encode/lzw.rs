//! Palette indices -> the LZW code stream of a GIF image (variable-length codes, least significant
//! bit first), as the `gif` crate's `write_lzw_pre_encoded_frame` takes it.
//!
//! The method is LZW (Welch 1984, from memory) with the GIF89a conventions (CompuServe 1990,
//! REFERENCES.md §10):
//! codes start one bit wider than the minimum code size; code `1 << min` clears the table and the
//! next one ends the data; the width grows when the next code to assign no longer fits, up to 12
//! bits; when all 4096 codes are taken a clear code starts a fresh table. The stream opens with a
//! clear code. These are the choices of the `weezl` encoder inside the `gif` crate too; the two
//! streams can differ by a few table entries (weezl's table may skip an entry as it grows) and
//! decode to the same pixels. This one keeps its string table in a small open-addressing hash
//! (32 kB, in the first-level cache) instead of a tree, which is faster on dithered frames.

/// Hash slots (a power of two, at least twice the 4096 codes so probes stay short).
const SLOTS_LOG2: u32 = 13;
const SLOTS: usize = 1 << SLOTS_LOG2;
/// Codes are at most 12 bits wide.
const MAX_CODES: u32 = 1 << 12;

/// A reusable GIF LZW encoder; see the module doc.
///
/// # Allocations
/// 32 kB of hash table plus the output buffer, kept from image to image.
pub struct LzwEncoder {
    /// Slot = (prefix code << 8 | byte) << 12 | code; 0 = empty (codes are never 0).
    slots: Box<[u32; SLOTS]>,
    out: Vec<u8>,
}

impl Default for LzwEncoder {
    fn default() -> Self {
        Self::new()
    }
}

/// Bit writer: codes are packed from the least significant bit up.
struct Bits<'a> {
    acc: u64,
    n: u32,
    out: &'a mut Vec<u8>,
}

impl Bits<'_> {
    #[inline(always)]
    fn put(&mut self, code: u32, width: u32) {
        self.acc |= (code as u64) << self.n;
        self.n += width;
        if self.n >= 32 {
            self.out.extend_from_slice(&(self.acc as u32).to_le_bytes());
            self.acc >>= 32;
            self.n -= 32;
        }
    }
    fn finish(mut self) {
        while self.n > 0 {
            self.out.push(self.acc as u8);
            self.acc >>= 8;
            self.n = self.n.saturating_sub(8);
        }
    }
}

/// Hash slot of (prefix code, byte): the byte shifted above the low bits of the code, xor the
/// code. Two one-cycle operations keep the lookup chain from byte to byte short; for one prefix,
/// every byte lands in a different slot.
#[inline(always)]
fn slot_of(code: u32, byte: u32) -> usize {
    (((byte << (SLOTS_LOG2 - 8)) ^ code) as usize) & (SLOTS - 1)
}

impl LzwEncoder {
    /// A new encoder.
    pub fn new() -> Self {
        LzwEncoder {
            slots: Box::new([0; SLOTS]),
            out: Vec::new(),
        }
    }

    /// Encodes `data` with `min_code_size` (2–8) and returns the minimum code size byte followed by
    /// the code stream (not yet split into sub-blocks).
    ///
    /// # Panics
    /// If `min_code_size` is outside 2–8 or a value of `data` is not below `1 << min_code_size`
    /// (a bug in the caller: the palette size fixes both).
    pub fn encode(&mut self, data: &[u8], min_code_size: u8) -> &[u8] {
        assert!(
            (2..=8).contains(&min_code_size),
            "GIF minimum code size is 2 to 8"
        );
        let limit = 1u32 << min_code_size;
        if min_code_size < 8 {
            assert!(
                data.iter().all(|&v| (v as u32) < limit),
                "index beyond the colour table"
            );
        }
        let clear = limit;
        let end = clear + 1;
        let first_width = min_code_size as u32 + 1;
        self.out.clear();
        self.out.reserve(data.len() / 2 + 16);
        self.out.push(min_code_size);
        self.slots.fill(0);
        let slots = &mut *self.slots;
        let mut bits = Bits {
            acc: 0,
            n: 0,
            out: &mut self.out,
        };
        bits.put(clear, first_width);
        let Some((&head, rest)) = data.split_first() else {
            bits.put(end, first_width);
            bits.finish();
            return &self.out;
        };
        let mut width = first_width;
        let mut next = end + 1;
        let mut cur = head as u32;
        'input: for &byte in rest {
            let key = (cur << 8) | byte as u32;
            let mut s = slot_of(cur, byte as u32);
            loop {
                let v = slots[s];
                if v == 0 {
                    break;
                }
                if v >> 12 == key {
                    cur = v & 0xFFF;
                    continue 'input;
                }
                s = (s + 1) & (SLOTS - 1);
            }
            // `cur + byte` is new: send `cur`, remember the longer string, start again at `byte`.
            bits.put(cur, width);
            if next == MAX_CODES {
                bits.put(clear, width);
                slots.fill(0);
                next = end + 1;
                width = first_width;
            } else {
                slots[s] = (key << 12) | next;
                next += 1;
                if next > (1 << width) && width < 12 {
                    width += 1;
                }
            }
            cur = byte as u32;
        }
        bits.put(cur, width);
        // The decoder adds one more entry on reading `cur`; the end code may need the wider width.
        if next >= (1 << width) && width < 12 {
            width += 1;
        }
        bits.put(end, width);
        bits.finish();
        &self.out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The `gif` crate's own encoder (weezl inside), which picks the minimum code size from the
    /// largest value present.
    fn reference(data: &[u8]) -> Vec<u8> {
        let mut f = gif::Frame {
            width: data.len() as u16,
            height: 1,
            buffer: std::borrow::Cow::Borrowed(data),
            ..Default::default()
        };
        f.make_lzw_pre_encoded();
        f.buffer.into_owned()
    }

    /// Wraps `stream` as the one image of a `width` x `height` GIF and decodes it with the `gif`
    /// crate's decoder.
    fn decode(stream: &[u8], width: u16, height: u16) -> Vec<u8> {
        let mut file = Vec::new();
        {
            let mut e = gif::Encoder::new(&mut file, width, height, &[0u8; 768]).unwrap();
            let f = gif::Frame {
                width,
                height,
                buffer: std::borrow::Cow::Borrowed(stream),
                ..Default::default()
            };
            e.write_lzw_pre_encoded_frame(&f).unwrap();
        }
        let mut opts = gif::DecodeOptions::new();
        opts.set_color_output(gif::ColorOutput::Indexed);
        let mut dec = opts.read_info(file.as_slice()).unwrap();
        let f = dec.read_next_frame().unwrap().unwrap();
        f.buffer.to_vec()
    }

    fn lcg(seed: &mut u32) -> u32 {
        *seed = seed.wrapping_mul(1664525).wrapping_add(1013904223);
        *seed >> 8
    }

    #[test]
    fn decodes_back_and_is_no_larger_than_the_gif_crate() {
        let mut enc = LzwEncoder::new();
        let mut seed = 7u32;
        let mut cases: Vec<Vec<u8>> =
            vec![vec![0], vec![3, 3], vec![255; 40000], (0..=255u8).collect()];
        // Noise over 256 values: many table resets at 4096 codes.
        cases.push((0..60000).map(|_| lcg(&mut seed) as u8).collect());
        // Smooth ramps with sparse noise: long strings, width growth up to 12 bits.
        cases.push(
            (0..65000u32)
                .map(|i| ((i / 37) as u8).wrapping_add((lcg(&mut seed) % 3) as u8))
                .collect(),
        );
        // Small alphabets: minimum code sizes 2 and 4.
        cases.push((0..30000).map(|_| (lcg(&mut seed) % 4) as u8).collect());
        cases.push((0..30000).map(|_| (lcg(&mut seed) % 11) as u8).collect());
        // Lengths around the width steps (minimum code size 4: steps after 11, 27, 59 ... codes).
        for n in [
            2usize, 3, 12, 13, 14, 28, 29, 30, 60, 61, 62, 250, 509, 510, 511, 512,
        ] {
            cases.push((0..n).map(|_| (lcg(&mut seed) % 16) as u8).collect());
        }
        for data in &cases {
            let want = reference(data);
            let got = enc.encode(data, want[0]).to_vec();
            assert_eq!(got[0], want[0]);
            // Check: round trip through an independent GIF89a decoder (the `gif` crate's); exact.
            assert!(
                decode(&got, data.len() as u16, 1) == *data,
                "{} values, min size {}",
                data.len(),
                want[0]
            );
            // Same rules as the gif crate's encoder; it may differ by a few table entries (it can
            // drop an entry when a node grows), so allow no more than 0.1 % + 4 bytes over it.
            assert!(
                got.len() <= want.len() + want.len() / 1000 + 4,
                "{} values: {} bytes vs {}",
                data.len(),
                got.len(),
                want.len()
            );
        }
    }

    #[test]
    fn wider_code_size_than_needed_still_decodes() {
        // A 4-colour image written with 8-bit codes (as for a 256-entry table) decodes back; GIF89a
        // allows any minimum code size the colour table supports.
        let data: Vec<u8> = (0..5000u32).map(|i| (i * i % 7 % 4) as u8).collect();
        let mut enc = LzwEncoder::new();
        let stream = enc.encode(&data, 8).to_vec();
        assert_eq!(decode(&stream, 100, 50), data);
    }
}
