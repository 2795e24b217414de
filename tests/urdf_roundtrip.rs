//! Writing URDF and reading it back: joint origins, axes and limits come back to 1e-12 and
//! forward kinematics agrees to 1e-12 at 100 random configurations; the roll-pitch-yaw
//! conversion used for every written rotation gives the rotation matrix back to a few ulps,
//! also at gimbal lock; the written text holds only numbers any URDF reader can parse.

use std::f64::consts::FRAC_PI_2;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, rpy_of, Pose};
use clamber::model::{
    EffectorSpec, Geometry, JointKind, JointSpec, JointType, Limits, LinkSpec, MeshSource, Robot,
    RobotSpec, Shape,
};
use clamber::robot_file::mesh::load_mesh;
use clamber::robot_file::urdf::{write_urdf, write_urdf_with, UrdfExportOptions};
use clamber::robot_file::{load_robot, urdf};
use nalgebra::{Matrix3, Quaternion, Rotation3, UnitQuaternion, Vector3};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

/// Write `text` into a fresh temporary directory and load it back as a URDF file.
fn reload(text: &str) -> Robot {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("written.urdf");
    std::fs::write(&file, text).unwrap();
    match load_robot(&file) {
        Ok(r) => r,
        Err(e) => panic!("written URDF does not load: {e}\n{text}"),
    }
}

fn max_abs_diff(a: &Matrix3<f64>, b: &Matrix3<f64>) -> f64 {
    (a - b).abs().max()
}

fn pose_diff(a: &Pose, b: &Pose) -> f64 {
    let t = (a.translation.vector - b.translation.vector).abs().max();
    t.max(max_abs_diff(a.rotation.matrix(), b.rotation.matrix()))
}

// ---------------------------------------------------------------------------------------
// Roll-pitch-yaw

/// Largest entry error of R -> rpy_of -> R over the given rotations.
fn rpy_error(rotations: &[Rotation3<f64>]) -> f64 {
    rotations
        .iter()
        .map(|r| {
            let back = pose_from_xyz_rpy([0.0; 3], rpy_of(r)).rotation;
            max_abs_diff(back.matrix(), r.matrix())
        })
        .fold(0.0, f64::max)
}

/// A few ulps of 1.0: matrix entries are at most 1 in magnitude and each goes through one
/// product of three rotations after the angles.
const RPY_TOL: f64 = 2e-15;

#[test]
fn rpy_round_trips_random_rotations() {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    // Uniform random rotations (normalized 4D Gaussian quaternions).
    let rotations: Vec<Rotation3<f64>> = (0..20_000)
        .map(|_| {
            let g: [f64; 4] = std::array::from_fn(|_| {
                // Box-Muller
                let (u1, u2): (f64, f64) = (rng.random::<f64>().max(1e-300), rng.random());
                (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
            });
            UnitQuaternion::from_quaternion(Quaternion::new(g[0], g[1], g[2], g[3]))
                .to_rotation_matrix()
        })
        .collect();
    let err = rpy_error(&rotations);
    assert!(err < RPY_TOL, "max entry error {err:e}");
}

#[test]
fn rpy_round_trips_at_and_near_gimbal_lock() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let mut rotations = Vec::new();
    for _ in 0..2000 {
        let (roll, yaw) = (rng.random_range(-3.2..3.2), rng.random_range(-3.2..3.2));
        for sign in [1.0, -1.0] {
            rotations.push(Rotation3::from_euler_angles(roll, sign * FRAC_PI_2, yaw));
            for k in 1..=16 {
                let eps = 10f64.powi(-k);
                rotations.push(Rotation3::from_euler_angles(
                    roll,
                    sign * (FRAC_PI_2 - eps),
                    yaw,
                ));
            }
        }
    }
    // Exact gimbal lock: the 24 rotations that permute and negate the axes, with exact
    // 0/+-1 entries (8 of them have r20 = +-1).
    let axes = [Vector3::x(), Vector3::y(), Vector3::z()];
    for (i, a) in axes.iter().enumerate() {
        for (j, b) in axes.iter().enumerate() {
            if i == j {
                continue;
            }
            for sa in [1.0, -1.0] {
                for sb in [1.0, -1.0] {
                    let (c0, c1) = (a * sa, b * sb);
                    let m = Matrix3::from_columns(&[c0, c1, c0.cross(&c1)]);
                    rotations.push(Rotation3::from_matrix_unchecked(m));
                }
            }
        }
    }
    assert!(
        rotations
            .iter()
            .filter(|r| r.matrix()[(2, 0)].abs() == 1.0)
            .count()
            >= 8
    );
    let err = rpy_error(&rotations);
    assert!(err < RPY_TOL, "max entry error {err:e}");
}

// ---------------------------------------------------------------------------------------
// Round trips

/// Compare two robots that should be the same kinematic tree.
fn assert_same_kinematics(a: &Robot, b: &Robot, seed: u64) {
    assert_eq!(a.nq(), b.nq());
    assert_eq!(a.nv(), b.nv());
    let names = |r: &Robot| r.links().iter().map(|l| l.name.clone()).collect::<Vec<_>>();
    assert_eq!(names(a), names(b));
    for (ja, jb) in a.joints().iter().zip(b.joints()) {
        assert_eq!(ja.name, jb.name);
        assert_eq!((ja.parent, ja.child), (jb.parent, jb.child), "{}", ja.name);
        let d = pose_diff(&ja.origin, &jb.origin);
        assert!(d < 1e-12, "joint {} origin differs by {d:e}", ja.name);
        match (&ja.kind, &jb.kind) {
            (JointKind::Revolute { axis: x }, JointKind::Revolute { axis: y })
            | (JointKind::Prismatic { axis: x }, JointKind::Prismatic { axis: y }) => {
                assert!(
                    (x.into_inner() - y.into_inner()).norm() < 1e-12,
                    "joint {} axis",
                    ja.name
                )
            }
            (ka, kb) => assert_eq!(ka, kb, "joint {}", ja.name),
        }
    }
    // FK of every link at random configurations.
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (mut pa, mut pb) = (
        vec![Pose::identity(); a.links().len()],
        vec![Pose::identity(); b.links().len()],
    );
    let mut worst = 0.0f64;
    for _ in 0..100 {
        let q = a.random_configuration(&mut rng);
        forward_kinematics(a, &q, &mut pa).unwrap();
        forward_kinematics(b, &q, &mut pb).unwrap();
        for (x, y) in pa.iter().zip(&pb) {
            worst = worst.max(pose_diff(x, y));
        }
    }
    assert!(worst < 1e-12, "FK differs by {worst:e}");
}

fn limits_of(r: &Robot) -> Vec<(String, Vec<Limits>)> {
    r.joints()
        .iter()
        .map(|j| (j.name.clone(), j.limits.clone()))
        .collect()
}

/// Every attribute of the written file that should be numeric holds only finite numbers
/// (URDF readers based on urdfdom cannot parse `inf` or `nan`).
fn assert_numbers_parse(text: &str) {
    let doc = roxmltree::Document::parse(text).unwrap();
    let numeric = [
        "xyz",
        "rpy",
        "size",
        "radius",
        "length",
        "scale",
        "lower",
        "upper",
        "effort",
        "velocity",
        "acceleration",
        "value",
        "ixx",
        "ixy",
        "ixz",
        "iyy",
        "iyz",
        "izz",
    ];
    let mut seen = 0;
    for n in doc.descendants().filter(|n| n.is_element()) {
        for a in n.attributes().filter(|a| numeric.contains(&a.name())) {
            for tok in a.value().split_whitespace() {
                let v: f64 = tok
                    .parse()
                    .unwrap_or_else(|_| panic!("`{tok}` in {} is not a number", a.name()));
                assert!(v.is_finite(), "{} = {tok}", a.name());
                seen += 1;
            }
        }
    }
    assert!(seen > 0);
}

#[test]
fn fixture_round_trip_is_exact() {
    let a = load_robot(&data("urdf/branching.urdf")).unwrap();
    let text = write_urdf_with(
        &a,
        &UrdfExportOptions {
            effector_frames: false,
        },
    );
    assert_numbers_parse(&text);
    let b = reload(&text);
    assert_same_kinematics(&a, &b, 1);
    assert_eq!(limits_of(&a), limits_of(&b));
    // The continuous joint is written as continuous.
    assert!(text.contains("type=\"continuous\""));
    // Shapes: primitives exactly, meshes from the same file and scale.
    for (la, lb) in a.links().iter().zip(b.links()) {
        let kinds = |l: &clamber::model::Link| {
            l.shapes
                .iter()
                .map(|s| s.geometry.type_name())
                .collect::<Vec<_>>()
        };
        if la
            .shapes
            .iter()
            .any(|s| matches!(s.geometry, Geometry::Capsule { .. }))
        {
            // one capsule -> cylinder + two spheres
            assert_eq!(lb.shapes.len(), la.shapes.len() + 2, "{}", la.name);
            continue;
        }
        assert_eq!(kinds(la), kinds(lb), "{}", la.name);
        for (sa, sb) in la.shapes.iter().zip(&lb.shapes) {
            assert!(pose_diff(&sa.origin, &sb.origin) < 1e-12);
            assert_eq!(sa.geometry, sb.geometry, "{}", la.name);
            assert_eq!(sa.source, sb.source, "{}", la.name);
        }
    }
    assert_eq!(b.effectors().len(), 1);
    let (ea, eb) = (&a.effectors()[0], &b.effectors()[0]);
    assert_eq!((&ea.name, ea.link), (&eb.name, eb.link));
    assert!(pose_diff(&ea.grip, &eb.grip) < 1e-12);
}

#[test]
fn written_twice_is_the_same_text() {
    let a = load_robot(&data("urdf/branching.urdf")).unwrap();
    let t1 = write_urdf(&a);
    let t2 = write_urdf(&a);
    assert_eq!(t1, t2);
}

/// A robot built in code with everything URDF cannot say directly.
fn awkward_robot() -> Robot {
    let cube = data("meshes/cube.stl");
    let scale = Vector3::new(0.1, 0.2, 0.3);
    let tri = load_mesh(&cube, scale, false).unwrap();
    let axis_z = Vector3::z();
    let lim = |lower: f64, upper: f64, velocity: f64, acceleration: f64| Limits {
        lower,
        upper,
        velocity,
        acceleration,
    };
    let joint =
        |name: &str, t: JointType, parent: &str, child: &str, origin: Pose, limits: Vec<Limits>| {
            JointSpec {
                name: name.into(),
                joint_type: t,
                parent: parent.into(),
                child: child.into(),
                origin,
                axis: axis_z,
                limits,
                passive: false,
            }
        };
    let spec = RobotSpec {
        name: "odd & \"quoted\" -- robot".into(),
        links: vec![
            LinkSpec {
                name: "root".into(),
                shapes: vec![],
            },
            LinkSpec {
                name: "body<1>".into(),
                shapes: vec![Shape {
                    origin: pose_from_xyz_rpy([0.0, 0.1, 0.2], [0.3, FRAC_PI_2, -0.4]),
                    geometry: Geometry::Capsule {
                        radius: 0.05,
                        length: 0.4,
                    },
                    source: None,
                }],
            },
            LinkSpec {
                name: "b2".into(),
                shapes: vec![Shape {
                    origin: Pose::identity(),
                    geometry: tri,
                    source: Some(MeshSource {
                        path: cube.clone(),
                        scale,
                    }),
                }],
            },
            LinkSpec {
                name: "b3".into(),
                shapes: vec![Shape {
                    origin: Pose::identity(),
                    geometry: Geometry::ConvexMesh {
                        points: Arc::new(
                            [
                                [0.0, 0.0, 0.0],
                                [1.0, 0.0, 0.0],
                                [0.0, 1.0, 0.0],
                                [0.0, 0.0, 1.0],
                            ]
                            .iter()
                            .map(|p| nalgebra::Point3::new(p[0], p[1], p[2]))
                            .collect(),
                        ),
                    },
                    source: None,
                }],
            },
            LinkSpec {
                name: "b4".into(),
                shapes: vec![],
            },
            LinkSpec {
                name: "b5".into(),
                shapes: vec![],
            },
        ],
        joints: vec![
            {
                let mut j = joint(
                    "float",
                    JointType::Floating,
                    "root",
                    "body<1>",
                    Pose::identity(),
                    vec![
                        lim(-1.0, 1.0, 2.0, 3.0),
                        lim(-1.0, 1.0, 2.0, 3.0),
                        lim(0.0, 2.0, 2.0, 3.0),
                        lim(f64::NEG_INFINITY, f64::INFINITY, 1.0, 1.0),
                        lim(f64::NEG_INFINITY, f64::INFINITY, 1.0, 1.0),
                        lim(f64::NEG_INFINITY, f64::INFINITY, 1.0, 1.0),
                    ],
                );
                j.axis = Vector3::zeros();
                j
            },
            // gimbal-lock origin, one-sided limit, acceleration
            joint(
                "one_sided",
                JointType::Revolute,
                "body<1>",
                "b2",
                pose_from_xyz_rpy([0.1, -0.2, 0.3], [0.7, -FRAC_PI_2, 1.1]),
                vec![lim(f64::NEG_INFINITY, 1.25, 0.5, 7.0)],
            ),
            // unbounded prismatic, passive
            {
                let mut j = joint(
                    "slider",
                    JointType::Prismatic,
                    "b2",
                    "b3",
                    pose_from_xyz_rpy([0.0, 0.0, 0.05], [0.0, 0.0, 0.0]),
                    vec![Limits::UNBOUNDED],
                );
                j.axis = Vector3::new(1.0, 2.0, 2.0);
                j.passive = true;
                j
            },
            // unbounded revolute -> continuous
            joint(
                "spin",
                JointType::Revolute,
                "b3",
                "b4",
                pose_from_xyz_rpy([0.2, 0.0, 0.0], [-2.0, 0.4, 3.0]),
                vec![lim(f64::NEG_INFINITY, f64::INFINITY, 4.0, f64::INFINITY)],
            ),
            joint(
                "weld",
                JointType::Fixed,
                "b4",
                "b5",
                pose_from_xyz_rpy([0.0, 0.3, 0.0], [0.0, 0.0, 0.5]),
                vec![],
            ),
        ],
        effectors: vec![EffectorSpec {
            name: "claw".into(),
            link: "b5".into(),
            grip: pose_from_xyz_rpy([0.0, 0.0, 0.12], [FRAC_PI_2, FRAC_PI_2, 0.0]),
        }],
        ..Default::default()
    };
    spec.build().unwrap()
}

#[test]
fn awkward_robot_round_trip() {
    let a = awkward_robot();
    let text = write_urdf_with(
        &a,
        &UrdfExportOptions {
            effector_frames: false,
        },
    );
    assert_numbers_parse(&text);
    let b = reload(&text);
    assert_eq!(b.name(), a.name(), "escaped name reads back");
    assert_same_kinematics(&a, &b, 2);

    let la = limits_of(&a);
    let lb = limits_of(&b);
    for ((name, x), (_, y)) in la.iter().zip(&lb) {
        if name == "float" {
            // URDF floating joints carry no limits: they come back unbounded (documented loss).
            assert!(y.iter().all(|l| *l == Limits::UNBOUNDED));
            assert!(text.contains("Limits not written"));
        } else {
            assert_eq!(x, y, "limits of {name}");
        }
    }
    assert!(
        text.contains("type=\"continuous\""),
        "unbounded revolute `spin`"
    );
    assert!(text.contains("Passive"), "passive joint is marked");
    assert!(
        !b.joints()[b.joint_id("slider").unwrap()].passive,
        "the flag itself is not carried by URDF"
    );

    // Capsule -> cylinder + 2 spheres at the cap centres, placed like the capsule.
    let body = &b.links()[b.link_id("body<1>").unwrap()];
    assert_eq!(body.shapes.len(), 3);
    let cap = &a.links()[a.link_id("body<1>").unwrap()].shapes[0];
    assert_eq!(
        body.shapes[0].geometry,
        Geometry::Cylinder {
            radius: 0.05,
            length: 0.4
        }
    );
    assert!(pose_diff(&body.shapes[0].origin, &cap.origin) < 1e-12);
    for (s, z) in body.shapes[1..].iter().zip([0.2, -0.2]) {
        assert_eq!(s.geometry, Geometry::Sphere { radius: 0.05 });
        let want = cap.origin * nalgebra::Translation3::new(0.0, 0.0, z);
        assert!(pose_diff(&s.origin, &want) < 1e-12);
    }
    // Triangle mesh -> <mesh> of the same file and scale, read back as a convex hull of
    // the same points.
    let b2 = &b.links()[b.link_id("b2").unwrap()].shapes[0];
    let a2 = &a.links()[a.link_id("b2").unwrap()].shapes[0];
    assert_eq!(
        b2.source.as_ref().unwrap().scale,
        a2.source.as_ref().unwrap().scale
    );
    match (&a2.geometry, &b2.geometry) {
        (Geometry::TriMesh { vertices, .. }, Geometry::ConvexMesh { points }) => {
            assert_eq!(vertices, points)
        }
        _ => panic!("expected trimesh -> convex mesh"),
    }
    // A mesh without a source file is left out.
    assert!(b.links()[b.link_id("b3").unwrap()].shapes.is_empty());
    assert!(text.contains("without a source file"));
}

#[test]
fn grip_frames_are_links_at_the_effector_pose() {
    for a in [
        awkward_robot(),
        load_robot(&data("urdf/branching.urdf")).unwrap(),
    ] {
        let text = write_urdf(&a);
        let b = reload(&text);
        assert_eq!(b.links().len(), a.links().len() + a.effectors().len());
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let mut pa = vec![Pose::identity(); a.links().len()];
        let mut pb = vec![Pose::identity(); b.links().len()];
        let mut worst = 0.0f64;
        for _ in 0..100 {
            let q = a.random_configuration(&mut rng);
            forward_kinematics(&a, &q, &mut pa).unwrap();
            forward_kinematics(&b, &q, &mut pb).unwrap();
            for e in a.effectors() {
                let grip = pb[b.link_id(&format!("{}_grip", e.name)).unwrap()];
                worst = worst.max(pose_diff(&(pa[e.link] * e.grip), &grip));
            }
        }
        assert!(worst < 1e-12, "grip frame differs by {worst:e}");
    }
}

#[test]
fn grip_names_do_not_clash() {
    let text = r#"<robot name="r">
  <link name="a"/><link name="e_grip"/>
  <joint name="j" type="fixed"><parent link="a"/><child link="e_grip"/></joint>
  <clamber_effector name="e" link="a"/>
</robot>"#;
    let a = urdf::load_str(text, Path::new("mem.urdf")).unwrap();
    let b = reload(&write_urdf(&a));
    assert!(b.link_id("e_grip_2").is_some());
    assert_eq!(b.links().len(), 3);
}
