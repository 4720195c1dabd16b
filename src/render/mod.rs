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
//!   exaggeration) to a pixel, for labels; `north_px` and `metres_per_px` serve a north arrow and a
//!   scale bar.
//!
//! Framing: `Renderer::framed(geometry, view, light, range, &Focus, &FreeArea)` fills in the view
//! keys the job leaves out (exaggeration, target, distance) by the pure functions of `framing.rs`;
//! `Renderer::new` frames the whole grid. `FrameView::vertical_exaggeration()` and
//! `Renderer::vertical_exaggeration()` give the value in use.
//!
//! Beyond the contract: `Renderer::set_water`, `Renderer::set_shell` and
//! `Renderer::render_scene_into(surface, shell, colouring, orbit_fraction, frame)` add a water plane,
//! a translucent second surface and colouring by change (DEM of difference) or by a draped RGB
//! raster. Options (`options.rs`) deserialise straight from the job YAML.
//!
//! Pipeline of one frame (files of this module):
//! 1. `lod.rs`: the surface is reduced to the level of detail chosen once per job from the projected
//!    cell size, heights multiplied by the vertical exaggeration.
//! 2. `shadow.rs`: cast shadows from the sun's horizon over that level (and, if asked, the sky
//!    visibility that darkens hollows).
//! 3. `scene.rs`: per vertex, Horn normals (`shade.rs`), colour (`ramp.rs`), Lambert + ambient +
//!    Blinn-Phong light, projection through the look-at camera (`camera.rs`); triangles binned to
//!    row bands; the block's sides (`sides.rs`); the shell surface likewise.
//! 4. `bands.rs` with `raster.rs`: each row band (in parallel, rayon) fills its sky gradient,
//!    rasterises its triangles with a depth buffer, blends the shell and the water plane, then
//!    averages the supersamples and encodes linear light to sRGB bytes into its rows of the frame.
//!
//! Determinism: every parallel step writes disjoint outputs computed from inputs fixed before the
//! step, in a fixed order, so the frame is bit-identical for any thread count.

mod bands;
pub mod camera;
pub mod framing;
pub mod lod;
mod options;
pub mod ramp;
pub mod raster;
mod scene;
pub mod shade;
pub mod shadow;
mod sides;
mod synthetic;

use crate::grid::GridGeometry;
use crate::interp::Surface;

pub use camera::Camera;
pub use framing::{Focus, FreeArea, FREE_AREA};
pub use options::{
    Colouring, Drape, LightOptions, ShellOptions, ViewOptions, WaterOptions, MAX_FRAME_PX,
    SUN_FROM_VIEW_DEG,
};

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

/// What a rendered frame needs to place labels: the camera of that frame.
#[derive(Debug, Clone)]
pub struct FrameView {
    camera: Camera,
    centre_map: (f64, f64),
    unit_m: f64,
    exaggeration: f64,
    target: [f64; 3],
    sun_azimuth_deg: f64,
}

impl FrameView {
    /// The vertical exaggeration this frame is drawn with (the job's, or the automatic choice), for
    /// the "heights ×N" note.
    pub fn vertical_exaggeration(&self) -> f64 {
        self.exaggeration
    }

    /// Compass azimuth of the sun lighting this frame, degrees in [0, 360).
    pub fn sun_azimuth_deg(&self) -> f64 {
        self.sun_azimuth_deg
    }

    fn local(&self, x: f64, y: f64, z_m: f64) -> [f64; 3] {
        [
            (x - self.centre_map.0) * self.unit_m,
            (y - self.centre_map.1) * self.unit_m,
            z_m * self.exaggeration,
        ]
    }

    /// Pixel (column, row; continuous, origin top-left) of a map point, or None if behind the camera.
    pub fn project(&self, x: f64, y: f64, z_m: f64) -> Option<(f32, f32)> {
        self.camera
            .project(self.local(x, y, z_m))
            .map(|(c, r, _)| (c as f32, r as f32))
    }

    /// Unit vector (d_column, d_row; rows grow downward) pointing north on the screen at the target,
    /// for a north arrow; None when north is along the line of sight.
    pub fn north_px(&self) -> Option<(f32, f32)> {
        let t = self.target;
        let step = 1.0;
        let a = self.camera.project(t)?;
        let b = self.camera.project([t[0], t[1] + step, t[2]])?;
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len = (dx * dx + dy * dy).sqrt();
        (len > 1e-9).then(|| ((dx / len) as f32, (dy / len) as f32))
    }

    /// Approximate metres (horizontal, on the ground) per pixel at the target, for a scale bar.
    pub fn metres_per_px(&self) -> f64 {
        let d = camera::dot(camera::sub(self.target, self.camera.eye), self.camera.fwd);
        d / self.camera.focal_px
    }

    /// The viewpoint of this frame as the job's view keys state it: (facing_deg, elevation_deg,
    /// distance_m), the orbit's turn included.
    pub fn view_values(&self) -> (f64, f64, f64) {
        let e = self.camera.eye;
        let d = [
            self.target[0] - e[0],
            self.target[1] - e[1],
            self.target[2] - e[2],
        ];
        let horizontal = d[0].hypot(d[1]);
        let facing = d[0].atan2(d[1]).to_degrees().rem_euclid(360.0);
        let elevation = (-d[2]).atan2(horizontal).to_degrees();
        (facing, elevation, horizontal.hypot(d[2]))
    }

    /// The camera of this frame (local metres about the grid centre; exaggerated heights).
    pub fn camera(&self) -> &Camera {
        &self.camera
    }
}

/// Renders surfaces of one analysis grid; holds the per-job buffers. A clone has buffers of its
/// own, so two clones can render two frames at once (buffers carry nothing from frame to frame).
#[derive(Debug, Clone)]
pub struct Renderer {
    geometry: GridGeometry,
    view: ViewOptions,
    light: LightOptions,
    water: WaterOptions,
    shell: ShellOptions,
    range_m: (f32, f32),
    base_m: f32,
    /// The vertical exaggeration in use (the job's, or the automatic choice).
    exaggeration: f64,
    target: [f64; 3],
    distance_m: f64,
    level: u32,
    ramp: ramp::ElevationRamp,
    buffers: scene::Buffers,
}

fn check(ok: bool, msg: impl FnOnce() -> String) -> Result<(), String> {
    if ok {
        Ok(())
    } else {
        Err(msg())
    }
}

/// When `view.eye` is set, the facing, elevation and distance it implies (checked), else the view.
fn apply_eye(
    g: &GridGeometry,
    view: &ViewOptions,
    range_m: (f32, f32),
    k: f64,
) -> Result<ViewOptions, String> {
    let Some([ex, ey, ez]) = view.eye else {
        return Ok(view.clone());
    };
    check(ex.is_finite() && ey.is_finite() && ez.is_finite(), || {
        format!("view.eye: [{ex}, {ey}, {ez}] is not three numbers; give [x, y, elevation_m]")
    })?;
    let (west, south, east, north) = g.extent();
    let [tx, ty] = view
        .target
        .unwrap_or([(west + east) / 2.0, (south + north) / 2.0]);
    let unit = g.horizontal_unit.metres();
    let tz = f64::from(range_m.0 + range_m.1) / 2.0 * k;
    let d = [(tx - ex) * unit, (ty - ey) * unit, tz - ez * k];
    let horiz = (d[0] * d[0] + d[1] * d[1]).sqrt();
    let dist = (horiz * horiz + d[2] * d[2]).sqrt();
    let elevation_deg = (-d[2]).atan2(horiz).to_degrees();
    check((5.0..=90.0).contains(&elevation_deg), || {
        format!(
            "view.eye: from [{ex}, {ey}, {ez}] the line of sight to the target is {elevation_deg:.1}° below the horizon; raise the eye so it looks down by 5° to 90°"
        )
    })?;
    let facing_deg = if horiz > 1e-9 {
        d[0].atan2(d[1]).to_degrees().rem_euclid(360.0)
    } else {
        view.facing_deg
    };
    Ok(ViewOptions {
        facing_deg,
        elevation_deg,
        distance_m: Some(dist),
        ..view.clone()
    })
}

impl Renderer {
    /// Checks the options against the grid and allocates per-job buffers; frames the whole grid
    /// (see [`Renderer::framed`]).
    ///
    /// # Errors
    /// A message naming the option at fault and the fix.
    pub fn new(
        geometry: &GridGeometry,
        view: &ViewOptions,
        light: &LightOptions,
        elevation_range_m: (f32, f32),
    ) -> Result<Renderer, String> {
        let (lo, hi) = elevation_range_m;
        let relief = if hi >= lo { f64::from(hi - lo) } else { 0.0 };
        let focus = Focus::whole(geometry, relief);
        Renderer::framed(geometry, view, light, elevation_range_m, &focus, &FREE_AREA)
    }

    /// Checks the options against the grid and allocates per-job buffers. View keys the job leaves
    /// out are filled in by framing `focus` into the `free` part of the frame: the vertical
    /// exaggeration by [`framing::auto_exaggeration`], the target (the focus's middle, slid to the
    /// free area's middle for a fixed view) and the distance by [`framing::fit`].
    ///
    /// # Errors
    /// A message naming the option at fault and the fix.
    ///
    /// # Allocations
    /// The frame-sized depth buffer (4 bytes a supersample) and the reduced-level vertex buffers
    /// (at most one vertex per supersample), once; each rayon thread also keeps one band's colour
    /// scratch (12 bytes a supersample of 16 output rows).
    pub fn framed(
        geometry: &GridGeometry,
        view: &ViewOptions,
        light: &LightOptions,
        elevation_range_m: (f32, f32),
        focus: &Focus,
        free: &FreeArea,
    ) -> Result<Renderer, String> {
        if let Some(k) = view.vertical_exaggeration {
            check(k.is_finite() && k > 0.0 && k <= 100.0, || {
                format!(
                    "view.vertical_exaggeration: {k} must be above 0 and at most 100; use 1 for true scale, 2 to 5 to bring out low dunes, or leave it out to have it chosen"
                )
            })?;
        }
        let k = view.vertical_exaggeration.unwrap_or_else(|| {
            framing::auto_exaggeration(focus.relief_m, focus.longer_side_m(geometry))
        });
        let derived = apply_eye(geometry, view, elevation_range_m, k)?;
        let v = &derived;
        check((1..=MAX_FRAME_PX).contains(&v.width), || {
            format!("view.width: {} is outside 1..={MAX_FRAME_PX}; give the frame width in pixels, e.g. 960", v.width)
        })?;
        check((1..=MAX_FRAME_PX).contains(&v.height), || {
            format!("view.height: {} is outside 1..={MAX_FRAME_PX}; give the frame height in pixels, e.g. 540", v.height)
        })?;
        check((1..=4).contains(&v.supersample), || {
            format!(
                "view.supersample: {} is not one of 1 (off), 2, 3 or 4 samples a side; use 2 for smooth edges",
                v.supersample
            )
        })?;
        let samples = u64::from(v.width) * u64::from(v.height) * u64::from(v.supersample).pow(2);
        check(samples <= 64 << 20, || {
            format!(
                "view.supersample: {} at {}x{} needs {samples} samples (more than 64 Mi); lower supersample or the frame size",
                v.supersample, v.width, v.height
            )
        })?;
        check(
            v.fov_deg.is_finite() && (5.0..=120.0).contains(&v.fov_deg),
            || {
                format!("view.fov_deg: {} is outside 5..=120; give the vertical field of view in degrees, e.g. 40", v.fov_deg)
            },
        )?;
        check(
            v.elevation_deg.is_finite() && (5.0..=90.0).contains(&v.elevation_deg),
            || {
                format!(
                "view.elevation_deg: {} is outside 5..=90; give the angle of the line of sight below the horizon, e.g. 35 (a camera at or below the horizon would look into the terrain)",
                v.elevation_deg
            )
            },
        )?;
        check(
            v.facing_deg.is_finite() && (0.0..360.0).contains(&v.facing_deg),
            || {
                format!(
                    "view.facing_deg: {} is outside [0, 360); give a compass bearing, e.g. 20",
                    v.facing_deg
                )
            },
        )?;
        check(
            v.orbit_deg.is_finite() && v.orbit_deg.abs() <= 3600.0,
            || {
                format!("view.orbit_deg: {} is outside -3600..=3600; give the turn over the animation in degrees, e.g. 360", v.orbit_deg)
            },
        )?;
        check(
            v.lod_min_cell_px.is_finite() && (0.5..=16.0).contains(&v.lod_min_cell_px),
            || {
                format!(
                    "view.lod_min_cell_px: {} is outside 0.5..=16; 2 is a good balance",
                    v.lod_min_cell_px
                )
            },
        )?;
        let l = light;
        if let Some(az) = l.azimuth_deg {
            check(az.is_finite() && (0.0..360.0).contains(&az), || {
                format!("sun.azimuth_deg: {az} is outside [0, 360); give the sun's compass bearing, e.g. 315, or leave it out for light from behind the viewer's left shoulder")
            })?;
        }
        check(
            l.altitude_deg.is_finite() && l.altitude_deg > 0.0 && l.altitude_deg <= 90.0,
            || {
                if l.altitude_deg <= 0.0 {
                    format!("sun.altitude_deg: {} puts the sun at or below the horizon; give an altitude in (0, 90], e.g. 40", l.altitude_deg)
                } else {
                    format!("sun.altitude_deg: {} is outside (0, 90]; give the sun's altitude in degrees, e.g. 40", l.altitude_deg)
                }
            },
        )?;
        for (name, val, lo, hi) in [
            ("ambient", l.ambient, 0.0, 1.0),
            ("diffuse", l.diffuse, 0.0, 2.0),
            ("specular", l.specular, 0.0, 1.0),
            ("shininess", l.shininess, 1.0, 1000.0),
            ("shadow_softness_cells", l.shadow_softness_cells, 0.0, 10.0),
            ("hollow_darkening", l.hollow_darkening, 0.0, 1.0),
        ] {
            check(val.is_finite() && (lo..=hi).contains(&val), || {
                format!("sun.{name}: {val} is outside {lo}..={hi}; give a value in that range, or leave it out for the default")
            })?;
        }
        check(
            l.intensity.is_finite() && l.intensity > 0.0 && l.intensity <= 10.0,
            || {
                format!(
                    "sun.intensity: {} must be above 0 and at most 10; 1 is full sunlight",
                    l.intensity
                )
            },
        )?;
        check(geometry.rows >= 2 && geometry.cols >= 2, || {
            format!(
                "the grid is {}x{} cells; the view needs at least 2x2",
                geometry.cols, geometry.rows
            )
        })?;
        let (lo, hi) = elevation_range_m;
        check(lo.is_finite() && hi.is_finite() && lo <= hi, || {
            format!("elevation range {lo}..{hi} m is not a finite range; the surveys hold no elevations to draw")
        })?;
        let range_m = if hi - lo < 0.01 {
            (lo - 0.5, hi + 0.5)
        } else {
            (lo, hi)
        };
        let base_m = match v.base_m {
            Some(b) => {
                check(b.is_finite() && (b as f32) < lo, || {
                    format!("view.base_m: {b} m is not below the lowest elevation {lo} m; give a lower base or leave it out")
                })?;
                b as f32
            }
            None => lo - 0.2 * (hi - lo) - 1.0,
        };
        let unit = geometry.horizontal_unit.metres();
        let (west, south, east, north) = geometry.extent();
        let (cx, cy) = ((west + east) / 2.0, (south + north) / 2.0);
        let tz = f64::from(range_m.0 + range_m.1) / 2.0 * k;
        let focus_extent = focus.extent(geometry);
        let focus_centre = [
            ((focus_extent.0 + focus_extent.2) / 2.0 - cx) * unit,
            ((focus_extent.1 + focus_extent.3) / 2.0 - cy) * unit,
            tz,
        ];
        let mut target = match v.target {
            Some([x, y]) => {
                check(
                    x.is_finite()
                        && y.is_finite()
                        && (west..=east).contains(&x)
                        && (south..=north).contains(&y),
                    || {
                        format!(
                        "view.target: [{x}, {y}] lies outside the grid ({west}..{east}, {south}..{north}); give a point inside it or leave it out"
                    )
                    },
                )?;
                [(x - cx) * unit, (y - cy) * unit, tz]
            }
            // An eye without a target looks at the grid's centre (as `apply_eye` assumed).
            None if v.eye.is_some() => [0.0, 0.0, tz],
            None => focus_centre,
        };
        // Corners of the terrain block, for framing and the inside/under checks.
        let (hw, hh) = ((east - west) / 2.0 * unit, (north - south) / 2.0 * unit);
        let ztop = f64::from(range_m.1) * k;
        let zbot = f64::from(base_m.min(range_m.0)) * k;
        let distance_m = match v.distance_m {
            Some(d) => {
                check(d.is_finite() && d > 0.0, || {
                    format!("view.distance_m: {d} must be a positive number of metres, or left out to fit the grid")
                })?;
                let eye_z = target[2] + d * v.elevation_deg.to_radians().sin();
                check(eye_z > f64::from(range_m.0) * k, || {
                    format!(
                        "view.distance_m: {d} m puts the camera under the terrain (eye at {:.1} m, lowest ground {:.1} m after exaggeration); increase distance_m or elevation_deg",
                        eye_z, f64::from(range_m.0) * k
                    )
                })?;
                // Inside: eye lower than the highest ground while standing over the grid at some
                // point of the orbit.
                let horiz = d * v.elevation_deg.to_radians().cos();
                let over_grid = (0..=72).any(|i| {
                    let yaw = v.facing_deg + v.orbit_deg * i as f64 / 72.0;
                    let (s, c) = yaw.to_radians().sin_cos();
                    let (ex, ey) = (target[0] - horiz * s, target[1] - horiz * c);
                    ex.abs() <= hw && ey.abs() <= hh
                });
                check(!(over_grid && eye_z <= ztop), || {
                    format!(
                        "view.distance_m: {d} m puts the camera inside the terrain (eye at {:.1} m, highest ground {:.1} m after exaggeration); increase distance_m or elevation_deg",
                        eye_z, ztop
                    )
                })?;
                d
            }
            None => {
                // The focus box (down to the block's base when it is the whole grid) inside the
                // free area on every step of the orbit.
                let base = (focus.is_whole(geometry) && v.block_sides).then_some(zbot / k);
                let range = (f64::from(range_m.0), f64::from(range_m.1));
                let box_corners = framing::framing_points(geometry, focus, k, range, base);
                let shot = framing::Shot {
                    facing_deg: v.facing_deg,
                    elevation_deg: v.elevation_deg,
                    fov_deg: v.fov_deg,
                    orbit_deg: v.orbit_deg,
                    width: f64::from(v.width),
                    height: f64::from(v.height),
                };
                let f = framing::fit(&box_corners, target, &shot, free, v.target.is_none());
                target = f.target;
                f.distance_m
            }
        };
        // Level of detail from the projected cell size at the target, in output pixels (so the
        // supersampling factor buys smoother edges, not four times the triangles: at 1280x720 a
        // 1024² grid costs 56 ms a frame at cells of 1 output pixel against 33 ms at 2, bench
        // `render`, 1 thread, 2x2 supersampling).
        let focal_out = (f64::from(v.height) / 2.0) / (v.fov_deg.to_radians() / 2.0).tan();
        let cell_m = geometry.cell_x_m().min(geometry.cell_y_m());
        let cell_px = cell_m * focal_out / distance_m;
        let mut level = lod::choose_level(cell_px, v.lod_min_cell_px, geometry.rows, geometry.cols);
        // Never more vertices than samples on the frame: finer levels cannot show more and would
        // only cost memory (a 4096² grid at level 0 needs about 0.6 GB of vertex buffers).
        let samples = (samples as usize).max(1);
        while level < lod::max_level(geometry.rows, geometry.cols) && {
            let (lr, lc) = lod::level_shape(geometry.rows, geometry.cols, level);
            lr * lc > samples
        } {
            level += 1;
        }
        log::debug!("render: level of detail {level} (cell {cell_px:.2} px at the target), distance {distance_m:.1} m");
        let buffers = scene::Buffers::new(geometry, v, level);
        Ok(Renderer {
            geometry: geometry.clone(),
            view: ViewOptions {
                vertical_exaggeration: Some(k),
                ..v.clone()
            },
            light: l.clone(),
            water: WaterOptions::default(),
            shell: ShellOptions::default(),
            range_m,
            base_m,
            exaggeration: k,
            target,
            distance_m,
            level,
            ramp: ramp::ElevationRamp::default(),
            buffers,
        })
    }

    /// Adds a water plane to every frame.
    ///
    /// # Errors
    /// A message naming the `water.*` option at fault.
    pub fn set_water(&mut self, water: &WaterOptions) -> Result<(), String> {
        if let Some(level) = water.level_m {
            check(level.is_finite(), || {
                format!("water.level_m: {level} is not a number of metres")
            })?;
        }
        check(
            water.opacity.is_finite() && (0.0..=1.0).contains(&water.opacity),
            || {
                format!(
                    "water.opacity: {} is outside 0..=1; e.g. 0.55",
                    water.opacity
                )
            },
        )?;
        self.water = water.clone();
        Ok(())
    }

    /// Sets how a translucent shell surface is drawn by [`Renderer::render_scene_into`].
    ///
    /// # Errors
    /// A message naming the `shell.*` option at fault.
    pub fn set_shell(&mut self, shell: &ShellOptions) -> Result<(), String> {
        check(
            shell.opacity.is_finite() && (0.0..=1.0).contains(&shell.opacity),
            || {
                format!(
                    "shell.opacity: {} is outside 0..=1; e.g. 0.5",
                    shell.opacity
                )
            },
        )?;
        check(
            shell.min_gap_m.is_finite() && (0.0..100.0).contains(&shell.min_gap_m),
            || {
                format!(
                    "shell.min_gap_m: {} m is out of range; use 0 to 100 m, e.g. 0.3",
                    shell.min_gap_m
                )
            },
        )?;
        check(
            shell.full_gap_m.is_finite()
                && shell.full_gap_m > shell.min_gap_m
                && shell.full_gap_m <= 1000.0,
            || {
                format!(
                    "shell.full_gap_m: {} m must be above shell.min_gap_m ({} m) and at most 1000; e.g. 2",
                    shell.full_gap_m, shell.min_gap_m
                )
            },
        )?;
        self.shell = shell.clone();
        Ok(())
    }

    /// Colours elevation on `ramp` from the next frame on.
    pub fn set_elevation_ramp(&mut self, ramp: ramp::ElevationRamp) {
        if ramp != self.ramp {
            self.ramp = ramp;
            self.buffers.set_elevation_ramp(ramp);
        }
    }

    /// The vertical exaggeration in use: the job's, or the automatic choice.
    pub fn vertical_exaggeration(&self) -> f64 {
        self.exaggeration
    }

    /// The framing in use: the target (scene metres about the grid's centre, exaggerated height)
    /// and the camera's distance from it.
    pub fn framing(&self) -> framing::Framing {
        framing::Framing {
            target: self.target,
            distance_m: self.distance_m,
        }
    }

    /// The view as resolved: the job's keys with the automatic choices filled in (exaggeration;
    /// distance and target in the scene's metres are in [`Renderer::framing`]).
    pub fn view(&self) -> &ViewOptions {
        &self.view
    }

    /// The level of detail drawn (0 = every cell; L = blocks of 2^L × 2^L cells).
    pub fn level_of_detail(&self) -> u32 {
        self.level
    }

    /// The cells of the grid this renderer's level of detail reads: a surface holding only those
    /// ([`Surface::samples`]) draws exactly as the whole grid does.
    pub fn sample_plan(&self) -> lod::SamplePlan {
        lod::SamplePlan::new(self.geometry.rows, self.geometry.cols, self.level)
    }

    /// Renders `surface` into `frame`.
    pub fn render_into(
        &mut self,
        surface: &Surface,
        orbit_fraction: f64,
        frame: &mut Frame,
    ) -> FrameView {
        self.render_scene_into(surface, None, Colouring::Elevation, orbit_fraction, frame)
    }

    /// Renders `surface`, coloured as asked, with an optional translucent `shell` surface (same
    /// geometry; e.g. an earlier survey) and the water plane, into `frame`.
    pub fn render_scene_into(
        &mut self,
        surface: &Surface,
        shell: Option<&Surface>,
        colouring: Colouring,
        orbit_fraction: f64,
        frame: &mut Frame,
    ) -> FrameView {
        scene::render(self, surface, shell, colouring, orbit_fraction, frame)
    }

    /// The camera for a point of the orbit, on the output frame.
    /// The camera of the frame at `orbit_fraction` (0 to 1 along the orbit), without rendering.
    pub fn frame_view(&self, orbit_fraction: f64) -> FrameView {
        let v = &self.view;
        let f = if v.orbit_easing {
            camera::ease(orbit_fraction)
        } else {
            orbit_fraction.clamp(0.0, 1.0)
        };
        let yaw = v.facing_deg + v.orbit_deg * f;
        let sun_azimuth_deg = self
            .light
            .azimuth_deg
            .unwrap_or(yaw + SUN_FROM_VIEW_DEG)
            .rem_euclid(360.0);
        let dir = camera::view_direction(yaw, v.elevation_deg);
        let d = self.distance_m;
        let t = self.target;
        let eye = [t[0] - dir[0] * d, t[1] - dir[1] * d, t[2] - dir[2] * d];
        let camera = Camera::look_at(
            eye,
            t,
            yaw,
            v.fov_deg,
            f64::from(v.width),
            f64::from(v.height),
        );
        let (west, south, east, north) = self.geometry.extent();
        FrameView {
            camera,
            centre_map: ((west + east) / 2.0, (south + north) / 2.0),
            unit_m: self.geometry.horizontal_unit.metres(),
            exaggeration: self.exaggeration,
            target: t,
            sun_azimuth_deg,
        }
    }
}

#[doc(hidden)]
/// Internals for benches; not part of the public API.
pub mod bench_api {
    pub use super::synthetic::synthetic_dunes;
}

#[cfg(test)]
mod tests;
