//! Robots built in code for tests (independent of the file loaders), and bundled scenario
//! files copied into a scratch directory.
#![allow(dead_code)]

use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use nalgebra::Vector3;

pub fn joint(
    name: &str,
    t: JointType,
    parent: &str,
    child: &str,
    xyz: [f64; 3],
    axis: [f64; 3],
    lim: Option<(f64, f64)>,
) -> JointSpec {
    JointSpec {
        name: name.into(),
        joint_type: t,
        parent: parent.into(),
        child: child.into(),
        origin: pose_from_xyz_rpy(xyz, [0.0; 3]),
        axis: Vector3::from(axis),
        limits: lim
            .map(|(lower, upper)| {
                vec![Limits {
                    lower,
                    upper,
                    velocity: 2.0,
                    acceleration: 5.0,
                }]
            })
            .unwrap_or_default(),
        passive: false,
    }
}

/// A seven-joint arm (shoulder z-y-z, elbow y, wrist z-y-z) with effector `hand`.
pub fn arm7() -> Robot {
    let axes = [
        [0., 0., 1.],
        [0., 1., 0.],
        [0., 0., 1.],
        [0., 1., 0.],
        [0., 0., 1.],
        [0., 1., 0.],
        [0., 0., 1.],
    ];
    let offs = [
        [0., 0., 0.12],
        [0., 0., 0.1],
        [0., 0., 0.0],
        [0.02, 0., 0.34],
        [-0.02, 0., 0.16],
        [0., 0., 0.14],
        [0., 0., 0.08],
    ];
    let mut links = vec![LinkSpec {
        name: "base".into(),
        shapes: vec![],
    }];
    let mut joints = vec![];
    for i in 0..7 {
        links.push(LinkSpec {
            name: format!("l{}", i + 1),
            shapes: vec![],
        });
        let parent = if i == 0 {
            "base".to_string()
        } else {
            format!("l{i}")
        };
        joints.push(joint(
            &format!("j{}", i + 1),
            JointType::Revolute,
            &parent,
            &format!("l{}", i + 1),
            offs[i],
            axes[i],
            Some((-2.9, 2.9)),
        ));
    }
    RobotSpec {
        name: "arm7".into(),
        links,
        joints,
        effectors: vec![EffectorSpec {
            name: "hand".into(),
            link: "l7".into(),
            grip: pose_from_xyz_rpy([0.0, 0.0, 0.1], [0.0; 3]),
        }],
        ..Default::default()
    }
    .build()
    .unwrap()
}

pub fn identity() -> Pose {
    Pose::identity()
}

/// A floating torso carrying two three-joint arms with effectors `left` and `right`, and a
/// passive hinge ("door") on the world: every joint type and a branching tree.
pub fn twin() -> Robot {
    let mut links = vec![
        LinkSpec {
            name: "world".into(),
            shapes: vec![],
        },
        LinkSpec {
            name: "torso".into(),
            shapes: vec![],
        },
    ];
    let mut joints = vec![JointSpec {
        name: "float".into(),
        joint_type: JointType::Floating,
        parent: "world".into(),
        child: "torso".into(),
        origin: Pose::identity(),
        axis: Vector3::z(),
        limits: vec![],
        passive: false,
    }];
    for (side, y) in [("left", 0.2), ("right", -0.2)] {
        let names = [format!("{side}1"), format!("{side}2"), format!("{side}3")];
        let axes = [[0.3, 0.2, 0.9], [0., 1., 0.], [1., 0., 0.]];
        let offs = [[0.0, y, 0.1], [0.0, 0.0, 0.3], [0.05, 0.0, 0.25]];
        let mut parent = "torso".to_string();
        for i in 0..3 {
            links.push(LinkSpec {
                name: names[i].clone(),
                shapes: vec![],
            });
            joints.push(joint(
                &format!("{side}_j{i}"),
                JointType::Revolute,
                &parent,
                &names[i],
                offs[i],
                axes[i],
                Some((-3.0, 3.0)),
            ));
            parent = names[i].clone();
        }
        links.push(LinkSpec {
            name: format!("{side}_slide"),
            shapes: vec![],
        });
        joints.push(joint(
            &format!("{side}_p"),
            JointType::Prismatic,
            &parent,
            &format!("{side}_slide"),
            [0.0, 0.0, 0.1],
            [0.0, 0.0, 1.0],
            Some((-0.1, 0.1)),
        ));
    }
    links.push(LinkSpec {
        name: "door".into(),
        shapes: vec![],
    });
    let mut hinge = joint(
        "hinge",
        JointType::Revolute,
        "world",
        "door",
        [1.0, 0.5, 0.0],
        [0.0, 0.0, 1.0],
        Some((-0.1, 2.0)),
    );
    hinge.passive = true;
    joints.push(hinge);
    RobotSpec {
        name: "twin".into(),
        links,
        joints,
        effectors: vec![
            EffectorSpec {
                name: "left".into(),
                link: "left_slide".into(),
                grip: pose_from_xyz_rpy([0.0, 0.02, 0.08], [0.1, 0.2, 0.3]),
            },
            EffectorSpec {
                name: "right".into(),
                link: "right_slide".into(),
                grip: pose_from_xyz_rpy([0.0, -0.02, 0.08], [-0.3, 0.1, 0.0]),
            },
        ],
        ..Default::default()
    }
    .build()
    .unwrap()
}

// ---------------------------------------------------------------------------------------
// Helpers for the projection / manifold-walk acceptance tests.

use clamber::constraint::{
    Constraint, ConstraintError, ConstraintStack, EvalContext, FrameRef, JacobianRows,
};
use clamber::model::JointKind;

/// Pins a one-DOF revolute joint at an angle: 1 row, `wrap(angle - target)` with the angle
/// read from the link poses (the constraint interface sees poses, not `q`): the rotation of
/// the child frame relative to the joint frame on the parent, about the joint axis. The
/// Jacobian row is the joint axis (world) dotted with the relative angular velocity
/// `w_child - w_parent`, from the frame Jacobians; for a chain this is 1 in the joint's own
/// column.
#[derive(Clone, Debug)]
pub struct JointPin {
    pub joint: usize,
    pub target: f64,
}

impl JointPin {
    pub fn new(robot: &Robot, joint: &str, target: f64) -> Self {
        let joint = robot.joint_id(joint).expect("joint exists");
        assert!(matches!(
            robot.joints()[joint].kind,
            JointKind::Revolute { .. }
        ));
        JointPin { joint, target }
    }
}

/// Wrap an angle into (-pi, pi].
pub fn wrap_angle(a: f64) -> f64 {
    let tau = std::f64::consts::TAU;
    let mut x = a.rem_euclid(tau);
    if x > std::f64::consts::PI {
        x -= tau;
    }
    x
}

impl Constraint for JointPin {
    fn rows(&self) -> usize {
        1
    }
    fn codimension(&self) -> usize {
        1
    }
    fn describe(&self) -> String {
        format!("pin joint {} at {}", self.joint, self.target)
    }
    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError> {
        let j = &ctx.robot.joints()[self.joint];
        let JointKind::Revolute { axis } = &j.kind else {
            unreachable!("checked in new")
        };
        let a = axis.into_inner();
        let frame = ctx.poses[j.parent] * j.origin; // joint frame (before the motion)
        let rel = frame.rotation.inverse() * ctx.poses[j.child].rotation;
        let u = perpendicular(&a);
        let v = rel * u;
        let angle = a.dot(&u.cross(&v)).atan2(u.dot(&v));
        residual[0] = wrap_angle(angle - self.target);
        if let Some(mut jac) = jacobian {
            let a_world = frame.rotation * a;
            let child = FrameRef {
                link: j.child,
                offset: Pose::identity(),
            };
            let parent = FrameRef {
                link: j.parent,
                offset: Pose::identity(),
            };
            ctx.frame_jacobian(&child)?;
            let wc = ctx.scratch.rows(3, 3).into_owned();
            ctx.frame_jacobian(&parent)?;
            let wp = ctx.scratch.rows(3, 3).into_owned();
            jac.row_mut(0).copy_from(&(a_world.transpose() * (wc - wp)));
        }
        Ok(())
    }
}

/// A unit vector perpendicular to unit `a`.
pub fn perpendicular(a: &Vector3<f64>) -> Vector3<f64> {
    let p = if a.x.abs() < 0.6 {
        Vector3::x()
    } else {
        Vector3::y()
    };
    a.cross(&p).normalize()
}

/// Largest absolute difference between the stack's analytic Jacobian at `q` and central
/// finite differences (step 1e-6) taken through `Robot::integrate`.
pub fn jacobian_fd_error(robot: &Robot, stack: &ConstraintStack, q: &[f64]) -> f64 {
    const H: f64 = 1e-6;
    let mut buf = stack.buffer(robot);
    stack.evaluate(robot, q, &mut buf, true).unwrap();
    let jac = buf.jacobian.clone();
    let mut v = vec![0.0; robot.nv()];
    let (mut qp, mut qm) = (vec![0.0; robot.nq()], vec![0.0; robot.nq()]);
    let mut worst: f64 = 0.0;
    for k in 0..robot.nv() {
        v.iter_mut().for_each(|x| *x = 0.0);
        v[k] = H;
        robot.integrate(q, &v, &mut qp).unwrap();
        v[k] = -H;
        robot.integrate(q, &v, &mut qm).unwrap();
        stack.evaluate(robot, &qp, &mut buf, false).unwrap();
        let rp = buf.residual.clone();
        stack.evaluate(robot, &qm, &mut buf, false).unwrap();
        let rm = buf.residual.clone();
        for r in 0..stack.rows() {
            let fd = (rp[r] - rm[r]) / (2.0 * H);
            worst = worst.max((fd - jac[(r, k)]).abs());
        }
    }
    worst
}

/// A point robot: three prismatic joints x, y, z (box limits `[-half, half]`), the point
/// being the origin of link `point`.
pub fn point_robot(half: f64) -> Robot {
    point_robot_with(half, vec![])
}

/// [`point_robot`] whose link `point` carries `shapes` (collision geometry).
pub fn point_robot_with(half: f64, shapes: Vec<clamber::model::Shape>) -> Robot {
    point_robot_limited(
        Limits {
            lower: -half,
            upper: half,
            velocity: 2.0,
            acceleration: 5.0,
        },
        shapes,
    )
}

/// [`point_robot_with`] with `limits` on each of the three joints.
pub fn point_robot_limited(limits: Limits, shapes: Vec<clamber::model::Shape>) -> Robot {
    let mut shapes = Some(shapes);
    let mut joints = vec![];
    let mut links = vec![LinkSpec {
        name: "world".into(),
        shapes: vec![],
    }];
    let mut parent = "world".to_string();
    for (name, axis) in [
        ("x", [1.0, 0.0, 0.0]),
        ("y", [0.0, 1.0, 0.0]),
        ("z", [0.0, 0.0, 1.0]),
    ] {
        let child = if name == "z" {
            "point".to_string()
        } else {
            format!("slide_{name}")
        };
        links.push(LinkSpec {
            name: child.clone(),
            shapes: if name == "z" {
                shapes.take().unwrap_or_default()
            } else {
                vec![]
            },
        });
        let mut j = joint(
            name,
            JointType::Prismatic,
            &parent,
            &child,
            [0.0; 3],
            axis,
            None,
        );
        j.limits = vec![limits];
        joints.push(j);
        parent = child;
    }
    RobotSpec {
        name: "point".into(),
        links,
        joints,
        ..Default::default()
    }
    .build()
    .unwrap()
}

/// Sphere of radius 1 about the origin, distance form: residual |p| - 1, gradient p / |p|
/// (zero at the origin), for the frame `point`. The analytic manifold of several tests.
#[derive(Debug)]
pub struct Sphere {
    pub point: clamber::constraint::FrameRef,
}

impl clamber::constraint::Constraint for Sphere {
    fn rows(&self) -> usize {
        1
    }
    fn codimension(&self) -> usize {
        1
    }
    fn describe(&self) -> String {
        "unit sphere".into()
    }
    fn evaluate(
        &self,
        ctx: &mut clamber::constraint::EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<clamber::constraint::JacobianRows<'_>>,
    ) -> Result<(), clamber::constraint::ConstraintError> {
        let p = self.point.pose(ctx.poses).translation.vector;
        let n = p.norm();
        residual[0] = n - 1.0;
        if let Some(mut jac) = jacobian {
            let grad = if n > 0.0 { p / n } else { Vector3::zeros() };
            ctx.frame_jacobian(&self.point)?;
            let lin = ctx.scratch.rows(0, 3);
            jac.row_mut(0).copy_from(&(grad.transpose() * lin));
        }
        Ok(())
    }
}

/// `scenarios/NAME.scenario.toml` copied into `dir` as `file_name`: the robot path
/// (`../robots/ROBOT`) made absolute, the outputs `out/NAME...` renamed to `run...` (so they
/// land in `dir`), then each `(from, to)` of `edits` replaced.
pub fn bundled_scenario_in(
    dir: &std::path::Path,
    name: &str,
    robot: &str,
    file_name: &str,
    edits: &[(&str, &str)],
) -> std::path::PathBuf {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut text = std::fs::read_to_string(root.join(format!("scenarios/{name}.scenario.toml")))
        .unwrap()
        .replace(
            &format!("robot = \"../robots/{robot}\""),
            &format!(
                "robot = {:?}",
                root.join("robots").join(robot).display().to_string()
            ),
        )
        .replace(&format!("out/{name}"), "run");
    for (from, to) in edits {
        text = text.replace(from, to);
    }
    let p = dir.join(file_name);
    std::fs::write(&p, text).unwrap();
    p
}
