//! Robots built in code for tests (independent of the file loaders).
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
