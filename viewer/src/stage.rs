//! The drawn scene: kiss3d nodes built once from a scenario (links from the robot's
//! collision shapes, holds, mechanisms, obstacles, a floor), then posed for each frame by
//! forward kinematics. World frame: z up, metres (as in Clamber).

use std::collections::BTreeSet;

use clamber::collision::convert::{point_from_parry, point_to_parry};
use clamber::kinematics::forward_kinematics;
use clamber::model::{Geometry, Robot, Shape};
use clamber::scenario::Scenario;
use clamber::scene::HoldKind;
use clamber::Pose;
use kiss3d::color::Color;
use kiss3d::prelude::{Light, Quat, SceneNode3d, Vec3};
use nalgebra::{Point3, Vector3};

use crate::palette;

/// Radius of a drawn bar hold and of a point hold's ball (metres; drawing only).
const BAR_RADIUS: f32 = 0.014;
const POINT_RADIUS: f32 = 0.026;

/// nalgebra (f64) to kiss3d (f32) conversions.
pub fn v3(p: &Vector3<f64>) -> Vec3 {
    Vec3::new(p.x as f32, p.y as f32, p.z as f32)
}

pub fn p3(p: &Point3<f64>) -> Vec3 {
    v3(&p.coords)
}

fn quat(pose: &Pose) -> Quat {
    let q = nalgebra::UnitQuaternion::from_rotation_matrix(&pose.rotation);
    let q = q.quaternion();
    Quat::from_xyzw(q.i as f32, q.j as f32, q.k as f32, q.w as f32).normalize()
}

fn place(node: &mut SceneNode3d, pose: &Pose) {
    node.set_position(v3(&pose.translation.vector));
    node.set_rotation(quat(pose));
}

/// kiss3d's cylinders and capsules run along y; ours along z.
fn y_to_z() -> Quat {
    Quat::from_rotation_x(std::f32::consts::FRAC_PI_2)
}

/// Rotation taking +y to the direction `d` (unit).
fn y_to(d: Vec3) -> Quat {
    Quat::from_rotation_arc(Vec3::Y, d.normalize())
}

/// Add one shape (in `parent`'s frame) with `color`.
fn add_shape(parent: &mut SceneNode3d, shape: &Shape, color: Color) {
    let mut holder = parent.add_group();
    place(&mut holder, &shape.origin);
    let mut node = match &shape.geometry {
        Geometry::Sphere { radius } => holder.add_sphere(*radius as f32),
        Geometry::Cuboid { size } => holder.add_cube(size.x as f32, size.y as f32, size.z as f32),
        Geometry::Capsule { radius, length } => {
            let mut n = holder.add_capsule(*radius as f32, *length as f32);
            n.set_rotation(y_to_z());
            n
        }
        Geometry::Cylinder { radius, length } => {
            let mut n = holder.add_cylinder(*radius as f32, *length as f32);
            n.set_rotation(y_to_z());
            n
        }
        Geometry::ConvexMesh { points } => {
            let pts: Vec<_> = points.iter().map(point_to_parry).collect();
            match parry3d_f64::transformation::try_convex_hull(&pts) {
                Ok((v, t)) => holder.add_trimesh(
                    v.into_iter().map(|p| p3(&point_from_parry(p))).collect(),
                    t,
                    Vec3::ONE,
                    true,
                ),
                // A degenerate hull (flat or too few points) has no surface to draw: show
                // its points' bounding ball instead so the link stays visible.
                Err(_) => holder.add_sphere(shape.geometry.bounding_radius().max(0.005) as f32),
            }
        }
        Geometry::TriMesh {
            vertices,
            triangles,
        } => holder.add_trimesh(
            vertices.iter().map(p3).collect(),
            triangles.to_vec(),
            Vec3::ONE,
            true,
        ),
        // Geometry is non-exhaustive: a kind this viewer does not know is drawn as its
        // bounding ball.
        #[allow(unreachable_patterns)]
        other => holder.add_sphere(other.bounding_radius() as f32),
    };
    node.set_color(color);
}

/// What is drawn and how to pose it.
pub struct Stage {
    pub root: SceneNode3d,
    /// One group node per robot link (mechanism links included), posed by FK.
    links: Vec<SceneNode3d>,
    /// Hold nodes by hold index, with their own colour.
    holds: Vec<(SceneNode3d, Color)>,
    hold_names: Vec<String>,
    /// Nodes of the robot proper (not mechanisms), to hide for a scene-only picture.
    robot_links: Vec<usize>,
    poses: Vec<Pose>,
}

impl Stage {
    /// Build the scene of `scenario`. `floor` is the floor plate's centre and half size.
    pub fn new(scenario: &Scenario, floor: (Vec3, f32)) -> Stage {
        let robot: &Robot = &scenario.robot;
        let mut root = SceneNode3d::empty();
        // Two lights: a warm key light from above-front and a cool fill from the side.
        root.add_light(Light::directional(Vec3::new(-0.4, 0.5, -1.0)).with_intensity(2.2))
            .set_position(Vec3::new(0.0, 0.0, 4.0));
        root.add_light(
            Light::directional(Vec3::new(0.7, -0.3, -0.4))
                .with_intensity(0.8)
                .with_casts_shadows(false),
        )
        .set_position(Vec3::new(-3.0, 2.0, 2.0));

        let (centre, half) = floor;
        root.add_cube(2.0 * half, 2.0 * half, 0.01)
            .set_position(Vec3::new(centre.x, centre.y, -0.006))
            .set_color(palette::FLOOR)
            .set_roughness(0.9);

        for o in &scenario.scene.obstacles {
            add_shape(&mut root, &o.shape, palette::OBSTACLE);
        }

        let mech_links: BTreeSet<&str> = scenario
            .scene
            .mechanisms
            .iter()
            .flat_map(|m| m.spec.links.iter().map(|l| l.name.as_str()))
            .collect();
        let effector_links: BTreeSet<usize> = robot.effectors().iter().map(|e| e.link).collect();
        let mut links = Vec::with_capacity(robot.links().len());
        let mut robot_links = Vec::new();
        for (i, l) in robot.links().iter().enumerate() {
            let mut g = root.add_group();
            let mech = mech_links.contains(l.name.as_str());
            let color = if mech {
                palette::MECHANISM
            } else if effector_links.contains(&i) {
                palette::EFFECTOR
            } else {
                palette::ROBOT
            };
            if !mech {
                robot_links.push(i);
            }
            for s in &l.shapes {
                add_shape(&mut g, s, color);
            }
            links.push(g);
        }

        let mut holds = Vec::new();
        let mut hold_names = Vec::new();
        for h in &scenario.scene.holds {
            let (node, color) = match &h.kind {
                HoldKind::Bar { start, end, .. } => {
                    let (a, b) = (p3(start), p3(end));
                    let mut g = root.add_group();
                    g.set_position(0.5 * (a + b));
                    let len = (b - a).length().max(1e-3);
                    g.add_cylinder(BAR_RADIUS, len).set_rotation(y_to(b - a));
                    // End stops: short wide discs make the bar read as a rail.
                    for end in [a, b] {
                        g.add_cylinder(1.8 * BAR_RADIUS, 0.012)
                            .set_position(end - 0.5 * (a + b))
                            .set_rotation(y_to(b - a));
                    }
                    (g, palette::BAR)
                }
                HoldKind::Point { pose, .. } => {
                    let mut g = root.add_group();
                    place(&mut g, pose);
                    g.add_sphere(POINT_RADIUS);
                    // A pin along the grip frame's z axis (the approach direction), behind
                    // the ball: the hand arrives along +z.
                    g.add_cylinder(0.3 * POINT_RADIUS, 3.0 * POINT_RADIUS)
                        .set_rotation(y_to_z())
                        .set_position(Vec3::new(0.0, 0.0, 1.5 * POINT_RADIUS));
                    (g, palette::POINT)
                }
                HoldKind::Handle { link, pose } => {
                    let parent = robot.link_id(link).map(|i| &mut links[i]);
                    let mut g = match parent {
                        Some(p) => p.add_group(),
                        None => root.add_group(),
                    };
                    place(&mut g, pose);
                    g.add_cube(0.03, 0.03, 0.09);
                    (g, palette::HANDLE)
                }
                #[allow(unreachable_patterns)]
                _ => (root.add_group(), palette::POINT),
            };
            let mut node = node;
            node.set_color_recursive(color);
            holds.push((node, color));
            hold_names.push(h.name.clone());
        }

        Stage {
            root,
            links,
            holds,
            hold_names,
            robot_links,
            poses: vec![Pose::identity(); robot.links().len()],
        }
    }

    /// Pose every link at `q` and light up the holds named in `gripped`.
    pub fn set_frame(&mut self, robot: &Robot, q: &[f64], gripped: &[String]) {
        if forward_kinematics(robot, q, &mut self.poses).is_ok() {
            for (node, pose) in self.links.iter_mut().zip(&self.poses) {
                place(node, pose);
            }
        }
        for ((node, color), name) in self.holds.iter_mut().zip(&self.hold_names) {
            let c = if gripped.contains(name) {
                palette::GRIPPED
            } else {
                *color
            };
            node.set_color_recursive(c);
        }
    }

    /// Show or hide the robot's own links (mechanisms stay): a scene-only picture.
    pub fn set_robot_visible(&mut self, visible: bool) {
        for &i in &self.robot_links {
            self.links[i].set_visible(visible);
        }
    }
}
