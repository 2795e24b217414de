//! Clearance against closed-form distances of elementary geometry.
//!
//! Each case puts one shape on the root link of a one-link robot (its pose is the shape
//! origin, the link sits at the world origin) and one obstacle, and compares
//! [`CollisionModel::clearance`] with the distance written out by hand from elementary
//! Euclidean geometry (the formula is named beside each check).
//!
//! Precision: every check agrees to `TOL` = 1e-9 m (f64). The shapes are a few tenths of a
//! metre, so this is about 1e-8 relative: far above rounding (1e-16) and below anything a
//! planner would notice.

use std::sync::Arc;

use clamber::collision::{Body, Clearance, CollisionModel, CollisionScratch, Obstacle};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, LinkSpec, RobotSpec, Shape};
use nalgebra::{Point3, Vector3};

const TOL: f64 = 1e-9;

fn shape(geometry: Geometry, pose: Pose) -> Shape {
    Shape {
        origin: pose,
        geometry,
        source: None,
    }
}

fn sphere(r: f64) -> Geometry {
    Geometry::Sphere { radius: r }
}

/// Clearance between `link_shape` on a fixed one-link robot and one obstacle `obstacle`.
fn clearance(link_shape: Shape, obstacle: Shape) -> Clearance {
    let spec = RobotSpec {
        name: "probe".into(),
        links: vec![LinkSpec {
            name: "probe".into(),
            shapes: vec![link_shape],
        }],
        ..Default::default()
    };
    let robot = spec.build().expect("valid robot");
    let obstacles = [Obstacle {
        name: "thing".into(),
        shape: obstacle,
    }];
    let model = CollisionModel::new(&robot, &obstacles).expect("valid model");
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(&robot, &[], &mut poses).expect("fk");
    let mut scratch = CollisionScratch::new();
    let c = model.clearance(&poses, &mut scratch).expect("query");
    assert_eq!(c.pair, Some((Body::Link(0), Body::Obstacle(0))));
    // in_collision must agree with the sign (touching counts as collision).
    let hit = model.in_collision(&poses, &mut scratch).expect("query");
    assert_eq!(
        hit,
        c.distance <= clamber::collision::TOUCH_TOLERANCE,
        "distance {}",
        c.distance
    );
    c
}

fn assert_close(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= TOL,
        "{what}: got {got}, want {want} (diff {:e})",
        got - want
    );
}

/// Distance from point `p` to the axis-aligned box of half extents `h` centred at the
/// origin: the norm of the per-axis excess `max(|p_i| - h_i, 0)` (elementary geometry:
/// the nearest point of a box is the coordinate-wise clamp of `p`).
fn point_box_distance(p: Vector3<f64>, h: Vector3<f64>) -> f64 {
    p.abs().zip_map(&h, |a, b| (a - b).max(0.0)).norm()
}

#[test]
fn sphere_sphere_distance_and_witness_points() {
    // |c1 - c2| - r1 - r2 (distance between spheres).
    let (c1, r1) = (Vector3::new(0.1, -0.2, 0.4), 0.3);
    let (c2, r2) = (Vector3::new(1.3, 0.9, -0.6), 0.5);
    let c = clearance(
        shape(sphere(r1), pose_from_xyz_rpy(c1.into(), [0.3, 0.2, 0.1])),
        shape(sphere(r2), pose_from_xyz_rpy(c2.into(), [0.0, 0.0, 0.0])),
    );
    let d = (c2 - c1).norm();
    assert_close(c.distance, d - r1 - r2, "sphere-sphere");
    // Witness points lie on the centre line: c1 + r1 n and c2 - r2 n, n = (c2 - c1)/|c2 - c1|.
    let n = (c2 - c1) / d;
    let (p1, p2) = c.points.expect("witness points");
    assert!((p1 - Point3::from(c1 + n * r1)).norm() <= TOL, "{p1}");
    assert!((p2 - Point3::from(c2 - n * r2)).norm() <= TOL, "{p2}");
}

#[test]
fn sphere_sphere_penetration_is_negative() {
    // Overlapping spheres: the signed distance |c1 - c2| - r1 - r2 is minus the depth.
    let c = clearance(
        shape(sphere(0.4), pose_from_xyz_rpy([0.0, 0.0, 0.0], [0.0; 3])),
        shape(sphere(0.3), pose_from_xyz_rpy([0.3, 0.4, 0.0], [0.0; 3])),
    );
    assert_close(c.distance, 0.5 - 0.7, "sphere-sphere penetration");
}

/// A box with full sizes (0.4, 0.6, 1.0) posed with a rotation, and a sphere whose centre
/// is given in the box frame.
fn sphere_vs_box(center_in_box: Vector3<f64>, r: f64) -> (Clearance, f64) {
    let size = Vector3::new(0.4, 0.6, 1.0);
    let box_pose = pose_from_xyz_rpy([0.5, -0.3, 0.8], [0.4, -0.7, 1.2]);
    let center = box_pose * Point3::from(center_in_box);
    let c = clearance(
        shape(sphere(r), pose_from_xyz_rpy(center.coords.into(), [0.0; 3])),
        shape(Geometry::Cuboid { size }, box_pose),
    );
    (c, point_box_distance(center_in_box, size / 2.0))
}

#[test]
fn sphere_box_face_case() {
    // Centre beyond the +x face only: distance = (p_x - h_x) - r.
    let (c, d) = sphere_vs_box(Vector3::new(0.5, 0.1, -0.2), 0.1);
    assert_close(d, 0.3, "reference point-box distance");
    assert_close(c.distance, 0.3 - 0.1, "sphere-box face");
}

#[test]
fn sphere_box_edge_and_corner_cases() {
    // Beyond the +x+y edge: distance = |(p_x - h_x, p_y - h_y)| - r.
    let (c, d) = sphere_vs_box(Vector3::new(0.5, -0.6, 0.1), 0.05);
    assert_close(
        d,
        (0.3f64.powi(2) + 0.3f64.powi(2)).sqrt(),
        "reference edge distance",
    );
    assert_close(c.distance, d - 0.05, "sphere-box edge");
    // Beyond the (+,+,+) corner (0.2, 0.3, 0.5): distance = |p - corner| - r.
    let (c, d) = sphere_vs_box(Vector3::new(0.5, 0.6, 0.9), 0.1);
    assert_close(
        d,
        (0.09f64 + 0.09 + 0.16).sqrt(),
        "reference corner distance",
    );
    assert_close(c.distance, d - 0.1, "sphere-box corner");
}

#[test]
fn sphere_centre_inside_box_penetrates_by_nearest_face_plus_radius() {
    // Centre inside: the shortest way out is through the nearest face, so the depth is
    // min_i(h_i - |p_i|) + r; here the x face at 0.2 - 0.05 = 0.15.
    let (c, _) = sphere_vs_box(Vector3::new(0.05, 0.1, 0.0), 0.08);
    assert_close(c.distance, -(0.15 + 0.08), "sphere inside box");
}

fn capsule(r: f64, length: f64) -> Geometry {
    Geometry::Capsule { radius: r, length }
}

#[test]
fn capsule_capsule_parallel_cases() {
    // Parallel axes, overlapping extents along the axis: distance = axis separation - r1 - r2.
    let c = clearance(
        shape(
            capsule(0.1, 1.0),
            pose_from_xyz_rpy([0.0, 0.0, 0.0], [0.0; 3]),
        ),
        shape(
            capsule(0.15, 1.0),
            pose_from_xyz_rpy([0.5, 0.0, 0.3], [0.0; 3]),
        ),
    );
    assert_close(c.distance, 0.5 - 0.25, "parallel capsules side by side");
    // Parallel and staggered: segments [-0.5, 0.5] and [1.1, 2.1] on z, 0.5 apart in x;
    // the nearest points are the end points (0, 0, 0.5) and (0.5, 0, 1.1).
    let c = clearance(
        shape(
            capsule(0.1, 1.0),
            pose_from_xyz_rpy([0.0, 0.0, 0.0], [0.0; 3]),
        ),
        shape(
            capsule(0.15, 1.0),
            pose_from_xyz_rpy([0.5, 0.0, 1.6], [0.0; 3]),
        ),
    );
    assert_close(
        c.distance,
        (0.25f64 + 0.36).sqrt() - 0.25,
        "parallel capsules staggered",
    );
}

#[test]
fn capsule_capsule_skew_case() {
    // Two skew lines p1 + s d1 and p2 + t d2. With w0 = p1 - p2, a = d1.d1, b = d1.d2,
    // c = d2.d2, d = d1.w0, e = d2.w0 the closest points are at
    //   s = (b e - c d) / (a c - b^2),  t = (a e - b d) / (a c - b^2)
    // (minimise |w0 + s d1 - t d2|^2; elementary vector calculus), and their distance is
    // also |w0 . (d1 x d2)| / |d1 x d2|. When s and t lie inside both segments the capsule
    // distance is that minus the radii.
    let pose1 = pose_from_xyz_rpy([0.1, 0.2, 0.3], [0.3, 0.5, -0.2]);
    let pose2 = pose_from_xyz_rpy([0.6, -0.1, 0.5], [1.2, -0.4, 0.9]);
    let (len1, len2, r1, r2) = (1.2, 1.4, 0.05, 0.07);
    let p1 = pose1.translation.vector;
    let p2 = pose2.translation.vector;
    let d1 = pose1.rotation * Vector3::z();
    let d2 = pose2.rotation * Vector3::z();
    let w0 = p1 - p2;
    let (a, b, cc, d, e) = (
        d1.dot(&d1),
        d1.dot(&d2),
        d2.dot(&d2),
        d1.dot(&w0),
        d2.dot(&w0),
    );
    let den = a * cc - b * b;
    let s = (b * e - cc * d) / den;
    let t = (a * e - b * d) / den;
    assert!(
        s.abs() < len1 / 2.0 && t.abs() < len2 / 2.0,
        "closest points inside the segments: s={s}, t={t}"
    );
    let line_dist = (w0 + d1 * s - d2 * t).norm();
    let n = d1.cross(&d2);
    assert!(
        (line_dist - w0.dot(&n).abs() / n.norm()).abs() < 1e-12,
        "the two line formulas agree"
    );
    let c = clearance(
        shape(capsule(r1, len1), pose1),
        shape(capsule(r2, len2), pose2),
    );
    assert_close(c.distance, line_dist - r1 - r2, "skew capsules");
    // Witness points: the closest points of the axes moved by each radius towards the other.
    let q1 = p1 + d1 * s;
    let q2 = p2 + d2 * t;
    let u = (q2 - q1) / line_dist;
    let (w1, w2) = c.points.expect("witness points");
    assert!((w1.coords - (q1 + u * r1)).norm() <= TOL);
    assert!((w2.coords - (q2 - u * r2)).norm() <= TOL);
}

#[test]
fn capsule_capsule_crossing_penetration() {
    // Axes crossing at right angles 0.1 apart with radii 0.1 + 0.1: the shapes overlap by
    // (r1 + r2) - 0.1 (the Minkowski difference is the axes' difference dilated by r1 + r2).
    let c = clearance(
        shape(
            capsule(0.1, 1.0),
            pose_from_xyz_rpy([0.0, 0.0, 0.0], [0.0; 3]),
        ),
        shape(
            capsule(0.1, 1.0),
            pose_from_xyz_rpy([0.1, 0.0, 0.0], [std::f64::consts::FRAC_PI_2, 0.0, 0.0]),
        ),
    );
    assert_close(c.distance, 0.1 - 0.2, "crossing capsules");
}

/// Cylinder of radius 0.2, length 0.8 along its local z, posed with a rotation; sphere
/// centre given in the cylinder frame.
fn sphere_vs_cylinder(center_in_cyl: Vector3<f64>, r: f64) -> Clearance {
    let cyl_pose = pose_from_xyz_rpy([-0.4, 0.2, 0.1], [0.9, 0.3, -1.4]);
    let center = cyl_pose * Point3::from(center_in_cyl);
    clearance(
        shape(sphere(r), pose_from_xyz_rpy(center.coords.into(), [0.0; 3])),
        shape(
            Geometry::Cylinder {
                radius: 0.2,
                length: 0.8,
            },
            cyl_pose,
        ),
    )
}

#[test]
fn sphere_cylinder_side_cap_and_rim() {
    // With rho = |(x, y)| and half length h = 0.4 (elementary geometry of a solid cylinder):
    // side (|z| <= h, rho > R): rho - R - r.
    let c = sphere_vs_cylinder(Vector3::new(0.5, 0.3, 0.1), 0.05);
    assert_close(c.distance, 0.34f64.sqrt() - 0.2 - 0.05, "cylinder side");
    // cap (rho <= R, z > h): z - h - r. This case fails if the axis were not local z.
    let c = sphere_vs_cylinder(Vector3::new(0.1, 0.05, 0.7), 0.05);
    assert_close(c.distance, 0.7 - 0.4 - 0.05, "cylinder cap");
    // rim (rho > R, z > h): |(rho - R, z - h)| - r.
    let c = sphere_vs_cylinder(Vector3::new(0.4, 0.3, 0.6), 0.05);
    assert_close(c.distance, (0.09f64 + 0.04).sqrt() - 0.05, "cylinder rim");
}

/// The unit corner tetrahedron {x, y, z >= 0, x + y + z <= 1} given as a point cloud with
/// extra interior points (the hull must drop them), posed with a rotation.
fn sphere_vs_tetrahedron(center_in_tet: Vector3<f64>, r: f64) -> Clearance {
    let pts = vec![
        Point3::new(0.0, 0.0, 0.0),
        Point3::new(1.0, 0.0, 0.0),
        Point3::new(0.0, 1.0, 0.0),
        Point3::new(0.0, 0.0, 1.0),
        Point3::new(0.1, 0.1, 0.1),
        Point3::new(0.2, 0.3, 0.1),
    ];
    let tet_pose = pose_from_xyz_rpy([0.3, 0.1, -0.2], [-0.5, 0.8, 0.25]);
    let center = tet_pose * Point3::from(center_in_tet);
    clearance(
        shape(sphere(r), pose_from_xyz_rpy(center.coords.into(), [0.0; 3])),
        shape(
            Geometry::ConvexMesh {
                points: Arc::new(pts),
            },
            tet_pose,
        ),
    )
}

#[test]
fn sphere_convex_mesh_face_and_vertex() {
    // Face x + y + z = 1: point-plane distance (n . p - 1) / |n| with n = (1, 1, 1); the
    // foot of the perpendicular from (0.6, 0.6, 0.6) is (1/3, 1/3, 1/3), inside the face.
    let c = sphere_vs_tetrahedron(Vector3::new(0.6, 0.6, 0.6), 0.1);
    assert_close(c.distance, 0.8 / 3f64.sqrt() - 0.1, "tetrahedron face");
    // All coordinates negative: the nearest point is the vertex at the origin (clamping).
    let c = sphere_vs_tetrahedron(Vector3::new(-0.3, -0.4, -0.2), 0.1);
    assert_close(c.distance, 0.29f64.sqrt() - 0.1, "tetrahedron vertex");
}

#[test]
fn triangle_mesh_vs_sphere_uses_nearest_triangle() {
    // One triangle in the plane z = 0 (a surface): a sphere above its interior is at
    // height - r (point-plane distance), and one beyond an edge at the point-segment distance.
    let vertices = vec![
        Point3::new(0.0, 0.0, 0.0),
        Point3::new(1.0, 0.0, 0.0),
        Point3::new(0.0, 1.0, 0.0),
    ];
    let mesh = Geometry::TriMesh {
        vertices: Arc::new(vertices),
        triangles: Arc::new(vec![[0, 1, 2]]),
    };
    let c = clearance(
        shape(sphere(0.05), pose_from_xyz_rpy([0.2, 0.3, 0.4], [0.0; 3])),
        shape(mesh.clone(), Pose::identity()),
    );
    assert_close(c.distance, 0.4 - 0.05, "triangle interior");
    // Beyond the hypotenuse x + y = 1 in the plane: distance |x + y - 1| / sqrt(2).
    let c = clearance(
        shape(sphere(0.05), pose_from_xyz_rpy([0.8, 0.6, 0.0], [0.0; 3])),
        shape(mesh, Pose::identity()),
    );
    assert_close(c.distance, 0.4 / 2f64.sqrt() - 0.05, "triangle edge");
}

#[test]
fn exact_touching_counts_as_collision() {
    // Spheres of radii 0.25 and 0.5 with centres 0.75 apart (all exact binary fractions):
    // signed distance 0, which is a collision by convention.
    let c = clearance(
        shape(sphere(0.25), Pose::identity()),
        shape(sphere(0.5), pose_from_xyz_rpy([0.75, 0.0, 0.0], [0.0; 3])),
    );
    assert_eq!(c.distance, 0.0);
}

#[test]
fn box_box_gap_and_overlap() {
    let big = Geometry::Cuboid {
        size: Vector3::new(0.4, 0.6, 1.0),
    };
    let small = Geometry::Cuboid {
        size: Vector3::new(0.2, 0.2, 0.2),
    };
    // Axis-aligned boxes: per-axis gap g_i = max(lo2_i - hi1_i, lo1_i - hi2_i, 0) and the
    // distance is |g| (elementary: the nearest points clamp coordinate-wise).
    // x: [-0.2, 0.2] vs [0.3, 0.5] -> 0.1; y: [-0.3, 0.3] vs [0.4, 0.6] -> 0.1; z overlaps.
    let c = clearance(
        shape(big.clone(), Pose::identity()),
        shape(small.clone(), pose_from_xyz_rpy([0.4, 0.5, 0.1], [0.0; 3])),
    );
    assert_close(c.distance, 0.02f64.sqrt(), "box-box edge gap");
    // Overlapping axis-aligned boxes: the shortest separating translation is along one
    // axis (separating axis theorem), depth = min_i min(hi1_i - lo2_i, hi2_i - lo1_i).
    // x: [-0.2, 0.2] vs [0.15, 0.35] -> 0.05; y: 0.35; z: 0.5.
    let c = clearance(
        shape(big, Pose::identity()),
        shape(small, pose_from_xyz_rpy([0.25, 0.05, 0.1], [0.0; 3])),
    );
    assert_close(c.distance, -0.05, "box-box overlap");
}

#[test]
fn capsule_box_face_gap() {
    // A capsule parallel to a box face: distance = axis-to-face distance - r.
    // Box x in [-0.2, 0.2]; capsule axis at x = 0.55 along z, radius 0.1 -> 0.25.
    let c = clearance(
        shape(
            Geometry::Cuboid {
                size: Vector3::new(0.4, 0.6, 1.0),
            },
            Pose::identity(),
        ),
        shape(
            capsule(0.1, 0.5),
            pose_from_xyz_rpy([0.55, 0.1, 0.0], [0.0; 3]),
        ),
    );
    assert_close(c.distance, 0.25, "capsule-box");
}

#[test]
fn capsule_cylinder_side_and_cap() {
    // Cylinder radius 0.2, length 0.8 along z at the origin.
    let cyl = || {
        shape(
            Geometry::Cylinder {
                radius: 0.2,
                length: 0.8,
            },
            Pose::identity(),
        )
    };
    // Capsule parallel to the axis, axis 0.5 away: distance = 0.5 - R - r (side wall).
    let c = clearance(
        shape(
            capsule(0.05, 0.4),
            pose_from_xyz_rpy([0.3, 0.4, 0.1], [0.0; 3]),
        ),
        cyl(),
    );
    assert_close(c.distance, 0.5 - 0.2 - 0.05, "capsule beside cylinder");
    // Capsule lying across above the cap, axis at height 0.7: distance = 0.7 - h - r.
    let c = clearance(
        shape(
            capsule(0.05, 1.0),
            pose_from_xyz_rpy([0.05, 0.0, 0.7], [0.0, std::f64::consts::FRAC_PI_2, 0.3]),
        ),
        cyl(),
    );
    assert_close(c.distance, 0.7 - 0.4 - 0.05, "capsule over cylinder cap");
    // Tilted capsule whose nearest point is its lower cap centre at (0.5, 0, 0.6), beyond
    // the rim circle: |(rho - R, z - h)| - r = |(0.3, 0.2)| - r.
    let c = clearance(
        shape(
            capsule(0.05, 0.4),
            pose_from_xyz_rpy(
                [0.5 + 0.2 * 0.6, 0.0, 0.6 + 0.2 * 0.8],
                [0.0, 0.6435011087932844, 0.0],
            ),
        ),
        cyl(),
    );
    assert_close(
        c.distance,
        0.13f64.sqrt() - 0.05,
        "capsule past the cylinder rim",
    );
}
