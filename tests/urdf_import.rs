//! Reading URDF files and mesh files: a hand-written fixture whose values are checked
//! against the file text and against forward kinematics worked out on paper, errors with
//! their line and column (found by searching the test text, independent of the XML reader),
//! and the mesh reader against the analytic corners of the test meshes
//! (`tests/data/meshes/make_meshes.py` writes them).

use std::f64::consts::{FRAC_PI_2, PI};
use std::path::{Path, PathBuf};

use clamber::kinematics::forward_kinematics;
use clamber::model::{Geometry, JointKind, ModelError};
use clamber::robot_file::mesh::load_mesh;
use clamber::robot_file::{load_robot, urdf, RobotFileError};
use clamber::Pose;
use nalgebra::{Point3, Vector3};

fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

fn fixture() -> clamber::Robot {
    match load_robot(&data("urdf/branching.urdf")) {
        Ok(r) => r,
        Err(e) => panic!("fixture failed to load: {e}"),
    }
}

#[test]
fn fixture_structure_names_and_sizes() {
    let r = fixture();
    assert_eq!(r.name(), "forkwing");
    // floating (7) + revolute + continuous + prismatic (1 each) + fixed (0)
    assert_eq!(r.nq(), 10);
    assert_eq!(r.nv(), 9);
    let links: Vec<&str> = r.links().iter().map(|l| l.name.as_str()).collect();
    assert_eq!(links[0], "anchor");
    for n in ["torso", "arm_l", "hand_l", "arm_r", "tool"] {
        assert!(links.contains(&n), "missing link {n}");
    }
    let kind = |n: &str| r.joints()[r.joint_id(n).unwrap()].kind.clone();
    assert_eq!(kind("drift"), JointKind::Floating);
    assert_eq!(kind("tool_mount"), JointKind::Fixed);
    assert!(
        matches!(kind("shoulder_l"), JointKind::Revolute { axis } if axis.into_inner() == Vector3::z())
    );
    // continuous -> revolute; mimic ignored: wrist_l is an independent joint
    assert!(
        matches!(kind("wrist_l"), JointKind::Revolute { axis } if axis.into_inner() == Vector3::x())
    );
    // the prismatic axis "0 0 -2" is normalized
    assert!(
        matches!(kind("slide_r"), JointKind::Prismatic { axis } if axis.into_inner() == -Vector3::z())
    );
    // the branch: both arms hang from the torso
    let torso = r.link_id("torso").unwrap();
    assert_eq!(r.parent_link(r.link_id("arm_l").unwrap()), Some(torso));
    assert_eq!(r.parent_link(r.link_id("arm_r").unwrap()), Some(torso));
    assert_eq!(r.dof_names().len(), 9);
    assert_eq!(r.effectors().len(), 1);
    let e = r.effector("grip_l").unwrap();
    assert_eq!(e.link, r.link_id("hand_l").unwrap());
    assert!((e.grip.translation.vector - Vector3::new(0.0, 0.0, 0.05)).norm() < 1e-15);
}

#[test]
fn fixture_limits() {
    let r = fixture();
    let lim = |n: &str| r.joints()[r.joint_id(n).unwrap()].limits.clone();
    let s = lim("shoulder_l");
    assert_eq!(s.len(), 1);
    assert_eq!(
        (s[0].lower, s[0].upper, s[0].velocity, s[0].acceleration),
        (-1.5, 2.0, 1.2, 4.5)
    );
    let w = lim("wrist_l");
    assert_eq!(
        (w[0].lower, w[0].upper, w[0].velocity),
        (f64::NEG_INFINITY, f64::INFINITY, 3.0)
    );
    assert_eq!(
        w[0].acceleration,
        f64::INFINITY,
        "URDF 1.0 without `acceleration` leaves it unbounded"
    );
    let p = lim("slide_r");
    assert_eq!((p[0].lower, p[0].upper, p[0].velocity), (0.0, 0.3, 0.25));
    assert!(lim("tool_mount").is_empty());
    let f = lim("drift");
    assert_eq!(f.len(), 6);
    assert!(f
        .iter()
        .all(|l| l.lower == f64::NEG_INFINITY && l.upper == f64::INFINITY));
}

#[test]
fn fixture_shapes() {
    let r = fixture();
    let shapes = |n: &str| r.links()[r.link_id(n).unwrap()].shapes.clone();
    let torso = shapes("torso");
    assert_eq!(torso.len(), 1, "visual geometry is not a collision shape");
    assert_eq!(
        torso[0].geometry,
        Geometry::Cuboid {
            size: Vector3::new(0.3, 0.4, 0.5)
        }
    );
    assert_eq!(
        torso[0].origin.translation.vector,
        Vector3::new(0.0, 0.0, 0.25)
    );
    let arm = shapes("arm_l");
    assert_eq!(
        arm[0].geometry,
        Geometry::Cylinder {
            radius: 0.04,
            length: 0.3
        }
    );
    // rpy 0 pi/2 0 turns the cylinder's z axis onto +x (up to rounding of pi/2)
    let z = arm[0].origin.rotation * Vector3::z();
    assert!((z - Vector3::x()).norm() < 1e-15, "{z}");
    let arm_r = shapes("arm_r");
    assert_eq!(arm_r[0].geometry, Geometry::Sphere { radius: 0.06 });
    assert_eq!(
        arm_r[1].geometry,
        Geometry::Capsule {
            radius: 0.03,
            length: 0.2
        }
    );

    // STL through package://, scaled by 0.1: the unit cube's 8 corners at +-0.05
    let hand = shapes("hand_l");
    match &hand[0].geometry {
        Geometry::ConvexMesh { points } => {
            assert_eq!(points.len(), 8);
            for p in points.iter() {
                for c in p.iter() {
                    assert!((c.abs() - 0.05).abs() < 1e-9, "corner coordinate {c}");
                }
            }
        }
        g => panic!("expected a convex mesh, got {}", g.type_name()),
    }
    let src = hand[0].source.as_ref().unwrap();
    assert!(src.path.is_absolute());
    assert!(src.path.ends_with("meshes/cube.stl"));
    assert_eq!(src.scale, Vector3::new(0.1, 0.1, 0.1));

    // OBJ relative to the URDF, scaled 0.05 0.05 0.1: tetrahedron corners
    let tool = shapes("tool");
    match &tool[0].geometry {
        Geometry::ConvexMesh { points } => {
            let mut got: Vec<[f64; 3]> = points.iter().map(|p| [p.x, p.y, p.z]).collect();
            got.sort_by(|a, b| a.partial_cmp(b).unwrap());
            assert_eq!(
                got,
                vec![
                    [0.0, 0.0, 0.0],
                    [0.0, 0.0, 0.1],
                    [0.0, 0.05, 0.0],
                    [0.05, 0.0, 0.0]
                ]
            );
        }
        g => panic!("expected a convex mesh, got {}", g.type_name()),
    }
}

/// Forward kinematics of the fixture worked out by hand (analytic case).
#[test]
fn fixture_forward_kinematics_by_hand() {
    let r = fixture();
    let mut q = r.neutral();
    let j = |n: &str| r.joints()[r.joint_id(n).unwrap()].q_index;
    // floating torso at (1, 2, 3), turned by pi/2 about z: quaternion (0, 0, sin pi/4, cos pi/4)
    let d = j("drift");
    q[d..d + 7].copy_from_slice(&[1.0, 2.0, 3.0, 0.0, 0.0, (PI / 4.0).sin(), (PI / 4.0).cos()]);
    q[j("shoulder_l")] = FRAC_PI_2;
    q[j("wrist_l")] = 0.7;
    q[j("slide_r")] = 0.2;
    let mut poses = vec![Pose::identity(); r.links().len()];
    forward_kinematics(&r, &q, &mut poses).unwrap();
    let at = |n: &str| poses[r.link_id(n).unwrap()].translation.vector;

    // torso frame: Rz(pi/2) at (1,2,3). Shoulder origin (0, 0.2, 0.5) in torso -> world
    // (1 - 0.2, 2, 3.5). Shoulder turns another pi/2 about z: arm_l total yaw pi, so the
    // wrist origin (0.3, 0, 0) in arm_l adds (-0.3, 0, 0).
    assert!(
        (at("arm_l") - Vector3::new(0.8, 2.0, 3.5)).norm() < 1e-14,
        "{}",
        at("arm_l")
    );
    assert!(
        (at("hand_l") - Vector3::new(0.5, 2.0, 3.5)).norm() < 1e-14,
        "{}",
        at("hand_l")
    );
    // slide origin (0, -0.2, 0.5) in torso -> world (1 + 0.2, 2, 3.5); its frame is
    // Rz(pi/2) Rx(pi/2): Rx(pi/2) maps the axis -z to +y, Rz(pi/2) maps +y to -x.
    // Moving 0.2 along it: x -= 0.2.
    assert!(
        (at("arm_r") - Vector3::new(1.0, 2.0, 3.5)).norm() < 1e-14,
        "{}",
        at("arm_r")
    );
    // tool_mount (0, 0, -0.25) in arm_r: arm_r's z axis is Rz(pi/2) Rx(pi/2) z = Rz(pi/2) (-y) = +x
    assert!(
        (at("tool") - Vector3::new(0.75, 2.0, 3.5)).norm() < 1e-14,
        "{}",
        at("tool")
    );
    // hand_l = Rz(pi) Rx(0.7): Rx(0.7) y = (0, cos 0.7, sin 0.7), Rz(pi) negates x and y.
    let hand_y = poses[r.link_id("hand_l").unwrap()].rotation * Vector3::y();
    let expect = Vector3::new(0.0, -(0.7f64).cos(), (0.7f64).sin());
    assert!((hand_y - expect).norm() < 1e-14, "{hand_y} vs {expect}");
}

#[test]
fn acceleration_and_unbounded_from_urdf_1_2() {
    let text = r#"<robot name="r" version="1.2">
  <link name="a"/><link name="b"/>
  <joint name="j" type="prismatic">
    <parent link="a"/><child link="b"/><axis xyz="1 0 0"/>
    <limit effort="1" acceleration="2.5"/>
  </joint>
</robot>"#;
    let r = urdf::load_str(text, Path::new("mem.urdf")).unwrap();
    let l = r.joints()[0].limits[0];
    assert_eq!(
        (l.lower, l.upper, l.velocity, l.acceleration),
        (f64::NEG_INFINITY, f64::INFINITY, f64::INFINITY, 2.5)
    );
}

// ---------------------------------------------------------------------------------------
// Errors: every one returns Err with the place it is about.

/// 1-based (line, column) of the first occurrence of `needle` in `text`.
fn line_col(text: &str, needle: &str) -> (usize, usize) {
    let at = text
        .find(needle)
        .unwrap_or_else(|| panic!("`{needle}` not in test text"));
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let column = at - before.rfind('\n').map(|i| i + 1).unwrap_or(0) + 1;
    (line, column)
}

const GOOD: &str = r#"<?xml version="1.0"?>
<robot name="pair">
  <link name="base"/>
  <link name="arm"/>
  <joint name="j1" type="revolute">
    <origin xyz="0 0 0.1" rpy="0 0 0"/>
    <parent link="base"/>
    <child link="arm"/>
    <axis xyz="0 0 1"/>
    <limit lower="-1" upper="1" effort="0" velocity="1"/>
  </joint>
</robot>
"#;

#[allow(clippy::result_large_err)] // the shared error type; see src/robot_file/urdf.rs
fn load(text: &str) -> Result<clamber::Robot, RobotFileError> {
    urdf::load_str(text, &data("urdf/in_memory.urdf"))
}

#[test]
fn good_text_loads() {
    let r = load(GOOD).unwrap();
    assert_eq!(r.nq(), 1);
}

#[test]
fn malformed_xml_has_position() {
    let text = GOOD.replace("<child link=\"arm\"/>", "<child link=\"arm\">");
    let e = load(&text).unwrap_err();
    assert!(matches!(e, RobotFileError::Syntax { .. }), "{e}");
    // roxmltree reports the mismatched close tag `</joint>` that follows.
    let expect = line_col(&text, "</joint>");
    assert_eq!(e.position().unwrap().0, expect.0, "{e}");
    assert!(e.to_string().contains("in_memory.urdf"), "{e}");
}

#[test]
fn unknown_parent_link_points_at_parent_element() {
    let text = GOOD.replace("<parent link=\"base\"/>", "<parent link=\"bsae\"/>");
    let e = load(&text).unwrap_err();
    match &e {
        RobotFileError::Model {
            field,
            source: ModelError::UnknownLink { link, .. },
            ..
        } => {
            assert_eq!(link, "bsae");
            assert_eq!(field, "parent link");
        }
        _ => panic!("expected an unknown-link model error, got {e}"),
    }
    assert_eq!(e.position(), Some(line_col(&text, "<parent")));
}

#[test]
fn unknown_and_unsupported_joint_types() {
    let text = GOOD.replace("type=\"revolute\"", "type=\"twisty\"");
    let e = load(&text).unwrap_err();
    assert!(matches!(e, RobotFileError::Syntax { .. }));
    assert!(e.to_string().contains("unknown joint type `twisty`"), "{e}");
    assert_eq!(e.position(), Some(line_col(&text, "twisty")));

    let text = GOOD.replace("type=\"revolute\"", "type=\"planar\"");
    let e = load(&text).unwrap_err();
    assert!(
        e.to_string().contains("unsupported joint type `planar`"),
        "{e}"
    );
    assert_eq!(e.position(), Some(line_col(&text, "planar")));
}

#[test]
fn missing_mesh_file_is_a_mesh_error() {
    let text = GOOD.replace(
        "<link name=\"arm\"/>",
        "<link name=\"arm\">\n    <collision><geometry><mesh filename=\"package://pkg/meshes/nothing.stl\"/></geometry></collision>\n  </link>",
    );
    let e = load(&text).unwrap_err();
    match &e {
        RobotFileError::Mesh { mesh, message, .. } => {
            assert!(
                mesh.ends_with("urdf/meshes/nothing.stl"),
                "{}",
                mesh.display()
            );
            assert!(message.contains("file not found"), "{message}");
            assert!(
                message.contains("package://"),
                "says how package:// was read: {message}"
            );
        }
        _ => panic!("expected a mesh error, got {e}"),
    }
    assert_eq!(e.position(), Some(line_col(&text, "<mesh")));
}

#[test]
fn reversed_limits_point_at_limit_element() {
    let text = GOOD.replace("lower=\"-1\" upper=\"1\"", "lower=\"1\" upper=\"-1\"");
    let e = load(&text).unwrap_err();
    assert!(
        matches!(
            e,
            RobotFileError::Model {
                source: ModelError::LimitsReversed { .. },
                ..
            }
        ),
        "{e}"
    );
    assert_eq!(e.position(), Some(line_col(&text, "<limit")));
}

#[test]
fn nan_in_origin_points_at_origin_element() {
    let text = GOOD.replace("xyz=\"0 0 0.1\"", "xyz=\"0 NaN 0.1\"");
    let e = load(&text).unwrap_err();
    assert!(
        matches!(
            e,
            RobotFileError::Model {
                source: ModelError::NotFinite { .. },
                ..
            }
        ),
        "{e}"
    );
    assert_eq!(e.position(), Some(line_col(&text, "<origin")));
}

#[test]
fn malformed_number_points_at_attribute() {
    let text = GOOD.replace("xyz=\"0 0 0.1\"", "xyz=\"0 x 0.1\"");
    let e = load(&text).unwrap_err();
    assert!(matches!(e, RobotFileError::Syntax { .. }), "{e}");
    assert!(e.to_string().contains("expected 3 numbers"), "{e}");
    // column of the attribute value, just after the opening quote
    let (l, c) = line_col(&text, "0 x 0.1");
    assert_eq!(e.position(), Some((l, c)));
}

#[test]
fn revolute_without_limit_is_an_error() {
    let text = GOOD.replace(
        "<limit lower=\"-1\" upper=\"1\" effort=\"0\" velocity=\"1\"/>",
        "",
    );
    let e = load(&text).unwrap_err();
    assert!(e.to_string().contains("needs a <limit> element"), "{e}");
    assert_eq!(e.position(), Some(line_col(&text, "<joint")));
}

#[test]
fn zero_velocity_is_refused() {
    let text = GOOD.replace("velocity=\"1\"", "velocity=\"0\"");
    let e = load(&text).unwrap_err();
    assert!(
        matches!(
            e,
            RobotFileError::Model {
                source: ModelError::NotPositive { .. },
                ..
            }
        ),
        "{e}"
    );
    assert_eq!(e.position(), Some(line_col(&text, "<limit")));
}

#[test]
fn other_bad_inputs_are_errors_not_panics() {
    let cases = [
        "",
        "<robot/>",
        "<notrobot/>",
        "<robot><link/></robot>",
        "<robot><link name=\"a\"/><link name=\"a\"/></robot>",
        "<robot><link name=\"a\"/><link name=\"b\"/></robot>",
        "<robot><link name=\"a\"><collision><geometry/></collision></link></robot>",
        "<robot><link name=\"a\"><collision><geometry><cone radius=\"1\"/></geometry></collision></link></robot>",
        "<robot><link name=\"a\"><collision><geometry><sphere radius=\"-1\"/></geometry></collision></link></robot>",
        "<robot><link name=\"a\"><collision><geometry><mesh filename=\"http://x/y.stl\"/></geometry></collision></link></robot>",
        "<robot><link name=\"a\"/><link name=\"b\"/><joint name=\"j\" type=\"fixed\"><parent link=\"a\"/></joint></robot>",
        "<robot><link name=\"a\"/><joint name=\"j\" type=\"fixed\"><parent link=\"a\"/><child link=\"a\"/></joint></robot>",
        "<robot><clamber_effector name=\"e\" link=\"nowhere\"/><link name=\"a\"/></robot>",
    ];
    for text in cases {
        let e = load(text);
        assert!(e.is_err(), "accepted: {text}");
        let e = e.unwrap_err();
        if !text.is_empty() && text != "<robot/>" {
            assert!(e.position().is_some(), "no position for {text}: {e}");
        }
    }
}

// ---------------------------------------------------------------------------------------
// Meshes

fn corners_pm(points: &[Point3<f64>], h: f64) -> bool {
    points.iter().all(|p| p.iter().all(|c| c.abs() == h))
}

#[test]
fn cube_stl_scaled_by_two_has_eight_corners_at_one() {
    for file in ["meshes/cube.stl", "meshes/cube_ascii.stl"] {
        let g = load_mesh(&data(file), Vector3::new(2.0, 2.0, 2.0), true).unwrap();
        let Geometry::ConvexMesh { points } = g else {
            panic!("expected a convex mesh")
        };
        assert_eq!(points.len(), 8, "{file}");
        assert!(corners_pm(&points, 1.0), "{file}: {points:?}");
        let mut signs: Vec<[bool; 3]> = points
            .iter()
            .map(|p| [p.x > 0.0, p.y > 0.0, p.z > 0.0])
            .collect();
        signs.sort();
        signs.dedup();
        assert_eq!(signs.len(), 8, "all eight sign patterns");
    }
}

/// Sum over triangles of (b-a)x(c-a) . a, six times the enclosed volume for a closed
/// surface with outward winding (divergence theorem; a standard mesh-volume formula).
fn signed_volume(vertices: &[Point3<f64>], triangles: &[[u32; 3]]) -> f64 {
    triangles
        .iter()
        .map(|t| {
            let (a, b, c) = (
                vertices[t[0] as usize],
                vertices[t[1] as usize],
                vertices[t[2] as usize],
            );
            (b - a).cross(&(c - a)).dot(&a.coords)
        })
        .sum::<f64>()
        / 6.0
}

#[test]
fn triangle_meshes_keep_volume_and_winding() {
    // (file, scale, exact volume, vertices, triangles)
    let cases: [(&str, [f64; 3], f64, usize, usize); 5] = [
        ("meshes/cube.stl", [2.0, 3.0, 4.0], 24.0, 8, 12),
        ("meshes/cube.stl", [-2.0, 3.0, 4.0], 24.0, 8, 12), // mirrored: winding flipped back outward
        ("meshes/tetra.obj", [1.0, 1.0, 1.0], 1.0 / 6.0, 4, 4),
        // octahedron of "radius" 0.5: volume 4/3 r^3
        (
            "meshes/octahedron.obj",
            [1.0, 1.0, 1.0],
            4.0 / 3.0 * 0.125,
            6,
            8,
        ),
        // square pyramid: base 2x2, height 1, volume 4/3; the quad base becomes 2 triangles
        ("meshes/pyramid.obj", [1.0, 1.0, 1.0], 4.0 / 3.0, 5, 6),
    ];
    for (file, s, volume, nv, nt) in cases {
        let g = load_mesh(&data(file), Vector3::from(s), false).unwrap();
        let Geometry::TriMesh {
            vertices,
            triangles,
        } = g
        else {
            panic!("expected a triangle mesh")
        };
        assert_eq!((vertices.len(), triangles.len()), (nv, nt), "{file} {s:?}");
        let v = signed_volume(&vertices, &triangles);
        assert!(
            (v - volume).abs() < 1e-12,
            "{file} {s:?}: volume {v}, expected {volume}"
        );
    }
}

#[test]
fn mesh_errors_are_reasons() {
    let one = Vector3::new(1.0, 1.0, 1.0);
    let e = load_mesh(&data("meshes/no_such.stl"), one, true).unwrap_err();
    assert_eq!(e, "file not found");
    let e = load_mesh(&data("meshes/garbage.stl"), one, true).unwrap_err();
    assert!(e.starts_with("not a valid STL"), "{e}");
    let e = load_mesh(&data("meshes/empty.stl"), one, true).unwrap_err();
    assert!(e.contains("no triangles"), "{e}");
    let e = load_mesh(&data("meshes/make_meshes.py"), one, true).unwrap_err();
    assert!(e.contains("unknown mesh type"), "{e}");
    let e = load_mesh(&data("meshes/cube.stl"), Vector3::new(1.0, 0.0, 1.0), true).unwrap_err();
    assert!(e.contains("scale"), "{e}");
    let e = load_mesh(
        &data("meshes/cube.stl"),
        Vector3::new(1.0, f64::NAN, 1.0),
        true,
    )
    .unwrap_err();
    assert!(e.contains("scale"), "{e}");
}
