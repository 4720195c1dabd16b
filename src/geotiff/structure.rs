//! TIFF header and first IFD -> checked against the file's length, before the decoder allocates.
//!
//! The `tiff` crate sizes its buffers from what a file declares: a tag's value count, the image's
//! width and height. A damaged or hostile header (a count of 100 million, a 30 000 x 30 000
//! raster in a 600-byte file) would have it reserve gigabytes before it finds out the bytes are
//! not there. This walk reads only the header, the first IFD's entries and the strip or tile
//! tables, with bounded reads, and refuses a file when
//! - the IFD or a tag's values would lie past the end of the file,
//! - a strip or tile lies past the end of the file, or
//! - the declared raster is larger than its stored bytes could expand to with the file's
//!   compression (the largest expansion a stream can have, `max_expansion`).
//!
//! So every buffer the decoder makes is bounded by a fixed multiple of the file's length, and a
//! declared 100 000 x 100 000 grid is refused before anything is reserved for it.
//!
//! Layout per TIFF 6.0 (Adobe 1992) §2: 8-byte header `II|MM, 42, first IFD offset`; IFD = SHORT
//! entry count, 12-byte entries `{tag, type, count, value or offset}`, next IFD offset. BigTIFF
//! (Aware Systems design note): magic 43, 16-byte header, 8-byte entry count, 20-byte entries with
//! 8-byte counts and offsets (REFERENCES.md §9).

use std::io::{Read, Seek, SeekFrom};

/// Most IFD entries accepted: a classic TIFF cannot hold more (the count is a SHORT), and a
/// GeoTIFF carries a few dozen; a BigTIFF claiming more is damaged.
const MAX_ENTRIES: u64 = 65_535;

/// Most strips or tiles whose table is read here (2^24: a 4 GiB raster in 256-byte strips).
const MAX_CHUNKS: u64 = 1 << 24;

/// What the walk learnt, for the caller's log.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Checked {
    /// Bytes of pixel data the strips or tiles hold.
    pub(super) stored_bytes: u64,
    /// Bytes the declared raster needs decoded (all bands).
    pub(super) declared_bytes: u64,
}

/// Largest factor by which a compressed stream can expand, per TIFF Compression code.
///
/// - 1 (none): 1.
/// - 32773 PackBits: a 2-byte run code gives at most 128 bytes (TIFF 6.0 §9), so 64.
/// - 8 and 32946 DEFLATE: 1032, the largest ratio of the format (zlib technical details,
///   zlib.net/zlib_tech.html; from memory).
/// - 5 LZW: codes are at least 9 bits and a code stands for at most 4096 bytes (the table holds
///   4096 entries, TIFF 6.0 §13), so under 4096 · 8 / 9 < 3641; 4096 is used.
/// - Anything else: the largest of these; the layout check refuses those codes with its own
///   message afterwards.
fn max_expansion(compression: u64) -> u64 {
    match compression {
        1 => 1,
        32773 => 64,
        8 | 32946 => 1032,
        _ => 4096,
    }
}

/// The name of a tag in messages.
fn tag_name(tag: u16) -> String {
    let name = match tag {
        256 => "ImageWidth",
        257 => "ImageLength",
        258 => "BitsPerSample",
        259 => "Compression",
        273 => "StripOffsets",
        277 => "SamplesPerPixel",
        278 => "RowsPerStrip",
        279 => "StripByteCounts",
        322 => "TileWidth",
        323 => "TileLength",
        324 => "TileOffsets",
        325 => "TileByteCounts",
        339 => "SampleFormat",
        33550 => "ModelPixelScale",
        33922 => "ModelTiepoint",
        34264 => "ModelTransformation",
        34735 => "GeoKeyDirectory",
        34736 => "GeoDoubleParams",
        34737 => "GeoAsciiParams",
        42113 => "GDAL_NODATA",
        _ => return format!("tag {tag}"),
    };
    format!("{name} (tag {tag})")
}

/// Bytes per value of a TIFF field type; None for a type TIFF does not define (the decoder skips
/// such entries).
fn type_size(t: u16) -> Option<u64> {
    Some(match t {
        1 | 2 | 6 | 7 => 1,
        3 | 8 => 2,
        4 | 9 | 11 | 13 => 4,
        5 | 10 | 12 | 16 | 17 | 18 => 8,
        _ => return None,
    })
}

/// Tags that size the raster or locate its pixels: their field types are checked, since the
/// decoder accepts more types for them than TIFF allows (an UNDEFINED ImageLength was read as a
/// byte; found by the mutation test).
const SIZE_TAGS: [u16; 11] = [256, 257, 258, 273, 277, 278, 279, 322, 323, 324, 325];

/// Whether a field type holds unsigned whole numbers (BYTE, SHORT, LONG, LONG8).
fn is_integer(t: u16) -> bool {
    matches!(t, 1 | 3 | 4 | 16)
}

/// One IFD entry as stored.
#[derive(Debug, Clone, Copy)]
struct Entry {
    tag: u16,
    typ: u16,
    count: u64,
    /// The value-or-offset field, as raw bytes (4 or 8 used).
    field: [u8; 8],
}

/// Reads integers in the file's byte order.
struct Walker<'a, R> {
    r: &'a mut R,
    len: u64,
    little: bool,
    big: bool,
}

impl<R: Read + Seek> Walker<'_, R> {
    fn bytes<const N: usize>(&mut self, at: u64) -> Result<[u8; N], String> {
        if at.checked_add(N as u64).is_none_or(|end| end > self.len) {
            return Err(truncated(at, self.len));
        }
        let mut b = [0u8; N];
        self.r
            .seek(SeekFrom::Start(at))
            .and_then(|_| self.r.read_exact(&mut b))
            .map_err(|e| format!("cannot read the TIFF structure ({e}); copy the file again"))?;
        Ok(b)
    }

    fn uint(&self, b: &[u8]) -> u64 {
        let mut v = 0u64;
        if self.little {
            for (i, x) in b.iter().enumerate() {
                v |= u64::from(*x) << (8 * i);
            }
        } else {
            for x in b {
                v = (v << 8) | u64::from(*x);
            }
        }
        v
    }

    fn offset_size(&self) -> u64 {
        if self.big {
            8
        } else {
            4
        }
    }

    /// All values of an integer entry (inline or out of line), at most `max` of them.
    fn values(&mut self, e: &Entry, max: u64) -> Result<Vec<u64>, String> {
        let size = type_size(e.typ).unwrap_or(1);
        if e.count > max {
            return Err(format!(
                "{} declares {} values, more than a GeoTIFF grid can use; the file is damaged, export \
                 or copy it again",
                tag_name(e.tag),
                e.count
            ));
        }
        let n = e.count as usize;
        let inline = e.count * size <= self.offset_size();
        let raw: Vec<u8> = if inline {
            e.field[..(e.count * size) as usize].to_vec()
        } else {
            let at = self.uint(&e.field[..self.offset_size() as usize]);
            let mut buf = vec![0u8; (e.count * size) as usize];
            self.r
                .seek(SeekFrom::Start(at))
                .and_then(|_| self.r.read_exact(&mut buf))
                .map_err(|_| truncated(at, self.len))?;
            buf
        };
        // Only the size tags are read here, and `check_size_types` has let through unsigned
        // types alone.
        let mut out = Vec::with_capacity(n);
        for v in raw.chunks_exact(size as usize) {
            out.push(self.uint(v));
        }
        Ok(out)
    }
}

fn truncated(at: u64, len: u64) -> String {
    format!(
        "the TIFF structure points to byte {at}, past the end of the file ({len} bytes): the file is \
         truncated or damaged; copy or export it again"
    )
}

/// Walks the header and first IFD of a TIFF of `len` bytes and checks that what it declares fits
/// in the file (see the module doc). The reader is left at an unspecified position.
///
/// # Errors
/// A message naming the tag or part at fault and the fix. A file that is not a TIFF at all gets
/// the message of the decoder instead (`Ok` with nothing checked), so there is one wording for it.
///
/// # Allocations
/// The IFD entries (at most 65 535) and the strip or tile tables, all bounded by `len`.
pub(super) fn check<R: Read + Seek>(r: &mut R, len: u64) -> Result<Option<Checked>, String> {
    let mut w = Walker {
        r,
        len,
        little: true,
        big: false,
    };
    let Ok(head) = w.bytes::<4>(0) else {
        return Ok(None);
    };
    w.little = match &head[..2] {
        b"II" => true,
        b"MM" => false,
        _ => return Ok(None),
    };
    w.big = match w.uint(&head[2..4]) {
        42 => false,
        43 => true,
        _ => return Ok(None),
    };
    let first_ifd = if w.big {
        let b = w.bytes::<12>(4)?;
        let (offset_size, zero) = (w.uint(&b[..2]), w.uint(&b[2..4]));
        if offset_size != 8 || zero != 0 {
            return Err(format!(
                "BigTIFF header states {offset_size}-byte offsets (8 are required); the file is damaged, \
                 copy or export it again"
            ));
        }
        w.uint(&b[4..12])
    } else {
        let b = w.bytes::<4>(4)?;
        w.uint(&b)
    };
    let entries = read_entries(&mut w, first_ifd)?;
    check_values(&mut w, &entries)?;
    check_size_types(&entries)?;
    image_budget(&mut w, &entries).map(Some)
}

fn read_entries<R: Read + Seek>(w: &mut Walker<R>, at: u64) -> Result<Vec<Entry>, String> {
    let (count_size, entry_size) = if w.big { (8, 20) } else { (2, 12) };
    let count = if w.big {
        let b = w.bytes::<8>(at)?;
        w.uint(&b)
    } else {
        let b = w.bytes::<2>(at)?;
        w.uint(&b)
    };
    let room = w.len.saturating_sub(at + count_size) / entry_size;
    if count == 0 || count > MAX_ENTRIES || count > room {
        return Err(format!(
            "the first image directory (IFD at byte {at}) declares {count} entries, but {} fit in \
             the file; the file is damaged or truncated, copy or export it again",
            room.min(MAX_ENTRIES)
        ));
    }
    let mut out = Vec::with_capacity(count as usize);
    for i in 0..count {
        let e = at + count_size + i * entry_size;
        let entry = if w.big {
            let b = w.bytes::<20>(e)?;
            Entry {
                tag: w.uint(&b[0..2]) as u16,
                typ: w.uint(&b[2..4]) as u16,
                count: w.uint(&b[4..12]),
                field: b[12..20].try_into().unwrap_or([0; 8]),
            }
        } else {
            let b = w.bytes::<12>(e)?;
            let mut field = [0u8; 8];
            field[..4].copy_from_slice(&b[8..12]);
            Entry {
                tag: w.uint(&b[0..2]) as u16,
                typ: w.uint(&b[2..4]) as u16,
                count: w.uint(&b[4..8]),
                field,
            }
        };
        out.push(entry);
    }
    Ok(out)
}

/// Every entry's values must lie inside the file.
fn check_values<R: Read + Seek>(w: &mut Walker<R>, entries: &[Entry]) -> Result<(), String> {
    for e in entries {
        let Some(size) = type_size(e.typ) else {
            continue;
        };
        let Some(bytes) = e.count.checked_mul(size) else {
            return Err(past_end(e, u64::MAX, 0, w.len));
        };
        if bytes <= w.offset_size() {
            continue;
        }
        let at = w.uint(&e.field[..w.offset_size() as usize]);
        if at.checked_add(bytes).is_none_or(|end| end > w.len) {
            return Err(past_end(e, bytes, at, w.len));
        }
    }
    Ok(())
}

/// TIFF 6.0 §8 gives the size and layout tags SHORT or LONG values (BigTIFF adds LONG8 for the
/// offsets and byte counts); BYTE is let through as a harmless widening. Any other type is refused.
fn check_size_types(entries: &[Entry]) -> Result<(), String> {
    for e in entries.iter().filter(|e| SIZE_TAGS.contains(&e.tag)) {
        if !matches!(e.typ, 1 | 3 | 4 | 16) {
            return Err(format!(
                "{} has field type {}, where TIFF allows only whole numbers (SHORT or LONG); the file \
                 is damaged, export or copy it again",
                tag_name(e.tag),
                e.typ
            ));
        }
    }
    Ok(())
}

fn past_end(e: &Entry, bytes: u64, at: u64, len: u64) -> String {
    format!(
        "{} declares {} values ({bytes} bytes) at byte {at}, which runs past the end of the file \
         ({len} bytes); the file is damaged or truncated, copy or export it again",
        tag_name(e.tag),
        e.count
    )
}

/// The first value of a tag, if present and of an integer type.
fn first<R: Read + Seek>(
    w: &mut Walker<R>,
    entries: &[Entry],
    tag: u16,
) -> Result<Option<u64>, String> {
    match entries.iter().find(|e| e.tag == tag) {
        Some(e) if is_integer(e.typ) => Ok(w.values(e, MAX_CHUNKS)?.first().copied()),
        _ => Ok(None),
    }
}

/// The declared raster must fit what its strips or tiles can expand to, and they must lie in the
/// file. Entries the decoder will refuse for other reasons (missing, of a wrong type) are left to
/// it: this check only bounds what it would allocate.
fn image_budget<R: Read + Seek>(w: &mut Walker<R>, entries: &[Entry]) -> Result<Checked, String> {
    let width = first(w, entries, 256)?.unwrap_or(0);
    let height = first(w, entries, 257)?.unwrap_or(0);
    let bands = first(w, entries, 277)?.unwrap_or(1).max(1);
    let bits = first(w, entries, 258)?.unwrap_or(1).max(1);
    let compression = first(w, entries, 259)?.unwrap_or(1);
    let declared =
        u128::from(width) * u128::from(height) * u128::from(bands) * u128::from(bits) / 8;
    let tiled = entries.iter().any(|e| e.tag == 324);
    let (offsets_tag, counts_tag) = if tiled { (324, 325) } else { (273, 279) };
    let find = |tag: u16| entries.iter().find(|e| e.tag == tag).copied();
    let (offsets, counts) = match (find(offsets_tag), find(counts_tag)) {
        (Some(o), Some(c)) if is_integer(o.typ) && is_integer(c.typ) => {
            (w.values(&o, MAX_CHUNKS)?, w.values(&c, MAX_CHUNKS)?)
        }
        // No table (or one of a wrong type): the decoder refuses the file before it reserves
        // the raster.
        _ => {
            return Ok(Checked {
                stored_bytes: 0,
                declared_bytes: u64::try_from(declared).unwrap_or(u64::MAX),
            })
        }
    };
    let mut stored = 0u64;
    for (i, (&at, &n)) in offsets.iter().zip(&counts).enumerate() {
        if at.checked_add(n).is_none_or(|end| end > w.len) {
            let what = if tiled { "tile" } else { "strip" };
            return Err(format!(
                "{what} {i} of the image is {n} bytes at byte {at}, which runs past the end of the file \
                 ({} bytes; {} and {}); the file is truncated or damaged, copy or export it again",
                w.len,
                tag_name(offsets_tag),
                tag_name(counts_tag)
            ));
        }
        stored += n;
    }
    let limit = u128::from(stored) * u128::from(max_expansion(compression));
    if declared > limit {
        let how = match compression {
            1 => "uncompressed".to_string(),
            c => format!(
                "even at the largest expansion of its compression (Compression tag 259 = {c}: {}x)",
                max_expansion(c)
            ),
        };
        return Err(format!(
            "declares {width} x {height} cells x {bands} band(s) of {bits} bits ({declared} bytes), but \
             its {} hold only {stored} bytes, {how} at most {limit} bytes; the header (ImageWidth tag \
             256, ImageLength tag 257) or the {} are damaged, export or copy the grid again",
            if tiled { "tiles" } else { "strips" },
            tag_name(counts_tag)
        ));
    }
    Ok(Checked {
        stored_bytes: stored,
        declared_bytes: u64::try_from(declared).unwrap_or(u64::MAX),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    /// A little-endian classic TIFF: header, one IFD at byte 8 with `entries` (tag, type, count,
    /// value or offset), then `tail` from byte `8 + 2 + 12 n + 4`.
    fn tiff(entries: &[(u16, u16, u32, u32)], tail: &[u8]) -> Vec<u8> {
        let mut b = b"II*\0".to_vec();
        b.extend(8u32.to_le_bytes());
        b.extend((entries.len() as u16).to_le_bytes());
        for &(tag, typ, count, value) in entries {
            b.extend(tag.to_le_bytes());
            b.extend(typ.to_le_bytes());
            b.extend(count.to_le_bytes());
            b.extend(value.to_le_bytes());
        }
        b.extend(0u32.to_le_bytes());
        b.extend_from_slice(tail);
        b
    }

    /// Where `tail` starts in [`tiff`] with `n` entries.
    fn tail_at(n: u32) -> u32 {
        8 + 2 + 12 * n + 4
    }

    /// A 4 x 2 float32 strip image, uncompressed, with its 32 bytes of pixels in the tail.
    fn strip_image(width: u32, height: u32, compression: u32, byte_count: u32) -> Vec<u8> {
        let n = 8;
        tiff(
            &[
                (256, 4, 1, width),
                (257, 4, 1, height),
                (258, 3, 1, 32),
                (259, 3, 1, compression),
                (273, 4, 1, tail_at(n)),
                (277, 3, 1, 1),
                (279, 4, 1, byte_count),
                (339, 3, 1, 3),
            ],
            &[0u8; 32],
        )
    }

    fn run(b: &[u8]) -> Result<Option<Checked>, String> {
        check(&mut Cursor::new(b), b.len() as u64)
    }

    #[test]
    fn a_sound_image_passes_with_its_sizes() {
        let c = run(&strip_image(4, 2, 1, 32)).unwrap().unwrap();
        assert_eq!((c.stored_bytes, c.declared_bytes), (32, 32));
    }

    #[test]
    fn huge_declared_grids_are_refused_before_decoding() {
        // Found by the mutation test: a 30 000 x 30 000 float32 grid declared in a 600-byte file
        // had the decoder reserve 3.4 GB; a 100 000 x 100 000 one is refused the same way.
        for (w, h) in [(30_000, 30_000), (100_000, 100_000), (u32::MAX, u32::MAX)] {
            let err = run(&strip_image(w, h, 1, 32)).unwrap_err();
            assert!(err.contains(&format!("{w} x {h} cells")), "{err}");
            assert!(err.contains("hold only 32 bytes"), "{err}");
        }
        // DEFLATE: at most 1032 times the stored bytes.
        let err = run(&strip_image(4096, 4096, 8, 32)).unwrap_err();
        assert!(err.contains("1032x"), "{err}");
        // Check: 1032:1 is DEFLATE's largest expansion (258-byte matches in 2 bits); zlib technical
        // details, from memory. 32 stored bytes may declare 33 024 decoded bytes, not one more.
        assert!(run(&strip_image(8256, 1, 8, 32)).is_ok());
        assert!(run(&strip_image(8257, 1, 8, 32)).is_err());
    }

    #[test]
    fn values_and_strips_past_the_end_are_refused() {
        // A tag of 100 million LONGs in a tiny file (the decoder would reserve them first).
        let b = tiff(&[(256, 4, 1, 4), (33550, 4, 100_000_000, 8)], &[]);
        let err = run(&b).unwrap_err();
        assert!(
            err.contains("ModelPixelScale (tag 33550) declares 100000000 values"),
            "{err}"
        );
        // A strip whose byte count runs past the end of the file.
        let err = run(&strip_image(4, 2, 1, 33)).unwrap_err();
        assert!(err.contains("strip 0 of the image is 33 bytes"), "{err}");
        // An offset near 2^32 overflows nothing.
        let mut b = strip_image(4, 2, 1, 32);
        let at = 8 + 2 + 12 * 4 + 8;
        b[at..at + 4].copy_from_slice(&0xFFFF_FFF0u32.to_le_bytes());
        assert!(run(&b).unwrap_err().contains("runs past the end"));
    }

    #[test]
    fn impossible_directories_are_refused() {
        let mut b = strip_image(4, 2, 1, 32);
        b[8..10].copy_from_slice(&0xFFFFu16.to_le_bytes());
        assert!(run(&b).unwrap_err().contains("declares 65535 entries"));
        b[8..10].copy_from_slice(&0u16.to_le_bytes());
        assert!(run(&b).unwrap_err().contains("declares 0 entries"));
        let mut b = strip_image(4, 2, 1, 32);
        b[4..8].copy_from_slice(&0xFFFF_FF00u32.to_le_bytes());
        assert!(run(&b).unwrap_err().contains("past the end of the file"));
        // BigTIFF with an entry count of 2^60.
        let mut big = b"II+\0\x08\0\0\0".to_vec();
        big.extend(16u64.to_le_bytes());
        big.extend((1u64 << 60).to_le_bytes());
        big.extend([0u8; 40]);
        assert!(run(&big).unwrap_err().contains("entries"));
    }

    #[test]
    fn signed_sizes_are_refused_and_other_files_left_to_the_decoder() {
        // SLONG width of -1: a signed type is not one TIFF allows for a size.
        let mut b = strip_image(4, 2, 1, 32);
        b[8 + 2 + 2..8 + 2 + 4].copy_from_slice(&9u16.to_le_bytes());
        b[8 + 2 + 8..8 + 2 + 12].copy_from_slice(&(-1i32).to_le_bytes());
        assert!(run(&b).unwrap_err().contains("field type 9"));
        // Not a TIFF: no verdict here, the decoder words it.
        assert_eq!(run(b"GIF89a....").unwrap(), None);
        assert_eq!(run(b"").unwrap(), None);
    }

    #[test]
    fn size_tags_of_other_types_are_refused() {
        // "tag 257 type 3 -> 7; dimensions := 65535 x 65535": the decoder read the UNDEFINED
        // ImageLength as its first byte (255) and reserved 63 MiB for a 600-byte file.
        let mut b = strip_image(4, 2, 1, 32);
        let at = 8 + 2 + 12 + 2;
        b[at..at + 2].copy_from_slice(&7u16.to_le_bytes());
        let err = run(&b).unwrap_err();
        assert!(
            err.contains("ImageLength (tag 257) has field type 7"),
            "{err}"
        );
        // SHORT, LONG and BYTE pass.
        b[at..at + 2].copy_from_slice(&3u16.to_le_bytes());
        assert!(run(&b).is_ok());
    }
}
