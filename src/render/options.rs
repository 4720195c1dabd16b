//! The renderer's options, read straight from the job YAML: view, light, water, shell, colouring.
//!
//! Every field has a unit in its name where it has one, a default, and a doc line ending in
//! "Default: …"; unknown keys are refused. Ranges are checked in `Renderer::new` / `set_water` /
//! `set_shell`, which name the offending key.

/// Bearing of the default sun relative to the camera's line of sight, degrees (negative = to the
/// left): light from behind the viewer's left shoulder, which keeps hills reading as hills in a
/// perspective view (Imhof 1982, REFERENCES.md §17). At 120° rather than 135° the light rakes a
/// little more across the view, so a dune shows a lit flank on the left and a shaded one on the
/// right; the design value of this project, common practice, no source.
pub const SUN_FROM_VIEW_DEG: f64 = -120.0;

/// Largest frame side accepted, in pixels.
pub const MAX_FRAME_PX: u32 = 8192;

/// Where the camera stands and how it moves, plus the scene around the terrain.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct ViewOptions {
    /// Frame width in pixels, 1 to 8192. Default: 960.
    pub width: u32,
    /// Frame height in pixels, 1 to 8192. Default: 540.
    pub height: u32,
    /// Compass bearing, in degrees clockwise from north, of the direction the camera looks. Default: 20.
    pub facing_deg: f64,
    /// Angle of the line of sight below the horizon, in degrees (90 = straight down), 5 to 90. Default: 35.
    pub elevation_deg: f64,
    /// Distance from the camera to the target in metres; absent = fit the whole grid in view. Default: fit.
    pub distance_m: Option<f64>,
    /// Camera position `[x, y, z_m]` (map coordinates, metres of elevation before exaggeration);
    /// when given it replaces `facing_deg`, `elevation_deg` and `distance_m`, and an orbit turns it
    /// around the target. Default: none.
    pub eye: Option<[f64; 3]>,
    /// Point looked at, `[x, y]` in map coordinates; absent = the grid's centre. Default: centre.
    pub target: Option<[f64; 2]>,
    /// Vertical field of view in degrees, 5 to 120. Default: 40.
    pub fov_deg: f64,
    /// Degrees the camera turns around the target over the whole animation (0 = fixed; 720 = two
    /// turns; negative turns anticlockwise seen from above). Default: 0.
    pub orbit_deg: f64,
    /// Ease the orbit in and out (zero turning speed at the first and last frame). Default: true.
    pub orbit_easing: bool,
    /// Heights are multiplied by this for display (geometry, normals and shadows alike), above 0
    /// and at most 100; absent = chosen from the framed area's relief and size by the rule of
    /// [`crate::render::framing::auto_exaggeration`] (1 to 5). Default: automatic.
    pub vertical_exaggeration: Option<f64>,
    /// Anti-aliasing: each pixel is the mean of supersample × supersample samples, 1 to 4. Default: 2.
    pub supersample: u32,
    /// Level of detail: grids are reduced until a cell spans at least this many output pixels at
    /// the target, 0.5 to 16 (smaller = more detail, slower). Default: 2.
    pub lod_min_cell_px: f64,
    /// Draw the terrain block's sides down to `base_m`. Default: true.
    pub block_sides: bool,
    /// Elevation in metres of the block's base; absent = 20 % of the elevation range below the lowest
    /// elevation, less 1 m. Default: automatic.
    pub base_m: Option<f64>,
    /// Colour of the block's sides, sRGB. Default: [150, 124, 96].
    pub side_rgb: [u8; 3],
    /// Sky colour at the top of the frame, sRGB. Default: [92, 136, 190].
    pub sky_top_rgb: [u8; 3],
    /// Sky colour at the bottom of the frame, sRGB. Default: [222, 230, 238].
    pub sky_bottom_rgb: [u8; 3],
}

impl Default for ViewOptions {
    fn default() -> Self {
        ViewOptions {
            width: 960,
            height: 540,
            facing_deg: 20.0,
            elevation_deg: 35.0,
            distance_m: None,
            eye: None,
            target: None,
            fov_deg: 40.0,
            orbit_deg: 0.0,
            orbit_easing: true,
            vertical_exaggeration: None,
            supersample: 2,
            lod_min_cell_px: 2.0,
            block_sides: true,
            base_m: None,
            side_rgb: [150, 124, 96],
            sky_top_rgb: [92, 136, 190],
            sky_bottom_rgb: [222, 230, 238],
        }
    }
}

impl ViewOptions {
    /// A small, quick view for previews and tests: 320 × 180, no supersampling.
    pub fn preview() -> Self {
        ViewOptions {
            width: 320,
            height: 180,
            supersample: 1,
            ..Default::default()
        }
    }
}

/// The sun and the surface's response to it.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct LightOptions {
    /// Sun azimuth, compass degrees clockwise from north, in [0, 360); absent = from behind the
    /// viewer's left shoulder ([`SUN_FROM_VIEW_DEG`] from the line of sight), turning with the
    /// camera through an orbit so relief never inverts. Default: behind the viewer's left shoulder.
    pub azimuth_deg: Option<f64>,
    /// Sun altitude above the horizon in degrees, in (0, 90]. Default: 40.
    pub altitude_deg: f64,
    /// Share of light that reaches every surface regardless of orientation, in [0, 1]. Default: 0.25.
    pub ambient: f64,
    /// Weight of the Lambert (diffuse) term, 0 to 2. Default: 0.85.
    pub diffuse: f64,
    /// Weight of the Blinn-Phong (specular) highlight, 0 to 1. Default: 0.12.
    pub specular: f64,
    /// Blinn-Phong shininess exponent (larger = tighter highlight), 1 to 1000. Default: 40.
    pub shininess: f64,
    /// Overall light multiplier, above 0 and at most 10. Default: 1.
    pub intensity: f64,
    /// Cast shadows from the sun's horizon. Default: true.
    pub shadows: bool,
    /// Width of the shadow edge in cells of the drawn level (0 = hard edge), 0 to 10. Default: 1.
    pub shadow_softness_cells: f64,
    /// Sky-visibility (ambient occlusion) darkening of hollows, 0 (off) to 1: the ambient light of
    /// a cell is reduced by this share of the sky directions it cannot see. Default: 0.
    pub hollow_darkening: f64,
}

impl Default for LightOptions {
    fn default() -> Self {
        LightOptions {
            azimuth_deg: None,
            altitude_deg: 40.0,
            ambient: 0.25,
            diffuse: 0.85,
            specular: 0.12,
            shininess: 40.0,
            intensity: 1.0,
            shadows: true,
            shadow_softness_cells: 1.0,
            hollow_darkening: 0.0,
        }
    }
}

/// A flat water surface (a tidal datum, a flood level) drawn translucent over the terrain.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct WaterOptions {
    /// Water level in metres (same datum as the grids); absent = no water. Default: none.
    #[serde(deserialize_with = "crate::job::length::opt_metres")]
    pub level_m: Option<f64>,
    /// Water colour, sRGB. Default: [40, 110, 170].
    pub rgb: [u8; 3],
    /// Opacity of the water, 0 (clear) to 1 (opaque). Default: 0.55.
    pub opacity: f64,
}

impl Default for WaterOptions {
    fn default() -> Self {
        WaterOptions {
            level_m: None,
            rgb: [40, 110, 170],
            opacity: 0.55,
        }
    }
}

/// A second surface (an earlier survey, a design grid) drawn as a smooth translucent shell where it
/// stands above the terrain. Both surfaces are smoothed over a few cells first (so survey noise
/// neither speckles the shell nor punches holes in it), and the shell's opacity grows smoothly with
/// its height above the terrain, from nothing at `min_gap_m` to `opacity` at `full_gap_m`.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct ShellOptions {
    /// Shell colour, sRGB. Default: [236, 240, 248].
    pub rgb: [u8; 3],
    /// Largest opacity of the shell, 0 to 1. Default: 0.5.
    pub opacity: f64,
    /// Height gap above the terrain, metres, at which the shell starts to show, 0 to 100.
    /// Default: 0.3.
    pub min_gap_m: f64,
    /// Height gap, metres, from which the shell has its full opacity; above `min_gap_m`.
    /// Default: 2.
    pub full_gap_m: f64,
}

impl Default for ShellOptions {
    fn default() -> Self {
        ShellOptions {
            rgb: [236, 240, 248],
            opacity: 0.5,
            min_gap_m: 0.3,
            full_gap_m: 2.0,
        }
    }
}

/// How a surface is coloured.
#[derive(Debug, Clone, Copy)]
pub enum Colouring<'a> {
    /// By elevation on the fixed elevation ramp.
    Elevation,
    /// By change since a reference surface (same geometry), on a diverging ramp centred on zero,
    /// symmetric to ±`limit_m`; |change| below `lod_m` is drawn neutral.
    Change {
        /// The earlier surface's elevations, row-major, same shape as the rendered surface.
        reference: &'a ndarray::ArrayRef2<f32>,
        /// Change in metres mapped to the ends of the ramp (> 0).
        limit_m: f32,
        /// Level of detection in metres: smaller changes are drawn as no change.
        lod_m: f32,
    },
    /// By an RGB raster (an orthophoto) draped over the surface; cells outside it keep the
    /// elevation colour.
    Drape(&'a Drape),
}

/// An RGB raster to drape over the surface, on its own geometry (same CRS as the grid).
#[derive(Debug, Clone)]
pub struct Drape {
    geometry: crate::grid::GridGeometry,
    /// Linear-light colour per cell, row-major (rows north to south), 3 floats a cell.
    linear: Vec<[f32; 3]>,
}

impl Drape {
    /// A drape from sRGB bytes of shape (rows, cols, 3) on `geometry`, checked against the grid
    /// it will be draped on.
    ///
    /// # Errors
    /// A message when the shape does not match the geometry or the raster misses the grid.
    pub fn new(
        geometry: &crate::grid::GridGeometry,
        rgb: &ndarray::Array3<u8>,
        grid: &crate::grid::GridGeometry,
    ) -> Result<Drape, String> {
        let (rows, cols, bands) = rgb.dim();
        if (rows, cols) != (geometry.rows, geometry.cols) || bands != 3 || rows == 0 || cols == 0 {
            return Err(format!(
                "drape: the raster is {cols}x{rows}x{bands} but its header says {}x{}x3; give an RGB raster of 3 bands",
                geometry.cols, geometry.rows
            ));
        }
        let (w, s, e, n) = geometry.extent();
        let (gw, gs, ge, gn) = grid.extent();
        if w >= ge || e <= gw || s >= gn || n <= gs {
            return Err(format!(
                "drape: the raster ({w}..{e}, {s}..{n}) does not overlap the grid ({gw}..{ge}, {gs}..{gn}); give an image of the same area in the same CRS"
            ));
        }
        let lut: Vec<f32> = (0..=255u8)
            .map(|v| super::ramp::srgb_to_linear(f32::from(v) / 255.0))
            .collect();
        let linear = rgb
            .outer_iter()
            .flat_map(|row| {
                row.outer_iter()
                    .map(|px| [0, 1, 2].map(|k| lut[px[k] as usize]))
                    .collect::<Vec<_>>()
            })
            .collect();
        Ok(Drape {
            geometry: geometry.clone(),
            linear,
        })
    }

    /// Bilinear linear-light colour at a map point, or None outside the raster.
    pub fn linear_at(&self, x: f64, y: f64) -> Option<[f32; 3]> {
        let g = &self.geometry;
        let (r, c) = g.to_cell(x, y);
        if !(r >= -0.5 && c >= -0.5 && r <= g.rows as f64 - 0.5 && c <= g.cols as f64 - 0.5) {
            return None;
        }
        let r = r.clamp(0.0, (g.rows - 1) as f64);
        let c = c.clamp(0.0, (g.cols - 1) as f64);
        let (r0, c0) = (r.floor() as usize, c.floor() as usize);
        let (r1, c1) = ((r0 + 1).min(g.rows - 1), (c0 + 1).min(g.cols - 1));
        let (fr, fc) = ((r - r0 as f64) as f32, (c - c0 as f64) as f32);
        let at = |rr: usize, cc: usize| self.linear[rr * g.cols + cc];
        let (a, b, cq, d) = (at(r0, c0), at(r0, c1), at(r1, c0), at(r1, c1));
        Some([0, 1, 2].map(|k| {
            (a[k] * (1.0 - fc) + b[k] * fc) * (1.0 - fr) + (cq[k] * (1.0 - fc) + d[k] * fc) * fr
        }))
    }
}
