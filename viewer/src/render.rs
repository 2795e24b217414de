//! Off-screen rendering: pictures of a route at chosen times with no window (kiss3d's
//! off-screen surface; on a machine without a GPU it runs on the Vulkan software driver).

use std::io::Cursor;
use std::path::Path;
use std::sync::Arc;

use clamber::output::write_atomic;
use clamber::scenario::Scenario;
use image::{ImageFormat, RgbImage};
use kiss3d::prelude::{Font, OffscreenSurface, OrbitCamera3d};

use crate::error::ViewError;
use crate::framing::{camera, ViewSettings};
use crate::overlay::{self, Caption, PixelView};
use crate::palette;
use crate::replay::Replay;
use crate::stage::Stage;

/// What goes into a picture besides the scene.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Layers {
    /// Draw the robot's links (off: the scene alone, mechanisms included).
    pub robot: bool,
    /// Draw the caption and the timeline.
    pub overlay: bool,
}

impl Default for Layers {
    fn default() -> Self {
        Layers {
            robot: true,
            overlay: true,
        }
    }
}

/// A reusable off-screen renderer for one scenario and route.
pub struct Renderer<'a> {
    scenario: &'a Scenario,
    replay: &'a Replay,
    surface: OffscreenSurface,
    stage: Stage,
    camera: OrbitCamera3d,
    font: Arc<Font>,
    view: ViewSettings,
}

impl<'a> Renderer<'a> {
    /// Set up the surface (fails with a clear message when no graphics adapter, not even
    /// the software one, is available).
    pub fn new(
        scenario: &'a Scenario,
        replay: &'a Replay,
        view: ViewSettings,
    ) -> Result<Renderer<'a>, ViewError> {
        if view.width < 64 || view.height < 64 || view.width > 8192 || view.height > 8192 {
            return Err(ViewError::Option {
                what: "picture size",
                expected: format!(
                    "64 to 8192 pixels each way, got {}x{}",
                    view.width, view.height
                ),
            });
        }
        let surface = std::panic::catch_unwind(|| {
            kiss3d::pollster::block_on(OffscreenSurface::new(view.width, view.height))
        })
        .map_err(|_| ViewError::Render(NO_ADAPTER.into()))?;
        let mut surface = surface;
        surface.set_background_color(palette::BACKGROUND);
        surface.set_ambient(0.35);
        let (cam, floor) = camera(scenario, replay, &view);
        Ok(Renderer {
            scenario,
            replay,
            surface,
            stage: Stage::new(scenario, floor),
            camera: cam,
            font: Font::default(),
            view,
        })
    }

    /// The camera the pictures are taken with (to project world points into them).
    pub fn camera(&self) -> &OrbitCamera3d {
        &self.camera
    }

    /// The picture at route time `t`.
    pub fn frame(&mut self, t: f64, layers: Layers) -> RgbImage {
        let robot = &self.scenario.robot;
        let f = self.replay.frame(robot, t);
        let gripped = self.replay.spans[f.span].holds.clone();
        self.stage.set_frame(robot, &f.q, &gripped);
        self.stage.set_robot_visible(layers.robot);
        let (w, h) = (self.view.width as f32, self.view.height as f32);
        let mut pixels = PixelView {
            width: w,
            height: h,
        };
        if layers.overlay {
            overlay::draw(
                self.surface.window_mut(),
                &self.font,
                w,
                h,
                self.replay,
                f.time,
                &Caption {
                    title: &self.scenario.name,
                    speed: 1.0,
                    playing: None,
                },
            );
        }
        kiss3d::pollster::block_on(self.surface.render(
            Some(&mut self.stage.root),
            None,
            Some(&mut self.camera),
            Some(&mut pixels),
            None,
            None,
        ));
        self.surface.snap_image()
    }
}

/// What test.sh and the error say when rendering cannot start.
pub const NO_ADAPTER: &str = "no graphics adapter found (not even a software one); on \
Debian/Ubuntu install the Vulkan software driver: apt-get install mesa-vulkan-drivers libvulkan1";

/// Images side by side, left to right, with a 4-pixel gap in the background colour.
pub fn strip(images: &[RgbImage]) -> RgbImage {
    const GAP: u32 = 4;
    let h = images.iter().map(|i| i.height()).max().unwrap_or(1);
    let w =
        images.iter().map(|i| i.width()).sum::<u32>() + GAP * images.len().saturating_sub(1) as u32;
    let mut out =
        RgbImage::from_pixel(w.max(1), h, image::Rgb(palette::srgb8(palette::BACKGROUND)));
    let mut x = 0;
    for img in images {
        image::imageops::replace(&mut out, img, x as i64, 0);
        x += img.width() + GAP;
    }
    out
}

/// Encode `img` as PNG and write it atomically to `path` (no partial file on failure).
pub fn write_png(img: &RgbImage, path: &Path) -> Result<(), ViewError> {
    let mut bytes = Vec::new();
    img.write_to(&mut Cursor::new(&mut bytes), ImageFormat::Png)
        .map_err(|e| ViewError::Render(format!("encoding PNG: {e}")))?;
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|source| ViewError::Io {
            path: dir.to_path_buf(),
            source,
        })?;
    }
    write_atomic(path, &bytes)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn strip_places_images_side_by_side() {
        let a = RgbImage::from_pixel(3, 2, image::Rgb([255, 0, 0]));
        let b = RgbImage::from_pixel(2, 4, image::Rgb([0, 255, 0]));
        let s = strip(&[a, b]);
        assert_eq!((s.width(), s.height()), (3 + 4 + 2, 4));
        assert_eq!(s.get_pixel(0, 0).0, [255, 0, 0]);
        assert_eq!(s.get_pixel(7, 3).0, [0, 255, 0]);
        assert_eq!(s.get_pixel(4, 0).0, palette::srgb8(palette::BACKGROUND));
    }
}
