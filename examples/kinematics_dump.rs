//! Dump a robot's URDF export and its forward kinematics and frame Jacobians at random
//! configurations, for comparison with an independent rigid-body library
//! (`reference/pinocchio_check.py`).
//!
//! ```text
//! cargo run --example kinematics_dump -- robots/sevenfold.toml --count 1000 --seed 1 --out /tmp/dump/sevenfold
//! cargo run --example kinematics_dump -- --builtin mixed --count 1000 --seed 1 --out /tmp/dump/mixed
//! ```
//!
//! Writes `OUT/robot.urdf` and `OUT/samples.json`:
//! ```text
//! { "robot", "nq", "nv",
//!   "joints": [{ "name", "type", "q_index", "v_index", "nq", "nv" }],        (our order)
//!   "frames": [{ "name", "kind": "link" | "grip", "link" }],
//!   "samples": [{ "q": [nq],
//!                 "poses": [[16] per frame, 4x4 row-major world pose],
//!                 "jacobians": [[6 * nv] per frame, row-major, rows v; w in world axes] }] }
//! ```
//! A grip frame is named `<effector>_grip`, like the child link the URDF export adds for it.

use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use clamber::kinematics::{forward_kinematics, frame_jacobian};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointSpec, JointType, Limits, LinkSpec, Robot, RobotSpec};
use clamber::robot_file::urdf::write_urdf;
use clap::Parser;
use nalgebra::{DMatrix, Vector3};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

#[derive(Parser)]
#[command(about = "Write a robot's URDF export and sampled FK / frame Jacobians as JSON")]
struct Args {
    /// Robot file (.toml or .urdf). Omit when using --builtin.
    robot: Option<PathBuf>,
    /// A robot built in code instead of a file: arm7, climber, mobile, mixed.
    #[arg(long)]
    builtin: Option<String>,
    /// Number of random configurations.
    #[arg(long, default_value_t = 1000)]
    count: usize,
    /// Seed of the configuration sampler.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Output directory (created if missing).
    #[arg(long)]
    out: PathBuf,
}

#[derive(Serialize)]
struct JointInfo {
    name: String,
    #[serde(rename = "type")]
    kind: &'static str,
    q_index: usize,
    v_index: usize,
    nq: usize,
    nv: usize,
}

#[derive(Serialize)]
struct FrameInfo {
    name: String,
    kind: &'static str,
    link: String,
}

#[derive(Serialize)]
struct Sample {
    q: Vec<f64>,
    poses: Vec<Vec<f64>>,
    jacobians: Vec<Vec<f64>>,
}

#[derive(Serialize)]
struct Dump {
    robot: String,
    nq: usize,
    nv: usize,
    joints: Vec<JointInfo>,
    frames: Vec<FrameInfo>,
    samples: Vec<Sample>,
}

fn main() -> Result<()> {
    let args = Args::parse();
    let robot = match (&args.robot, &args.builtin) {
        (Some(path), None) => clamber::robot_file::load_robot(path)
            .with_context(|| format!("loading {}", path.display()))?,
        (None, Some(name)) => builtin(name)?,
        _ => bail!("give exactly one of a robot file or --builtin NAME"),
    };
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("creating {}", args.out.display()))?;
    write_file(&args.out.join("robot.urdf"), &write_urdf(&robot))?;

    // Frames: every link, then every effector's grip frame.
    let mut frames: Vec<(FrameInfo, usize, Pose)> = robot
        .links()
        .iter()
        .enumerate()
        .map(|(i, l)| {
            (
                FrameInfo {
                    name: l.name.clone(),
                    kind: "link",
                    link: l.name.clone(),
                },
                i,
                Pose::identity(),
            )
        })
        .collect();
    for e in robot.effectors() {
        let link = robot.links()[e.link].name.clone();
        frames.push((
            FrameInfo {
                name: format!("{}_grip", e.name),
                kind: "grip",
                link,
            },
            e.link,
            e.grip,
        ));
    }

    let mut rng = ChaCha8Rng::seed_from_u64(args.seed);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let mut jac = DMatrix::zeros(6, robot.nv());
    let mut samples = Vec::with_capacity(args.count);
    for _ in 0..args.count {
        let q = robot.random_configuration(&mut rng);
        forward_kinematics(&robot, &q, &mut poses)?;
        let mut sample = Sample {
            q: q.clone(),
            poses: Vec::new(),
            jacobians: Vec::new(),
        };
        for (_, link, frame) in &frames {
            let world = poses[*link] * frame;
            let m = world.to_homogeneous();
            sample.poses.push(
                (0..4)
                    .flat_map(|r| (0..4).map(move |c| (r, c)))
                    .map(|rc| m[rc])
                    .collect(),
            );
            frame_jacobian(&robot, &poses, *link, frame, &mut jac)?;
            sample.jacobians.push(
                (0..6)
                    .flat_map(|r| (0..robot.nv()).map(move |c| (r, c)))
                    .map(|rc| jac[rc])
                    .collect(),
            );
        }
        samples.push(sample);
    }

    let dump = Dump {
        robot: robot.name().to_string(),
        nq: robot.nq(),
        nv: robot.nv(),
        joints: robot
            .joints()
            .iter()
            .map(|j| JointInfo {
                name: j.name.clone(),
                kind: j.kind.type_name(),
                q_index: j.q_index,
                v_index: j.v_index,
                nq: j.kind.nq(),
                nv: j.kind.nv(),
            })
            .collect(),
        frames: frames.into_iter().map(|(f, _, _)| f).collect(),
        samples,
    };
    write_file(
        &args.out.join("samples.json"),
        &serde_json::to_string(&dump)?,
    )?;
    println!(
        "{}: nq {} nv {}, {} frames x {} configurations -> {}",
        dump.robot,
        dump.nq,
        dump.nv,
        dump.frames.len(),
        args.count,
        args.out.display()
    );
    Ok(())
}

/// Write via a temporary file and a rename, so no half-written file is left behind.
fn write_file(path: &Path, text: &str) -> Result<()> {
    let tmp = path.with_extension("partial");
    std::fs::write(&tmp, text).with_context(|| format!("writing {}", tmp.display()))?;
    std::fs::rename(&tmp, path).with_context(|| format!("renaming to {}", path.display()))?;
    Ok(())
}

// ---------------------------------------------------------------------------------------
// Robots built in code (used while the robot file loaders are not on this branch, and to
// cover joint types the shipped robots do not have: oblique axes, a floating joint below
// the root).

fn builtin(name: &str) -> Result<Robot> {
    let spec = match name {
        "arm7" => arm7_spec(),
        "climber" => climber_spec(),
        "mobile" => mobile_spec(),
        "mixed" => mixed_spec(),
        _ => bail!("unknown builtin robot `{name}`; expected arm7, climber, mobile or mixed"),
    };
    Ok(spec.build()?)
}

fn lim(lower: f64, upper: f64) -> Vec<Limits> {
    vec![Limits {
        lower,
        upper,
        velocity: 2.0,
        acceleration: 6.0,
    }]
}

#[allow(clippy::too_many_arguments)] // one table row per joint
fn joint(
    name: &str,
    t: JointType,
    parent: &str,
    child: &str,
    xyz: [f64; 3],
    rpy: [f64; 3],
    axis: [f64; 3],
    limits: Vec<Limits>,
) -> JointSpec {
    JointSpec {
        name: name.into(),
        joint_type: t,
        parent: parent.into(),
        child: child.into(),
        origin: pose_from_xyz_rpy(xyz, rpy),
        axis: Vector3::from(axis),
        limits,
        passive: false,
    }
}

/// Seven revolute joints z y z y z y z with ~0.3 m offsets, from `parent`; link names get
/// `prefix`. Returns (links, joints, last link).
fn arm(
    prefix: &str,
    parent: &str,
    mount_xyz: [f64; 3],
    mount_rpy: [f64; 3],
) -> (Vec<LinkSpec>, Vec<JointSpec>, String) {
    let offsets = [
        [0.0, 0.0, 0.12],
        [0.0, 0.0, 0.1],
        [0.0, 0.0, 0.3],
        [0.02, 0.0, 0.3],
        [-0.02, 0.0, 0.16],
        [0.0, 0.0, 0.14],
        [0.0, 0.0, 0.08],
    ];
    let (mut links, mut joints) = (Vec::new(), Vec::new());
    let mut p = parent.to_string();
    for (i, off) in offsets.iter().enumerate() {
        let child = format!("{prefix}link{}", i + 1);
        let axis = if i % 2 == 0 {
            [0.0, 0.0, 1.0]
        } else {
            [0.0, 1.0, 0.0]
        };
        let (xyz, rpy) = if i == 0 {
            (mount_xyz, mount_rpy)
        } else {
            (*off, [0.0; 3])
        };
        let range = if i % 2 == 0 { 2.9 } else { 2.0 };
        joints.push(joint(
            &format!("{prefix}joint{}", i + 1),
            JointType::Revolute,
            &p,
            &child,
            xyz,
            rpy,
            axis,
            lim(-range, range),
        ));
        links.push(LinkSpec {
            name: child.clone(),
            shapes: Vec::new(),
        });
        p = child;
    }
    let palm = format!("{prefix}palm");
    joints.push(joint(
        &format!("{prefix}palm_mount"),
        JointType::Fixed,
        &p,
        &palm,
        [0.0, 0.0, 0.04],
        [0.0; 3],
        [0.0; 3],
        vec![],
    ));
    links.push(LinkSpec {
        name: palm.clone(),
        shapes: Vec::new(),
    });
    (links, joints, palm)
}

fn link(name: &str) -> LinkSpec {
    LinkSpec {
        name: name.into(),
        shapes: Vec::new(),
    }
}

fn grip(name: &str, link: &str) -> EffectorSpec {
    EffectorSpec {
        name: name.into(),
        link: link.into(),
        grip: pose_from_xyz_rpy([0.0, 0.0, 0.1], [0.0; 3]),
    }
}

fn arm7_spec() -> RobotSpec {
    let (links, joints, palm) = arm("", "base", [0.0, 0.0, 0.12], [0.0; 3]);
    RobotSpec {
        name: "arm7".into(),
        links: std::iter::once(link("base")).chain(links).collect(),
        joints,
        effectors: vec![grip("hand", &palm)],
        ..Default::default()
    }
}

fn climber_spec() -> RobotSpec {
    let mut links = vec![link("world"), link("torso")];
    let free = vec![
        Limits {
            lower: -20.0,
            upper: 20.0,
            velocity: 0.5,
            acceleration: 1.0
        };
        3
    ];
    let spin = vec![
        Limits {
            lower: f64::NEG_INFINITY,
            upper: f64::INFINITY,
            velocity: 1.0,
            acceleration: 2.0
        };
        3
    ];
    let mut joints = vec![joint(
        "body_float",
        JointType::Floating,
        "world",
        "torso",
        [0.0; 3],
        [0.0; 3],
        [0.0; 3],
        [free, spin].concat(),
    )];
    let (ll, lj, lp) = arm(
        "left_",
        "torso",
        [0.0, 0.15, 0.14],
        [-std::f64::consts::FRAC_PI_2, 0.0, 0.0],
    );
    let (rl, rj, rp) = arm(
        "right_",
        "torso",
        [0.0, -0.15, 0.14],
        [std::f64::consts::FRAC_PI_2, 0.0, 0.0],
    );
    links.extend(ll.into_iter().chain(rl));
    joints.extend(lj.into_iter().chain(rj));
    RobotSpec {
        name: "climber".into(),
        links,
        joints,
        effectors: vec![grip("left_hand", &lp), grip("right_hand", &rp)],
        ..Default::default()
    }
}

fn mobile_spec() -> RobotSpec {
    let mut links = vec![
        link("world"),
        link("carriage_x"),
        link("carriage_y"),
        link("chassis"),
    ];
    let mut joints = vec![
        joint(
            "base_x",
            JointType::Prismatic,
            "world",
            "carriage_x",
            [0.0; 3],
            [0.0; 3],
            [1.0, 0.0, 0.0],
            lim(-15.0, 15.0),
        ),
        joint(
            "base_y",
            JointType::Prismatic,
            "carriage_x",
            "carriage_y",
            [0.0; 3],
            [0.0; 3],
            [0.0, 1.0, 0.0],
            lim(-15.0, 15.0),
        ),
        joint(
            "base_yaw",
            JointType::Revolute,
            "carriage_y",
            "chassis",
            [0.0; 3],
            [0.0; 3],
            [0.0, 0.0, 1.0],
            lim(-3.1, 3.1),
        ),
    ];
    let (al, aj, ap) = arm("arm_", "chassis", [0.2, 0.0, 0.35], [0.0; 3]);
    links.extend(al);
    joints.extend(aj);
    RobotSpec {
        name: "mobile".into(),
        links,
        joints,
        effectors: vec![grip("hand", &ap)],
        ..Default::default()
    }
}

/// Every joint type: oblique revolute and prismatic axes, fixed joints, a branching tree,
/// a floating root and a second floating joint below a revolute one (a carried body),
/// an unbounded revolute joint, and rotations within 1e-7 of pitch = +-pi/2 (as a URDF
/// author writing 1.5707963 produces), where a roll-pitch-yaw export must not lose digits.
#[allow(clippy::approx_constant)] // 1.5707963: deliberately NOT exactly pi/2
fn mixed_spec() -> RobotSpec {
    let unbounded = vec![];
    RobotSpec {
        name: "mixed".into(),
        links: ["world", "torso", "a1", "a2", "a3", "b1", "b2", "b3"]
            .iter()
            .map(|n| link(n))
            .collect(),
        joints: vec![
            joint(
                "float",
                JointType::Floating,
                "world",
                "torso",
                [0.3, -0.2, 0.5],
                [0.2, -0.4, 0.9],
                [0.0; 3],
                unbounded.clone(),
            ),
            joint(
                "a_rev",
                JointType::Revolute,
                "torso",
                "a1",
                [0.1, 0.2, 0.3],
                [0.3, 0.5, -0.2],
                [1.0, -2.0, 0.5],
                lim(-2.5, 2.5),
            ),
            joint(
                "a_pri",
                JointType::Prismatic,
                "a1",
                "a2",
                [0.0, 0.0, 0.35],
                [-0.6, 0.1, 0.0],
                [0.3, 0.4, -1.0],
                lim(-0.4, 0.6),
            ),
            joint(
                "a_fix",
                JointType::Fixed,
                "a2",
                "a3",
                [0.05, -0.1, 0.2],
                [0.4, 1.5707963, -1.1],
                [0.0; 3],
                vec![],
            ),
            joint(
                "b_rev1",
                JointType::Revolute,
                "torso",
                "b1",
                [-0.1, -0.2, 0.3],
                [0.0, 0.0, 0.7],
                [0.0, 1.0, 0.0],
                unbounded.clone(),
            ),
            joint(
                "b_rev2",
                JointType::Revolute,
                "b1",
                "b2",
                [0.0, 0.0, 0.3],
                [1.2, 0.0, 0.0],
                [0.2, 0.9, 0.4],
                lim(-3.0, 3.0),
            ),
            joint(
                "b_float",
                JointType::Floating,
                "b2",
                "b3",
                [0.0, 0.1, 0.25],
                [0.0, 0.3, 0.0],
                [0.0; 3],
                unbounded,
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
                grip: pose_from_xyz_rpy([0.07, 0.0, 0.1], [-0.5, -1.57079632, 1.0]),
            },
        ],
        ..Default::default()
    }
}

// ---------------------------------------------------------------------------------------
