//! Bench: `geotiff::read_grid` on float32 GeoTIFFs written by the `tiff` crate's encoder in setup
//! (1024² and 4096² cells, DEFLATE and uncompressed). Reports the median of several reads, in
//! cells/s and MB/s of decoded float32. Run with `cargo bench --bench read_grid`.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;
use std::time::Instant;

use tiff::encoder::{colortype, Compression, DeflateLevel, TiffEncoder};
use tiff::tags::Tag;

const RUNS: usize = 7;

/// An invented dune field: long-crested ridges, a cross pattern and lidar-like noise in the low bits.
fn surface(size: usize) -> Vec<f32> {
    let mut z = Vec::with_capacity(size * size);
    let mut seed = 0x2545_f491_4f6c_dd1du64;
    for r in 0..size {
        for c in 0..size {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            let noise = (seed >> 40) as f32 / (1u64 << 24) as f32 * 0.02;
            let (x, y) = (c as f32, r as f32);
            z.push(
                4.0 + 3.0 * (x / 37.0 + 0.3 * (y / 91.0).sin()).sin()
                    + 0.5 * (y / 23.0).cos()
                    + noise,
            );
        }
    }
    z
}

fn write(path: &Path, size: usize, compression: Compression) {
    let z = surface(size);
    let file = BufWriter::new(File::create(path).expect("create bench file"));
    let mut enc = TiffEncoder::new(file)
        .expect("encoder")
        .with_compression(compression);
    let mut img = enc
        .new_image::<colortype::Gray32Float>(size as u32, size as u32)
        .expect("image");
    img.rows_per_strip(16).expect("rows per strip");
    let d = img.encoder();
    d.write_tag(Tag::ModelPixelScaleTag, &[1.0f64, 1.0, 0.0][..])
        .expect("scale");
    d.write_tag(
        Tag::ModelTiepointTag,
        &[0.0f64, 0.0, 0.0, 500_000.0, 4_000_000.0, 0.0][..],
    )
    .expect("tiepoint");
    let keys: [u16; 16] = [1, 1, 0, 3, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633];
    d.write_tag(Tag::GeoKeyDirectoryTag, &keys[..])
        .expect("geokeys");
    d.write_tag(Tag::GdalNodata, "-9999").expect("nodata");
    img.write_data(&z).expect("pixels");
}

fn main() {
    let dir = tempfile::tempdir().expect("temp dir");
    let cases = [
        (
            "1024² deflate",
            1024,
            Compression::Deflate(DeflateLevel::Balanced),
        ),
        (
            "4096² deflate",
            4096,
            Compression::Deflate(DeflateLevel::Balanced),
        ),
        ("4096² none", 4096, Compression::Uncompressed),
    ];
    println!("read_grid: median of {RUNS} reads");
    for (label, size, compression) in cases {
        let path = dir.path().join(format!("bench-{size}.tif"));
        write(&path, size, compression);
        let file_mb = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0) as f64 / 1e6;
        let mut times = Vec::with_capacity(RUNS);
        for _ in 0..RUNS {
            let t = Instant::now();
            let (grid, _) = dunereel::geotiff::read_grid(&path).expect("bench file reads");
            times.push(t.elapsed().as_secs_f64());
            assert_eq!(grid.z.dim(), (size, size));
        }
        times.sort_by(|a, b| a.total_cmp(b));
        let median = times[RUNS / 2];
        let cells = (size * size) as f64;
        println!(
            "  {label:14} file {file_mb:7.1} MB  median {:8.1} ms  {:7.1} Mcells/s  {:7.1} MB/s decoded f32",
            median * 1e3,
            cells / median / 1e6,
            cells * 4.0 / median / 1e6
        );
    }
}
