//! Reach bounds: how far apart two frames of a robot can possibly be, from link geometry
//! alone (no joint values). Cheap and conservative; planners use it to prune holds that no
//! configuration can reach before spending projections on them.
//!
//! The bound (triangle inequality along the kinematic tree): a link frame's origin sits at
//! its joint's origin in the parent frame, moved by the joint's motion. A revolute or fixed
//! joint does not move that point, a prismatic joint moves it by at most the larger of its
//! limits, a floating joint by at most the norm of its translation limit box. So the distance
//! between a frame and its parent's origin is at most `|joint origin| + motion bound`, and the
//! distance between two frames is at most the sum of such segments along the tree path
//! between them. At the lowest common ancestor the two branches' joint origins are fixed
//! points of one frame, so their direct distance is used instead of two segments through that
//! frame's origin.

use nalgebra::{Point3, Vector3};
use thiserror::Error;

use crate::model::{JointKind, LinkId, Robot};
use crate::scene::Hold;

/// A reach query that names something the robot does not have.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ReachError {
    #[error("robot `{robot}` has no effector `{name}`")]
    NoSuchEffector { robot: String, name: String },
    #[error("robot `{robot}` has no link `{name}`")]
    NoSuchLink { robot: String, name: String },
    #[error("link index {0} is out of range")]
    LinkOutOfRange(LinkId),
}

/// Largest distance a joint's motion can move its child frame's origin away from the joint
/// origin (metres). Infinite for unbounded translation.
fn motion_bound(robot: &Robot, link: LinkId) -> f64 {
    let Some(j) = robot.links()[link].parent_joint.map(|j| &robot.joints()[j]) else {
        return 0.0;
    };
    match j.kind {
        JointKind::Revolute { .. } | JointKind::Fixed => 0.0,
        JointKind::Prismatic { .. } => match j.limits.first() {
            Some(l) => l.lower.abs().max(l.upper.abs()),
            None => f64::INFINITY,
        },
        JointKind::Floating => {
            if j.limits.len() < 3 {
                return f64::INFINITY;
            }
            let corner: f64 = j.limits[..3]
                .iter()
                .map(|l| l.lower.abs().max(l.upper.abs()).powi(2))
                .sum();
            corner.sqrt()
        }
    }
}

/// The joint origin of `link` in its parent's frame (zero for the root).
fn anchor(robot: &Robot, link: LinkId) -> Vector3<f64> {
    robot.links()[link]
        .parent_joint
        .map_or_else(Vector3::zeros, |j| {
            robot.joints()[j].origin.translation.vector
        })
}

/// Links from `link` up to the root, `link` first.
fn ancestry(robot: &Robot, link: LinkId) -> Vec<LinkId> {
    let mut out = vec![link];
    let mut l = link;
    while let Some(p) = robot.parent_link(l) {
        out.push(p);
        l = p;
    }
    out
}

/// One branch of the path: from a point (`offset` in `link`'s frame) up to, but excluding,
/// `top`. Returns the bound on the distance from the point to the branch's anchor point in
/// `top`'s frame, and that anchor point.
fn branch(robot: &Robot, path: &[LinkId], offset: Vector3<f64>) -> (f64, Vector3<f64>) {
    // `path` runs from the start link up to the child of the common ancestor; empty when the
    // start link is the common ancestor itself.
    let Some((&last, below)) = path.split_last() else {
        return (0.0, offset);
    };
    let mut bound = offset.norm();
    for &l in below {
        bound += anchor(robot, l).norm() + motion_bound(robot, l);
    }
    bound += motion_bound(robot, last);
    (bound, anchor(robot, last))
}

/// Upper bound on the distance between the point `offset_a` fixed in link `a` and the point
/// `offset_b` fixed in link `b`, over every configuration (metres; may be infinite when an
/// unbounded prismatic or floating joint lies on the path).
pub fn link_point_bound(
    robot: &Robot,
    a: LinkId,
    offset_a: Vector3<f64>,
    b: LinkId,
    offset_b: Vector3<f64>,
) -> Result<f64, ReachError> {
    for l in [a, b] {
        if l >= robot.links().len() {
            return Err(ReachError::LinkOutOfRange(l));
        }
    }
    let up_a = ancestry(robot, a);
    let up_b = ancestry(robot, b);
    // Lowest common ancestor: the first link of a's ancestry that is also b's ancestor. The
    // root is common to both, so one is found.
    let (ia, lca) = up_a
        .iter()
        .enumerate()
        .find(|(_, l)| up_b.contains(l))
        .map(|(i, &l)| (i, l))
        .unwrap_or((up_a.len() - 1, 0));
    let ib = up_b
        .iter()
        .position(|&l| l == lca)
        .unwrap_or(up_b.len() - 1);
    let (ba, pa) = branch(robot, &up_a[..ia], offset_a);
    let (bb, pb) = branch(robot, &up_b[..ib], offset_b);
    Ok(ba + (pa - pb).norm() + bb)
}

fn effector_point(robot: &Robot, name: &str) -> Result<(LinkId, Vector3<f64>), ReachError> {
    robot
        .effector(name)
        .map(|e| (e.link, e.grip.translation.vector))
        .ok_or_else(|| ReachError::NoSuchEffector {
            robot: robot.name().to_string(),
            name: name.to_string(),
        })
}

/// Upper bound on the distance between the grip frames of effectors `a` and `b`: no two holds
/// farther apart than this can be held by them at once.
pub fn effector_span(robot: &Robot, a: &str, b: &str) -> Result<f64, ReachError> {
    let (la, oa) = effector_point(robot, a)?;
    let (lb, ob) = effector_point(robot, b)?;
    link_point_bound(robot, la, oa, lb, ob)
}

/// Upper bound on the distance from the origin of link `link` to effector `effector`'s grip
/// frame (for a climber: how far a hand can be from its torso).
pub fn effector_reach(robot: &Robot, effector: &str, link: &str) -> Result<f64, ReachError> {
    let (le, oe) = effector_point(robot, effector)?;
    let l = robot.link_id(link).ok_or_else(|| ReachError::NoSuchLink {
        robot: robot.name().to_string(),
        name: link.to_string(),
    })?;
    link_point_bound(robot, l, Vector3::zeros(), le, oe)
}

/// Closest distance between two segments `[p0, p1]` and `[q0, q1]` (either may be a point).
///
/// Written by hand (a dozen lines): clamp the unconstrained closest-point parameters of the
/// two lines into `[0, 1]`, re-solving for the other parameter after each clamp (the method
/// of Ericson, *Real-Time Collision Detection*, 2005, section 5.1.9).
pub fn segment_distance(
    p0: &Point3<f64>,
    p1: &Point3<f64>,
    q0: &Point3<f64>,
    q1: &Point3<f64>,
) -> f64 {
    let d1 = p1 - p0;
    let d2 = q1 - q0;
    let r = p0 - q0;
    let a = d1.norm_squared();
    let e = d2.norm_squared();
    let f = d2.dot(&r);
    let eps = 1e-18;
    let (s, t) = if a <= eps && e <= eps {
        (0.0, 0.0)
    } else if a <= eps {
        (0.0, (f / e).clamp(0.0, 1.0))
    } else {
        let c = d1.dot(&r);
        if e <= eps {
            ((-c / a).clamp(0.0, 1.0), 0.0)
        } else {
            let b = d1.dot(&d2);
            let denom = a * e - b * b;
            let mut s = if denom > eps * a * e {
                ((b * f - c * e) / denom).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let mut t = (b * s + f) / e;
            if t < 0.0 {
                t = 0.0;
                s = (-c / a).clamp(0.0, 1.0);
            } else if t > 1.0 {
                t = 1.0;
                s = ((b - c) / a).clamp(0.0, 1.0);
            }
            (s, t)
        }
    };
    ((p0 + d1 * s) - (q0 + d2 * t)).norm()
}

/// The fixed geometry of a hold as a segment (a point hold is a zero-length segment);
/// `None` for a handle, which moves with its mechanism.
pub fn hold_segment(hold: &Hold) -> Option<(Point3<f64>, Point3<f64>)> {
    use crate::scene::HoldKind;
    match &hold.kind {
        HoldKind::Point { pose, .. } => {
            let p = Point3::from(pose.translation.vector);
            Some((p, p))
        }
        HoldKind::Bar { start, end, .. } => Some((*start, *end)),
        _ => None,
    }
}

/// Closest distance between the grip points of two fixed holds (`None` if either is a
/// handle). Two effectors whose [`effector_span`] is below this cannot hold both at once.
pub fn hold_distance(a: &Hold, b: &Hold) -> Option<f64> {
    let (a0, a1) = hold_segment(a)?;
    let (b0, b1) = hold_segment(b)?;
    Some(segment_distance(&a0, &a1, &b0, &b1))
}
