//! RGB samples from all frames -> one palette of at most 256 colours (median cut), and RGB pixels ->
//! palette indices (exact nearest colour, optional ordered dithering).
//!
//! Palette: Heckbert's median cut (Heckbert 1982, REFERENCES.md §10) on a histogram with 6 bits per
//! channel (each cell keeps its pixel count and colour sums, so box means use the exact colours).
//! Which box to split next: the one with the largest summed squared error about its mean (a common
//! variant; Heckbert splits the most populous box). The split is along the channel of widest range,
//! at the pixel-weighted median. If the samples hold no more distinct colours than the palette may
//! have, the palette is exactly those colours, so such images round-trip losslessly.
//!
//! Mapping: the exact nearest palette colour (squared RGB distance, ties to the lower index),
//! answered from a table with one byte per 24-bit colour. The table is filled a 6-bit cell (4x4x4
//! colours, one 64-byte line) at a time on first use: only the palette entries that can be nearest
//! to some colour in the cell are searched (an entry is kept if its nearest possible distance to the
//! cell is no more than the smallest farthest distance of any entry), so every answer is exact.
//!
//! Dithering: ordered 4x4 Bayer thresholds (Bayer 1973, REFERENCES.md §10) added to each channel
//! before the lookup. The offset depends only on the pixel position, so a pixel that keeps its
//! colour keeps its index from frame to frame: no shimmer, and the difference encoding stays
//! effective. Error diffusion (Floyd & Steinberg 1976) is not offered: one changed pixel moves the
//! error of every pixel after it, so still areas flicker between frames.

/// The 4x4 Bayer threshold matrix (Bayer 1973), values 0..15; use as `(m + 0.5) / 16`.
pub const BAYER4: [[u8; 4]; 4] = [[0, 8, 2, 10], [12, 4, 14, 6], [3, 11, 1, 9], [15, 7, 13, 5]];

/// Threshold in (0, 1) of the Bayer matrix at pixel (x, y).
pub fn bayer_threshold(x: usize, y: usize) -> f32 {
    (BAYER4[y & 3][x & 3] as f32 + 0.5) / 16.0
}

/// Bits per channel of the palette histogram cells.
const BITS: u32 = 6;
const CELLS: usize = 1 << (3 * BITS);
/// Bits per channel of the mapper's cells; a cell's 4x4x4 exact answers fill one 64-byte line.
const MBITS: u32 = 6;
const MCELLS: usize = 1 << (3 * MBITS);
const MSHIFT: u32 = 8 - MBITS;
const MLOW: usize = (1 << MSHIFT) - 1;
/// One answer per 24-bit colour.
const ANSWERS: usize = 1 << 24;

/// Index of the cell of `B` bits per channel holding (r, g, b).
#[inline]
fn cell_index<const B: u32>(r: u8, g: u8, b: u8) -> usize {
    let s = 8 - B;
    ((r as usize >> s) << (2 * B)) | ((g as usize >> s) << B) | (b as usize >> s)
}

#[inline]
fn cell_of(r: u8, g: u8, b: u8) -> usize {
    cell_index::<BITS>(r, g, b)
}

#[inline]
fn mcell_of(r: u8, g: u8, b: u8) -> usize {
    cell_index::<MBITS>(r, g, b)
}

/// A palette of 1 to 256 RGB colours.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Palette {
    colours: Vec<[u8; 3]>,
}

impl Palette {
    /// A palette of the given colours.
    ///
    /// # Errors
    /// A message if there are no colours or more than 256.
    pub fn new(colours: Vec<[u8; 3]>) -> Result<Palette, String> {
        if colours.is_empty() || colours.len() > 256 {
            return Err(format!(
                "a palette needs 1 to 256 colours, not {}",
                colours.len()
            ));
        }
        Ok(Palette { colours })
    }
    /// The colours.
    pub fn colours(&self) -> &[[u8; 3]] {
        &self.colours
    }
    /// Number of colours.
    pub fn len(&self) -> usize {
        self.colours.len()
    }
    /// Always false: a palette has at least one colour.
    pub fn is_empty(&self) -> bool {
        self.colours.is_empty()
    }
    /// Flat `r, g, b, r, g, b, …` bytes, as a GIF colour table.
    pub fn to_rgb_bytes(&self) -> Vec<u8> {
        self.colours.iter().flatten().copied().collect()
    }
}

#[derive(Clone, Copy, Default)]
struct Cell {
    count: u64,
    sum: [u64; 3],
}

/// Collects colour samples from any number of frames, then builds one palette for all of them.
///
/// # Allocations
/// About 8 MB for the histogram, once per animation.
pub struct PaletteBuilder {
    hist: Vec<Cell>,
    /// Distinct exact colours seen, while there are at most 256 (None once there are more).
    distinct: Option<Vec<u32>>,
}

impl Default for PaletteBuilder {
    fn default() -> Self {
        Self::new()
    }
}

impl PaletteBuilder {
    /// An empty builder.
    pub fn new() -> Self {
        PaletteBuilder {
            hist: vec![Cell::default(); CELLS],
            distinct: Some(Vec::new()),
        }
    }

    /// Adds every `step`-th pixel of an RGBA buffer (alpha ignored; frames are opaque).
    pub fn add_rgba(&mut self, rgba: &[u8], step: usize) {
        let step = step.max(1);
        let mut last = u32::MAX;
        for p in rgba.chunks_exact(4).step_by(step) {
            let c = &mut self.hist[cell_of(p[0], p[1], p[2])];
            c.count += 1;
            c.sum[0] += p[0] as u64;
            c.sum[1] += p[1] as u64;
            c.sum[2] += p[2] as u64;
            if let Some(d) = self.distinct.as_mut() {
                let key = u32::from_le_bytes([p[0], p[1], p[2], 0]);
                if key != last {
                    last = key;
                    if let Err(pos) = d.binary_search(&key) {
                        if d.len() >= 256 {
                            self.distinct = None;
                        } else {
                            d.insert(pos, key);
                        }
                    }
                }
            }
        }
    }

    /// Builds a palette of at most `max_colours` (clamped to 1..=256) colours. With no samples the
    /// palette is black.
    pub fn build(&self, max_colours: usize) -> Palette {
        let n = max_colours.clamp(1, 256);
        if let Some(d) = &self.distinct {
            if !d.is_empty() && d.len() <= n {
                let colours = d.iter().map(|k| {
                    let b = k.to_le_bytes();
                    [b[0], b[1], b[2]]
                });
                return Palette {
                    colours: colours.collect(),
                };
            }
        }
        let mut cells: Vec<(u64, [u64; 3])> = self
            .hist
            .iter()
            .filter(|c| c.count > 0)
            .map(|c| (c.count, c.sum))
            .collect();
        if cells.is_empty() {
            return Palette {
                colours: vec![[0, 0, 0]],
            };
        }
        let mut boxes = vec![(0usize, cells.len())];
        while boxes.len() < n {
            // The box with the largest squared error that can still be split.
            let mut best = None;
            let mut best_err = 0.0f64;
            for (i, &(s, e)) in boxes.iter().enumerate() {
                if e - s < 2 {
                    continue;
                }
                let err = box_error(&cells[s..e]);
                if err > best_err {
                    best_err = err;
                    best = Some(i);
                }
            }
            let Some(i) = best else { break };
            let (s, e) = boxes[i];
            let split = split_box(&mut cells[s..e]) + s;
            boxes[i] = (s, split);
            boxes.push((split, e));
        }
        let mut colours: Vec<[u8; 3]> = boxes
            .iter()
            .map(|&(s, e)| {
                let (mut cnt, mut sum) = (0u64, [0u64; 3]);
                for c in &cells[s..e] {
                    cnt += c.0;
                    for (acc, v) in sum.iter_mut().zip(c.1) {
                        *acc += v;
                    }
                }
                let mean =
                    |k: usize| ((sum[k] as f64 / cnt as f64).round()).clamp(0.0, 255.0) as u8;
                [mean(0), mean(1), mean(2)]
            })
            .collect();
        // Deterministic order (dark to light, then by channel) and no duplicates.
        colours.sort_by_key(|c| {
            (
                299 * c[0] as u32 + 587 * c[1] as u32 + 114 * c[2] as u32,
                *c,
            )
        });
        colours.dedup();
        Palette { colours }
    }
}

fn mean_of(cells: &[(u64, [u64; 3])]) -> [f64; 3] {
    let (mut cnt, mut sum) = (0u64, [0u64; 3]);
    for c in cells {
        cnt += c.0;
        for (acc, v) in sum.iter_mut().zip(c.1) {
            *acc += v;
        }
    }
    let n = cnt.max(1) as f64;
    [sum[0] as f64 / n, sum[1] as f64 / n, sum[2] as f64 / n]
}

fn box_error(cells: &[(u64, [u64; 3])]) -> f64 {
    let m = mean_of(cells);
    cells
        .iter()
        .map(|c| {
            let n = c.0 as f64;
            let d: f64 = (0..3).map(|k| (c.1[k] as f64 / n - m[k]).powi(2)).sum();
            n * d
        })
        .sum()
}

/// Sorts the cells along the channel of widest range and returns the weighted-median split point
/// (in 1..len, so both halves are non-empty).
fn split_box(cells: &mut [(u64, [u64; 3])]) -> usize {
    let mean = |c: &(u64, [u64; 3]), k: usize| c.1[k] as f64 / c.0 as f64;
    let mut axis = 0;
    let mut widest = -1.0;
    for k in 0..3 {
        let (lo, hi) = cells.iter().fold((f64::MAX, f64::MIN), |(lo, hi), c| {
            (lo.min(mean(c, k)), hi.max(mean(c, k)))
        });
        if hi - lo > widest {
            widest = hi - lo;
            axis = k;
        }
    }
    cells.sort_by(|a, b| mean(a, axis).total_cmp(&mean(b, axis)).then(a.1.cmp(&b.1)));
    let total: u64 = cells.iter().map(|c| c.0).sum();
    let mut acc = 0u64;
    for (i, c) in cells.iter().enumerate() {
        acc += c.0;
        if acc * 2 >= total {
            return (i + 1).clamp(1, cells.len() - 1);
        }
    }
    cells.len() / 2
}

/// Fixed-point scale of the error sums: 1/1024 of a colour level.
const SQRT_SCALE: f64 = 1024.0;

/// `round(sqrt(d2) * SQRT_SCALE)` for squared distances below 4096 (errors under 64 levels).
fn sqrt_table() -> &'static [u32; 4096] {
    static TABLE: std::sync::OnceLock<[u32; 4096]> = std::sync::OnceLock::new();
    TABLE.get_or_init(|| std::array::from_fn(|i| ((i as f64).sqrt() * SQRT_SCALE).round() as u32))
}

/// Maps RGB colours to the index of the nearest palette colour; see the module doc.
///
/// # Allocations
/// A 16 MiB answer table per palette (allocated zeroed, so the OS backs only the pages of the cells
/// in use) and a 32 kB bitset of filled cells.
pub struct Mapper {
    /// Palette colours, padded to 256 entries (so any `u8` index is in bounds).
    palette: Box<[[i32; 3]; 256]>,
    /// Exact nearest index for every 24-bit colour, cell-major: `(cell << 6) | sub`, where `cell`
    /// holds the top 6 bits of each channel and `sub` the low 2 bits (one 64-byte line per cell).
    answers: Box<[u8; ANSWERS]>,
    /// One bit per 6-bit cell: its 64 answers are filled in.
    filled: Box<[u64; MCELLS / 64]>,
    /// Palette length.
    len: usize,
    /// Scratch: candidate indices of the cell being filled.
    keep: Vec<u8>,
}

/// Position of (r, g, b) in the cell-major answer table.
#[inline]
fn answer_slot(r: u8, g: u8, b: u8) -> usize {
    (mcell_of(r, g, b) << (3 * MSHIFT))
        | (((r as usize) & MLOW) << (2 * MSHIFT))
        | (((g as usize) & MLOW) << MSHIFT)
        | ((b as usize) & MLOW)
}

impl Mapper {
    /// A mapper for `palette`.
    pub fn new(palette: &Palette) -> Self {
        let mut colours = Box::new([[0i32; 3]; 256]);
        for (dst, c) in colours.iter_mut().zip(&palette.colours) {
            *dst = [c[0] as i32, c[1] as i32, c[2] as i32];
        }
        // Allocated zeroed: the OS maps pages only when a cell in them is filled.
        let answers: Box<[u8; ANSWERS]> = vec![0u8; ANSWERS]
            .into_boxed_slice()
            .try_into()
            .expect("answer table size");
        Mapper {
            palette: colours,
            answers,
            filled: Box::new([0; MCELLS / 64]),
            len: palette.len(),
            keep: Vec::with_capacity(256),
        }
    }

    /// Fills the answers of one cell: prunes the palette to the entries that can be nearest to
    /// some colour in the cell, then searches them for each of the cell's colours.
    #[cold]
    fn fill_cell(&mut self, cell: usize) {
        let lo = [
            ((cell >> (2 * MBITS)) << MSHIFT) as i32,
            (((cell >> MBITS) & ((1 << MBITS) - 1)) << MSHIFT) as i32,
            ((cell & ((1 << MBITS) - 1)) << MSHIFT) as i32,
        ];
        let hi = lo.map(|v| v + (1 << MSHIFT) - 1);
        let mut best_far = i32::MAX;
        let mut near = [0i32; 256];
        for (i, p) in self.palette[..self.len].iter().enumerate() {
            let (mut dn, mut df) = (0, 0);
            for k in 0..3 {
                let n = if p[k] < lo[k] {
                    lo[k] - p[k]
                } else if p[k] > hi[k] {
                    p[k] - hi[k]
                } else {
                    0
                };
                let f = (p[k] - lo[k]).abs().max((p[k] - hi[k]).abs());
                dn += n * n;
                df += f * f;
            }
            best_far = best_far.min(df);
            near[i] = dn;
        }
        self.keep.clear();
        self.keep.extend(
            (0..self.len)
                .filter(|&i| near[i] <= best_far)
                .map(|i| i as u8),
        );
        let base = cell << (3 * MSHIFT);
        for sub in 0..(1usize << (3 * MSHIFT)) {
            let c = [
                lo[0] + (sub >> (2 * MSHIFT)) as i32,
                lo[1] + ((sub >> MSHIFT) & MLOW) as i32,
                lo[2] + (sub & MLOW) as i32,
            ];
            // Candidates are in index order and only a strictly smaller distance wins: ties go to
            // the lower index, as in a plain search of the whole palette.
            let mut best = (0u8, i32::MAX);
            for &i in &self.keep {
                let p = self.palette[i as usize];
                let (dr, dg, db) = (p[0] - c[0], p[1] - c[1], p[2] - c[2]);
                let d = dr * dr + dg * dg + db * db;
                if d < best.1 {
                    best = (i, d);
                }
            }
            self.answers[base + sub] = best.0;
        }
        self.filled[cell >> 6] |= 1 << (cell & 63);
    }

    /// Number of 6-bit cells (of 262144) filled so far (bench diagnostics).
    #[doc(hidden)]
    pub fn filled_cells(&self) -> usize {
        self.filled.iter().map(|w| w.count_ones() as usize).sum()
    }

    /// Index of the nearest palette colour to (r, g, b).
    #[inline]
    pub fn nearest(&mut self, r: u8, g: u8, b: u8) -> u8 {
        let cell = mcell_of(r, g, b) & (MCELLS - 1);
        if self.filled[cell >> 6] & (1 << (cell & 63)) == 0 {
            self.fill_cell(cell);
        }
        self.answers[answer_slot(r, g, b) & (ANSWERS - 1)]
    }

    /// Maps a whole RGBA frame (`width` pixels a row) into `out` (one index per pixel), with Bayer
    /// offsets of `spread` colour levels peak to peak (0 = no dithering). Returns the summed
    /// Euclidean RGB distance between each input pixel and its palette colour.
    ///
    /// # Panics
    /// If `out.len() * 4 != rgba.len()` or `width` does not divide the pixel count (a bug in the caller).
    pub fn map_frame(&mut self, rgba: &[u8], width: usize, spread: f32, out: &mut [u8]) -> f64 {
        assert_eq!(rgba.len(), out.len() * 4, "one index per RGBA pixel");
        assert!(width > 0 && out.len().is_multiple_of(width), "whole rows");
        let mut err_sum = 0.0f64;
        let spread = if spread.is_finite() {
            spread.clamp(0.0, 254.0)
        } else {
            0.0
        };
        let sqrt_table = sqrt_table();
        // Dithered channel values per Bayer cell: a table lookup instead of an add and a clamp.
        let mut dith = vec![[0u8; 256]; 16];
        for (k, t) in dith.iter_mut().enumerate() {
            let off = ((bayer_threshold(k & 3, k >> 2) - 0.5) * spread).round() as i32;
            for (v, o) in t.iter_mut().enumerate() {
                *o = (v as i32 + off).clamp(0, 255) as u8;
            }
        }
        for (y, (src_row, dst_row)) in rgba
            .chunks_exact(width * 4)
            .zip(out.chunks_exact_mut(width))
            .enumerate()
        {
            let tables: &[[u8; 256]; 4] = dith[(y & 3) * 4..(y & 3) * 4 + 4]
                .try_into()
                .expect("four Bayer columns");
            let mut row_err = 0u64;
            // Four pixels at a time, one per Bayer column, so each uses a fixed table.
            let mut src4 = src_row.chunks_exact(16);
            let mut dst4 = dst_row.chunks_exact_mut(4);
            for (p4, o4) in (&mut src4).zip(&mut dst4) {
                for k in 0..4 {
                    let (idx, e) = self.map_pixel(&tables[k], &p4[4 * k..4 * k + 4], sqrt_table);
                    o4[k] = idx;
                    row_err += e as u64;
                }
            }
            for (k, (p, o)) in src4
                .remainder()
                .chunks_exact(4)
                .zip(dst4.into_remainder())
                .enumerate()
            {
                let (idx, e) = self.map_pixel(&tables[k], p, sqrt_table);
                *o = idx;
                row_err += e as u64;
            }
            err_sum += row_err as f64 / SQRT_SCALE;
        }
        err_sum
    }

    /// Index of one RGBA pixel `p` dithered through `table`, and its scaled colour error.
    #[inline(always)]
    fn map_pixel(&mut self, table: &[u8; 256], p: &[u8], sqrt_table: &[u32; 4096]) -> (u8, u32) {
        let idx = self.nearest(
            table[p[0] as usize],
            table[p[1] as usize],
            table[p[2] as usize],
        );
        let q = self.palette[idx as usize];
        let (dr, dg, db) = (q[0] - p[0] as i32, q[1] - p[1] as i32, q[2] - p[2] as i32);
        let d2 = (dr * dr + dg * dg + db * db) as usize;
        // Integer sums from a table keep float adds (and their latency) out of the loop.
        let e = match sqrt_table.get(d2) {
            Some(&v) => v,
            None => ((d2 as f64).sqrt() * SQRT_SCALE) as u32,
        };
        (idx, e)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn brute_nearest(pal: &Palette, c: [u8; 3]) -> (u8, i32) {
        let mut best = (0u8, i32::MAX);
        for (i, p) in pal.colours().iter().enumerate() {
            let d: i32 = (0..3).map(|k| (p[k] as i32 - c[k] as i32).pow(2)).sum();
            if d < best.1 {
                best = (i as u8, d);
            }
        }
        best
    }

    fn gradient(w: usize, h: usize) -> Vec<u8> {
        let mut v = Vec::with_capacity(w * h * 4);
        for y in 0..h {
            for x in 0..w {
                v.extend_from_slice(&[
                    (x * 255 / w) as u8,
                    (y * 255 / h) as u8,
                    ((x + y) * 127 / (w + h)) as u8 + 60,
                    255,
                ]);
            }
        }
        v
    }

    #[test]
    fn bayer_on_uniform_half_sets_exactly_half() {
        // Check: Bayer (1973) 4x4 thresholds (m+0.5)/16 — uniform 0.5 sets exactly 8 of 16 pixels;
        // analytic, REFERENCES.md §10.
        let on = (0..4)
            .flat_map(|y| (0..4).map(move |x| (x, y)))
            .filter(|&(x, y)| 0.5 > bayer_threshold(x, y))
            .count();
        assert_eq!(on, 8);
        // The same through the mapper: palette {black, white}, grey 127.5 ± spread 255. A grey of 128
        // is ever so slightly above 0.5, so exactly the 8 cells with m >= 8 go white.
        let pal = Palette::new(vec![[0, 0, 0], [255, 255, 255]]).unwrap();
        let mut m = Mapper::new(&pal);
        let rgba: Vec<u8> = [128u8, 128, 128, 255].repeat(16);
        let mut out = vec![0u8; 16];
        m.map_frame(&rgba, 4, 255.0, &mut out);
        assert_eq!(out.iter().filter(|&&i| i == 1).count(), 8, "{out:?}");
    }

    #[test]
    fn mapper_matches_brute_force_nearest() {
        let mut b = PaletteBuilder::new();
        b.add_rgba(&gradient(97, 61), 1);
        let pal = b.build(37);
        let mut m = Mapper::new(&pal);
        let mut seed = 12345u32;
        for _ in 0..20000 {
            seed = seed.wrapping_mul(1664525).wrapping_add(1013904223);
            let c = [(seed >> 8) as u8, (seed >> 16) as u8, (seed >> 24) as u8];
            let got = m.nearest(c[0], c[1], c[2]);
            let (_, want_d) = brute_nearest(&pal, c);
            let p = pal.colours()[got as usize];
            let got_d: i32 = (0..3).map(|k| (p[k] as i32 - c[k] as i32).pow(2)).sum();
            assert_eq!(got_d, want_d, "colour {c:?}");
        }
    }

    #[test]
    fn answer_table_is_exact_on_a_lattice_and_breaks_ties_low() {
        // Every 5th level per channel (52^3 colours, every cell phase met) against a full search.
        let mut b = PaletteBuilder::new();
        b.add_rgba(&gradient(61, 43), 1);
        let pal = b.build(23);
        let mut m = Mapper::new(&pal);
        for r in (0..=255u8).step_by(5) {
            for g in (0..=255u8).step_by(5) {
                for bl in (0..=255u8).step_by(5) {
                    let c = [r, g, bl];
                    let got = m.nearest(r, g, bl);
                    let (want, want_d) = brute_nearest(&pal, c);
                    let p = pal.colours()[got as usize];
                    let got_d: i32 = (0..3).map(|k| (p[k] as i32 - c[k] as i32).pow(2)).sum();
                    assert_eq!((got, got_d), (want, want_d), "colour {c:?}");
                }
            }
        }
        // Equal distances go to the lower index, whichever order the colours come in.
        let pal = Palette::new(vec![[12, 0, 0], [10, 0, 0], [8, 0, 0]]).unwrap();
        let mut m = Mapper::new(&pal);
        assert_eq!(m.nearest(11, 0, 0), 0);
        assert_eq!(m.nearest(9, 0, 0), 1);
    }

    #[test]
    fn few_colours_are_kept_exactly() {
        // Check: REFERENCES.md §10 — an image with ≤ 256 distinct colours must round-trip losslessly.
        let mut rgba = Vec::new();
        for i in 0..256u32 {
            rgba.extend_from_slice(&[
                (i * 7 % 256) as u8,
                (i * 13 % 256) as u8,
                (i / 3) as u8,
                255,
            ]);
        }
        let mut b = PaletteBuilder::new();
        b.add_rgba(&rgba, 1);
        let pal = b.build(256);
        assert_eq!(pal.len(), 256);
        let mut m = Mapper::new(&pal);
        let mut out = vec![0u8; 256];
        let err = m.map_frame(&rgba, 16, 0.0, &mut out);
        assert_eq!(err, 0.0);
        for (i, p) in rgba.chunks_exact(4).enumerate() {
            assert_eq!(pal.colours()[out[i] as usize], [p[0], p[1], p[2]]);
        }
    }

    #[test]
    fn error_does_not_rise_as_the_palette_grows() {
        // Check: REFERENCES.md §10 — palette MSE must not rise when the palette grows (median cut
        // refines the same split tree, so each step can only lower the error); tolerance 1e-9.
        let img = gradient(128, 96);
        let mut b = PaletteBuilder::new();
        b.add_rgba(&img, 1);
        let mut last = f64::MAX;
        for n in [2, 4, 8, 16, 32, 64, 128, 256] {
            let pal = b.build(n);
            let mut m = Mapper::new(&pal);
            let mut out = vec![0u8; 128 * 96];
            let err = m.map_frame(&img, 128, 0.0, &mut out) / (128.0 * 96.0);
            assert!(err <= last + 1e-9, "{n} colours: {err} > {last}");
            last = err;
        }
        // Check: analytic — the test image is a 2-D sheet of colours about 255 x 255 levels (tilted in
        // blue); 256 colours tile it at best in squares of side 16, and the mean distance from a uniform
        // point in a square of side s to its centre is s(√2 + ln(1+√2))/6 = 0.3826 s = 6.1 levels.
        // Bound 7.5 levels (the tilt enlarges the sheet by about 10 %).
        assert!(last < 7.5, "{last}");
    }
}
