//! The GIF writer checked from its output bytes: GIF89a structure, two independent decoders,
//! palette stability, quantisation error, lossless round trip of few-colour frames, overwrite rules.

use std::path::Path;

use dunereel::encode::gif::{write_gif, Dither, GifOptions};
use dunereel::encode::quantize::{Mapper, PaletteBuilder};
use dunereel::render::Frame;

/// A smooth coloured field with a bright disc that moves right by 5 px per frame; the left quarter
/// never changes.
fn moving_frames(w: u32, h: u32, n: usize) -> Vec<Frame> {
    (0..n)
        .map(|k| {
            let mut f = Frame::new(w, h);
            for y in 0..h as usize {
                for x in 0..w as usize {
                    let i = (y * w as usize + x) * 4;
                    let (cx, cy) = (30.0 + 5.0 * k as f32, h as f32 / 2.0);
                    let d = ((x as f32 - cx).powi(2) + (y as f32 - cy).powi(2)).sqrt();
                    let disc = x >= w as usize / 4 && d < 10.0;
                    let rgb = if disc {
                        [250, 240, 40]
                    } else {
                        [
                            (40 + x * 180 / w as usize) as u8,
                            (60 + y * 150 / h as usize) as u8,
                            (120 + (x + y) % 50) as u8,
                        ]
                    };
                    f.rgba[i..i + 3].copy_from_slice(&rgb);
                }
            }
            f
        })
        .collect()
}

/// Walks the GIF block structure (GIF89a, CompuServe 1990): returns (global table entries,
/// delays of each Graphic Control Extension, number of image descriptors with a local table,
/// number of images, NETSCAPE2.0 loop count if present).
fn parse_blocks(b: &[u8]) -> (usize, Vec<u16>, usize, usize, Option<u16>) {
    // Check: GIF89a (CompuServe 1990) — header "GIF89a", then the logical screen descriptor; REFERENCES.md §10.
    assert_eq!(&b[..6], b"GIF89a");
    let packed = b[10];
    assert!(packed & 0x80 != 0, "global colour table flag set");
    let gct = 2usize << (packed & 7);
    let mut p = 13 + 3 * gct;
    let (mut delays, mut local, mut images, mut looping) = (Vec::new(), 0, 0, None);
    loop {
        match b[p] {
            0x21 => {
                let label = b[p + 1];
                if label == 0xF9 {
                    // Check: GIF89a — Graphic Control Extension 21 F9 04 [packed] [delay u16 LE] [transp] 00.
                    assert_eq!(b[p + 2], 4);
                    delays.push(u16::from_le_bytes([b[p + 4], b[p + 5]]));
                    assert_eq!(b[p + 7], 0);
                    p += 8;
                    continue;
                }
                if label == 0xFF {
                    // Check: NETSCAPE2.0 application extension 21 FF 0B "NETSCAPE2.0" 03 01 [loop u16 LE] 00;
                    // de-facto, REFERENCES.md §10.
                    assert_eq!(b[p + 2], 0x0B);
                    assert_eq!(&b[p + 3..p + 14], b"NETSCAPE2.0");
                    assert_eq!(&b[p + 14..p + 16], &[3, 1]);
                    looping = Some(u16::from_le_bytes([b[p + 16], b[p + 17]]));
                    assert_eq!(b[p + 18], 0);
                    p += 19;
                    continue;
                }
                p += 2;
                while b[p] != 0 {
                    p += b[p] as usize + 1;
                }
                p += 1;
            }
            0x2C => {
                images += 1;
                let flags = b[p + 9];
                if flags & 0x80 != 0 {
                    local += 1;
                    p += 3 * (2usize << (flags & 7));
                }
                p += 10 + 1; // descriptor + LZW minimum code size
                while b[p] != 0 {
                    p += b[p] as usize + 1;
                }
                p += 1;
            }
            0x3B => {
                assert_eq!(p, b.len() - 1, "trailer is the last byte");
                return (gct, delays, local, images, looping);
            }
            other => panic!("unexpected block 0x{other:02X} at {p}"),
        }
    }
}

/// Decodes with the `gif` crate into composited RGBA frames plus the composited index canvas.
fn decode_with_gif_crate(path: &Path) -> (Vec<Vec<u8>>, Vec<Vec<u8>>) {
    let mut opts = gif::DecodeOptions::new();
    opts.set_color_output(gif::ColorOutput::Indexed);
    let mut dec = opts.read_info(std::fs::File::open(path).unwrap()).unwrap();
    let (w, h) = (dec.width() as usize, dec.height() as usize);
    let pal = dec.global_palette().unwrap().to_vec();
    let mut canvas = vec![0u8; w * h];
    let (mut rgba, mut idx) = (Vec::new(), Vec::new());
    while let Some(f) = dec.read_next_frame().unwrap() {
        assert!(f.palette.is_none(), "no local tables");
        for y in 0..f.height as usize {
            for x in 0..f.width as usize {
                let v = f.buffer[y * f.width as usize + x];
                if Some(v) != f.transparent {
                    canvas[(y + f.top as usize) * w + x + f.left as usize] = v;
                }
            }
        }
        idx.push(canvas.clone());
        rgba.push(
            canvas
                .iter()
                .flat_map(|&i| {
                    [
                        pal[3 * i as usize],
                        pal[3 * i as usize + 1],
                        pal[3 * i as usize + 2],
                        255,
                    ]
                })
                .collect(),
        );
    }
    (rgba, idx)
}

fn decode_with_image_crate(path: &Path) -> Vec<(Vec<u8>, u32)> {
    use image::AnimationDecoder;
    let dec = image::codecs::gif::GifDecoder::new(std::io::BufReader::new(
        std::fs::File::open(path).unwrap(),
    ))
    .unwrap();
    dec.into_frames()
        .map(|f| {
            let f = f.unwrap();
            let (num, den) = f.delay().numer_denom_ms();
            (f.into_buffer().into_raw(), num / den)
        })
        .collect()
}

#[test]
fn structure_decoders_and_palette_agree() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("anim.gif");
    let frames = moving_frames(96, 64, 6);
    let delays = vec![4, 4, 150, 4, 4, 7];
    let opts = GifOptions::default();
    let stats = write_gif(&path, &frames, &delays, &opts, false).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    assert_eq!(stats.bytes as usize, bytes.len());
    assert_eq!(stats.frames, 6);

    let (gct, got_delays, local, images, looping) = parse_blocks(&bytes);
    assert_eq!(gct, 256);
    assert_eq!(got_delays, delays);
    assert_eq!(local, 0, "one global colour table only");
    assert_eq!(images, 6);
    // Check: NETSCAPE2.0 loop count 0 = loop forever; de-facto, REFERENCES.md §10.
    assert_eq!(looping, Some(0));
    // Difference frames: later frames cover less than the whole canvas.
    assert!(stats.changed_fraction < 0.9, "{}", stats.changed_fraction);

    // Two independent decoders give identical pixels.
    let (a, idx) = decode_with_gif_crate(&path);
    let b = decode_with_image_crate(&path);
    assert_eq!(a.len(), 6);
    assert_eq!(b.len(), 6);
    for (k, (fa, (fb, ms))) in a.iter().zip(&b).enumerate() {
        assert!(fa == fb, "frame {k}: decoders differ");
        // Check: GIF89a — delay unit is 1/100 s, so 4 cs = 40 ms.
        assert_eq!(*ms, delays[k] as u32 * 10);
    }

    // The decoded pixels are exactly what the palette and mapper give for each frame.
    let mut builder = PaletteBuilder::new();
    for f in &frames {
        builder.add_rgba(&f.rgba, 1);
    }
    let pal = builder.build(256);
    let mut mapper = Mapper::new(&pal);
    let mut err = 0.0;
    for (k, f) in frames.iter().enumerate() {
        let mut out = vec![0u8; 96 * 64];
        let GifOptions {
            dither: Dither::Ordered { spread },
            ..
        } = opts
        else {
            unreachable!()
        };
        err += mapper.map_frame(&f.rgba, 96, spread, &mut out);
        assert_eq!(out, idx[k], "frame {k}: indices differ from the mapper's");
    }
    // Reported error matches the decoded frames, and is bounded.
    let mut err_decoded = 0.0f64;
    for (f, d) in frames.iter().zip(&a) {
        for (p, q) in f.rgba.chunks_exact(4).zip(d.chunks_exact(4)) {
            err_decoded += (0..3)
                .map(|c| (p[c] as f64 - q[c] as f64).powi(2))
                .sum::<f64>()
                .sqrt();
        }
    }
    let n = 96.0 * 64.0 * 6.0;
    assert!(
        (err_decoded / n - stats.mean_colour_error).abs() < 1e-3,
        "{} vs {}",
        err_decoded / n,
        stats.mean_colour_error
    );
    assert!((err / n - stats.mean_colour_error).abs() < 1e-3);
    // Check: common practice, no source — a smooth field in 256 colours plus a ±4-level Bayer
    // offset stays within 8 RGB levels on average.
    assert!(stats.mean_colour_error < 8.0, "{}", stats.mean_colour_error);
}

#[test]
fn same_colour_same_index_in_every_frame() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("stable.gif");
    let frames = moving_frames(96, 64, 5);
    write_gif(&path, &frames, &[5; 5], &GifOptions::default(), false).unwrap();
    let (_, idx) = decode_with_gif_crate(&path);
    // The disc (one colour) moves; its centre pixel must carry the same index in every frame, at the
    // same Bayer phase (the disc moves 5 px, so compare the four pixels of one 4x4 cell phase).
    let mut seen = std::collections::BTreeSet::new();
    for (k, canvas) in idx.iter().enumerate() {
        let cx = 30 + 5 * k;
        let x = cx - cx % 4; // same Bayer column phase 0
        let y = 32; // a multiple of 4: Bayer row phase 0
        seen.insert(canvas[y * 96 + x]);
    }
    assert_eq!(seen.len(), 1, "{seen:?}");
    // And a still pixel keeps its index everywhere.
    let still: std::collections::BTreeSet<u8> = idx.iter().map(|c| c[10 * 96 + 5]).collect();
    assert_eq!(still.len(), 1);
}

#[test]
fn few_colours_round_trip_losslessly() {
    // Check: REFERENCES.md §10 — an image with ≤ 256 distinct colours must round-trip losslessly.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("few.gif");
    let frames: Vec<Frame> = (0..3)
        .map(|k| {
            let mut f = Frame::new(40, 30);
            for (i, p) in f.rgba.chunks_exact_mut(4).enumerate() {
                let c = ((i + k * 7) % 200) as u8;
                p.copy_from_slice(&[c, 255 - c, c / 2, 255]);
            }
            f
        })
        .collect();
    let opts = GifOptions {
        dither: Dither::None,
        ..Default::default()
    };
    let stats = write_gif(&path, &frames, &[10; 3], &opts, false).unwrap();
    assert_eq!(stats.mean_colour_error, 0.0);
    let decoded = decode_with_image_crate(&path);
    for (f, (d, _)) in frames.iter().zip(&decoded) {
        assert!(f.rgba == *d);
    }
}

#[test]
fn finite_loop_count_and_overwrite_rules() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("loop3.gif");
    let frames = moving_frames(32, 24, 2);
    let opts = GifOptions {
        loop_count: 3,
        ..Default::default()
    };
    write_gif(&path, &frames, &[10, 10], &opts, false).unwrap();
    let first = std::fs::read(&path).unwrap();
    assert_eq!(parse_blocks(&first).4, Some(3));
    // Refused without overwrite; file untouched; no temporary left.
    let err = write_gif(&path, &frames[..1], &[10], &GifOptions::default(), false).unwrap_err();
    assert!(err.to_string().contains("overwrite"), "{err}");
    assert_eq!(std::fs::read(&path).unwrap(), first);
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    // Bad input is refused before anything is written.
    let other = dir.path().join("bad.gif");
    assert!(write_gif(&other, &frames, &[10], &GifOptions::default(), false).is_err());
    let mixed = vec![Frame::new(32, 24), Frame::new(16, 16)];
    assert!(write_gif(&other, &mixed, &[1, 1], &GifOptions::default(), false).is_err());
    assert!(!other.exists());
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    // Same input, same bytes.
    let again = dir.path().join("again.gif");
    write_gif(&again, &frames, &[10, 10], &opts, false).unwrap();
    assert_eq!(std::fs::read(&again).unwrap(), first);
}
