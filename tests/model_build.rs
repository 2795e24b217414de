//! Building robot models from descriptions: tree ordering, coordinate layout and the
//! structural errors every file format relies on.

use clamber::math::Pose;
use clamber::model::{ItemKind, JointSpec, JointType, Limits, LinkSpec, ModelError, RobotSpec};
use nalgebra::Vector3;

fn link(name: &str) -> LinkSpec {
    LinkSpec {
        name: name.into(),
        shapes: vec![],
    }
}

fn joint(name: &str, t: JointType, parent: &str, child: &str) -> JointSpec {
    JointSpec {
        name: name.into(),
        joint_type: t,
        parent: parent.into(),
        child: child.into(),
        origin: Pose::identity(),
        axis: Vector3::z(),
        limits: vec![],
        passive: false,
    }
}

/// A branching tree given out of order: two arms on a floating torso.
fn tree() -> RobotSpec {
    RobotSpec {
        name: "tree".into(),
        links: ["left2", "world", "torso", "right1", "left1"]
            .into_iter()
            .map(link)
            .collect(),
        joints: vec![
            joint("l2", JointType::Prismatic, "left1", "left2"),
            joint("r1", JointType::Revolute, "torso", "right1"),
            joint("float", JointType::Floating, "world", "torso"),
            joint("l1", JointType::Revolute, "torso", "left1"),
        ],
        ..Default::default()
    }
}

#[test]
fn tree_is_ordered_parents_first_and_coordinates_are_laid_out_in_that_order() {
    let r = tree().build().unwrap();
    assert_eq!(r.links()[0].name, "world");
    assert_eq!((r.nq(), r.nv()), (7 + 1 + 1 + 1, 6 + 1 + 1 + 1));
    for (i, j) in r.joints().iter().enumerate() {
        assert_eq!(j.child, i + 1);
        assert!(j.parent < j.child, "parent before child");
        assert_eq!(r.links()[j.child].parent_joint, Some(i));
    }
    let names: Vec<_> = r.joints().iter().map(|j| j.name.as_str()).collect();
    assert_eq!(names, ["float", "r1", "l1", "l2"]);
    let offsets: Vec<_> = r.joints().iter().map(|j| (j.q_index, j.v_index)).collect();
    assert_eq!(offsets, [(0, 0), (7, 6), (8, 7), (9, 8)]);
    assert_eq!(r.dof_names().len(), r.nv());
    // Adjacent pairs are ignored for self-collision by default; non-adjacent are not.
    let (t, l2) = (r.link_id("torso").unwrap(), r.link_id("left2").unwrap());
    let l1 = r.link_id("left1").unwrap();
    assert!(r.is_ignored_pair(t, l1) && r.is_ignored_pair(l1, l2));
    assert!(!r.is_ignored_pair(t, l2));
}

#[test]
fn robot_is_send_and_sync() {
    fn assert_send_sync<T: Send + Sync>() {}
    assert_send_sync::<clamber::Robot>();
}

fn err(spec: RobotSpec) -> ModelError {
    spec.build().expect_err("description should be rejected")
}

#[test]
fn structural_errors_name_the_item_at_fault() {
    let mut s = tree();
    s.joints[0].parent = "nowhere".into();
    let e = err(s);
    assert!(matches!(e, ModelError::UnknownLink { .. }), "{e}");
    let at = e.locator().unwrap();
    assert_eq!(
        (at.kind, at.index, at.field),
        (ItemKind::Joint, 0, "parent")
    );

    let mut s = tree();
    s.joints
        .push(joint("again", JointType::Fixed, "world", "left2"));
    assert!(matches!(err(s), ModelError::TwoParents { .. }));

    // left1 -> left2 -> left1 closes a loop (and torso has no path to them).
    let mut s = tree();
    s.joints[3] = joint("l1", JointType::Revolute, "left2", "left1");
    let e = err(s);
    assert!(matches!(e, ModelError::Cycle { .. }), "{e}");

    let mut s = tree();
    s.links.push(link("stray"));
    let e = err(s);
    assert!(matches!(e, ModelError::ManyRoots { count: 2, .. }), "{e}");

    let mut s = tree();
    s.links.push(link("torso"));
    let e = err(s);
    assert!(
        matches!(e, ModelError::DuplicateName { what: "link", .. }),
        "{e}"
    );
    assert_eq!(e.locator().unwrap().index, 5);

    let mut s = tree();
    s.joints[1].axis = Vector3::zeros();
    assert!(matches!(err(s), ModelError::ZeroAxis { .. }));

    let mut s = tree();
    s.joints[1].limits = vec![Limits {
        lower: 1.0,
        upper: -1.0,
        velocity: 1.0,
        acceleration: 1.0,
    }];
    assert!(matches!(err(s), ModelError::LimitsReversed { .. }));

    let mut s = tree();
    s.joints[1].limits = vec![Limits {
        lower: f64::NAN,
        upper: 1.0,
        velocity: 1.0,
        acceleration: 1.0,
    }];
    assert!(matches!(err(s), ModelError::NotFinite { .. }));

    let mut s = tree();
    s.joints[2].origin.translation.vector.x = f64::INFINITY;
    let e = err(s);
    assert!(
        matches!(
            e,
            ModelError::NotFinite {
                field: "origin",
                ..
            }
        ),
        "{e}"
    );

    let mut s = tree();
    s.joints[2].limits = vec![Limits::UNBOUNDED];
    assert!(matches!(
        err(s),
        ModelError::LimitCount {
            got: 1,
            expected: 6,
            ..
        }
    ));
}
