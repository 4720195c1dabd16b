//! Writes the invented demo scenario (five dated elevation surveys of a migrating coastal dune, as
//! GeoTIFFs) plus `README.md` and `truth.json` (the generator's exact, noise-free figures) into a folder.
//!
//! Run: `cargo run --release --bin make-demo-data -- demo-data` (add `--force` to replace files).
//!
//! Everything here is invented: the place, the agency, the campaigns, the coordinates. The output is
//! bit-for-bit deterministic: no clock, no threads, no hash-map order; every random number comes
//! from a seeded SplitMix64 stream, and the Gaussian-like noise is a sum of uniforms (no `ln`/`cos`).
//!
//! The model, in local metres (X east of the grid's west edge, Y north of its south edge):
//! - base plane `z = BASE_Z0 + BASE_DZ_DX·X + BASE_DZ_DY·Y` (beach rising inland, to the east);
//! - main dune, a barchan-like crescent: along the wind axis `u` (downwind) and across it `v`,
//!   `s = u − κ·v²` (horns bend downwind), height `H·P(s)·exp(−(v/W)²)` with the half-Gaussian
//!   profile `P(s) = exp(−(s/Ls)²)` on the gentle windward side (s < 0) and `exp(−(s/Ll)²)` on the
//!   steep lee side (s ≥ 0, the slip face). Its top (height `H` above the base plane) is at the
//!   centre; its volume above the base plane is exactly `H·(π/2)·W·(Ls + Ll)` on an unbounded plane
//!   (the `κ` bend shifts each cross-section and so does not change it);
//! - a smaller secondary dune of the same form further south;
//! - per survey: small-scale roughness (value noise, ±`ROUGHNESS_M`) and measurement noise with the
//!   survey's stated standard deviation; one survey has a gap (nodata) where water stood.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use chrono::NaiveDate;
use clap::Parser;
use ndarray::Array2;
use serde::Serialize;

use dunereel::geotiff::{write_bands, WriteOptions};
use dunereel::grid::{GridGeometry, LinearUnit};

/// Writes the invented demo surveys, README.md and truth.json.
#[derive(Parser, Debug)]
#[command(version, about)]
struct Args {
    /// Folder to write into (created if missing).
    out_dir: PathBuf,
    /// Replace files that already exist.
    #[arg(long)]
    force: bool,
    /// For benchmarks: write only the five surveys, on an N x N raster over a 320 m square (the same
    /// landscape at 320/N m cells). Without it, the demo: 320 x 240 cells of 1 m, truth and README.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(16..=16384))]
    cells: Option<u32>,
}

// ---- Grid -------------------------------------------------------------------------------------

/// WGS 84 / UTM zone 31N: a real, generic projected CRS; the coordinates below are invented.
const EPSG: u32 = 32631;
const COLS: usize = 320;
const ROWS: usize = 240;
const CELL_M: f64 = 1.0;
/// West edge of the grid (UTM easting, m).
const ORIGIN_X: f64 = 512_400.0;
/// North edge of the grid (UTM northing, m).
const ORIGIN_Y: f64 = 5_841_360.0;
/// Value written for missing cells (tag 42113 holds its text).
const NODATA: f32 = -9999.0;

// ---- Model constants --------------------------------------------------------------------------

const BASE_Z0: f64 = 1.5;
const BASE_DZ_DX: f64 = 0.025;
const BASE_DZ_DY: f64 = 0.004;

/// Orientation of both dunes: the wind blows toward this azimuth (clockwise from north).
const WIND_AZIMUTH_DEG: f64 = 70.0;

const MAIN_START: (f64, f64) = (128.0, 116.0);
const MAIN_HEIGHT_START_M: f64 = 12.6;
/// Height lost per year of the main dune.
const MAIN_HEIGHT_LOSS_M_PER_YR: f64 = 0.25;
const MAIN_STOSS_M: f64 = 28.0;
/// Lee length: the steepest lee slope is `H·√(2/e)/Ll` ≈ 0.72 (36°) at the start, near the angle of
/// repose of dry sand (about 30–35°; common practice, no source).
const MAIN_LEE_M: f64 = 15.0;
const MAIN_HALF_WIDTH_M: f64 = 28.0;
const MAIN_HORN_BEND_PER_M: f64 = 0.018;
/// Migration of the main dune in each interval between consecutive surveys: (m/yr, azimuth deg).
const MAIN_MOTION: [(f64, f64); 4] = [(6.0, 68.0), (4.5, 72.0), (7.0, 70.0), (5.0, 74.0)];

const SECOND_START: (f64, f64) = (62.0, 34.0);
const SECOND_HEIGHT_M: f64 = 3.2;
const SECOND_STOSS_M: f64 = 12.0;
const SECOND_LEE_M: f64 = 5.0;
const SECOND_HALF_WIDTH_M: f64 = 16.0;
const SECOND_HORN_BEND_PER_M: f64 = 0.03;
const SECOND_MOTION: (f64, f64) = (8.0, 75.0);

/// Amplitude of the small-scale roughness (value noise), metres.
const ROUGHNESS_M: f64 = 0.06;
/// Lattice spacing of the roughness, cells.
const ROUGHNESS_CELLS: f64 = 4.0;
const SEED: u64 = 0x51_0e11_a5a4_d5e5;

/// One survey of the scenario.
struct SurveySpec {
    date: &'static str,
    sensor: &'static str,
    campaign: &'static str,
    sigma_z_m: f64,
    /// Nodata ellipse: centre X, centre Y, semi-axis X, semi-axis Y (local metres).
    gap: Option<(f64, f64, f64, f64)>,
}

const SURVEYS: [SurveySpec; 5] = [
    SurveySpec {
        date: "2026-04-14",
        sensor: "airborne lidar",
        campaign: "Orrisay Coastal Lidar 2026 (OCL-26)",
        sigma_z_m: 0.10,
        gap: None,
    },
    SurveySpec {
        date: "2027-10-02",
        sensor: "drone photogrammetry",
        campaign: "Quellan Sands drone flight QSD-1",
        sigma_z_m: 0.05,
        gap: None,
    },
    SurveySpec {
        date: "2028-09-19",
        sensor: "airborne lidar",
        campaign: "Orrisay Coastal Lidar 2028 (OCL-28)",
        sigma_z_m: 0.12,
        gap: Some((60.0, 200.0, 14.0, 8.0)),
    },
    SurveySpec {
        date: "2031-03-27",
        sensor: "airborne lidar",
        campaign: "Orrisay Coastal Lidar 2031 (OCL-31)",
        sigma_z_m: 0.15,
        gap: None,
    },
    SurveySpec {
        date: "2034-05-08",
        sensor: "airborne lidar",
        campaign: "Orrisay Coastal Lidar 2034 (OCL-34)",
        sigma_z_m: 0.08,
        gap: None,
    },
];

// ---- Deterministic random numbers ---------------------------------------------------------------

/// SplitMix64 (Steele, Lea & Flood 2014; constants from memory): one 64-bit state, one mix per draw.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        mix64(self.0)
    }
    /// Uniform in [0, 1) with 53 random bits.
    fn next_f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }
    /// Approximately standard normal: sum of 12 uniforms minus 6 (Irwin–Hall; mean 0, variance 1).
    fn next_normal(&mut self) -> f64 {
        (0..12).map(|_| self.next_f64()).sum::<f64>() - 6.0
    }
}

fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// Lattice value in [-1, 1] for (seed, i, j).
fn lattice(seed: u64, i: i64, j: i64) -> f64 {
    let h =
        mix64(seed ^ mix64((i as u64).wrapping_mul(0x1000_0000_01b3) ^ (j as u64).rotate_left(32)));
    (h >> 11) as f64 * (2.0 / (1u64 << 53) as f64) - 1.0
}

/// Smoothly interpolated value noise in [-1, 1] at continuous lattice coordinates.
fn value_noise(seed: u64, a: f64, b: f64) -> f64 {
    let (i, j) = (a.floor(), b.floor());
    let (fa, fb) = (a - i, b - j);
    let (sa, sb) = (fa * fa * (3.0 - 2.0 * fa), fb * fb * (3.0 - 2.0 * fb));
    let (i, j) = (i as i64, j as i64);
    let top = lattice(seed, i, j) * (1.0 - sa) + lattice(seed, i + 1, j) * sa;
    let bottom = lattice(seed, i, j + 1) * (1.0 - sa) + lattice(seed, i + 1, j + 1) * sa;
    top * (1.0 - sb) + bottom * sb
}

// ---- The noise-free model -----------------------------------------------------------------------

/// A barchan-like dune at one moment, in local metres.
#[derive(Debug, Clone, Copy)]
struct Dune {
    centre: (f64, f64),
    height_m: f64,
    stoss_m: f64,
    lee_m: f64,
    half_width_m: f64,
    horn_bend_per_m: f64,
}

impl Dune {
    /// Height above the base plane at local (X, Y).
    fn height_at(&self, x: f64, y: f64) -> f64 {
        let (sin_a, cos_a) = WIND_AZIMUTH_DEG.to_radians().sin_cos();
        let (dx, dy) = (x - self.centre.0, y - self.centre.1);
        let u = dx * sin_a + dy * cos_a;
        let v = dx * cos_a - dy * sin_a;
        let s = u - self.horn_bend_per_m * v * v;
        let len = if s < 0.0 { self.stoss_m } else { self.lee_m };
        self.height_m * (-(s / len).powi(2)).exp() * (-(v / self.half_width_m).powi(2)).exp()
    }
    /// Exact volume above the base plane on an unbounded plane, m³.
    fn volume_m3(&self) -> f64 {
        self.height_m
            * std::f64::consts::FRAC_PI_2
            * self.half_width_m
            * (self.stoss_m + self.lee_m)
    }
}

fn base_m(x: f64, y: f64) -> f64 {
    BASE_Z0 + BASE_DZ_DX * x + BASE_DZ_DY * y
}

/// State of the scenario at one survey.
#[derive(Debug, Clone, Copy)]
struct Moment {
    decimal_year: f64,
    main: Dune,
    second: Dune,
}

impl Moment {
    /// Noise-free elevation at local (X, Y).
    fn model_m(&self, x: f64, y: f64) -> f64 {
        base_m(x, y) + self.main.height_at(x, y) + self.second.height_at(x, y)
    }
}

/// Decimal year of a date at 00:00, the actual-length-year convention shared with the tool.
fn decimal_year(date: NaiveDate) -> f64 {
    dunereel::timeline::decimal_year(date.and_time(chrono::NaiveTime::MIN))
}

fn parse_date(text: &str) -> NaiveDate {
    // The dates are constants of this program; a failure here is a bug, not bad input.
    NaiveDate::parse_from_str(text, "%Y-%m-%d").expect("scenario dates are valid")
}

fn step((x, y): (f64, f64), rate_m_per_yr: f64, azimuth_deg: f64, years: f64) -> (f64, f64) {
    let (s, c) = azimuth_deg.to_radians().sin_cos();
    (x + rate_m_per_yr * years * s, y + rate_m_per_yr * years * c)
}

fn moments() -> Vec<Moment> {
    let years: Vec<f64> = SURVEYS
        .iter()
        .map(|s| decimal_year(parse_date(s.date)))
        .collect();
    let mut main_c = MAIN_START;
    let mut out = Vec::with_capacity(SURVEYS.len());
    for (k, &t) in years.iter().enumerate() {
        if k > 0 {
            let (rate, az) = MAIN_MOTION[k - 1];
            main_c = step(main_c, rate, az, t - years[k - 1]);
        }
        let elapsed = t - years[0];
        out.push(Moment {
            decimal_year: t,
            main: Dune {
                centre: main_c,
                height_m: MAIN_HEIGHT_START_M - MAIN_HEIGHT_LOSS_M_PER_YR * elapsed,
                stoss_m: MAIN_STOSS_M,
                lee_m: MAIN_LEE_M,
                half_width_m: MAIN_HALF_WIDTH_M,
                horn_bend_per_m: MAIN_HORN_BEND_PER_M,
            },
            second: Dune {
                centre: step(SECOND_START, SECOND_MOTION.0, SECOND_MOTION.1, elapsed),
                height_m: SECOND_HEIGHT_M,
                stoss_m: SECOND_STOSS_M,
                lee_m: SECOND_LEE_M,
                half_width_m: SECOND_HALF_WIDTH_M,
                horn_bend_per_m: SECOND_HORN_BEND_PER_M,
            },
        });
    }
    out
}

/// The raster the scenario is sampled on: the demo's own, or a finer square one for benchmarks.
#[derive(Debug, Clone, Copy)]
struct Raster {
    cols: usize,
    rows: usize,
    cell_m: f64,
}

/// The demo raster: 320 x 240 cells of 1 m.
const DEMO: Raster = Raster {
    cols: COLS,
    rows: ROWS,
    cell_m: CELL_M,
};

impl Raster {
    /// A square raster of `n` x `n` cells over the demo's width (320 m): the same landscape, finer,
    /// and 80 m more beach to the south. For benchmarks of large grids (`--cells`).
    fn square(n: usize) -> Raster {
        Raster {
            cols: n,
            rows: n,
            cell_m: COLS as f64 * CELL_M / n as f64,
        }
    }

    fn geometry(&self) -> GridGeometry {
        GridGeometry {
            cols: self.cols,
            rows: self.rows,
            origin_x: ORIGIN_X,
            origin_y: ORIGIN_Y,
            cell_x: self.cell_m,
            cell_y: self.cell_m,
            epsg: Some(EPSG),
            horizontal_unit: LinearUnit::Metre,
        }
    }

    /// Local (X, Y) of the centre of cell (row, col), from the raster's south-west corner.
    fn cell_local(&self, row: usize, col: usize) -> (f64, f64) {
        (
            (col as f64 + 0.5) * self.cell_m,
            (self.rows as f64 - row as f64 - 0.5) * self.cell_m,
        )
    }
}

fn geometry() -> GridGeometry {
    DEMO.geometry()
}

/// Local (X, Y) of the centre of cell (row, col) of the demo raster.
fn cell_local(row: usize, col: usize) -> (f64, f64) {
    DEMO.cell_local(row, col)
}

fn to_map((x, y): (f64, f64)) -> (f64, f64) {
    (ORIGIN_X + x, ORIGIN_Y - ROWS as f64 * CELL_M + y)
}

/// The elevations of survey `k` as written: model + roughness + measurement noise, NaN in the gap.
fn survey_grid(k: usize, m: &Moment, raster: Raster) -> Array2<f32> {
    let spec = &SURVEYS[k];
    let rough_seed = SEED ^ mix64(1000 + k as u64);
    let mut noise = SplitMix64(SEED ^ mix64(2000 + k as u64));
    Array2::from_shape_fn((raster.rows, raster.cols), |(r, c)| {
        let (x, y) = raster.cell_local(r, c);
        // Drawn for every cell, gap or not, so the gap does not shift the noise of other cells.
        let e = spec.sigma_z_m * noise.next_normal();
        if let Some((gx, gy, ax, ay)) = spec.gap {
            if ((x - gx) / ax).powi(2) + ((y - gy) / ay).powi(2) <= 1.0 {
                return f32::NAN;
            }
        }
        let rough = ROUGHNESS_M * value_noise(rough_seed, x / ROUGHNESS_CELLS, y / ROUGHNESS_CELLS);
        (m.model_m(x, y) + rough + e) as f32
    })
}

// ---- Truth ----------------------------------------------------------------------------------------

/// Location and elevation of the highest point of the noise-free surface near the main dune,
/// found by a 0.1 m search over ±6 m around the dune centre, refined by a 0.002 m search over ±0.15 m.
fn surface_peak(m: &Moment) -> (f64, f64, f64) {
    let mut best = (
        m.main.centre.0,
        m.main.centre.1,
        m.model_m(m.main.centre.0, m.main.centre.1),
    );
    for (half, stepm) in [(6.0_f64, 0.1_f64), (0.15, 0.002)] {
        let (cx, cy) = (best.0, best.1);
        let n = (half / stepm).round() as i64;
        for i in -n..=n {
            for j in -n..=n {
                let (x, y) = (cx + i as f64 * stepm, cy + j as f64 * stepm);
                let z = m.model_m(x, y);
                if z > best.2 {
                    best = (x, y, z);
                }
            }
        }
    }
    best
}

fn round6(v: f64) -> f64 {
    (v * 1e6).round() / 1e6
}

#[derive(Serialize)]
struct Truth {
    about: &'static str,
    crs: String,
    grid: GridTruth,
    base_plane: BasePlaneTruth,
    decimal_year_convention: &'static str,
    surveys: Vec<SurveyTruth>,
    intervals: Vec<IntervalTruth>,
}

#[derive(Serialize)]
struct GridTruth {
    cols: usize,
    rows: usize,
    cell_size_m: f64,
    west: f64,
    south: f64,
    east: f64,
    north: f64,
    nodata: f32,
}

#[derive(Serialize)]
struct BasePlaneTruth {
    formula: &'static str,
    z0_m: f64,
    dz_dx: f64,
    dz_dy: f64,
    local_origin_x: f64,
    local_origin_y: f64,
}

#[derive(Serialize)]
struct SurveyTruth {
    file: String,
    date: &'static str,
    decimal_year: f64,
    sensor: &'static str,
    campaign: &'static str,
    sigma_z_m: f64,
    nodata_cells: usize,
    main_dune: DuneTruth,
    secondary_dune: SecondaryTruth,
}

#[derive(Serialize)]
struct DuneTruth {
    height_above_base_m: f64,
    crest_x: f64,
    crest_y: f64,
    base_elevation_at_crest_m: f64,
    crest_elevation_m: f64,
    surface_peak_x: f64,
    surface_peak_y: f64,
    surface_peak_elevation_m: f64,
    volume_above_base_m3: f64,
    volume_above_base_cell_sum_m3: f64,
}

#[derive(Serialize)]
struct SecondaryTruth {
    height_above_base_m: f64,
    crest_x: f64,
    crest_y: f64,
    volume_above_base_m3: f64,
}

#[derive(Serialize)]
struct IntervalTruth {
    from: &'static str,
    to: &'static str,
    years: f64,
    crest_shift_east_m: f64,
    crest_shift_north_m: f64,
    crest_shift_m: f64,
    crest_azimuth_deg: f64,
    crest_rate_m_per_yr: f64,
    surface_peak_shift_east_m: f64,
    surface_peak_shift_north_m: f64,
    surface_peak_shift_m: f64,
    height_change_m: f64,
    volume_change_m3: f64,
}

fn file_name(k: usize) -> String {
    format!("quellan-{}.tif", SURVEYS[k].date)
}

fn truth(moments: &[Moment], grids: &[Array2<f32>]) -> Truth {
    let g = geometry();
    let (west, south, east, north) = g.extent();
    let mut surveys = Vec::new();
    for (k, m) in moments.iter().enumerate() {
        let d = &m.main;
        let (cx, cy) = to_map(d.centre);
        let (px, py, pz) = surface_peak(m);
        let (px, py) = to_map((px, py));
        let mut cell_sum = 0.0;
        for r in 0..ROWS {
            for c in 0..COLS {
                let (x, y) = cell_local(r, c);
                cell_sum += d.height_at(x, y) * CELL_M * CELL_M;
            }
        }
        let (sx, sy) = to_map(m.second.centre);
        surveys.push(SurveyTruth {
            file: file_name(k),
            date: SURVEYS[k].date,
            decimal_year: round6(m.decimal_year),
            sensor: SURVEYS[k].sensor,
            campaign: SURVEYS[k].campaign,
            sigma_z_m: SURVEYS[k].sigma_z_m,
            nodata_cells: grids[k].iter().filter(|v| v.is_nan()).count(),
            main_dune: DuneTruth {
                height_above_base_m: round6(d.height_m),
                crest_x: round6(cx),
                crest_y: round6(cy),
                base_elevation_at_crest_m: round6(base_m(d.centre.0, d.centre.1)),
                crest_elevation_m: round6(m.model_m(d.centre.0, d.centre.1)),
                surface_peak_x: round6(px),
                surface_peak_y: round6(py),
                surface_peak_elevation_m: round6(pz),
                volume_above_base_m3: round6(d.volume_m3()),
                volume_above_base_cell_sum_m3: round6(cell_sum),
            },
            secondary_dune: SecondaryTruth {
                height_above_base_m: round6(m.second.height_m),
                crest_x: round6(sx),
                crest_y: round6(sy),
                volume_above_base_m3: round6(m.second.volume_m3()),
            },
        });
    }
    let mut intervals = Vec::new();
    for k in 1..moments.len() {
        let (a, b) = (&moments[k - 1], &moments[k]);
        let years = b.decimal_year - a.decimal_year;
        let de = b.main.centre.0 - a.main.centre.0;
        let dn = b.main.centre.1 - a.main.centre.1;
        let dist = de.hypot(dn);
        let (pa, pb) = (surface_peak(a), surface_peak(b));
        let (pe, pn) = (pb.0 - pa.0, pb.1 - pa.1);
        intervals.push(IntervalTruth {
            from: SURVEYS[k - 1].date,
            to: SURVEYS[k].date,
            years: round6(years),
            crest_shift_east_m: round6(de),
            crest_shift_north_m: round6(dn),
            crest_shift_m: round6(dist),
            crest_azimuth_deg: round6(de.atan2(dn).to_degrees().rem_euclid(360.0)),
            crest_rate_m_per_yr: round6(dist / years),
            surface_peak_shift_east_m: round6(pe),
            surface_peak_shift_north_m: round6(pn),
            surface_peak_shift_m: round6(pe.hypot(pn)),
            height_change_m: round6(b.main.height_m - a.main.height_m),
            volume_change_m3: round6(b.main.volume_m3() - a.main.volume_m3()),
        });
    }
    Truth {
        about: "Invented scenario. Exact figures of the noise-free model that generated the surveys; see README.md for how each was computed.",
        crs: format!("EPSG:{EPSG} (WGS 84 / UTM zone 31N); coordinates invented"),
        grid: GridTruth { cols: COLS, rows: ROWS, cell_size_m: CELL_M, west, south, east, north, nodata: NODATA },
        base_plane: BasePlaneTruth {
            formula: "z = z0_m + dz_dx * (x - local_origin_x) + dz_dy * (y - local_origin_y)",
            z0_m: BASE_Z0,
            dz_dx: BASE_DZ_DX,
            dz_dy: BASE_DZ_DY,
            local_origin_x: west,
            local_origin_y: south,
        },
        decimal_year_convention: "year + (days since 1 January) / (days in that year)",
        surveys,
        intervals,
    }
}

// ---- README ---------------------------------------------------------------------------------------

fn readme(t: &Truth) -> String {
    let mut s = String::new();
    s.push_str(
        "# Demo data: Quellan Sands (an invented place)\n\n\
Everything in this folder is invented: Quellan Sands, the Orrisay Coast, the Orrisay Shoreline\n\
Monitoring Unit, its survey campaigns and the coordinates. The grids are made by a program\n\
(`src/bin/make-demo-data.rs`), not measured. Any likeness to a real place or survey is chance.\n\n\
## Scenario\n\n\
Quellan Sands is a dune field behind a sandy beach on the Orrisay Coast. The beach rises gently\n\
inland (eastward). Onshore winds from the west-south-west drive a large barchan-like dune,\n\
about 12 m high, inland toward the east-north-east at 4.5–7 m per year; its steep slip face is on\n\
the east-north-east (lee) side and its horns point downwind. The dune slowly loses height\n\
(0.25 m per year). A smaller dune, about 3 m high, moves faster (8 m per year) across the south\n\
of the area. The Orrisay Shoreline Monitoring Unit surveyed the field five times in eight years,\n\
at uneven intervals; in September 2028 standing water left a gap (nodata) in the north-west.\n\n\
## Surveys\n\n\
| File | Date | Sensor | Campaign | Vertical uncertainty (1σ) |\n\
|---|---|---|---|---|\n",
    );
    for sv in &t.surveys {
        s.push_str(&format!(
            "| `{}` | {} | {} | {} | {:.2} m |\n",
            sv.file, sv.date, sv.sensor, sv.campaign, sv.sigma_z_m
        ));
    }
    s.push_str(&format!(
        "\n## Grid\n\n\
- CRS: EPSG:{EPSG} (WGS 84 / UTM zone 31N), a real generic CRS; the coordinates are invented.\n\
- {COLS} columns × {ROWS} rows of {CELL_M} m cells, pixel-is-area; extent west {:.0}, south {:.0},\n  east {:.0}, north {:.0}.\n\
- Float32 elevations in metres, DEFLATE-compressed GeoTIFF, nodata written as {NODATA} (tag 42113).\n\n",
        t.grid.west, t.grid.south, t.grid.east, t.grid.north
    ));
    s.push_str(
        "## Regenerate\n\n\
```sh\n\
cargo run --release --bin make-demo-data -- demo-data          # refuses to replace files\n\
cargo run --release --bin make-demo-data -- demo-data --force  # replaces them\n\
```\n\n\
The output is bit-for-bit the same on every run (seeded SplitMix64 numbers, no clock, no threads).\n\n",
    );
    let motion: Vec<String> = MAIN_MOTION
        .iter()
        .map(|(r, a)| format!("{r:.1} m/yr toward {a}°"))
        .collect();
    s.push_str(&format!(
        "## How the surfaces are built\n\n\
Local coordinates: X metres east of the west edge, Y metres north of the south edge.\n\n\
- Base plane: `z = {BASE_Z0} + {BASE_DZ_DX}·X + {BASE_DZ_DY}·Y` m.\n\
- Main dune: with `u` the distance downwind (toward azimuth {WIND_AZIMUTH_DEG}°) and `v` the distance\n  \
across the wind from the dune centre, `s = u − {MAIN_HORN_BEND_PER_M}·v²` (the horns bend downwind)\n  \
and height `H·P(s)·exp(−(v/{MAIN_HALF_WIDTH_M})²)`, where `P(s) = exp(−(s/{MAIN_STOSS_M})²)` on the\n  \
windward side (s < 0) and `exp(−(s/{MAIN_LEE_M})²)` on the steeper lee side (s ≥ 0, the slip face).\n  \
H falls from {MAIN_HEIGHT_START_M} m by {MAIN_HEIGHT_LOSS_M_PER_YR} m per (decimal) year. The centre starts at\n  \
X = {}, Y = {} and moves between consecutive surveys at {}.\n\
- Secondary dune: the same form with H = {SECOND_HEIGHT_M} m, lengths {SECOND_STOSS_M} m / {SECOND_LEE_M} m,\n  \
half-width {SECOND_HALF_WIDTH_M} m, bend {SECOND_HORN_BEND_PER_M}, starting at X = {}, Y = {} and moving\n  \
{} m/yr toward {}°.\n\
- Each survey adds small-scale roughness (smooth value noise, at most ±{ROUGHNESS_M} m, {ROUGHNESS_CELLS} m\n  \
lattice, new per survey) and measurement noise with the survey's standard deviation (a sum of\n  \
12 uniform numbers minus 6, nearly Gaussian). The 2028-09-19 survey has an elliptical gap (nodata).\n\n",
        MAIN_START.0,
        MAIN_START.1,
        motion.join(", "),
        SECOND_START.0,
        SECOND_START.1,
        SECOND_MOTION.0,
        SECOND_MOTION.1,
    ));
    s.push_str(
        "## truth.json: the generator's known answers\n\n\
All figures come from the noise-free model (base plane + both dunes; no roughness, no noise),\n\
rounded to 1e-6. Map coordinates are EPSG:32631 metres.\n\n\
- `height_above_base_m`: H, the main dune's top above the base plane (exact: the profile is at\n  \
most 1, reached only at the centre).\n\
- `crest_x`, `crest_y`: the main dune's centre, where that top is.\n\
- `base_elevation_at_crest_m`, `crest_elevation_m`: base plane and full model at the centre.\n\
- `surface_peak_*`: the highest point of the full noise-free surface near the main dune. The\n  \
base plane rises toward the east-north-east, which moves this point a few decimetres downwind\n  \
of the centre. Found by a 0.1 m search over ±6 m, then a 0.002 m search over ±0.15 m;\n  \
position good to about 0.002 m. A grid-based measure sees it at a cell centre (up to 0.71 m\n  \
away) plus roughness and noise.\n\
- `volume_above_base_m3`: exact closed form `H·(π/2)·W·(Ls + Ll)` for the unbounded plane.\n  \
`volume_above_base_cell_sum_m3`: sum over this grid's cell centres × 1 m² of the main dune's\n  \
height alone (what a cell sum sees without noise; the secondary dune is not included).\n\
- `intervals`: per consecutive pair, the true translation of the main dune centre (east, north,\n  \
distance, azimuth clockwise from north, rate = distance / years with decimal years as above),\n  \
the shift of the surface peak, and the changes of height and volume.\n\
- `nodata_cells`: number of cells written as nodata.\n",
    );
    s
}

// ---- Writing --------------------------------------------------------------------------------------

fn write_text_atomic(path: &Path, text: &str) -> Result<(), String> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.{}.tmp", std::process::id()));
    fs::write(&tmp, text)
        .and_then(|()| fs::rename(&tmp, path))
        .map_err(|e| {
            let _ = fs::remove_file(&tmp);
            format!("{}: {e}", path.display())
        })
}

/// Writes the whole scenario into `out_dir` (with `cells`, only the surveys, on an n x n raster);
/// returns the files written.
fn generate(out_dir: &Path, force: bool, cells: Option<usize>) -> Result<Vec<PathBuf>, String> {
    let raster = cells.map_or(DEMO, Raster::square);
    let mut targets: Vec<PathBuf> = (0..SURVEYS.len())
        .map(|k| out_dir.join(file_name(k)))
        .collect();
    if cells.is_none() {
        targets.push(out_dir.join("truth.json"));
        targets.push(out_dir.join("README.md"));
    }
    if !force {
        let existing: Vec<String> = targets
            .iter()
            .filter(|p| p.exists())
            .map(|p| p.display().to_string())
            .collect();
        if !existing.is_empty() {
            return Err(format!(
                "{} already exist(s); pass --force to replace the demo files",
                existing.join(", ")
            ));
        }
    }
    fs::create_dir_all(out_dir).map_err(|e| format!("{}: {e}", out_dir.display()))?;
    let moments = moments();
    let grids: Vec<Array2<f32>> = moments
        .iter()
        .enumerate()
        .map(|(k, m)| survey_grid(k, m, raster))
        .collect();
    let geometry = raster.geometry();
    for (k, grid) in grids.iter().enumerate() {
        let spec = &SURVEYS[k];
        let opts = WriteOptions {
            nodata: Some(NODATA),
            overwrite: force,
            band_descriptions: vec![format!(
                "elevation (m), {}, {}, sigma {:.2} m",
                spec.date, spec.sensor, spec.sigma_z_m
            )],
            ..Default::default()
        };
        write_bands(&targets[k], &geometry, &[grid], &opts).map_err(|e| e.to_string())?;
    }
    if cells.is_some() {
        // The truth and README describe the demo raster; a benchmark raster has only its grids.
        return Ok(targets);
    }
    let t = truth(&moments, &grids);
    let json = serde_json::to_string_pretty(&t).map_err(|e| e.to_string())? + "\n";
    write_text_atomic(&targets[SURVEYS.len()], &json)?;
    write_text_atomic(&targets[SURVEYS.len() + 1], &readme(&t))?;
    Ok(targets)
}

fn main() -> ExitCode {
    let args = Args::parse();
    match generate(&args.out_dir, args.force, args.cells.map(|n| n as usize)) {
        Ok(files) => {
            let mut total = 0u64;
            for f in &files {
                let size = fs::metadata(f).map(|m| m.len()).unwrap_or(0);
                total += size;
                println!("wrote {} ({size} bytes)", f.display());
            }
            println!("total {total} bytes");
            ExitCode::SUCCESS
        }
        Err(msg) => {
            eprintln!("make-demo-data: {msg}");
            ExitCode::from(1)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use tiff::decoder::{Decoder, DecodingResult};

    fn read_tif(path: &Path) -> Vec<f32> {
        let mut dec = Decoder::new(fs::File::open(path).unwrap()).unwrap();
        assert_eq!(dec.dimensions().unwrap(), (COLS as u32, ROWS as u32));
        match dec.read_image().unwrap() {
            DecodingResult::F32(v) => v,
            _ => panic!("{}: not float32", path.display()),
        }
    }

    #[test]
    fn decimal_years() {
        // Check: actual-length-year convention — 2019-03-15 → 2019.2 (73/365); REFERENCES.md §8, abs diff < 1e-12
        assert!((decimal_year(parse_date("2019-03-15")) - 2019.2).abs() < 1e-12);
        // Check: 2020-07-02 → 2020.5 exactly (183/366, leap year); REFERENCES.md §8
        assert_eq!(decimal_year(parse_date("2020-07-02")), 2020.5);
    }

    #[test]
    fn scenario_has_uneven_gaps_and_stays_inside_the_grid() {
        let m = moments();
        let gaps: Vec<f64> = m
            .windows(2)
            .map(|w| w[1].decimal_year - w[0].decimal_year)
            .collect();
        let (lo, hi) = gaps
            .iter()
            .fold((f64::MAX, 0.0f64), |(a, b), &g| (a.min(g), b.max(g)));
        assert!(hi > 2.0 * lo, "gaps {gaps:?}");
        let span = m[4].decimal_year - m[0].decimal_year;
        assert!((7.5..8.5).contains(&span), "span {span}");
        for mo in &m {
            // 3 stoss lengths windward and 3 half-widths across stay inside the grid.
            let (x, y) = mo.main.centre;
            assert!(
                x - 3.0 * MAIN_STOSS_M > 0.0 && x + 100.0 < COLS as f64,
                "x {x}"
            );
            assert!(
                y - 3.0 * MAIN_HALF_WIDTH_M > 0.0 && y + 3.0 * MAIN_HALF_WIDTH_M < ROWS as f64,
                "y {y}"
            );
        }
    }

    #[test]
    fn closed_form_volume_matches_fine_integration() {
        let m = moments()[0];
        // Midpoint rule on a 0.25 m grid over a square far larger than the dune.
        let h = 0.25;
        let (cx, cy) = m.main.centre;
        let n = (260.0 / h) as i64;
        let mut sum = 0.0;
        for i in -n..n {
            for j in -n..n {
                sum += m
                    .main
                    .height_at(cx + (i as f64 + 0.5) * h, cy + (j as f64 + 0.5) * h);
            }
        }
        let numeric = sum * h * h;
        // Check: analytic — ∫exp(−(s/L)²) over a half line = L·√π/2, ∫exp(−(v/W)²) = W·√π, so the
        // volume is H·(π/2)·W·(Ls+Ll); relative diff < 1e-6 (midpoint rule, 0.25 m, ±260 m)
        let exact = m.main.volume_m3();
        assert!(
            ((numeric - exact) / exact).abs() < 1e-6,
            "{numeric} vs {exact}"
        );
    }

    #[test]
    fn generating_twice_gives_identical_bytes_and_refuses_overwrite() {
        let a = tempfile::tempdir().unwrap();
        let b = tempfile::tempdir().unwrap();
        let fa = generate(a.path(), false, None).unwrap();
        let fb = generate(b.path(), false, None).unwrap();
        assert_eq!(fa.len(), 7);
        for (x, y) in fa.iter().zip(&fb) {
            assert_eq!(
                fs::read(x).unwrap(),
                fs::read(y).unwrap(),
                "{}",
                x.display()
            );
        }
        let total: u64 = fa.iter().map(|f| fs::metadata(f).unwrap().len()).sum();
        assert!(total <= 3_000_000, "demo data is {total} bytes");
        let err = generate(a.path(), false, None).unwrap_err();
        assert!(err.contains("--force"), "{err}");
        let again = generate(a.path(), true, None).unwrap();
        assert_eq!(fs::read(&again[0]).unwrap(), fs::read(&fb[0]).unwrap());
    }

    #[test]
    fn written_files_match_truth() {
        let dir = tempfile::tempdir().unwrap();
        let files = generate(dir.path(), false, None).unwrap();
        let truth: serde_json::Value =
            serde_json::from_str(&fs::read_to_string(dir.path().join("truth.json")).unwrap())
                .unwrap();
        let surveys = truth["surveys"].as_array().unwrap();
        let f = |v: &serde_json::Value| v.as_f64().unwrap();
        for (k, sv) in surveys.iter().enumerate() {
            let z = read_tif(&files[k]);
            let sigma = f(&sv["sigma_z_m"]);
            let main = &sv["main_dune"];
            let nodata = z.iter().filter(|v| **v == NODATA).count();
            assert_eq!(
                nodata as u64,
                sv["nodata_cells"].as_u64().unwrap(),
                "survey {k}"
            );
            assert_eq!(nodata > 0, k == 2, "only the 2028 survey has a gap");

            // Highest cell within 20 m of the stated surface peak.
            let (px, py) = (f(&main["surface_peak_x"]), f(&main["surface_peak_y"]));
            let mut best = (f32::MIN, 0.0, 0.0);
            for r in 0..ROWS {
                for c in 0..COLS {
                    let (x, y) = to_map(cell_local(r, c));
                    let v = z[r * COLS + c];
                    if v != NODATA && (x - px).hypot(y - py) < 20.0 && v > best.0 {
                        best = (v, x, y);
                    }
                }
            }
            // Tolerance: roughness (≤ 0.06 m) + noise maximum over the ~50 cells within 0.2 m
            // of the top (≈ 3σ) + curvature within one cell (< 0.1 m): 0.06 + 3σ + 0.1.
            let tol_z = 0.16 + 3.0 * sigma;
            let dz = best.0 as f64 - f(&main["surface_peak_elevation_m"]);
            assert!(
                dz.abs() < tol_z,
                "survey {k}: highest cell off by {dz} m (tol {tol_z})"
            );
            // Tolerance 8 m: the top is flat to a few decimetres over several metres, so noise
            // moves the highest cell around it.
            let dxy = (best.1 - px).hypot(best.2 - py);
            assert!(
                dxy < 8.0,
                "survey {k}: highest cell {dxy} m from the stated peak"
            );

            // Volume above the stated base plane: cell sum of the file ≈ both dunes' exact volumes.
            if nodata == 0 {
                let bp = &truth["base_plane"];
                let mut vol = 0.0;
                for r in 0..ROWS {
                    for c in 0..COLS {
                        let (x, y) = to_map(cell_local(r, c));
                        let base = f(&bp["z0_m"])
                            + f(&bp["dz_dx"]) * (x - f(&bp["local_origin_x"]))
                            + f(&bp["dz_dy"]) * (y - f(&bp["local_origin_y"]));
                        vol += z[r * COLS + c] as f64 - base;
                    }
                }
                let expect = f(&main["volume_above_base_m3"])
                    + f(&sv["secondary_dune"]["volume_above_base_m3"]);
                // Tolerance 0.5 %: noise sums to ≈ σ·√76800 ≈ 40 m³ and roughness to a few
                // hundred m³ at most, against ≈ 20 000 m³.
                assert!(
                    ((vol - expect) / expect).abs() < 0.005,
                    "survey {k}: {vol} vs {expect}"
                );
            }
        }
        // Consecutive translations in truth.json agree with the stated crests.
        for (k, iv) in truth["intervals"].as_array().unwrap().iter().enumerate() {
            let (a, b) = (&surveys[k]["main_dune"], &surveys[k + 1]["main_dune"]);
            let de = f(&b["crest_x"]) - f(&a["crest_x"]);
            let dn = f(&b["crest_y"]) - f(&a["crest_y"]);
            assert!((de - f(&iv["crest_shift_east_m"])).abs() < 2e-6);
            assert!((dn - f(&iv["crest_shift_north_m"])).abs() < 2e-6);
            let (rate, az) = MAIN_MOTION[k];
            // Check: analytic — rate = distance / decimal years reproduces the model's rate; abs diff < 1e-5
            assert!((f(&iv["crest_rate_m_per_yr"]) - rate).abs() < 1e-5);
            assert!((f(&iv["crest_azimuth_deg"]) - az).abs() < 1e-5);
        }
    }
}
