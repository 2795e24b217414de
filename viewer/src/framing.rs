//! Where the camera looks from: a bounding ball of everything the route shows (obstacles,
//! holds, the robot's links over the whole route), seen from a fixed azimuth and elevation.

use clamber::kinematics::forward_kinematics;
use clamber::scenario::Scenario;
use clamber::Pose;
use kiss3d::prelude::{OrbitCamera3d, Vec3};
use nalgebra::Point3;

use crate::replay::Replay;
use crate::stage::p3;

/// View direction and picture size.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ViewSettings {
    /// Degrees about the world z axis, from +x towards +y, of the eye seen from the target.
    pub azimuth: f64,
    /// Degrees above the horizontal plane.
    pub elevation: f64,
    pub width: u32,
    pub height: u32,
}

impl Default for ViewSettings {
    fn default() -> Self {
        ViewSettings {
            azimuth: -60.0,
            elevation: 28.0,
            width: 960,
            height: 640,
        }
    }
}

/// Vertical field of view (radians) of every camera the viewer makes.
pub const FOV: f32 = 0.70;

/// Axis-aligned box of the scene and of the robot along the route.
pub fn scene_box(s: &Scenario, replay: &Replay) -> (Point3<f64>, Point3<f64>) {
    let mut lo = Point3::new(f64::INFINITY, f64::INFINITY, f64::INFINITY);
    let mut hi = Point3::new(f64::NEG_INFINITY, f64::NEG_INFINITY, f64::NEG_INFINITY);
    let mut grow = |p: Point3<f64>, r: f64| {
        for k in 0..3 {
            lo[k] = lo[k].min(p[k] - r);
            hi[k] = hi[k].max(p[k] + r);
        }
    };
    for o in &s.scene.obstacles {
        grow(
            Point3::from(o.shape.origin.translation.vector),
            o.shape.geometry.bounding_radius(),
        );
    }
    for h in &s.scene.holds {
        if let Some((c, r)) = h.fixed_extent() {
            grow(c, r);
        }
    }
    let robot = &s.robot;
    let mut poses = vec![Pose::identity(); robot.links().len()];
    for t in replay.key_times(24) {
        let f = replay.frame(robot, t);
        if forward_kinematics(robot, &f.q, &mut poses).is_ok() {
            for (l, p) in robot.links().iter().zip(&poses) {
                for sh in &l.shapes {
                    let c = p * sh.origin;
                    grow(
                        Point3::from(c.translation.vector),
                        sh.geometry.bounding_radius(),
                    );
                }
            }
        }
    }
    if !lo.x.is_finite() {
        return (Point3::new(-0.5, -0.5, 0.0), Point3::new(0.5, 0.5, 1.0));
    }
    (lo, hi)
}

/// The camera that frames the route, and the floor plate (centre, half size).
pub fn camera(s: &Scenario, replay: &Replay, v: &ViewSettings) -> (OrbitCamera3d, (Vec3, f32)) {
    let (lo, hi) = scene_box(s, replay);
    let centre = nalgebra::center(&lo, &hi);
    let radius = (0.5 * (hi - lo).norm()).max(0.2);
    // Distance at which a ball of `radius` fills the vertical field of view with a margin.
    let dist = 1.0 * radius / (0.5 * FOV as f64).sin();
    let (az, el) = (v.azimuth.to_radians(), v.elevation.to_radians());
    let dir = nalgebra::Vector3::new(el.cos() * az.cos(), el.cos() * az.sin(), el.sin());
    let at = p3(&centre);
    let eye = p3(&(centre + dir * dist));
    let mut cam = OrbitCamera3d::new_with_frustum(FOV, 0.01, (4.0 * dist) as f32, eye, at);
    cam.set_up_axis(Vec3::Z);
    let floor_half = (1.4 * radius).max(0.5) as f32;
    (cam, (Vec3::new(at.x, at.y, 0.0), floor_half))
}
