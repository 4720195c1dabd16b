//! Fixtures made in code: small synthetic dunes written as GeoTIFFs, and job files around them.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use dunereel::geotiff::{write_bands, WriteOptions};
use dunereel::grid::{GridGeometry, LinearUnit};
use ndarray::Array2;

/// A 1 m grid of `cols` x `rows` cells in an invented UTM-style frame.
pub fn geometry(cols: usize, rows: usize) -> GridGeometry {
    GridGeometry {
        cols,
        rows,
        origin_x: 400_000.0,
        origin_y: 6_000_000.0,
        cell_x: 1.0,
        cell_y: 1.0,
        epsg: Some(32631),
        horizontal_unit: LinearUnit::Metre,
    }
}

/// A Gaussian dune of height `h` m and spread `sigma` cells centred at (`cx`, `cy`) cells, on a 2 m plane.
pub fn gaussian_dune(g: &GridGeometry, cx: f64, cy: f64, h: f64, sigma: f64) -> Array2<f32> {
    Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let dx = c as f64 - cx;
        let dy = r as f64 - cy;
        (2.0 + h * (-(dx * dx + dy * dy) / (2.0 * sigma * sigma)).exp()) as f32
    })
}

/// Writes a grid as a GeoTIFF.
pub fn write_grid(path: &Path, g: &GridGeometry, z: &Array2<f32>) {
    write_bands(
        path,
        g,
        &[z],
        &WriteOptions {
            nodata: Some(-9999.0),
            ..Default::default()
        },
    )
    .unwrap();
}

/// Writes three surveys of a dune moving east by 6 cells a year, and a job file; returns the job path.
pub fn moving_dune_job(dir: &Path, extra_yaml: &str) -> PathBuf {
    let g = geometry(64, 48);
    for (i, date) in ["2030-03-01", "2031-03-01", "2033-03-01"]
        .iter()
        .enumerate()
    {
        let years = [0.0, 1.0, 3.0][i];
        let z = gaussian_dune(&g, 16.0 + 6.0 * years, 24.0, 6.0 - 0.5 * years, 5.0);
        write_grid(&dir.join(format!("{date}.tif")), &g, &z);
    }
    let job = format!(
        "format_version: 1\ntitle: Test dune\nsurveys:\n  - {{ date: 2030-03-01, grid: 2030-03-01.tif, sigma_z_m: 0.1 }}\n  - {{ date: 2031-03-01, grid: 2031-03-01.tif, sigma_z_m: 0.1 }}\n  - {{ date: 2033-03-01, grid: 2033-03-01.tif }}\ntimeline: {{ frames_per_year: 3, fps: 10, hold_s: 0.5 }}\nview: {{ width: 128, height: 96 }}\noutput: {{ folder: out }}\n{extra_yaml}"
    );
    let path = dir.join("job.yaml");
    std::fs::write(&path, job).unwrap();
    path
}

/// Writes an 8-bit RGB GeoTIFF on `g` whose cell (row, col) has colour `rgb(row, col)`.
pub fn write_rgb(path: &Path, g: &GridGeometry, rgb: impl Fn(usize, usize) -> [u8; 3]) {
    use tiff::encoder::{colortype::RGB8, TiffEncoder};
    use tiff::tags::Tag;
    let data: Vec<u8> = (0..g.rows * g.cols)
        .flat_map(|i| rgb(i / g.cols, i % g.cols))
        .collect();
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let mut enc = TiffEncoder::new(&mut out).unwrap();
    let mut image = enc.new_image::<RGB8>(g.cols as u32, g.rows as u32).unwrap();
    let dir = image.encoder();
    dir.write_tag(Tag::ModelPixelScaleTag, &[g.cell_x, g.cell_y, 0.0][..])
        .unwrap();
    dir.write_tag(
        Tag::ModelTiepointTag,
        &[0.0, 0.0, 0.0, g.origin_x, g.origin_y, 0.0][..],
    )
    .unwrap();
    // GeoKey directory: version 1.1.0, 2 keys; projected model (1024 = 1), EPSG code (3072).
    let epsg = g.epsg.unwrap_or(32631) as u16;
    dir.write_tag(
        Tag::GeoKeyDirectoryTag,
        &[1u16, 1, 0, 2, 1024, 0, 1, 1, 3072, 0, 1, epsg][..],
    )
    .unwrap();
    image.write_data(&data).unwrap();
}

/// A seeded source of normal deviates (Box–Muller on a 64-bit linear congruential generator with
/// Knuth's MMIX constants): the same seed gives the same numbers on every machine.
pub struct SeededNoise(u64);

impl SeededNoise {
    /// A generator started at `seed`.
    pub fn new(seed: u64) -> Self {
        SeededNoise(seed)
    }

    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// One deviate of mean 0 and standard deviation `sigma`.
    pub fn normal(&mut self, sigma: f64) -> f64 {
        let (a, b) = (self.uniform(), self.uniform());
        sigma * (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
    }
}

/// A synthetic coastal survey: a beach rising gently from the south edge (0 m) inland at 1:40,
/// a Gaussian dune of height `h` m and spread `sigma` cells centred at (`cx`, `cy`) cells, and
/// seeded random survey noise of standard deviation `noise_m` on every cell.
#[allow(clippy::too_many_arguments)]
pub fn noisy_dune(
    g: &GridGeometry,
    cx: f64,
    cy: f64,
    h: f64,
    sigma: f64,
    noise_m: f64,
    seed: u64,
) -> Array2<f32> {
    let mut noise = SeededNoise::new(seed);
    Array2::from_shape_fn((g.rows, g.cols), |(r, c)| {
        let (dx, dy) = (c as f64 - cx, r as f64 - cy);
        let beach = (g.rows - 1 - r) as f64 * g.cell_y / 40.0;
        let dune = h * (-(dx * dx + dy * dy) / (2.0 * sigma * sigma)).exp();
        (beach + dune + noise.normal(noise_m)) as f32
    })
}
