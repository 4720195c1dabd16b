//! Mutations of a TIFF file that know where its parts lie: the header, the first IFD and its
//! entries, out-of-line tag values, and the strips or tiles of pixel data.
//!
//! The map of a file (`TiffMap`) is read from the pristine committed fixture, never from a mutated
//! copy, so this walker may trust what it reads. Each mutation returns a short description that
//! goes into a failure report together with the seed and the case number.
//!
//! Layout facts used here are from TIFF 6.0 (Adobe 1992) §2 "Image File Directory" (8-byte header,
//! 12-byte entries, field types 1–12) and the BigTIFF design note (Aware Systems; header 16 bytes,
//! 20-byte entries, 8-byte counts and offsets, types 16–18), REFERENCES.md §9.

use super::rng::Rng;

/// One IFD entry of the pristine file.
#[derive(Debug, Clone)]
pub struct Entry {
    /// Byte offset of the entry itself.
    pub at: usize,
    pub tag: u16,
    pub typ: u16,
    pub count: u64,
    /// Byte offset of the value-or-offset field.
    pub field_at: usize,
    /// The out-of-line values, when they do not fit in the field.
    pub data: Option<(usize, usize)>,
}

/// Where the parts of a pristine TIFF lie.
#[derive(Debug, Clone)]
pub struct TiffMap {
    pub big: bool,
    pub little: bool,
    pub ifd_at: usize,
    pub entries: Vec<Entry>,
    /// Offset of the next-IFD pointer after the entries.
    pub next_at: usize,
    /// Strips or tiles: (offset, byte count).
    pub chunks: Vec<(usize, usize)>,
}

/// Byte size of one value of a TIFF field type (0 for an unknown type).
pub fn type_size(t: u16) -> usize {
    match t {
        1 | 2 | 6 | 7 => 1,
        3 | 8 => 2,
        4 | 9 | 11 | 13 => 4,
        5 | 10 | 12 | 16 | 17 | 18 => 8,
        _ => 0,
    }
}

impl TiffMap {
    /// Reads an `n`-byte unsigned integer; 0 past the end (a mutated copy may be shorter).
    fn uint(&self, b: &[u8], at: usize, n: usize) -> u64 {
        let Some(s) = b.get(at..at + n) else {
            return 0;
        };
        let mut v = 0u64;
        if self.little {
            for (i, x) in s.iter().enumerate() {
                v |= u64::from(*x) << (8 * i);
            }
        } else {
            for x in s {
                v = (v << 8) | u64::from(*x);
            }
        }
        v
    }

    /// Writes `v` as an `n`-byte unsigned integer in the file's byte order.
    pub fn put(&self, b: &mut [u8], at: usize, n: usize, v: u64) {
        if at + n > b.len() {
            return;
        }
        for i in 0..n {
            let shift = if self.little { 8 * i } else { 8 * (n - 1 - i) };
            b[at + i] = (v >> shift) as u8;
        }
    }

    /// Reads the map of a well-formed TIFF (a committed fixture).
    pub fn read(b: &[u8]) -> TiffMap {
        let little = &b[..2] == b"II";
        assert!(little || &b[..2] == b"MM", "fixture is not a TIFF");
        let mut m = TiffMap {
            big: false,
            little,
            ifd_at: 0,
            entries: Vec::new(),
            next_at: 0,
            chunks: Vec::new(),
        };
        let magic = m.uint(b, 2, 2);
        m.big = magic == 43;
        let (count_n, entry_n, off_n) = if m.big { (8, 20, 8) } else { (2, 12, 4) };
        m.ifd_at = if m.big {
            m.uint(b, 8, 8)
        } else {
            m.uint(b, 4, 4)
        } as usize;
        let n = m.uint(b, m.ifd_at, count_n) as usize;
        for i in 0..n {
            let at = m.ifd_at + count_n + i * entry_n;
            let tag = m.uint(b, at, 2) as u16;
            let typ = m.uint(b, at + 2, 2) as u16;
            let count = m.uint(b, at + 4, off_n);
            let field_at = at + 4 + off_n;
            let bytes = type_size(typ) * count as usize;
            let data = (bytes > off_n).then(|| (m.uint(b, field_at, off_n) as usize, bytes));
            m.entries.push(Entry {
                at,
                tag,
                typ,
                count,
                field_at,
                data,
            });
        }
        m.next_at = m.ifd_at + count_n + n * entry_n;
        let offsets = m.values(b, 273).or_else(|| m.values(b, 324));
        let counts = m.values(b, 279).or_else(|| m.values(b, 325));
        if let (Some(o), Some(c)) = (offsets, counts) {
            m.chunks = o
                .into_iter()
                .zip(c)
                .map(|(o, c)| (o as usize, c as usize))
                .collect();
        }
        m
    }

    fn offset_size(&self) -> usize {
        if self.big {
            8
        } else {
            4
        }
    }

    /// All values of an integer tag of the pristine file.
    pub fn values(&self, b: &[u8], tag: u16) -> Option<Vec<u64>> {
        let e = self.entries.iter().find(|e| e.tag == tag)?;
        let size = type_size(e.typ);
        let start = e.data.map_or(e.field_at, |(o, _)| o);
        Some(
            (0..e.count as usize)
                .map(|i| self.uint(b, start + i * size, size))
                .collect(),
        )
    }

    fn entry(&self, tag: u16) -> Option<&Entry> {
        self.entries.iter().find(|e| e.tag == tag)
    }

    /// Sets value `index` of an integer tag (in place, keeping its type), if the tag is there.
    pub fn set_value(&self, b: &mut [u8], tag: u16, index: usize, v: u64) -> bool {
        let Some(e) = self.entry(tag) else {
            return false;
        };
        let size = type_size(e.typ);
        if size == 0 || index >= e.count as usize {
            return false;
        }
        let start = e.data.map_or(e.field_at, |(o, _)| o);
        self.put(b, start + index * size, size, v);
        true
    }

    /// The regions a truncation may cut into, named for the report.
    fn regions(&self, len: usize) -> Vec<(&'static str, usize, usize)> {
        let mut r = vec![
            ("header", 0, if self.big { 16 } else { 8 }),
            ("IFD", self.ifd_at, self.next_at + self.offset_size()),
        ];
        for e in &self.entries {
            if let Some((o, n)) = e.data {
                r.push(("tag values", o, o + n));
            }
        }
        for &(o, n) in &self.chunks {
            r.push(("pixel data", o, o + n));
        }
        r.retain(|&(_, a, z)| a < z && z <= len);
        r
    }
}

/// Values that break sizes and offsets: zero, one, edges of the integer widths, the file length.
fn extreme(rng: &mut Rng, len: usize, width: usize) -> u64 {
    let max = if width >= 8 {
        u64::MAX
    } else {
        (1u64 << (8 * width)) - 1
    };
    let v = match rng.below(14) {
        0 => 0,
        1 => 1,
        2 => max,
        3 => max >> 1,
        4 => (max >> 1) + 1,
        5 => len as u64,
        6 => len as u64 + 1,
        7 => (len as u64).saturating_sub(1),
        8 => 100_000,
        9 => 65_535,
        10 => 65_536,
        11 => 30_000,
        12 => rng.next() & max,
        _ => 1 << rng.below(8 * width as u64),
    };
    v & max
}

/// The tags whose values the reader depends on (TIFF 6.0 baseline and GeoTIFF 1.1).
const TAGS: [u16; 23] = [
    256, 257, 258, 259, 262, 273, 277, 278, 279, 284, 317, 322, 323, 324, 325, 339, 33550, 33922,
    34264, 34735, 34736, 34737, 42113,
];

/// Applies one random mutation to `b` and says what it did.
pub fn mutate(rng: &mut Rng, map: &TiffMap, b: &mut Vec<u8>) -> String {
    let len = b.len();
    let off_n = map.offset_size();
    match rng.below(16) {
        0 => {
            let n = 1 + rng.below(8) as usize;
            let mut at = Vec::new();
            for _ in 0..n {
                let i = rng.below(len as u64) as usize;
                let bit = rng.below(8);
                b[i] ^= 1 << bit;
                at.push(format!("{i}.{bit}"));
            }
            format!("bit flips at {}", at.join(","))
        }
        1 => {
            let i = rng.below(len as u64) as usize;
            let v = rng.next() as u8;
            b[i] = v;
            format!("byte {i} := {v:#04x}")
        }
        2 => {
            // Truncation inside (or at an edge of) one region.
            let regions = map.regions(len);
            if regions.is_empty() {
                let cut = rng.below(len as u64) as usize;
                b.truncate(cut);
                return format!("truncated at {cut}");
            }
            let (name, a, z) = regions[rng.below(regions.len() as u64) as usize];
            let cut = match rng.below(4) {
                0 => a,
                1 => z.min(len - 1),
                _ => a + rng.below((z - a) as u64) as usize,
            };
            b.truncate(cut);
            format!("truncated at {cut} (in the {name} {a}..{z})")
        }
        3 | 4 => {
            // One field of one entry: tag, type, count or value/offset.
            let e = &map.entries[rng.below(map.entries.len() as u64) as usize];
            let (field, at, width) = match rng.below(4) {
                0 => ("tag", e.at, 2),
                1 => ("type", e.at + 2, 2),
                2 => ("count", e.at + 4, off_n),
                _ => ("value/offset", e.field_at, off_n),
            };
            let v = if field == "type" {
                rng.below(20)
            } else {
                extreme(rng, len, width)
            };
            map.put(b, at, width, v);
            format!("entry of tag {} {field} := {v}", e.tag)
        }
        5 | 6 => {
            // A value of a tag the reader depends on.
            let tag = TAGS[rng.below(TAGS.len() as u64) as usize];
            let Some(e) = map.entry(tag) else {
                return mutate(rng, map, b);
            };
            let width = type_size(e.typ).max(1);
            let index = rng.below(e.count.clamp(1, 8)) as usize;
            let v = extreme(rng, len, width);
            if width == 8 && (e.typ == 12 || e.typ == 11) {
                // Floats: a non-number, an infinity, a huge or a tiny value.
                let f = [f64::NAN, f64::INFINITY, -1e308, 0.0, 1e-310, -5.0][rng.below(6) as usize];
                let start = e.data.map_or(e.field_at, |(o, _)| o) + index * 8;
                map.put(b, start, 8, f.to_bits());
                return format!("tag {tag} value {index} := {f}");
            }
            map.set_value(b, tag, index, v);
            format!("tag {tag} value {index} := {v}")
        }
        7 => {
            // Huge (or zero) declared dimensions, both at once.
            let (w, h) = [
                (100_000, 100_000),
                (30_000, 30_000),
                (0xFFFF_FFFF, 0xFFFF_FFFF),
                (1, 0xFFFF_FFFF),
                (65_535, 65_535),
                (46_341, 46_341),
                (0, 7),
            ][rng.below(7) as usize];
            map.set_value(b, 256, 0, w);
            map.set_value(b, 257, 0, h);
            if rng.below(2) == 0 {
                map.set_value(b, 278, 0, h);
            }
            format!("dimensions := {w} x {h}")
        }
        8 => {
            // Swapped byte order marker, the rest left as it was.
            let (from, to) = if map.little {
                (b"II", b"MM")
            } else {
                (b"MM", b"II")
            };
            if b.len() < 2 {
                return "(too short to swap the byte order)".into();
            }
            b[..2].copy_from_slice(to);
            format!(
                "byte order {} -> {}",
                String::from_utf8_lossy(from),
                String::from_utf8_lossy(to)
            )
        }
        9 => {
            // The first-IFD offset, the entry count or the next-IFD pointer.
            match rng.below(3) {
                0 => {
                    let (at, w) = if map.big { (8, 8) } else { (4, 4) };
                    let v = if rng.below(3) == 0 {
                        map.ifd_at as u64 + 1
                    } else {
                        extreme(rng, len, w)
                    };
                    map.put(b, at, w, v);
                    format!("first IFD offset := {v}")
                }
                1 => {
                    let w = if map.big { 8 } else { 2 };
                    let v = match rng.below(3) {
                        0 => map.entries.len() as u64 + 1 + rng.below(4),
                        1 => map.entries.len().saturating_sub(1 + rng.below(3) as usize) as u64,
                        _ => extreme(rng, len, w),
                    };
                    map.put(b, map.ifd_at, w, v);
                    format!("IFD entry count := {v}")
                }
                _ => {
                    let v = if rng.below(2) == 0 {
                        map.ifd_at as u64
                    } else {
                        extreme(rng, len, off_n)
                    };
                    map.put(b, map.next_at, off_n, v);
                    format!("next IFD offset := {v}")
                }
            }
        }
        10 | 11 => {
            // Strip or tile sizes and offsets that lie.
            if map.chunks.is_empty() {
                return mutate(rng, map, b);
            }
            let i = rng.below(map.chunks.len() as u64) as usize;
            let (o, n) = map.chunks[i];
            let (count_tag, offset_tag) = if map.entry(279).is_some() {
                (279, 273)
            } else {
                (325, 324)
            };
            match rng.below(5) {
                0 => {
                    let v = [0, 1, n as u64 / 2, n as u64 * 2, n as u64 + 1, 0xFFFF_FFFF]
                        [rng.below(6) as usize];
                    map.set_value(b, count_tag, i, v);
                    format!("byte count of chunk {i} := {v} (was {n})")
                }
                1 => {
                    let v = [0, 1, len as u64, len as u64 - 1, 0xFFFF_FFF0, o as u64 + 1]
                        [rng.below(6) as usize];
                    map.set_value(b, offset_tag, i, v);
                    format!("offset of chunk {i} := {v} (was {o})")
                }
                2 => {
                    // Damage inside the (compressed) stream.
                    let k = 1 + rng.below(4);
                    for _ in 0..k {
                        let at = o + rng.below(n.max(1) as u64) as usize;
                        if at < b.len() {
                            b[at] = rng.next() as u8;
                        }
                    }
                    format!("{k} byte(s) changed inside chunk {i}")
                }
                3 => {
                    // A chunk that points at the IFD, or at the header.
                    let v = if rng.below(2) == 0 { map.ifd_at } else { 0 } as u64;
                    map.set_value(b, offset_tag, i, v);
                    format!("offset of chunk {i} := {v} (IFD or header)")
                }
                _ => {
                    // Every chunk's byte count scaled by the same lie.
                    let f = [0u64, 2, 1000][rng.below(3) as usize];
                    for (j, &(_, n)) in map.chunks.iter().enumerate() {
                        map.set_value(b, count_tag, j, n as u64 * f);
                    }
                    format!("all chunk byte counts x {f}")
                }
            }
        }
        12 => bomb(rng, map, b),
        13 => {
            // Two entries swapped (tags out of order) or one entry repeated over its neighbour.
            let n = map.entries.len();
            let i = rng.below(n as u64 - 1) as usize;
            let size = if map.big { 20 } else { 12 };
            let (a, z) = (map.entries[i].at, map.entries[i + 1].at);
            if z + size > b.len() {
                return format!("(entries {i} and {} are cut off)", i + 1);
            }
            if rng.below(2) == 0 {
                for k in 0..size {
                    b.swap(a + k, z + k);
                }
                format!("entries {i} and {} swapped", i + 1)
            } else {
                b.copy_within(a..a + size, z);
                format!("entry {i} repeated over entry {}", i + 1)
            }
        }
        14 => {
            // A run of bytes copied over another place (structure appearing where data should be).
            let n = 1 + rng.below(32) as usize;
            let from = rng.below(len.saturating_sub(n).max(1) as u64) as usize;
            let to = rng.below(len.saturating_sub(n).max(1) as u64) as usize;
            let end = (from + n).min(len);
            let to_end = (to + end - from).min(len);
            let chunk: Vec<u8> = b[from..from + (to_end - to)].to_vec();
            b[to..to_end].copy_from_slice(&chunk);
            format!("{n} bytes copied from {from} to {to}")
        }
        _ => {
            // Wrong field type for a tag the reader depends on.
            let tag = TAGS[rng.below(TAGS.len() as u64) as usize];
            let Some(e) = map.entry(tag) else {
                return mutate(rng, map, b);
            };
            let t = [1u16, 2, 3, 4, 5, 7, 11, 12, 16, 0, 13, 99][rng.below(12) as usize];
            map.put(b, e.at + 2, 2, u64::from(t));
            format!("tag {tag} type {} -> {t}", e.typ)
        }
    }
}

/// A compressed stream that lies about its size: a small DEFLATE or LZW stream (whichever the
/// file uses) that expands to far more than the strip holds, appended and pointed to by the first
/// chunk; sometimes with dimensions declared to match what it expands to.
fn bomb(rng: &mut Rng, map: &TiffMap, b: &mut Vec<u8>) -> String {
    let compression = map
        .values(b, 259)
        .and_then(|v| v.first().copied())
        .unwrap_or(1);
    let expands_to = [1usize << 20, 8 << 20][rng.below(2) as usize];
    let lzw = match compression {
        8 | 32946 => false,
        5 => true,
        _ => return mutate(rng, map, b),
    };
    let stream = bomb_stream(lzw, expands_to);
    if map.chunks.is_empty() {
        return mutate(rng, map, b);
    }
    let at = b.len();
    b.extend_from_slice(stream);
    let (count_tag, offset_tag) = if map.entry(279).is_some() {
        (279, 273)
    } else {
        (325, 324)
    };
    map.set_value(b, offset_tag, 0, at as u64);
    map.set_value(b, count_tag, 0, stream.len() as u64);
    let mut what = format!(
        "chunk 0 := a {}-byte stream expanding to {expands_to} bytes",
        stream.len()
    );
    if rng.below(2) == 0 {
        let (w, h) =
            [(100_000u64, 100_000u64), (4096, 4096), (30_000, 30_000)][rng.below(3) as usize];
        map.set_value(b, 256, 0, w);
        map.set_value(b, 257, 0, h);
        map.set_value(b, 278, 0, h);
        what.push_str(&format!(", dimensions := {w} x {h}"));
    }
    what
}

/// A stream of `n` zero bytes, compressed once per process (DEFLATE in a zlib wrapper, as TIFF
/// compression 8 stores it, or TIFF's MSB-first LZW).
fn bomb_stream(lzw: bool, n: usize) -> &'static [u8] {
    use std::sync::OnceLock;
    static STREAMS: OnceLock<Vec<(bool, usize, Vec<u8>)>> = OnceLock::new();
    let all = STREAMS.get_or_init(|| {
        let mut v = Vec::new();
        for n in [1usize << 20, 8 << 20] {
            let zeros = vec![0u8; n];
            let deflate = {
                use std::io::Write;
                let mut e =
                    flate2::write::ZlibEncoder::new(Vec::new(), flate2::Compression::best());
                e.write_all(&zeros).unwrap();
                e.finish().unwrap()
            };
            let lzw = weezl::encode::Encoder::with_tiff_size_switch(weezl::BitOrder::Msb, 8)
                .encode(&zeros)
                .unwrap();
            v.push((false, n, deflate));
            v.push((true, n, lzw));
        }
        v
    });
    all.iter()
        .find(|(l, m, _)| *l == lzw && *m == n)
        .map(|(_, _, s)| s.as_slice())
        .unwrap()
}
