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

/// A seeded stream of numbers (SplitMix64), so generated noise is the same on every machine.
pub struct Seeded(u64);

impl Seeded {
    /// A stream from `seed`.
    pub fn new(seed: u64) -> Self {
        Seeded(seed)
    }
    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        // Check: Steele, Lea & Flood (2014) SplitMix64 constants; from memory
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Roughly normal with standard deviation `sigma`: the sum of 12 uniforms minus 6 has mean 0
    /// and variance 1 (common practice, no source).
    pub fn normal(&mut self, sigma: f64) -> f64 {
        sigma * ((0..12).map(|_| self.uniform()).sum::<f64>() - 6.0)
    }
}

/// A moving dune of the series site: where it starts, how it moves, how it changes height.
#[derive(Debug, Clone, Copy)]
pub struct MovingDune {
    /// Start centre, (col, row) in cells from the grid's north-west corner.
    pub start: (f64, f64),
    /// Height above the ground at the first survey, metres.
    pub height_m: f64,
    /// Height at the second survey.
    pub height_after_m: f64,
    /// Spread (Gaussian sigma), metres.
    pub sigma_m: f64,
    /// Distance moved between the surveys, metres.
    pub move_m: f64,
    /// Direction of the move, compass degrees.
    pub azimuth_deg: f64,
}

impl MovingDune {
    /// The true (east, north) move in metres.
    pub fn shift(&self) -> (f64, f64) {
        let a = self.azimuth_deg.to_radians();
        (self.move_m * a.sin(), self.move_m * a.cos())
    }
}

/// The invented series site: 256 x 256 cells of 1 m with a fixed north–south ridge and a fixed
/// knoll (stable relief, every aspect) beside a large dune that moves 16 m toward 67.5° (east-north-
/// east) while losing a quarter of its height, and a small dune that moves 10 m toward 100°.
pub const SERIES_DUNES: [MovingDune; 2] = [
    MovingDune {
        start: (112.0, 150.0),
        height_m: 10.0,
        height_after_m: 7.5,
        sigma_m: 16.0,
        move_m: 16.0,
        azimuth_deg: 67.5,
    },
    MovingDune {
        start: (200.0, 60.0),
        height_m: 3.0,
        height_after_m: 3.0,
        sigma_m: 6.0,
        move_m: 10.0,
        azimuth_deg: 100.0,
    },
];

/// Elevation of the series site at local map point (east, north) metres from the grid's north-west
/// corner (north negative downwards), at survey `after` (false = first survey), without noise.
pub fn series_surface(east: f64, north: f64, after: bool) -> f64 {
    let (col, row) = (east, -north);
    let mut z = 2.0 + 0.01 * col + 0.004 * (256.0 - row);
    // Fixed ridge along col 40, tapering towards its ends.
    let along = (row - 128.0) / 95.0;
    z += 7.0 * (-(col - 40.0).powi(2) / (2.0 * 81.0)).exp() * (-along.powi(4)).exp();
    // Fixed knoll.
    z += 5.0 * (-((col - 205.0).powi(2) + (row - 205.0).powi(2)) / (2.0 * 144.0)).exp();
    for d in SERIES_DUNES {
        let (de, dn) = if after { d.shift() } else { (0.0, 0.0) };
        let h = if after { d.height_after_m } else { d.height_m };
        let (cx, cy) = (d.start.0 + de, d.start.1 - dn);
        let r2 = (col - cx).powi(2) + (row - cy).powi(2);
        z += h * (-r2 / (2.0 * d.sigma_m * d.sigma_m)).exp();
    }
    z
}

/// One survey of the series site on `geometry(256, 256)`, sampled at cell centres shifted by
/// (`east_m`, `north_m`) (the survey's mis-registration: it shows the ground at x − d at x),
/// raised by `dz_m`, with normal noise of `sigma_m` from `seed`.
pub fn series_survey(
    after: bool,
    east_m: f64,
    north_m: f64,
    dz_m: f64,
    sigma_m: f64,
    seed: u64,
) -> Array2<f32> {
    let mut rng = Seeded::new(seed);
    Array2::from_shape_fn((256, 256), |(r, c)| {
        let (e, n) = (c as f64 + 0.5 - east_m, -(r as f64 + 0.5) - north_m);
        (series_surface(e, n, after) + dz_m + rng.normal(sigma_m)) as f32
    })
}

/// Seeded normal noise: SplitMix64 (Steele, Lea & Flood 2014, from memory) and the sum of twelve
/// uniforms minus six (variance 1; common practice, no source). Same numbers on every machine.
pub struct Noise(pub u64);

impl Noise {
    pub fn normal(&mut self) -> f64 {
        let mut next = || {
            self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        };
        (0..12).map(|_| next()).sum::<f64>() - 6.0
    }
}

/// Five yearly surveys of a dune moving east 3 m a year and losing 0.4 m of height a year (12 m
/// at first), with `sigma_m` of seeded random noise, and a job file rendering them with the morph
/// and a 40° orbit. Returns the job path; the noise-free crest in year k is 2 + 12 − 0.4·k m.
pub fn noisy_series_job(dir: &Path, sigma_m: f64, extra_yaml: &str) -> PathBuf {
    let g = geometry(96, 72);
    let mut surveys = String::new();
    for k in 0..5 {
        let year = 2030 + k;
        let mut z = gaussian_dune(&g, 30.0 + 3.0 * k as f64, 36.0, 12.0 - 0.4 * k as f64, 9.0);
        let mut n = Noise(0xD00E + k as u64);
        z.mapv_inplace(|v| v + (sigma_m * n.normal()) as f32);
        let name = format!("{year}-06-01.tif");
        write_grid(&dir.join(&name), &g, &z);
        surveys.push_str(&format!(
            "  - {{ date: {year}-06-01, grid: {name}, sigma_z_m: {sigma_m} }}\n"
        ));
    }
    let job = format!(
        "format_version: 1\ntitle: Noisy test dune\nsurveys:\n{surveys}timeline: {{ frames_per_year: 4, fps: 10, hold_s: 0.5 }}\n\
         in_between: {{ method: morph }}\nflow: {{ window_m: 12, search_radius_m: 12 }}\n\
         view: {{ width: 192, height: 108, orbit_deg: 40, supersample: 1 }}\noutput: {{ folder: out }}\n{extra_yaml}"
    );
    let path = dir.join("job.yaml");
    std::fs::write(&path, job).unwrap();
    path
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
