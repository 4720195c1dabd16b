//! PNG sequence, index CSV and poster, read back with the image crate.

use dunereel::encode::png_seq::{
    write_poster, IndexRow, PngSequence, PosterOptions, PosterTile, RowStatus, INDEX_HEADER,
};
use dunereel::render::Frame;

fn frame(w: u32, h: u32, k: u8) -> Frame {
    let mut f = Frame::new(w, h);
    for (i, p) in f.rgba.chunks_exact_mut(4).enumerate() {
        p[0] = (i % 251) as u8;
        p[1] = k.wrapping_mul(40);
        p[2] = (i / 7 % 256) as u8;
    }
    f
}

fn row(i: usize) -> IndexRow {
    IndexRow {
        time: format!("2027-0{}-01T00:00:00", i + 1),
        status: if i == 0 {
            RowStatus::Surveyed
        } else {
            RowStatus::Interpolated
        },
        method: if i == 0 {
            "survey".into()
        } else {
            "linear blend".into()
        },
        from_survey: "2027-01-01".into(),
        to_survey: if i == 0 {
            "2027-01-01".into()
        } else {
            "2028-01-01, spring".into()
        },
        crest_elevation: 12.5 + i as f64,
        crest_height_above_reference: 10.5 + i as f64,
        highest_cell_elevation: 12.625 + i as f64,
        unit: "m".into(),
    }
}

#[test]
fn sequence_round_trips_and_index_lists_every_frame() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("frames");
    let frames: Vec<Frame> = (0..3).map(|k| frame(37, 21, k)).collect();
    let mut seq = PngSequence::create(&out, "frame_", 3, false).unwrap();
    for (i, f) in frames.iter().enumerate() {
        seq.write_frame(f, row(i)).unwrap();
    }
    let index = seq.finish().unwrap();
    // Check: PNG (W3C 2003 / ISO/IEC 15948) read back by the image crate — identical RGB, opaque.
    for (i, f) in frames.iter().enumerate() {
        let img = image::open(out.join(format!("frame_{i:04}.png")))
            .unwrap()
            .to_rgba8();
        assert_eq!(img.dimensions(), (37, 21));
        assert!(img.as_raw() == &f.rgba, "frame {i} differs");
    }
    let csv = std::fs::read_to_string(index).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines[0], INDEX_HEADER);
    assert_eq!(lines.len(), 4);
    assert_eq!(
        lines[1],
        "0,frame_0000.png,2027-01-01T00:00:00,surveyed,survey,2027-01-01,2027-01-01,12.500,10.500,12.625,m"
    );
    assert_eq!(lines[2], "1,frame_0001.png,2027-02-01T00:00:00,interpolated,linear blend,2027-01-01,\"2028-01-01, spring\",13.500,11.500,13.625,m");
    // Only the frames and the index, no temporary files.
    assert_eq!(std::fs::read_dir(&out).unwrap().count(), 4);
}

#[test]
fn existing_sequence_is_refused_before_anything_is_written() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("frame_0002.png"), b"keep me").unwrap();
    let err = PngSequence::create(dir.path(), "frame_", 3, false).unwrap_err();
    assert!(
        err.to_string().contains("frame_0002.png") && err.to_string().contains("overwrite"),
        "{err}"
    );
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    assert!(PngSequence::create(dir.path(), "frame_", 3, true).is_ok());
    assert!(PngSequence::create(dir.path(), "../x", 3, true).is_err());
}

#[test]
fn poster_places_tiles_side_by_side_with_captions() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("poster.png");
    let a = frame(160, 90, 1);
    let b = frame(160, 90, 5);
    let tiles = [
        PosterTile {
            frame: &a,
            caption: "2027-01-01 · surveyed · crest elevation 12.5 m",
        },
        PosterTile {
            frame: &b,
            caption: "2028-01-01 · surveyed · crest elevation 14.0 m",
        },
    ];
    let opts = PosterOptions {
        tile_width: 240,
        title: "Test dune A: surveys".into(),
        ..Default::default()
    };
    write_poster(&path, &tiles, &opts, false).unwrap();
    let img = image::open(&path).unwrap().to_rgba8();
    // Two columns of 240 px and three margins of 16 px x (240 / 480) = 8 px.
    assert_eq!(img.width(), 8 + 2 * (240 + 8));
    // The second tile's centre carries the second frame's green (5 * 40 = 200), the first's 40.
    let (tw, th) = (240u32, 135u32);
    let title_h = (26.0f32 * 0.5 * 1.5).ceil() as u32;
    let y = 8 + title_h + th / 2;
    assert_eq!(img.get_pixel(8 + tw / 2, y)[1], 40);
    assert_eq!(img.get_pixel(8 + tw + 8 + tw / 2, y)[1], 200);
    let preview = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/annotate-preview");
    std::fs::create_dir_all(&preview).unwrap();
    img.save(preview.join("poster.png")).unwrap();
    assert!(
        write_poster(&path, &tiles, &opts, false).is_err(),
        "no overwrite unless asked"
    );
}
