//! H.264 access units + their durations -> an MP4 file (ISO base media file format) with one video
//! track, laid out for playing while loading ("fast start": `moov` before `mdat`).
//!
//! Written after ISO/IEC 14496-12 (box structure, sample tables) and ISO/IEC 14496-15 (the `avc1`
//! sample entry and its `avcC` decoder configuration), REFERENCES.md §15. Our own small muxer rather
//! than a crate: the MP4 crates at hand write `moov` after `mdat` (a browser must then read the
//! whole file before it can start) and cannot write the `colr` box that states the colour space.
//!
//! Layout:
//!
//! ```text
//! ftyp  isom, with iso2 avc1 mp41 compatible
//! moov  mvhd (timescale 1000)
//!       trak  tkhd (enabled, in movie), mdia: mdhd (timescale 90000), hdlr vide,
//!             minf: vmhd, dinf/dref/url (self-contained), stbl:
//!               stsd/avc1 (avcC, colr nclx, pasp 1:1), stts, stss, stsc, stsz, stco
//! mdat  samples: NAL units each prefixed by its 4-byte big-endian length
//! ```
//!
//! Every sample sits in a chunk of its own (`stsc` = one entry, one sample per chunk), which every
//! player handles. Parameter sets (SPS, PPS) live in `avcC` only. No edit list: the first sample
//! starts at time 0 and there are no B-frames, so presentation = decoding time. Creation and
//! modification times are 0 so that the same frames give the same bytes.
//!
//! # Allocations
//! The muxer holds the encoded samples in memory until [`Mp4Muxer::finish`] (a 154-frame 1280×720
//! animation is a few MB).

use std::io::Write;

/// Ticks per second of the media (track) time scale. 90 000 (common practice, no source) divides
/// evenly by the usual frame rates (10, 12, 15, 24, 25, 30, 60 fps) and by 100 (GIF delays).
pub const MEDIA_TIMESCALE: u32 = 90_000;

/// Ticks per second of the movie time scale (`mvhd`, `tkhd` durations): milliseconds.
pub const MOVIE_TIMESCALE: u32 = 1000;

/// Colour description written into the `colr` (nclx) box: ITU-T H.273 code points.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ColourInfo {
    /// Colour primaries (1 = BT.709).
    pub primaries: u16,
    /// Transfer characteristics (1 = BT.709).
    pub transfer: u16,
    /// Matrix coefficients (1 = BT.709).
    pub matrix: u16,
    /// True for full range (0–255), false for limited ("video") range 16–235.
    pub full_range: bool,
}

impl ColourInfo {
    /// BT.709 primaries, transfer and matrix, limited range: what HD video players expect.
    pub const BT709_LIMITED: ColourInfo = ColourInfo {
        primaries: 1,
        transfer: 1,
        matrix: 1,
        full_range: false,
    };
}

/// Why a sample cannot be muxed (all of them mean a bug in the caller or the encoder).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MuxError(pub String);

impl std::fmt::Display for MuxError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

/// Collects H.264 access units and writes them as an MP4 file; see the module doc.
#[derive(Debug)]
pub struct Mp4Muxer {
    width: u16,
    height: u16,
    colour: ColourInfo,
    sps: Option<Vec<u8>>,
    pps: Option<Vec<u8>>,
    /// Sample data, length-prefixed NAL units, all samples one after the other.
    data: Vec<u8>,
    sizes: Vec<u32>,
    durations: Vec<u32>,
    sync: Vec<u32>,
}

/// The NAL units of an Annex B byte stream (start codes `00 00 01` or `00 00 00 01` removed).
pub fn split_annex_b(stream: &[u8]) -> Vec<&[u8]> {
    let mut starts = Vec::new();
    let mut i = 0;
    while i + 3 <= stream.len() {
        if stream[i] == 0 && stream[i + 1] == 0 && stream[i + 2] == 1 {
            starts.push(i + 3);
            i += 3;
        } else {
            i += 1;
        }
    }
    let mut out = Vec::with_capacity(starts.len());
    for (k, &s) in starts.iter().enumerate() {
        let mut end = starts.get(k + 1).map_or(stream.len(), |&n| n - 3);
        // A four-byte start code leaves one zero byte at the end of the previous unit; trailing
        // zeros are never part of a NAL unit (H.264 §7.4.1), so drop them all.
        while end > s && stream[end - 1] == 0 {
            end -= 1;
        }
        if end > s {
            out.push(&stream[s..end]);
        }
    }
    out
}

impl Mp4Muxer {
    /// A muxer for a `width` × `height` track (both even, 1–65535) with the given colour description.
    ///
    /// # Errors
    /// [`MuxError`] for a zero, odd or too large size.
    pub fn new(width: u32, height: u32, colour: ColourInfo) -> Result<Mp4Muxer, MuxError> {
        if width == 0
            || height == 0
            || width % 2 == 1
            || height % 2 == 1
            || width > 65535
            || height > 65535
        {
            return Err(MuxError(format!(
                "a {width} x {height} track: H.264 4:2:0 video needs even sizes from 2 to 65534"
            )));
        }
        Ok(Mp4Muxer {
            width: width as u16,
            height: height as u16,
            colour,
            sps: None,
            pps: None,
            data: Vec::new(),
            sizes: Vec::new(),
            durations: Vec::new(),
            sync: Vec::new(),
        })
    }

    /// Appends one access unit given as an Annex B byte stream, shown for `duration` ticks of
    /// [`MEDIA_TIMESCALE`]. `is_sync` marks an IDR picture (a point a player can start from).
    ///
    /// SPS (type 7) and PPS (type 8) units are taken out of the sample and kept for `avcC`; a later
    /// one that differs from the first is refused (one sample description per track).
    ///
    /// # Errors
    /// [`MuxError`] if the access unit holds no picture data, a zero duration, or changing parameter sets.
    pub fn push(&mut self, annex_b: &[u8], duration: u32, is_sync: bool) -> Result<(), MuxError> {
        if duration == 0 {
            return Err(MuxError("a sample with zero duration".into()));
        }
        let start = self.data.len();
        for nal in split_annex_b(annex_b) {
            let kind = nal[0] & 0x1f;
            let slot = match kind {
                7 => Some(&mut self.sps),
                8 => Some(&mut self.pps),
                _ => None,
            };
            if let Some(slot) = slot {
                match slot {
                    Some(prev) if prev.as_slice() != nal => {
                        return Err(MuxError(format!(
                            "the encoder changed its parameter set (NAL type {kind}) mid-stream"
                        )))
                    }
                    Some(_) => {}
                    None => *slot = Some(nal.to_vec()),
                }
                continue;
            }
            let len =
                u32::try_from(nal.len()).map_err(|_| MuxError("a NAL unit over 4 GiB".into()))?;
            self.data.extend_from_slice(&len.to_be_bytes());
            self.data.extend_from_slice(nal);
        }
        let size = self.data.len() - start;
        if size == 0 {
            return Err(MuxError(format!(
                "access unit {} holds no picture data",
                self.sizes.len()
            )));
        }
        self.sizes.push(size as u32);
        self.durations.push(duration);
        if is_sync {
            self.sync.push(self.sizes.len() as u32);
        }
        Ok(())
    }

    /// Number of samples so far.
    pub fn len(&self) -> usize {
        self.sizes.len()
    }

    /// True before the first sample.
    pub fn is_empty(&self) -> bool {
        self.sizes.is_empty()
    }

    /// Total duration in media ticks.
    pub fn duration_ticks(&self) -> u64 {
        self.durations.iter().map(|&d| d as u64).sum()
    }

    /// Writes the whole file to `w`. Returns the number of bytes written.
    ///
    /// # Errors
    /// [`MuxError`] when there are no samples, no SPS/PPS was seen, the first sample is not a sync
    /// sample, or the file would pass 4 GiB; I/O errors are passed through in the message.
    pub fn finish(self, w: &mut impl Write) -> Result<u64, MuxError> {
        if self.sizes.is_empty() {
            return Err(MuxError("no samples to write".into()));
        }
        let (Some(sps), Some(pps)) = (&self.sps, &self.pps) else {
            return Err(MuxError("the stream carried no SPS/PPS".into()));
        };
        if sps.len() < 4 {
            return Err(MuxError("the SPS is too short".into()));
        }
        if self.sync.first() != Some(&1) {
            return Err(MuxError("the first sample is not an IDR picture".into()));
        }
        let ftyp = ftyp();
        // The chunk offsets depend on the size of moov, which does not depend on the offsets'
        // values: build once with zeros to measure, then with the real offsets.
        let moov_len = self.moov(sps, pps, 0).len() as u64;
        let mdat_header = 8u64;
        let base = ftyp.len() as u64 + moov_len + mdat_header;
        let total = base + self.data.len() as u64;
        if total > u32::MAX as u64 {
            return Err(MuxError(format!(
                "{total} bytes: over the 4 GiB a 32-bit MP4 can hold; lower the frame size or video quality"
            )));
        }
        let moov = self.moov(sps, pps, base as u32);
        debug_assert_eq!(moov.len() as u64, moov_len);
        let io = |e: std::io::Error| MuxError(format!("write failed: {e}"));
        w.write_all(&ftyp).map_err(io)?;
        w.write_all(&moov).map_err(io)?;
        w.write_all(&((mdat_header + self.data.len() as u64) as u32).to_be_bytes())
            .map_err(io)?;
        w.write_all(b"mdat").map_err(io)?;
        w.write_all(&self.data).map_err(io)?;
        Ok(total)
    }

    fn moov(&self, sps: &[u8], pps: &[u8], first_offset: u32) -> Vec<u8> {
        let ticks = self.duration_ticks();
        let movie_duration = ((ticks * MOVIE_TIMESCALE as u64 + MEDIA_TIMESCALE as u64 / 2)
            / MEDIA_TIMESCALE as u64) as u32;
        let mut moov = Vec::new();
        put_box(&mut moov, b"mvhd", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&0u32.to_be_bytes()); // creation time
            b.extend_from_slice(&0u32.to_be_bytes()); // modification time
            b.extend_from_slice(&MOVIE_TIMESCALE.to_be_bytes());
            b.extend_from_slice(&movie_duration.to_be_bytes());
            b.extend_from_slice(&0x0001_0000u32.to_be_bytes()); // rate 1.0
            b.extend_from_slice(&0x0100u16.to_be_bytes()); // volume 1.0
            b.extend_from_slice(&[0; 10]); // reserved
            unity_matrix(b);
            b.extend_from_slice(&[0; 24]); // pre_defined
            b.extend_from_slice(&2u32.to_be_bytes()); // next track id
        });
        put_box(&mut moov, b"trak", |trak| {
            put_box(trak, b"tkhd", |b| {
                full_header(b, 0, 0x3); // enabled, in movie
                b.extend_from_slice(&0u32.to_be_bytes());
                b.extend_from_slice(&0u32.to_be_bytes());
                b.extend_from_slice(&1u32.to_be_bytes()); // track id
                b.extend_from_slice(&0u32.to_be_bytes()); // reserved
                b.extend_from_slice(&movie_duration.to_be_bytes());
                b.extend_from_slice(&[0; 8]); // reserved
                b.extend_from_slice(&0u16.to_be_bytes()); // layer
                b.extend_from_slice(&0u16.to_be_bytes()); // alternate group
                b.extend_from_slice(&0u16.to_be_bytes()); // volume (video: 0)
                b.extend_from_slice(&0u16.to_be_bytes()); // reserved
                unity_matrix(b);
                b.extend_from_slice(&((self.width as u32) << 16).to_be_bytes());
                b.extend_from_slice(&((self.height as u32) << 16).to_be_bytes());
            });
            put_box(trak, b"mdia", |mdia| {
                put_box(mdia, b"mdhd", |b| {
                    let duration = u32::try_from(ticks).unwrap_or(u32::MAX);
                    full_header(b, 0, 0);
                    b.extend_from_slice(&0u32.to_be_bytes());
                    b.extend_from_slice(&0u32.to_be_bytes());
                    b.extend_from_slice(&MEDIA_TIMESCALE.to_be_bytes());
                    b.extend_from_slice(&duration.to_be_bytes());
                    // Language "und" (ISO 639-2/T), three 5-bit letters minus 0x60.
                    let lang = ((b'u' - 0x60) as u16) << 10
                        | ((b'n' - 0x60) as u16) << 5
                        | (b'd' - 0x60) as u16;
                    b.extend_from_slice(&lang.to_be_bytes());
                    b.extend_from_slice(&0u16.to_be_bytes());
                });
                put_box(mdia, b"hdlr", |b| {
                    full_header(b, 0, 0);
                    b.extend_from_slice(&0u32.to_be_bytes()); // pre_defined
                    b.extend_from_slice(b"vide");
                    b.extend_from_slice(&[0; 12]);
                    b.extend_from_slice(b"dunereel frames\0");
                });
                put_box(mdia, b"minf", |minf| {
                    put_box(minf, b"vmhd", |b| {
                        full_header(b, 0, 1);
                        b.extend_from_slice(&[0; 8]); // graphics mode, opcolour
                    });
                    put_box(minf, b"dinf", |dinf| {
                        put_box(dinf, b"dref", |b| {
                            full_header(b, 0, 0);
                            b.extend_from_slice(&1u32.to_be_bytes());
                            put_box(b, b"url ", |u| full_header(u, 0, 1)); // data in this file
                        });
                    });
                    put_box(minf, b"stbl", |stbl| {
                        self.stbl(stbl, sps, pps, first_offset)
                    });
                });
            });
        });
        let mut out = Vec::with_capacity(moov.len() + 8);
        put_box(&mut out, b"moov", |b| b.extend_from_slice(&moov));
        out
    }

    fn stbl(&self, stbl: &mut Vec<u8>, sps: &[u8], pps: &[u8], first_offset: u32) {
        put_box(stbl, b"stsd", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&1u32.to_be_bytes());
            put_box(b, b"avc1", |e| {
                e.extend_from_slice(&[0; 6]); // reserved
                e.extend_from_slice(&1u16.to_be_bytes()); // data reference index
                e.extend_from_slice(&[0; 16]); // pre_defined, reserved
                e.extend_from_slice(&self.width.to_be_bytes());
                e.extend_from_slice(&self.height.to_be_bytes());
                e.extend_from_slice(&0x0048_0000u32.to_be_bytes()); // 72 dpi
                e.extend_from_slice(&0x0048_0000u32.to_be_bytes());
                e.extend_from_slice(&0u32.to_be_bytes()); // reserved
                e.extend_from_slice(&1u16.to_be_bytes()); // frame count per sample
                let mut name = [0u8; 32];
                let label = b"dunereel H.264";
                name[0] = label.len() as u8;
                name[1..=label.len()].copy_from_slice(label);
                e.extend_from_slice(&name);
                e.extend_from_slice(&0x0018u16.to_be_bytes()); // depth: colour, no alpha
                e.extend_from_slice(&(-1i16).to_be_bytes());
                put_box(e, b"avcC", |c| avc_config(c, sps, pps));
                put_box(e, b"colr", |c| {
                    c.extend_from_slice(b"nclx");
                    c.extend_from_slice(&self.colour.primaries.to_be_bytes());
                    c.extend_from_slice(&self.colour.transfer.to_be_bytes());
                    c.extend_from_slice(&self.colour.matrix.to_be_bytes());
                    c.push(if self.colour.full_range { 0x80 } else { 0 });
                });
                put_box(e, b"pasp", |c| {
                    c.extend_from_slice(&1u32.to_be_bytes());
                    c.extend_from_slice(&1u32.to_be_bytes());
                });
            });
        });
        put_box(stbl, b"stts", |b| {
            full_header(b, 0, 0);
            let mut runs: Vec<(u32, u32)> = Vec::new();
            for &d in &self.durations {
                match runs.last_mut() {
                    Some((n, delta)) if *delta == d => *n += 1,
                    _ => runs.push((1, d)),
                }
            }
            b.extend_from_slice(&(runs.len() as u32).to_be_bytes());
            for (n, d) in runs {
                b.extend_from_slice(&n.to_be_bytes());
                b.extend_from_slice(&d.to_be_bytes());
            }
        });
        put_box(stbl, b"stss", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&(self.sync.len() as u32).to_be_bytes());
            for s in &self.sync {
                b.extend_from_slice(&s.to_be_bytes());
            }
        });
        put_box(stbl, b"stsc", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&1u32.to_be_bytes());
            b.extend_from_slice(&1u32.to_be_bytes()); // first chunk
            b.extend_from_slice(&1u32.to_be_bytes()); // samples per chunk
            b.extend_from_slice(&1u32.to_be_bytes()); // sample description index
        });
        put_box(stbl, b"stsz", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&0u32.to_be_bytes()); // sizes differ: listed below
            b.extend_from_slice(&(self.sizes.len() as u32).to_be_bytes());
            for s in &self.sizes {
                b.extend_from_slice(&s.to_be_bytes());
            }
        });
        put_box(stbl, b"stco", |b| {
            full_header(b, 0, 0);
            b.extend_from_slice(&(self.sizes.len() as u32).to_be_bytes());
            let mut offset = first_offset;
            for s in &self.sizes {
                b.extend_from_slice(&offset.to_be_bytes());
                offset = offset.wrapping_add(*s);
            }
        });
    }
}

/// `AVCDecoderConfigurationRecord` (ISO/IEC 14496-15 §5.3.3.1): profile, compatibility and level
/// copied from the SPS, 4-byte NAL lengths, one SPS and one PPS; the extra chroma and bit-depth
/// fields for the High profiles (100, 110, 122, 144).
fn avc_config(c: &mut Vec<u8>, sps: &[u8], pps: &[u8]) {
    c.push(1); // configurationVersion
    c.extend_from_slice(&sps[1..4]); // profile_idc, constraint flags, level_idc
    c.push(0xfc | 3); // reserved bits, lengthSizeMinusOne = 3
    c.push(0xe0 | 1); // reserved bits, one SPS
    c.extend_from_slice(&(sps.len() as u16).to_be_bytes());
    c.extend_from_slice(sps);
    c.push(1); // one PPS
    c.extend_from_slice(&(pps.len() as u16).to_be_bytes());
    c.extend_from_slice(pps);
    if matches!(sps[1], 100 | 110 | 122 | 144) {
        c.push(0xfc | 1); // chroma_format_idc = 1 (4:2:0)
        c.push(0xf8); // bit_depth_luma_minus8 = 0
        c.push(0xf8); // bit_depth_chroma_minus8 = 0
        c.push(0); // no SPS extensions
    }
}

fn put_box(out: &mut Vec<u8>, kind: &[u8; 4], fill: impl FnOnce(&mut Vec<u8>)) {
    let start = out.len();
    out.extend_from_slice(&[0; 4]);
    out.extend_from_slice(kind);
    fill(out);
    let size = (out.len() - start) as u32;
    out[start..start + 4].copy_from_slice(&size.to_be_bytes());
}

fn full_header(b: &mut Vec<u8>, version: u8, flags: u32) {
    b.push(version);
    b.extend_from_slice(&flags.to_be_bytes()[1..]);
}

fn unity_matrix(b: &mut Vec<u8>) {
    for v in [0x0001_0000u32, 0, 0, 0, 0x0001_0000, 0, 0, 0, 0x4000_0000] {
        b.extend_from_slice(&v.to_be_bytes());
    }
}

fn ftyp() -> Vec<u8> {
    let mut out = Vec::new();
    put_box(&mut out, b"ftyp", |b| {
        b.extend_from_slice(b"isom");
        b.extend_from_slice(&0x200u32.to_be_bytes());
        for brand in [b"isom", b"iso2", b"avc1", b"mp41"] {
            b.extend_from_slice(brand);
        }
    });
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// (type, payload) of every box in `data`, top level only.
    fn boxes(data: &[u8]) -> Vec<([u8; 4], &[u8])> {
        let mut out = Vec::new();
        let mut i = 0;
        while i + 8 <= data.len() {
            let size = u32::from_be_bytes(data[i..i + 4].try_into().unwrap()) as usize;
            let kind: [u8; 4] = data[i + 4..i + 8].try_into().unwrap();
            assert!(
                size >= 8 && i + size <= data.len(),
                "box {:?} overruns",
                kind
            );
            out.push((kind, &data[i + 8..i + size]));
            i += size;
        }
        assert_eq!(i, data.len(), "trailing bytes after the last box");
        out
    }

    fn find<'a>(data: &'a [u8], path: &[&[u8; 4]], skip: &[usize]) -> &'a [u8] {
        let mut cur = data;
        for (k, kind) in path.iter().enumerate() {
            let body = &cur[skip.get(k).copied().unwrap_or(0)..];
            cur = boxes(body)
                .into_iter()
                .find(|(t, _)| t == *kind)
                .unwrap_or_else(|| panic!("no {:?}", std::str::from_utf8(*kind)))
                .1;
        }
        cur
    }

    // A tiny made-up stream: SPS (baseline, level 3.1), PPS, an IDR slice and a P slice.
    const SPS: [u8; 6] = [0x67, 66, 0xc0, 31, 0xaa, 0xbb];
    const PPS: [u8; 3] = [0x68, 0xce, 0x38];

    fn access_unit(with_params: bool, slice: &[u8]) -> Vec<u8> {
        let mut v = Vec::new();
        if with_params {
            v.extend_from_slice(&[0, 0, 0, 1]);
            v.extend_from_slice(&SPS);
            v.extend_from_slice(&[0, 0, 0, 1]);
            v.extend_from_slice(&PPS);
        }
        v.extend_from_slice(&[0, 0, 1]);
        v.extend_from_slice(slice);
        v
    }

    #[test]
    fn annex_b_units_are_split_on_both_start_code_lengths() {
        let s = access_unit(true, &[0x65, 1, 2, 3]);
        let units = split_annex_b(&s);
        assert_eq!(units, vec![&SPS[..], &PPS[..], &[0x65, 1, 2, 3][..]]);
    }

    #[test]
    fn file_structure_follows_iso_14496_12_and_15() {
        let mut m = Mp4Muxer::new(64, 48, ColourInfo::BT709_LIMITED).unwrap();
        m.push(&access_unit(true, &[0x65, 9, 9, 9]), 900 * 8, true)
            .unwrap();
        m.push(&access_unit(false, &[0x41, 7, 7]), 900 * 8, false)
            .unwrap();
        m.push(&access_unit(false, &[0x41, 5]), 900 * 108, false)
            .unwrap();
        let mut file = Vec::new();
        let n = m.finish(&mut file).unwrap();
        assert_eq!(n as usize, file.len());
        let top: Vec<[u8; 4]> = boxes(&file).iter().map(|(k, _)| *k).collect();
        // Check: ISO/IEC 14496-12 §4.3 ftyp first; moov before mdat for progressive playing (common practice, no source).
        assert_eq!(top, vec![*b"ftyp", *b"moov", *b"mdat"]);

        let stbl_path: [&[u8; 4]; 5] = [b"moov", b"trak", b"mdia", b"minf", b"stbl"];
        let stbl = find(&file, &stbl_path, &[]);
        // stts: runs of equal durations: (2 × 7200), (1 × 97200).
        let stts = find(stbl, &[b"stts"], &[]);
        assert_eq!(&stts[4..8], &2u32.to_be_bytes());
        assert_eq!(&stts[8..16], &[0, 0, 0, 2, 0, 0, 0x1c, 0x20]);
        assert_eq!(&stts[16..24], &[0, 0, 0, 1, 0, 1, 0x7b, 0xb0]);
        // stss: only sample 1 is a sync sample (1-based numbering, ISO/IEC 14496-12 §8.6.2).
        let stss = find(stbl, &[b"stss"], &[]);
        assert_eq!(&stss[4..], &[0, 0, 0, 1, 0, 0, 0, 1]);
        // stsz: sizes exclude SPS/PPS and count 4-byte length prefixes.
        let stsz = find(stbl, &[b"stsz"], &[]);
        assert_eq!(&stsz[8..12], &3u32.to_be_bytes());
        let sizes: Vec<u32> = stsz[12..]
            .chunks(4)
            .map(|c| u32::from_be_bytes(c.try_into().unwrap()))
            .collect();
        assert_eq!(sizes, vec![8, 7, 6]);
        // stco: chunk offsets point at the samples inside mdat.
        let stco = find(stbl, &[b"stco"], &[]);
        let first = u32::from_be_bytes(stco[8..12].try_into().unwrap()) as usize;
        assert_eq!(&file[first..first + 8], &[0, 0, 0, 4, 0x65, 9, 9, 9]);
        let third = u32::from_be_bytes(stco[16..20].try_into().unwrap()) as usize;
        assert_eq!(&file[third..third + 6], &[0, 0, 0, 2, 0x41, 5]);

        // Sample entry: avc1 (78 bytes of visual sample entry before its child boxes).
        let stsd = find(stbl, &[b"stsd"], &[]);
        let avc1 = find(&stsd[8..], &[b"avc1"], &[]);
        assert_eq!(&avc1[24..28], &[0, 64, 0, 48], "width, height");
        let children = &avc1[78..];
        let avcc = find(children, &[b"avcC"], &[]);
        // Check: ISO/IEC 14496-15 §5.3.3.1 — version 1, profile/compat/level from SPS bytes 1..4,
        // 0xFF = 4-byte lengths, 0xE1 = one SPS; hand-computed.
        assert_eq!(&avcc[..6], &[1, 66, 0xc0, 31, 0xff, 0xe1]);
        assert_eq!(&avcc[6..8], &(SPS.len() as u16).to_be_bytes());
        assert_eq!(&avcc[8..14], &SPS);
        assert_eq!(&avcc[14..], &[1, 0, 3, 0x68, 0xce, 0x38]);
        let colr = find(children, &[b"colr"], &[]);
        // Check: ITU-T H.273 — BT.709 primaries/transfer/matrix are code point 1; limited range flag 0.
        assert_eq!(colr, b"nclx\0\x01\0\x01\0\x01\0");

        // Durations: media 90000 ticks/s, 124 cs = 111600 ticks; movie in ms = 1240.
        let mdhd = find(&file, &[b"moov", b"trak", b"mdia", b"mdhd"], &[]);
        assert_eq!(&mdhd[12..16], &MEDIA_TIMESCALE.to_be_bytes());
        assert_eq!(&mdhd[16..20], &111_600u32.to_be_bytes());
        let mvhd = find(&file, &[b"moov", b"mvhd"], &[]);
        assert_eq!(&mvhd[16..20], &1240u32.to_be_bytes());
    }

    #[test]
    fn odd_sizes_missing_parameters_and_changed_parameters_are_refused() {
        assert!(Mp4Muxer::new(63, 48, ColourInfo::BT709_LIMITED).is_err());
        let mut m = Mp4Muxer::new(64, 48, ColourInfo::BT709_LIMITED).unwrap();
        m.push(&access_unit(false, &[0x65, 1]), 10, true).unwrap();
        assert!(m.finish(&mut Vec::new()).unwrap_err().0.contains("SPS"));
        let mut m = Mp4Muxer::new(64, 48, ColourInfo::BT709_LIMITED).unwrap();
        m.push(&access_unit(true, &[0x65, 1]), 10, true).unwrap();
        let mut other = access_unit(true, &[0x65, 1]);
        other[7] = 40; // another level_idc
        assert!(m
            .push(&other, 10, true)
            .unwrap_err()
            .0
            .contains("parameter set"));
        assert!(m.push(&access_unit(false, &[0x41]), 0, false).is_err());
    }
}
