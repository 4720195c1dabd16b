//! Pair of surveys + LoD -> the landforms that moved, one [`LandformRecord`] each, plus the
//! site-wide migration of everything that moved.
//!
//! Place in the pipeline: after the change record's pair rows, before the archive. Migration is
//! measured from the cells that changed beyond the level of detection, not from the whole relief:
//! relief that stood still (a fixed foredune, an embankment) would otherwise pull the estimate
//! towards zero and towards its own orientation.
//!
//! # How a landform is delimited
//! 1. Detected change: cells with data in both surveys whose DoD reaches the LoD.
//! 2. Speckle removed: a cell is kept when detected change fills at least half of the cells with
//!    data in its 5 x 5 neighbourhood (isolated noise cells above the LoD, about 5 % of cells at
//!    t = 1.96, never make a majority).
//! 3. Flanks joined: the kept cells are grown by half of `change.landform_join_m` in every
//!    direction, so the eroded windward flank and the raised lee flank of one dune, separated by a
//!    crest that hardly changed, become one region; regions closer than that distance merge.
//! 4. Regions: 8-connected components of the grown cells. A region whose speckle-free change
//!    covers less than `change.landform_min_area_m2` is dropped. A region's area and volumes count
//!    every cell inside it whose change reaches the LoD.
//!
//! Each region's migration is the dominant displacement of the relief inside the region only
//! (`interp::flow::estimate` on the region's box, cells outside the region flattened to the base
//! plane of the unchanged ground): normalised
//! cross-correlation with a sub-cell fit, refined by a translation with gain and offset, so growth
//! or loss in place does not read as motion. The site-wide figure is the same estimate over the
//! union of all regions. Ids number the regions from the largest area of detected change down.

use ndarray::{Array2, ArrayRef2};
use rayon::prelude::*;
use serde::Serialize;

use super::record::{PairKind, PairRecord};
use crate::align::AlignedStack;
use crate::interp::flow::{self, FlowOptions};

/// One moving landform of one pair.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LandformRecord {
    /// Consecutive, or last against first.
    pub pair_kind: PairKind,
    /// Id of the earlier survey.
    pub from_id: String,
    /// Id of the later survey.
    pub to_id: String,
    /// `1`, `2`, … from the largest area of detected change down; `all` for the site-wide row.
    pub landform_id: String,
    /// Map x of the centroid of the detected change, CRS units.
    pub centroid_x_crs: f64,
    /// Map y of the centroid of the detected change, CRS units.
    pub centroid_y_crs: f64,
    /// Area whose change reaches the LoD.
    pub changed_area_m2: f64,
    /// Erosion volume over those cells.
    pub erosion_volume_m3: f64,
    /// Deposition volume over those cells.
    pub deposition_volume_m3: f64,
    /// Eastward migration, when it could be measured.
    pub migration_east_m: Option<f64>,
    /// Northward migration.
    pub migration_north_m: Option<f64>,
    /// Migration distance.
    pub migration_distance_m: Option<f64>,
    /// Direction of travel, compass degrees clockwise from north.
    pub migration_azimuth_deg: Option<f64>,
    /// Distance per decimal year.
    pub migration_rate_m_per_yr: Option<f64>,
    /// Whole-relief NCC of the match inside the region, -1 to 1.
    pub match_ncc: Option<f64>,
    /// `measured`, or why no migration is given.
    pub status: String,
}

/// Column names of [`LandformRecord`], for the header of an empty table.
pub const COLUMNS: &[&str] = &[
    "pair_kind",
    "from_id",
    "to_id",
    "landform_id",
    "centroid_x_crs",
    "centroid_y_crs",
    "changed_area_m2",
    "erosion_volume_m3",
    "deposition_volume_m3",
    "migration_east_m",
    "migration_north_m",
    "migration_distance_m",
    "migration_azimuth_deg",
    "migration_rate_m_per_yr",
    "match_ncc",
    "status",
];

/// A region of detected change.
struct Region {
    /// Cells of the grown region (row-major indices; 32 bits halve the memory of large regions).
    cells: Vec<u32>,
    /// Detected-change cells inside it.
    detected: Vec<u32>,
}

/// Settings the delimitation needs, in cells.
struct Delimit {
    join_cells: usize,
    min_cells: usize,
}

/// Detected change (|DoD| >= LoD) and the same with speckle removed (majority of a 5 x 5
/// neighbourhood).
fn kept_change(a: &[f32], b: &[f32], rows: usize, cols: usize, lod: f64) -> (Vec<bool>, Vec<bool>) {
    let lod = lod as f32;
    let n = rows * cols;
    // One byte a cell (counts of a 5 x 5 window fit): at 4096² each mask is 16 MB, not 64.
    let (detected, valid): (Vec<u8>, Vec<u8>) = (0..n)
        .into_par_iter()
        .map(|k| {
            let d = b[k] - a[k];
            if d.is_finite() {
                ((d.abs() >= lod) as u8, 1)
            } else {
                (0, 0)
            }
        })
        .unzip();
    let sd = window_counts(&detected, rows, cols, 2);
    let sv = window_counts(&valid, rows, cols, 2);
    drop(valid);
    let kept = (0..n)
        .into_par_iter()
        .map(|k| detected[k] == 1 && 2 * sd[k] as u32 >= sv[k] as u32)
        .collect();
    (detected.par_iter().map(|&d| d == 1).collect(), kept)
}

/// Count of ones in the (2r+1)² window around each cell of a 0/1 mask (clipped at the edges), for
/// windows of at most 255 cells. Sums run in wrapping byte arithmetic: every window's true count
/// fits a byte, so differences of the wrapped running sums are exact.
pub(crate) fn window_counts(x: &[u8], rows: usize, cols: usize, r: usize) -> Vec<u8> {
    assert!(
        (2 * r + 1) * (2 * r + 1) <= 255,
        "window of at most 255 cells"
    );
    if rows == 0 || cols == 0 {
        return Vec::new();
    }
    let mut h = vec![0u8; x.len()];
    h.par_chunks_mut(cols)
        .zip(x.par_chunks(cols))
        .for_each(|(out, line)| {
            let mut prefix = vec![0u8; cols + 1];
            for c in 0..cols {
                prefix[c + 1] = prefix[c].wrapping_add(line[c]);
            }
            for (c, o) in out.iter_mut().enumerate() {
                let (lo, hi) = (c.saturating_sub(r), (c + r + 1).min(cols));
                *o = prefix[hi].wrapping_sub(prefix[lo]);
            }
        });
    let mut out = vec![0u8; x.len()];
    out.par_chunks_mut(cols).enumerate().for_each(|(row, o)| {
        let (lo, hi) = (row.saturating_sub(r), (row + r + 1).min(rows));
        for line in h[lo * cols..hi * cols].chunks_exact(cols) {
            for (a, &v) in o.iter_mut().zip(line) {
                *a = a.wrapping_add(v);
            }
        }
    });
    out
}

/// True where a (2r+1)² window around the cell (clipped at the edges) holds a non-zero cell of
/// `x`: a square dilation, done as a row pass then a column pass, each marking the cells within
/// `r` of a set cell.
pub(crate) fn dilate(x: &[u8], rows: usize, cols: usize, r: usize) -> Vec<bool> {
    if rows == 0 || cols == 0 {
        return Vec::new();
    }
    // Row pass: distance to the nearest set cell in the row, looked up both ways.
    let mut h = vec![0u8; x.len()];
    h.par_chunks_mut(cols)
        .zip(x.par_chunks(cols))
        .for_each(|(out, line)| {
            let mut last = None::<usize>;
            for c in 0..cols {
                if line[c] != 0 {
                    last = Some(c);
                }
                out[c] = last.is_some_and(|l| c - l <= r) as u8;
            }
            let mut next = None::<usize>;
            for c in (0..cols).rev() {
                if line[c] != 0 {
                    next = Some(c);
                }
                out[c] |= next.is_some_and(|n| n - c <= r) as u8;
            }
        });
    // Column pass, the same both ways: rows in order, each column remembering its last set row
    // (whole rows at a time, so the loops run over contiguous memory). Bands of rows run side by
    // side; each band first reads the r rows above it (and, going up, the r rows below it), the
    // only ones whose set cells can reach into the band, so every cell gets the same answer as in
    // one pass over the whole grid.
    let mut out = vec![false; x.len()];
    let far = usize::MAX / 2;
    // A radius beyond the grid makes one band of the whole grid.
    let band = DILATE_BAND_ROWS.max(r).min(rows);
    out.par_chunks_mut(band * cols)
        .enumerate()
        .for_each(|(b, chunk)| {
            let (r0, r1) = (b * band, (b * band + band).min(rows));
            let line = |row: usize| &h[row * cols..(row + 1) * cols];
            let mut last = vec![far; cols];
            for row in r0.saturating_sub(r)..r1 {
                for (l, &v) in last.iter_mut().zip(line(row)) {
                    if v != 0 {
                        *l = row;
                    }
                }
                if row >= r0 {
                    let o = &mut chunk[(row - r0) * cols..(row - r0 + 1) * cols];
                    for (o, &l) in o.iter_mut().zip(&last) {
                        *o = l != far && row - l <= r;
                    }
                }
            }
            let mut next = vec![far; cols];
            for row in (r0..r1.saturating_add(r).min(rows)).rev() {
                for (n, &v) in next.iter_mut().zip(line(row)) {
                    if v != 0 {
                        *n = row;
                    }
                }
                if row < r1 {
                    let o = &mut chunk[(row - r0) * cols..(row - r0 + 1) * cols];
                    for (o, &n) in o.iter_mut().zip(&next) {
                        *o |= n != far && n - row <= r;
                    }
                }
            }
        });
    out
}

/// Rows per band of [`dilate`]'s column pass (at least the radius, so a band's halo is no larger
/// than the band).
const DILATE_BAND_ROWS: usize = 64;

/// Regions of kept change, grown by `join_cells`, largest detected area first; `detected` is the
/// change before speckle removal, counted inside each region.
fn regions(detected: &[bool], kept: &[bool], rows: usize, cols: usize, d: &Delimit) -> Vec<Region> {
    assert!(
        rows * cols <= u32::MAX as usize,
        "landform regions index cells with 32 bits"
    );
    let as_bytes: Vec<u8> = kept.iter().map(|&k| k as u8).collect();
    // A cell is cleared from `unvisited` when it joins a region, so each is taken once.
    let mut unvisited = dilate(&as_bytes, rows, cols, d.join_cells);
    drop(as_bytes);
    let mut out = Vec::new();
    let mut queue = Vec::new();
    for start in 0..rows * cols {
        if !unvisited[start] {
            continue;
        }
        unvisited[start] = false;
        queue.clear();
        queue.push(start);
        let mut cells: Vec<u32> = Vec::new();
        while let Some(k) = queue.pop() {
            cells.push(k as u32);
            let (r, c) = ((k / cols) as isize, (k % cols) as isize);
            for dr in -1..=1 {
                for dc in -1..=1 {
                    let (rr, cc) = (r + dr, c + dc);
                    if rr < 0 || cc < 0 || rr >= rows as isize || cc >= cols as isize {
                        continue;
                    }
                    let j = rr as usize * cols + cc as usize;
                    if unvisited[j] {
                        unvisited[j] = false;
                        queue.push(j);
                    }
                }
            }
        }
        cells.sort_unstable();
        let inside: Vec<u32> = cells
            .iter()
            .copied()
            .filter(|&k| detected[k as usize])
            .collect();
        out.push(Region {
            cells,
            detected: inside,
        });
    }
    out.retain(|r| r.cells.iter().filter(|&&k| kept[k as usize]).count() >= d.min_cells.max(1));
    // Largest first; ties keep raster order (the sort is stable).
    out.sort_by_key(|r| std::cmp::Reverse(r.detected.len()));
    out
}

/// Cells of margin kept around a region's bounding box, at ground level (see `region_migration`).
const MARGIN_CELLS: usize = 16;

/// The dominant displacement of the relief inside `cells` (a region), or why there is none.
///
/// The estimate runs on the region's bounding box plus a margin; inside the region the surveys are
/// as measured, outside it both are replaced by the base plane of the ground that did not change
/// (`plane`: z = p0 + p1·col + p2·row on the full grid). Cells outside were first tried as nodata,
/// but then the estimator fits its own base plane through the dune itself, and the tilt it leaves,
/// scaled by the gain that absorbs the dune's loss of height, can read as motion. Flat ground
/// around the region keeps the plane where it belongs and carries no motion of its own. (Growing
/// the region by a further 5 to 20 cells changed the demo's figures by under 0.05 m.)
fn region_migration(
    a: &ArrayRef2<f32>,
    b: &ArrayRef2<f32>,
    cells: &[u32],
    plane: [f64; 3],
    cell_m: f64,
    flow_opts: &FlowOptions,
    max_side: usize,
) -> Result<flow::Dominant, String> {
    let (rows, cols) = a.dim();
    let (mut r0, mut r1, mut c0, mut c1) = (usize::MAX, 0, usize::MAX, 0);
    for &k in cells {
        let k = k as usize;
        let (r, c) = (k / cols, k % cols);
        r0 = r0.min(r);
        r1 = r1.max(r);
        c0 = c0.min(c);
        c1 = c1.max(c);
    }
    if cells.is_empty() || r1 >= rows || c1 >= cols {
        return Err("no region".into());
    }
    let (r0, c0) = (
        r0.saturating_sub(MARGIN_CELLS),
        c0.saturating_sub(MARGIN_CELLS),
    );
    let (r1, c1) = (
        (r1 + MARGIN_CELLS).min(rows - 1),
        (c1 + MARGIN_CELLS).min(cols - 1),
    );
    let (h, w) = (r1 - r0 + 1, c1 - c0 + 1);
    let mut inside = Array2::from_elem((h, w), false);
    for &k in cells {
        let k = k as usize;
        inside[[k / cols - r0, k % cols - c0]] = true;
    }
    let crop = |z: &ArrayRef2<f32>| {
        Array2::from_shape_fn((h, w), |(r, c)| {
            if inside[[r, c]] {
                z[[r + r0, c + c0]]
            } else {
                (plane[0] + plane[1] * (c + c0) as f64 + plane[2] * (r + r0) as f64) as f32
            }
        })
    };
    // The dominant displacement alone: the dense field is not needed for one vector a region.
    flow::estimate_dominant_within(&crop(a), &crop(b), cell_m, flow_opts, max_side)
        .map_err(|(verdict, _)| format!("no reliable displacement ({verdict})"))
}

/// Finds the moving landforms of one pair and measures their migration. Returns the landform rows
/// (the site-wide row last) and fills the pair's migration columns with the site-wide figure.
///
/// `join_m` and `min_area_m2` are `change.landform_join_m` and `change.landform_min_area_m2`;
/// `max_side` bounds the grid the displacement estimate works on (see `flow::estimate_within`).
pub fn landforms(
    stack: &AlignedStack,
    pair: &mut PairRecord,
    flow_opts: &FlowOptions,
    join_m: f64,
    min_area_m2: f64,
    max_side: usize,
) -> Vec<LandformRecord> {
    let g = stack.geometry();
    let (a, b) = (&stack.z(pair.from_index), &stack.z(pair.to_index));
    let (rows, cols) = a.dim();
    let cell_m = g.cell_x_m();
    let cell_area = g.cell_area_m2();
    // The grids as they are (no 64 MB copies at 4096²); copied only if not in row-major layout.
    let (la, lb) = (a.as_standard_layout(), b.as_standard_layout());
    let sa: &[f32] = la.as_slice().expect("standard layout");
    let sb: &[f32] = lb.as_slice().expect("standard layout");
    let (detected_cells, kept) = kept_change(sa, sb, rows, cols, pair.lod_m);
    let d = Delimit {
        join_cells: (0.5 * join_m / cell_m).round().max(0.0) as usize,
        min_cells: (min_area_m2 / cell_area).ceil().max(1.0) as usize,
    };
    let found = regions(&detected_cells, &kept, rows, cols, &d);
    // The ground that did not change: everything outside the regions.
    let mut in_region = vec![false; rows * cols];
    for r in &found {
        for &k in &r.cells {
            let k = k as usize;
            in_region[k] = true;
        }
    }
    let plane = flow::base_plane_outside(sa, sb, Some(&in_region), flow::RasterDims { rows, cols });
    let years = pair.interval_years;
    let (kind, from_id, to_id) = (pair.pair_kind, pair.from_id.clone(), pair.to_id.clone());
    let row = |id: String, detected: &[u32], m: &Result<flow::Dominant, String>| {
        let (mut sx, mut sy, mut ero, mut dep) = (0.0, 0.0, 0.0, 0.0);
        for &k in detected {
            let k = k as usize;
            let (x, y) = g.cell_center(k / cols, k % cols);
            sx += x;
            sy += y;
            let dz = (sb[k] - sa[k]) as f64;
            if dz < 0.0 {
                ero -= dz;
            } else {
                dep += dz;
            }
        }
        let n = detected.len().max(1) as f64;
        let ok = m.as_ref().ok();
        LandformRecord {
            pair_kind: kind,
            from_id: from_id.clone(),
            to_id: to_id.clone(),
            landform_id: id,
            centroid_x_crs: sx / n,
            centroid_y_crs: sy / n,
            changed_area_m2: detected.len() as f64 * cell_area,
            erosion_volume_m3: ero * cell_area,
            deposition_volume_m3: dep * cell_area,
            migration_east_m: ok.map(|d| d.east_m),
            migration_north_m: ok.map(|d| d.north_m),
            migration_distance_m: ok.map(|d| d.distance_m),
            migration_azimuth_deg: ok.map(|d| d.azimuth_deg),
            migration_rate_m_per_yr: ok.and_then(|d| d.rate_m_per_yr(years)),
            match_ncc: ok.map(|d| d.ncc),
            status: match m {
                Ok(_) => "measured".into(),
                Err(why) => why.clone(),
            },
        }
    };
    let mut out: Vec<LandformRecord> = found
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let m = region_migration(a, b, &r.cells, plane, cell_m, flow_opts, max_side);
            row((i + 1).to_string(), &r.detected, &m)
        })
        .collect();
    let mut all: Vec<u32> = found.iter().flat_map(|r| r.cells.iter().copied()).collect();
    all.sort_unstable();
    let detected: Vec<u32> = found
        .iter()
        .flat_map(|r| r.detected.iter().copied())
        .collect();
    let site = if found.is_empty() {
        Err(
            "no change beyond the level of detection: nothing moved that the surveys can show"
                .into(),
        )
    } else {
        region_migration(a, b, &all, plane, cell_m, flow_opts, max_side)
    };
    out.push(row("all".into(), &detected, &site));
    if let Ok(d) = &site {
        pair.set_migration(d.east_m, d.north_m);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Count of ones in the clipped (2r+1)² window around each cell, cell by cell.
    fn brute_counts(x: &[u8], rows: usize, cols: usize, r: usize) -> Vec<u32> {
        let mut out = vec![0u32; rows * cols];
        for row in 0..rows {
            for c in 0..cols {
                for rr in row.saturating_sub(r)..(row + r + 1).min(rows) {
                    for cc in c.saturating_sub(r)..(c + r + 1).min(cols) {
                        out[row * cols + c] += x[rr * cols + cc] as u32;
                    }
                }
            }
        }
        out
    }

    /// A seeded 0/1 mask with about one cell in `one_in` set.
    fn mask(rows: usize, cols: usize, one_in: u64) -> Vec<u8> {
        let mut state = 12345u64;
        (0..rows * cols)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (state >> 33).is_multiple_of(one_in) as u8
            })
            .collect()
    }

    #[test]
    fn window_counts_match_a_direct_count() {
        // Check: analytic — byte window counts equal the count cell by cell, edges included,
        // also where the wrapped running sums of a long row pass 255 many times.
        for (rows, cols, one_in) in [(37, 53, 7), (150, 7, 2), (9, 600, 1)] {
            let x = mask(rows, cols, one_in);
            for r in [0, 1, 2, 7] {
                let fast = window_counts(&x, rows, cols, r);
                let want = brute_counts(&x, rows, cols, r);
                assert!(
                    fast.iter().zip(&want).all(|(&a, &b)| a as u32 == b),
                    "{rows}x{cols}, r {r}"
                );
            }
        }
        // Check: analytic — a corner of a 3x4 grid of ones sees 2x2 cells, an inner cell 3x3
        let ones = window_counts(&[1u8; 12], 3, 4, 1);
        assert_eq!((ones[0], ones[5]), (4, 9));
    }

    #[test]
    fn dilation_marks_the_cells_whose_window_holds_a_set_cell() {
        // Check: analytic — the square dilation is "window count > 0", for radii smaller and
        // larger than the grid.
        // Also bands of rows with halos: 300 rows are five bands of 64.
        for (rows, cols, one_in) in [(37, 53, 7), (150, 7, 40), (20, 30, 500), (300, 5, 97)] {
            let x = mask(rows, cols, one_in);
            for r in [0, 1, 3, 9, 60, 63, 64, 65, 200, usize::MAX / 4] {
                let fast = dilate(&x, rows, cols, r);
                let want = brute_counts(&x, rows, cols, r);
                assert!(
                    fast.iter().zip(&want).all(|(&a, &b)| a == (b > 0)),
                    "{rows}x{cols}, r {r}"
                );
            }
        }
        assert!(dilate(&[0u8; 6], 2, 3, 5).iter().all(|&v| !v));
    }

    #[test]
    fn speckle_is_dropped_and_flanks_join() {
        let (rows, cols) = (40, 60);
        let a = vec![0f32; rows * cols];
        let mut b = a.clone();
        // One noise cell above the LoD, far from anything.
        b[5 * cols + 5] = 1.0;
        // Two blocks of change (erosion, deposition) 4 cells apart: one landform once joined.
        for r in 20..28 {
            for c in 20..26 {
                b[r * cols + c] = -1.0;
            }
            for c in 30..36 {
                b[r * cols + c] = 1.0;
            }
        }
        let (detected, kept) = kept_change(&a, &b, rows, cols, 0.5);
        assert!(detected[5 * cols + 5] && !kept[5 * cols + 5]);
        let found = regions(
            &detected,
            &kept,
            rows,
            cols,
            &Delimit {
                join_cells: 3,
                min_cells: 10,
            },
        );
        assert_eq!(found.len(), 1);
        assert_eq!(found[0].detected.len(), 96);
        let apart = regions(
            &detected,
            &kept,
            rows,
            cols,
            &Delimit {
                join_cells: 1,
                min_cells: 10,
            },
        );
        assert_eq!(apart.len(), 2);
    }
}
