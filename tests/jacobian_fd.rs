//! Analytic frame and point Jacobians against central finite differences taken through
//! `Robot::integrate`, for robots built in code that cover every joint type.
//!
//! Finite-difference scheme: for tangent coordinate k, q± = q ⊕ (±h e_k), h = 1e-6.
//! - linear rows: (p(q+) - p(q-)) / 2h, p the frame origin in world coordinates;
//! - angular rows: R(q-) log(R(q-)^T R(q+)) / 2h, which equals log(R(q+) R(q-)^T) / 2h
//!   exactly (conjugation), i.e. the angular velocity in WORLD axes.
//!
//! Tolerance, |fd - J| <= TOL * (1 + |J|) per column with TOL = 1e-6:
//! - truncation: a central difference errs by h^2/6 |f'''|. Along any tangent direction
//!   the frame moves on a composition of rotations of unit rate, so |f'''| is bounded by
//!   a few times the lever arm (< 3 m for these robots): error < 1e-12 * 3 / 6 ~ 5e-13.
//!   For the rotation, log(R(+h) R(-h)^T) = 2h w + O(h^3) (Baker-Campbell-Hausdorff: the
//!   h^2 terms cancel in the symmetric product), giving the same order.
//! - roundoff: positions are O(3) m computed to ~1e-15 absolute, and the difference is
//!   divided by 2h = 2e-6, so ~1e-15 * 3 / 2e-6 ~ 2e-9. The small-angle logarithm below is
//!   accurate to relative 1e-10 (it never calls acos near 1).
//!
//! So the expected error is ~1e-9 and the tolerance leaves a factor ~1000; a wrong axis,
//! sign, column, frame or lever arm makes an error of order 1 (at least 1e-2 here).

use clamber::kinematics::{forward_kinematics, frame_jacobian, point_jacobian};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use nalgebra::{DMatrix, Matrix3, Point3, Quaternion, Rotation3, UnitQuaternion, Vector3};
use proptest::prelude::*;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

const H: f64 = 1e-6;
const TOL: f64 = 1e-6;

// ---------------------------------------------------------------------------------------
// Robots built in code

fn joint(
    name: &str,
    t: JointType,
    parent: &str,
    child: &str,
    origin: Pose,
    axis: [f64; 3],
) -> JointSpec {
    JointSpec {
        name: name.into(),
        joint_type: t,
        parent: parent.into(),
        child: child.into(),
        origin,
        axis: Vector3::from(axis),
        limits: Vec::new(),
        passive: false,
    }
}

fn link(name: &str) -> LinkSpec {
    LinkSpec {
        name: name.into(),
        shapes: Vec::new(),
    }
}

/// A floating torso with two branches: branch A has a revolute joint about an oblique
/// axis, a prismatic joint along an oblique axis and a fixed joint; branch B has two
/// revolute joints and a second floating joint (a carried body). Joints are declared out
/// of tree order on purpose.
fn mixed_tree() -> Robot {
    let spec = RobotSpec {
        name: "mixed_tree".into(),
        links: ["world", "torso", "a1", "a2", "a3", "b1", "b2", "b3"]
            .iter()
            .map(|n| link(n))
            .collect(),
        joints: vec![
            joint(
                "a_fix",
                JointType::Fixed,
                "a2",
                "a3",
                pose_from_xyz_rpy([0.05, -0.1, 0.2], [0.4, 0.0, -1.1]),
                [0.0; 3],
            ),
            joint(
                "float",
                JointType::Floating,
                "world",
                "torso",
                pose_from_xyz_rpy([0.3, -0.2, 0.5], [0.2, -0.4, 0.9]),
                [0.0; 3],
            ),
            joint(
                "a_rev",
                JointType::Revolute,
                "torso",
                "a1",
                pose_from_xyz_rpy([0.1, 0.2, 0.3], [0.3, 0.5, -0.2]),
                [1.0, -2.0, 0.5],
            ),
            joint(
                "a_pri",
                JointType::Prismatic,
                "a1",
                "a2",
                pose_from_xyz_rpy([0.0, 0.0, 0.35], [-0.6, 0.1, 0.0]),
                [0.3, 0.4, -1.0],
            ),
            joint(
                "b_rev1",
                JointType::Revolute,
                "torso",
                "b1",
                pose_from_xyz_rpy([-0.1, -0.2, 0.3], [0.0, 0.0, 0.7]),
                [0.0, 1.0, 0.0],
            ),
            joint(
                "b_rev2",
                JointType::Revolute,
                "b1",
                "b2",
                pose_from_xyz_rpy([0.0, 0.0, 0.3], [1.2, 0.0, 0.0]),
                [0.2, 0.9, 0.4],
            ),
            joint(
                "b_float",
                JointType::Floating,
                "b2",
                "b3",
                pose_from_xyz_rpy([0.0, 0.1, 0.25], [0.0, 0.3, 0.0]),
                [0.0; 3],
            ),
        ],
        effectors: vec![
            EffectorSpec {
                name: "hand_a".into(),
                link: "a3".into(),
                grip: pose_from_xyz_rpy([0.0, 0.0, 0.12], [0.1, 0.2, 0.3]),
            },
            EffectorSpec {
                name: "hand_b".into(),
                link: "b3".into(),
                grip: pose_from_xyz_rpy([0.07, 0.0, 0.1], [-0.5, 0.0, 1.0]),
            },
        ],
        ..Default::default()
    };
    spec.build().expect("mixed_tree is a valid robot")
}

/// A fixed-base seven-joint arm (z y z y z y z) with a bounded prismatic joint at the base.
fn arm_on_rail() -> Robot {
    let mut links = vec![link("base"), link("carriage")];
    let mut joints = vec![JointSpec {
        limits: vec![Limits {
            lower: -1.0,
            upper: 1.0,
            velocity: 1.0,
            acceleration: 1.0,
        }],
        ..joint(
            "rail",
            JointType::Prismatic,
            "base",
            "carriage",
            Pose::identity(),
            [1.0, 0.0, 0.0],
        )
    }];
    let mut parent = "carriage".to_string();
    for i in 1..=7 {
        let child = format!("l{i}");
        let axis = if i % 2 == 1 {
            [0.0, 0.0, 1.0]
        } else {
            [0.0, 1.0, 0.0]
        };
        joints.push(joint(
            &format!("j{i}"),
            JointType::Revolute,
            &parent,
            &child,
            pose_from_xyz_rpy([0.0, 0.0, 0.3], [0.0; 3]),
            axis,
        ));
        links.push(link(&child));
        parent = child;
    }
    let spec = RobotSpec {
        name: "arm_on_rail".into(),
        links,
        joints,
        effectors: vec![EffectorSpec {
            name: "tool".into(),
            link: "l7".into(),
            grip: pose_from_xyz_rpy([0.0, 0.0, 0.1], [0.0; 3]),
        }],
        ..Default::default()
    };
    spec.build().expect("arm_on_rail is a valid robot")
}

// ---------------------------------------------------------------------------------------
// Finite differences

/// log of SO(3) for rotations near the identity, from the skew part and the trace:
/// theta = atan2(|s|, (tr - 1) / 2) with s = vee(R - R^T) / 2 = sin(theta) u. Written here
/// because nalgebra's `Rotation3::scaled_axis` takes the angle from acos of the trace,
/// which loses about half the digits at the 1e-6 rad angles a finite difference produces.
fn log_small(r: &Matrix3<f64>) -> Vector3<f64> {
    let s = 0.5
        * Vector3::new(
            r[(2, 1)] - r[(1, 2)],
            r[(0, 2)] - r[(2, 0)],
            r[(1, 0)] - r[(0, 1)],
        );
    let sn = s.norm();
    if sn == 0.0 {
        return Vector3::zeros();
    }
    let theta = sn.atan2(0.5 * (r.trace() - 1.0));
    s * (theta / sn)
}

fn world_frame(robot: &Robot, q: &[f64], link: usize, frame: &Pose) -> Pose {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    poses[link] * frame
}

/// The 6 x nv finite-difference Jacobian of `frame` on `link`.
fn fd_jacobian(robot: &Robot, q: &[f64], link: usize, frame: &Pose) -> DMatrix<f64> {
    let (nq, nv) = (robot.nq(), robot.nv());
    let mut jac = DMatrix::zeros(6, nv);
    let (mut qp, mut qm) = (vec![0.0; nq], vec![0.0; nq]);
    let mut v = vec![0.0; nv];
    for k in 0..nv {
        v.iter_mut().for_each(|x| *x = 0.0);
        v[k] = H;
        robot.integrate(q, &v, &mut qp).unwrap();
        v[k] = -H;
        robot.integrate(q, &v, &mut qm).unwrap();
        let (tp, tm) = (
            world_frame(robot, &qp, link, frame),
            world_frame(robot, &qm, link, frame),
        );
        let lin = (tp.translation.vector - tm.translation.vector) / (2.0 * H);
        let rm = tm.rotation.matrix();
        let ang = rm * log_small(&(rm.transpose() * tp.rotation.matrix())) / (2.0 * H);
        for r in 0..3 {
            jac[(r, k)] = lin[r];
            jac[(3 + r, k)] = ang[r];
        }
    }
    jac
}

/// Largest column error scaled as in the module docs: max_k |fd_k - J_k| / (1 + |J_k|).
fn scaled_error(analytic: &DMatrix<f64>, fd: &DMatrix<f64>) -> f64 {
    (0..analytic.ncols())
        .map(|k| (analytic.column(k) - fd.column(k)).norm() / (1.0 + analytic.column(k).norm()))
        .fold(0.0, f64::max)
}

/// Every frame worth checking on a robot: each link frame, each effector grip frame and
/// an extra offset frame on each link. Returns (description, link, frame in link).
fn frames_of(robot: &Robot, extra: &Pose) -> Vec<(String, usize, Pose)> {
    let mut out = Vec::new();
    for (i, l) in robot.links().iter().enumerate() {
        out.push((format!("link {}", l.name), i, Pose::identity()));
        out.push((format!("offset frame on {}", l.name), i, *extra));
    }
    for e in robot.effectors() {
        out.push((format!("grip {}", e.name), e.link, e.grip));
    }
    out
}

/// Check frame and point Jacobians of every frame at `q`; returns the largest scaled
/// errors (frame, point).
fn check_all_frames(robot: &Robot, q: &[f64], extra: &Pose) -> Result<(f64, f64), String> {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    let (mut worst_frame, mut worst_point) = (0.0f64, 0.0f64);
    for (what, link, frame) in frames_of(robot, extra) {
        let mut jac = DMatrix::zeros(6, robot.nv());
        frame_jacobian(robot, &poses, link, &frame, &mut jac).unwrap();
        let fd = fd_jacobian(robot, q, link, &frame);
        let e = scaled_error(&jac, &fd);
        if e > TOL {
            return Err(format!(
                "{}: frame Jacobian of {what} off by {e:e} at q = {q:?}\nanalytic {jac}\nfd {fd}",
                robot.name()
            ));
        }
        worst_frame = worst_frame.max(e);

        // Point Jacobian of the same frame's origin, given in link coordinates.
        let point = Point3::from(frame.translation.vector);
        let mut pj = DMatrix::zeros(3, robot.nv());
        point_jacobian(robot, &poses, link, &point, &mut pj).unwrap();
        let fd_lin = fd.rows(0, 3).into_owned();
        let e = scaled_error(&pj, &fd_lin);
        if e > TOL {
            return Err(format!("{}: point Jacobian of {what} off by {e:e} at q = {q:?}\nanalytic {pj}\nfd {fd_lin}", robot.name()));
        }
        worst_point = worst_point.max(e);
    }
    Ok((worst_frame, worst_point))
}

// ---------------------------------------------------------------------------------------
// Strategies

/// A configuration with every coordinate in [-pi, pi], quaternions normalized (4 uniform
/// components in [-1, 1], rejected when nearly zero).
fn config_strategy(robot: &Robot) -> impl Strategy<Value = Vec<f64>> {
    let floating: Vec<usize> = robot
        .joints()
        .iter()
        .filter(|j| j.kind.nq() == 7)
        .map(|j| j.q_index)
        .collect();
    let nq = robot.nq();
    prop::collection::vec(-std::f64::consts::PI..std::f64::consts::PI, nq).prop_filter_map(
        "quaternion too short to normalize",
        move |mut q| {
            for &i in &floating {
                let n = (q[i + 3].powi(2) + q[i + 4].powi(2) + q[i + 5].powi(2) + q[i + 6].powi(2))
                    .sqrt();
                if n < 0.1 {
                    return None;
                }
                for k in 3..7 {
                    q[i + k] /= n;
                }
            }
            Some(q)
        },
    )
}

fn pose_strategy() -> impl Strategy<Value = Pose> {
    (
        prop::array::uniform3(-0.5..0.5f64),
        prop::array::uniform3(-3.0..3.0f64),
    )
        .prop_map(|(x, r)| pose_from_xyz_rpy(x, r))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn mixed_tree_jacobians_match_finite_differences(
        (q, extra) in config_strategy(&mixed_tree()).prop_flat_map(|q| (Just(q), pose_strategy()))
    ) {
        let robot = mixed_tree();
        if let Err(msg) = check_all_frames(&robot, &q, &extra) {
            prop_assert!(false, "{}", msg);
        }
    }

    #[test]
    fn arm_jacobians_match_finite_differences(
        (q, extra) in config_strategy(&arm_on_rail()).prop_flat_map(|q| (Just(q), pose_strategy()))
    ) {
        let robot = arm_on_rail();
        if let Err(msg) = check_all_frames(&robot, &q, &extra) {
            prop_assert!(false, "{}", msg);
        }
    }
}

// ---------------------------------------------------------------------------------------
// Floating joint at configurations where Euler angles would be singular

/// Quaternions (x, y, z, w) of the explicit floating-joint orientations.
fn special_orientations() -> Vec<(&'static str, UnitQuaternion<f64>)> {
    use std::f64::consts::{FRAC_PI_2, PI};
    let rpy =
        |r, p, y| UnitQuaternion::from_rotation_matrix(&Rotation3::from_euler_angles(r, p, y));
    vec![
        ("identity", UnitQuaternion::identity()),
        ("pitch +pi/2", rpy(0.3, FRAC_PI_2, -0.8)),
        ("pitch -pi/2", rpy(-1.1, -FRAC_PI_2, 0.4)),
        ("pitch +pi/2, roll = yaw = 0", rpy(0.0, FRAC_PI_2, 0.0)),
        // 180 degree rotations: w = 0 exactly.
        (
            "180 deg about x",
            UnitQuaternion::new_unchecked(Quaternion::new(0.0, 1.0, 0.0, 0.0)),
        ),
        (
            "180 deg about z",
            UnitQuaternion::new_unchecked(Quaternion::new(0.0, 0.0, 0.0, 1.0)),
        ),
        (
            "180 deg about (1,2,3)",
            UnitQuaternion::from_axis_angle(
                &nalgebra::Unit::new_normalize(Vector3::new(1.0, 2.0, 3.0)),
                PI,
            ),
        ),
        (
            "-identity (w = -1)",
            UnitQuaternion::new_unchecked(Quaternion::new(-1.0, 0.0, 0.0, 0.0)),
        ),
    ]
}

fn set_quat(q: &mut [f64], i: usize, r: &UnitQuaternion<f64>) {
    let c = r.quaternion().coords; // x y z w
    q[i + 3..i + 7].copy_from_slice(&[c[0], c[1], c[2], c[3]]);
}

#[test]
fn floating_joint_at_euler_singular_orientations() {
    let robot = mixed_tree();
    let float = &robot.joints()[robot.joint_id("float").unwrap()];
    let b_float = &robot.joints()[robot.joint_id("b_float").unwrap()];
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let extra = pose_from_xyz_rpy([0.1, -0.2, 0.05], [0.5, -0.3, 2.0]);
    let mut worst = (0.0f64, 0.0f64);
    for (name, r) in special_orientations() {
        for (name2, r2) in special_orientations() {
            // Both floating joints at special orientations, everything else random.
            let mut q = robot.random_configuration(&mut rng);
            set_quat(&mut q, float.q_index, &r);
            set_quat(&mut q, b_float.q_index, &r2);
            match check_all_frames(&robot, &q, &extra) {
                Ok((f, p)) => worst = (worst.0.max(f), worst.1.max(p)),
                Err(msg) => panic!("torso {name}, carried body {name2}: {msg}"),
            }
        }
    }
    eprintln!(
        "special orientations: worst scaled FD error frame {:.3e}, point {:.3e}",
        worst.0, worst.1
    );
}

/// The floating joint's own child frame, analytically: with the root at the world origin,
/// tangent coordinates are body-frame linear and angular velocity, so the frame Jacobian's
/// first six columns are [R 0; 0 R] with R the body orientation (a change of axes), and
/// the FD agrees.
#[test]
fn floating_joint_own_frame_is_a_change_of_axes() {
    let robot = mixed_tree();
    let torso = robot.link_id("torso").unwrap();
    let float = &robot.joints()[robot.joint_id("float").unwrap()];
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    for (name, r) in special_orientations() {
        let mut q = robot.random_configuration(&mut rng);
        set_quat(&mut q, float.q_index, &r);
        let mut poses = vec![Pose::identity(); robot.links().len()];
        forward_kinematics(&robot, &q, &mut poses).unwrap();
        let mut jac = DMatrix::zeros(6, robot.nv());
        frame_jacobian(&robot, &poses, torso, &Pose::identity(), &mut jac).unwrap();
        let rot = poses[torso].rotation.matrix();
        // R = origin rotation * body quaternion.
        let expected_rot = float.origin.rotation.matrix() * r.to_rotation_matrix().matrix();
        assert!(
            (rot - expected_rot).abs().max() < 1e-14,
            "{name}: torso orientation {rot} vs {expected_rot}"
        );
        let v = float.v_index;
        let mut expected = DMatrix::zeros(6, robot.nv());
        expected.view_mut((0, v), (3, 3)).copy_from(rot);
        expected.view_mut((3, v + 3), (3, 3)).copy_from(rot);
        let err = (&jac - &expected).abs().max();
        assert!(
            err < 1e-14,
            "{name}: torso Jacobian\n{jac}\nexpected\n{expected}"
        );
        let fd = fd_jacobian(&robot, &q, torso, &Pose::identity());
        let e = scaled_error(&jac, &fd);
        assert!(
            e < TOL,
            "{name}: FD of the torso frame off by {e:e}\n{jac}\n{fd}"
        );
    }
}

/// A deterministic sweep that reports the largest FD errors seen (run with --nocapture);
/// asserts the same tolerance as the property tests.
#[test]
fn report_worst_fd_error_over_seeded_sweep() {
    for robot in [mixed_tree(), arm_on_rail()] {
        let mut rng = ChaCha8Rng::seed_from_u64(2024);
        let extra = pose_from_xyz_rpy([0.2, 0.1, -0.3], [1.0, 0.4, -2.2]);
        let mut worst = (0.0f64, 0.0f64);
        for _ in 0..200 {
            let q = robot.random_configuration(&mut rng);
            match check_all_frames(&robot, &q, &extra) {
                Ok((f, p)) => worst = (worst.0.max(f), worst.1.max(p)),
                Err(msg) => panic!("{msg}"),
            }
        }
        eprintln!(
            "{}: 200 configurations, worst scaled FD error frame {:.3e}, point {:.3e}",
            robot.name(),
            worst.0,
            worst.1
        );
    }
}

/// The check itself can fail: a Jacobian with one column's sign flipped, or the grip
/// frame's lever arm dropped, is caught by the same comparison.
#[test]
fn fd_comparison_detects_wrong_jacobians() {
    let robot = mixed_tree();
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let q = robot.random_configuration(&mut rng);
    let e = robot.effector("hand_a").unwrap();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(&robot, &q, &mut poses).unwrap();
    let mut jac = DMatrix::zeros(6, robot.nv());
    frame_jacobian(&robot, &poses, e.link, &e.grip, &mut jac).unwrap();
    let fd = fd_jacobian(&robot, &q, e.link, &e.grip);
    assert!(scaled_error(&jac, &fd) < TOL);
    let a_rev = robot.joints()[robot.joint_id("a_rev").unwrap()].v_index;
    let mut flipped = jac.clone();
    flipped.column_mut(a_rev).neg_mut();
    assert!(scaled_error(&flipped, &fd) > 1e-2);
    let mut no_arm = DMatrix::zeros(6, robot.nv());
    frame_jacobian(&robot, &poses, e.link, &Pose::identity(), &mut no_arm).unwrap();
    assert!(scaled_error(&no_arm, &fd) > 1e-2);
}
