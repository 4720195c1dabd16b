//! Surface -> `Frame`: a shaded perspective view of the terrain, drawn on the CPU.
//!
//! CONTRACT (used by `lib.rs`; keep these names and signatures):
//! - `Frame::new(width, height)`, fields `width`, `height`, `rgba` (row-major, 4 bytes a pixel).
//! - `Renderer::new(geometry, &ViewOptions, &LightOptions, elevation_range_m) -> Result<Renderer, String>`:
//!   checks the options against the grid (the `String` says what is wrong and how to fix it; the caller
//!   adds the job file path) and allocates everything a frame needs, once per job.
//! - `Renderer::render_into(&mut self, &Surface, orbit_fraction, &mut Frame) -> FrameView`:
//!   infallible; `orbit_fraction` in [0, 1] is how far along the orbit this frame is (ignored for a
//!   fixed view).
//! - `FrameView::project(x, y, z_m)` maps a map point (CRS units, metres of elevation, before
//!   exaggeration) to a pixel, for labels.

use crate::grid::GridGeometry;
use crate::interp::Surface;

/// An RGBA image that frames are rendered into, then labelled, then encoded.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Pixels, row-major from the top-left, 4 bytes each (R, G, B, A).
    pub rgba: Vec<u8>,
}

impl Frame {
    /// A black, opaque frame.
    pub fn new(width: u32, height: u32) -> Self {
        let mut rgba = vec![0u8; width as usize * height as usize * 4];
        rgba.chunks_exact_mut(4).for_each(|p| p[3] = 255);
        Frame {
            width,
            height,
            rgba,
        }
    }
}

/// Where the camera stands and how it moves.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct ViewOptions {
    /// Frame width in pixels. Default: 960.
    pub width: u32,
    /// Frame height in pixels. Default: 540.
    pub height: u32,
    /// Compass bearing, in degrees clockwise from north, of the direction the camera looks. Default: 20.
    pub facing_deg: f64,
    /// Angle of the line of sight below the horizon, in degrees (90 = straight down). Default: 35.
    pub elevation_deg: f64,
    /// Distance from the camera to the target in metres; absent = fit the whole grid in view. Default: fit.
    pub distance_m: Option<f64>,
    /// Point looked at, `[x, y]` in map coordinates; absent = the grid's centre. Default: centre.
    pub target: Option<[f64; 2]>,
    /// Vertical field of view in degrees. Default: 40.
    pub fov_deg: f64,
    /// Degrees the camera turns around the target over the whole animation (0 = fixed). Default: 0.
    pub orbit_deg: f64,
    /// Heights are multiplied by this for display (geometry, normals and shadows alike). Default: 2.
    pub vertical_exaggeration: f64,
}

impl Default for ViewOptions {
    fn default() -> Self {
        ViewOptions {
            width: 960,
            height: 540,
            facing_deg: 20.0,
            elevation_deg: 35.0,
            distance_m: None,
            target: None,
            fov_deg: 40.0,
            orbit_deg: 0.0,
            vertical_exaggeration: 2.0,
        }
    }
}

/// The sun and the surface's response to it.
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields, default)]
pub struct LightOptions {
    /// Sun azimuth, compass degrees clockwise from north, in [0, 360). Default: 315.
    pub azimuth_deg: f64,
    /// Sun altitude above the horizon in degrees, in (0, 90]. Default: 40.
    pub altitude_deg: f64,
    /// Share of light that reaches every surface regardless of orientation, in [0, 1]. Default: 0.25.
    pub ambient: f64,
}

impl Default for LightOptions {
    fn default() -> Self {
        LightOptions {
            azimuth_deg: 315.0,
            altitude_deg: 40.0,
            ambient: 0.25,
        }
    }
}

/// What a rendered frame needs to place labels: the camera of that frame.
#[derive(Debug, Clone)]
pub struct FrameView {
    _private: (),
}

impl FrameView {
    /// Pixel (column, row; continuous, origin top-left) of a map point, or None if behind the camera.
    pub fn project(&self, _x: f64, _y: f64, _z_m: f64) -> Option<(f32, f32)> {
        None
    }
}

/// Renders surfaces of one analysis grid; holds the per-job buffers.
#[derive(Debug)]
pub struct Renderer {
    _geometry: GridGeometry,
}

impl Renderer {
    /// Checks the options against the grid and allocates per-job buffers.
    ///
    /// # Errors
    /// A message naming the option at fault and the fix.
    pub fn new(
        geometry: &GridGeometry,
        _view: &ViewOptions,
        _light: &LightOptions,
        _elevation_range_m: (f32, f32),
    ) -> Result<Renderer, String> {
        Ok(Renderer {
            _geometry: geometry.clone(),
        })
    }

    /// Renders `surface` into `frame`.
    pub fn render_into(
        &mut self,
        _surface: &Surface,
        _orbit_fraction: f64,
        _frame: &mut Frame,
    ) -> FrameView {
        FrameView { _private: () }
    }
}
