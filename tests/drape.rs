//! A job that drapes an RGB orthophoto over the terrain: colours land where the image puts them,
//! and an image that misses the grid stops the run before anything is written.

mod common;

use dunereel::error::Error;
use dunereel::{job, run_job, RunOptions};

/// Drape of the moving-dune grid's extent at 0.5 m cells: west half pure red, east half pure blue.
fn write_split_drape(dir: &std::path::Path, shift_x_m: f64) {
    let mut g = common::geometry(128, 96);
    g.cell_x = 0.5;
    g.cell_y = 0.5;
    g.origin_x += shift_x_m;
    common::write_rgb(&dir.join("photo.tif"), &g, |_, c| {
        if c < 64 {
            [255, 0, 0]
        } else {
            [0, 0, 255]
        }
    });
}

#[test]
fn drape_colours_west_red_and_east_blue() {
    let d = tempfile::tempdir().unwrap();
    write_split_drape(d.path(), 0.0);
    let path = common::moving_dune_job(
        d.path(),
        "colour: { by: drape, drape: photo.tif }\nlabels: { inset_chart: false }\n",
    );
    let job = job::load(&path).unwrap();
    run_job(&job, &RunOptions::default()).unwrap();
    let frame = image::open(d.path().join("out/data/frames/frame-0000.png"))
        .unwrap()
        .to_rgb8();
    // Strongly red or strongly blue pixels: the sky ([92, 136, 190] to [222, 230, 238]) and the
    // block sides ([150, 124, 96]) are neither.
    let (mut red, mut blue) = (Vec::new(), Vec::new());
    for (x, _, p) in frame.enumerate_pixels() {
        let [r, g, b] = p.0.map(u32::from);
        if r > 60 && 3 * g < r && 3 * b < r {
            red.push(x);
        } else if b > 60 && 3 * r < b && 3 * g < b {
            blue.push(x);
        }
    }
    let mid = frame.width() / 2;
    let share_left = |xs: &[u32]| xs.iter().filter(|&&x| x < mid).count() as f64 / xs.len() as f64;
    // The camera faces 20° east of north (the default), so west is on the left of the frame.
    // Enough of each colour to be the terrain, not stray pixels: 5% of the frame each.
    let enough = (frame.width() * frame.height() / 20) as usize;
    assert!(
        red.len() > enough && blue.len() > enough,
        "{} red, {} blue",
        red.len(),
        blue.len()
    );
    // The split line passes through the target at the frame centre; perspective tilts it, so
    // allow 15% on the wrong side.
    assert!(
        share_left(&red) > 0.85,
        "red left share {}",
        share_left(&red)
    );
    assert!(
        share_left(&blue) < 0.15,
        "blue left share {}",
        share_left(&blue)
    );
}

#[test]
fn drape_that_misses_the_grid_writes_nothing() {
    let d = tempfile::tempdir().unwrap();
    // 10 km east of the 64 m wide grid.
    write_split_drape(d.path(), 10_000.0);
    let path = common::moving_dune_job(d.path(), "colour: { by: drape, drape: photo.tif }\n");
    let job = job::load(&path).unwrap();
    let err = run_job(&job, &RunOptions::default()).unwrap_err();
    assert_eq!(err.exit_code(), 2, "{err}");
    assert!(
        matches!(&err, Error::Job { place, .. } if place == "colour.drape"),
        "{err}"
    );
    assert!(err.to_string().contains("does not overlap"), "{err}");
    assert!(!d.path().join("out").exists());
}

#[test]
fn drape_in_another_crs_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let mut g = common::geometry(64, 48);
    g.epsg = Some(32632);
    common::write_rgb(&d.path().join("photo.tif"), &g, |_, _| [9, 9, 9]);
    let path = common::moving_dune_job(d.path(), "colour: { by: drape, drape: photo.tif }\n");
    let err = run_job(&job::load(&path).unwrap(), &RunOptions::default()).unwrap_err();
    assert_eq!(err.exit_code(), 2, "{err}");
    let msg = err.to_string();
    assert!(
        msg.contains("photo.tif") && msg.contains("EPSG:32632") && msg.contains("EPSG:32631"),
        "{msg}"
    );
    assert!(!d.path().join("out").exists());
}
