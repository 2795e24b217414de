//! The robot model: an immutable kinematic tree with limits, effectors and collision shapes.

use std::collections::HashMap;

use nalgebra::{Unit, Vector3};

use super::error::{ItemKind, Locator, ModelError};
use super::joint::{Joint, JointId, JointKind, Limits};
use super::shape::{Geometry, Shape};
use crate::math::Pose;

/// Index of a link in [`Robot::links`]. Link 0 is the root; every other link's parent has
/// a smaller index (links are stored in topological order).
pub type LinkId = usize;

/// A rigid body of the robot.
#[derive(Clone, Debug)]
pub struct Link {
    pub name: String,
    /// The joint whose child this link is; `None` only for the root.
    pub parent_joint: Option<JointId>,
    /// Collision shapes, placed in the link frame.
    pub shapes: Vec<Shape>,
}

/// A frame that can grip: hand, gripper, foot. The grip frame (TCP) is fixed on a link.
#[derive(Clone, Debug)]
pub struct Effector {
    pub name: String,
    pub link: LinkId,
    /// Grip frame in the link frame.
    pub grip: Pose,
}

/// An immutable robot model. Cheap to share across threads (`Send + Sync`); all
/// kinematics are pure functions of it and a configuration `q`.
#[derive(Clone, Debug)]
pub struct Robot {
    name: String,
    links: Vec<Link>,
    joints: Vec<Joint>,
    effectors: Vec<Effector>,
    ignored_pairs: Vec<(LinkId, LinkId)>,
    nq: usize,
    nv: usize,
}

impl Robot {
    pub fn name(&self) -> &str {
        &self.name
    }
    /// Links in topological order; `links()[0]` is the root.
    pub fn links(&self) -> &[Link] {
        &self.links
    }
    /// Joints ordered like their child links: `joints()[i].child == i + 1`.
    pub fn joints(&self) -> &[Joint] {
        &self.joints
    }
    pub fn effectors(&self) -> &[Effector] {
        &self.effectors
    }
    /// Length of a configuration vector `q`.
    pub fn nq(&self) -> usize {
        self.nq
    }
    /// Number of degrees of freedom: length of a tangent vector, columns of a Jacobian.
    pub fn nv(&self) -> usize {
        self.nv
    }
    /// Link pairs never checked against each other for self-collision, each as
    /// `(smaller, larger)` index, sorted.
    pub fn ignored_pairs(&self) -> &[(LinkId, LinkId)] {
        &self.ignored_pairs
    }
    pub fn is_ignored_pair(&self, a: LinkId, b: LinkId) -> bool {
        let key = (a.min(b), a.max(b));
        self.ignored_pairs.binary_search(&key).is_ok()
    }
    pub fn link_id(&self, name: &str) -> Option<LinkId> {
        self.links.iter().position(|l| l.name == name)
    }
    pub fn joint_id(&self, name: &str) -> Option<JointId> {
        self.joints.iter().position(|j| j.name == name)
    }
    pub fn effector(&self, name: &str) -> Option<&Effector> {
        self.effectors.iter().find(|e| e.name == name)
    }
    /// Parent link of `link` (None for the root).
    pub fn parent_link(&self, link: LinkId) -> Option<LinkId> {
        self.links[link].parent_joint.map(|j| self.joints[j].parent)
    }
    /// Limits of every tangent coordinate, in tangent order (length `nv`).
    pub fn tangent_limits(&self) -> impl Iterator<Item = &Limits> {
        self.joints.iter().flat_map(|j| j.limits.iter())
    }
    /// A readable name for every tangent coordinate (`joint` for one-DOF joints,
    /// `joint.x` ... `joint.wz` for a floating joint).
    pub fn dof_names(&self) -> Vec<String> {
        let mut out = Vec::with_capacity(self.nv);
        for j in &self.joints {
            match j.kind {
                JointKind::Floating => {
                    for s in ["x", "y", "z", "wx", "wy", "wz"] {
                        out.push(format!("{}.{}", j.name, s));
                    }
                }
                JointKind::Fixed => {}
                _ => out.push(j.name.clone()),
            }
        }
        out
    }
    /// Number of passive (mechanism) tangent coordinates.
    pub fn passive_dof(&self) -> usize {
        self.joints
            .iter()
            .filter(|j| j.passive)
            .map(|j| j.kind.nv())
            .sum()
    }
}

// ---------------------------------------------------------------------------------------
// Description and builder

/// Joint type as written in a description, before the axis is checked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum JointType {
    Revolute,
    Prismatic,
    Fixed,
    Floating,
}

/// A link as described in a file.
#[derive(Clone, Debug, Default)]
pub struct LinkSpec {
    pub name: String,
    pub shapes: Vec<Shape>,
}

/// A joint as described in a file.
#[derive(Clone, Debug)]
pub struct JointSpec {
    pub name: String,
    pub joint_type: JointType,
    pub parent: String,
    pub child: String,
    pub origin: Pose,
    /// Need not be unit length; must not be zero for revolute and prismatic joints.
    pub axis: Vector3<f64>,
    /// Empty: unbounded. Otherwise one entry per tangent coordinate of the joint type
    /// (1 for revolute/prismatic, 6 for floating).
    pub limits: Vec<Limits>,
    pub passive: bool,
}

/// An effector as described in a file.
#[derive(Clone, Debug)]
pub struct EffectorSpec {
    pub name: String,
    pub link: String,
    pub grip: Pose,
}

/// A format-independent robot description. Both the TOML and the URDF loader produce one;
/// [`RobotSpec::build`] checks it and makes the [`Robot`].
#[derive(Clone, Debug)]
pub struct RobotSpec {
    pub name: String,
    pub links: Vec<LinkSpec>,
    pub joints: Vec<JointSpec>,
    pub effectors: Vec<EffectorSpec>,
    /// Extra link pairs never checked for self-collision.
    pub ignored_pairs: Vec<(String, String)>,
    /// Also ignore every parent-child link pair (default true).
    pub ignore_adjacent: bool,
}

impl Default for RobotSpec {
    fn default() -> Self {
        RobotSpec {
            name: String::new(),
            links: Vec::new(),
            joints: Vec::new(),
            effectors: Vec::new(),
            ignored_pairs: Vec::new(),
            ignore_adjacent: true,
        }
    }
}

fn check_finite(item: &str, field: &'static str, v: f64, at: Locator) -> Result<(), ModelError> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(ModelError::NotFinite {
            item: item.to_string(),
            field,
            value: v,
            at,
        })
    }
}

fn check_pose(item: &str, field: &'static str, p: &Pose, at: Locator) -> Result<(), ModelError> {
    for v in p
        .translation
        .vector
        .iter()
        .chain(p.rotation.matrix().iter())
    {
        check_finite(item, field, *v, at)?;
    }
    Ok(())
}

fn check_positive(item: &str, field: &'static str, v: f64, at: Locator) -> Result<(), ModelError> {
    check_finite(item, field, v, at)?;
    if v > 0.0 {
        Ok(())
    } else {
        Err(ModelError::NotPositive {
            item: item.to_string(),
            field,
            value: v,
            at,
        })
    }
}

fn check_shape(link: &str, li: usize, si: usize, s: &Shape) -> Result<(), ModelError> {
    let at = Locator {
        kind: ItemKind::Shape,
        index: li,
        sub_index: si,
        field: "origin",
    };
    let item = format!("link `{link}` shape {si}");
    check_pose(&item, "origin", &s.origin, at)?;
    let at = |field| Locator {
        kind: ItemKind::Shape,
        index: li,
        sub_index: si,
        field,
    };
    match &s.geometry {
        Geometry::Sphere { radius } => check_positive(&item, "radius", *radius, at("radius")),
        Geometry::Cuboid { size } => {
            for v in size.iter() {
                check_positive(&item, "size", *v, at("size"))?;
            }
            Ok(())
        }
        Geometry::Capsule { radius, length } | Geometry::Cylinder { radius, length } => {
            check_positive(&item, "radius", *radius, at("radius"))?;
            check_positive(&item, "length", *length, at("length"))
        }
        Geometry::ConvexMesh { points } => {
            if points.len() < 4 {
                return Err(ModelError::BadShape {
                    link: link.to_string(),
                    index: si,
                    reason: format!(
                        "a convex mesh needs at least 4 points, got {}",
                        points.len()
                    ),
                    at: at("mesh"),
                });
            }
            for p in points.iter() {
                for v in p.iter() {
                    check_finite(&item, "mesh", *v, at("mesh"))?;
                }
            }
            Ok(())
        }
        Geometry::TriMesh {
            vertices,
            triangles,
        } => {
            if triangles.is_empty() {
                return Err(ModelError::BadShape {
                    link: link.to_string(),
                    index: si,
                    reason: "a triangle mesh needs at least one triangle".into(),
                    at: at("mesh"),
                });
            }
            for p in vertices.iter() {
                for v in p.iter() {
                    check_finite(&item, "mesh", *v, at("mesh"))?;
                }
            }
            if let Some(t) = triangles
                .iter()
                .find(|t| t.iter().any(|&i| i as usize >= vertices.len()))
            {
                return Err(ModelError::BadShape {
                    link: link.to_string(),
                    index: si,
                    reason: format!(
                        "triangle {t:?} indexes past the {} vertices",
                        vertices.len()
                    ),
                    at: at("mesh"),
                });
            }
            Ok(())
        }
    }
}

fn check_limits(joint: &str, ji: usize, l: &Limits) -> Result<(), ModelError> {
    let at = |field| Locator::new(ItemKind::Joint, ji, field);
    let item = format!("joint `{joint}`");
    if l.lower.is_nan() {
        return Err(ModelError::NotFinite {
            item,
            field: "lower",
            value: l.lower,
            at: at("lower"),
        });
    }
    if l.upper.is_nan() {
        return Err(ModelError::NotFinite {
            item,
            field: "upper",
            value: l.upper,
            at: at("upper"),
        });
    }
    if l.lower > l.upper {
        return Err(ModelError::LimitsReversed {
            joint: joint.to_string(),
            lower: l.lower,
            upper: l.upper,
            at: at("lower"),
        });
    }
    for (field, v) in [("velocity", l.velocity), ("acceleration", l.acceleration)] {
        if v.is_nan() || v <= 0.0 {
            return Err(ModelError::NotPositive {
                item,
                field,
                value: v,
                at: at(field),
            });
        }
    }
    Ok(())
}

fn unique_names<'a>(
    what: &'static str,
    kind: ItemKind,
    names: impl Iterator<Item = &'a str>,
) -> Result<HashMap<&'a str, usize>, ModelError> {
    let mut map = HashMap::new();
    for (i, n) in names.enumerate() {
        if let Some(&first) = map.get(n) {
            return Err(ModelError::DuplicateName {
                what,
                name: n.to_string(),
                first,
                at: Locator::new(kind, i, "name"),
            });
        }
        map.insert(n, i);
    }
    Ok(map)
}

impl RobotSpec {
    /// Check the description and build the model. Errors carry a [`Locator`] naming the
    /// item and field at fault.
    pub fn build(&self) -> Result<Robot, ModelError> {
        if self.links.is_empty() {
            return Err(ModelError::NoLinks);
        }
        let link_ix = unique_names(
            "link",
            ItemKind::Link,
            self.links.iter().map(|l| l.name.as_str()),
        )?;
        unique_names(
            "joint",
            ItemKind::Joint,
            self.joints.iter().map(|j| j.name.as_str()),
        )?;
        unique_names(
            "effector",
            ItemKind::Effector,
            self.effectors.iter().map(|e| e.name.as_str()),
        )?;

        // Resolve joint ends; every link has at most one parent joint.
        let n = self.links.len();
        let mut parent_of: Vec<Option<usize>> = vec![None; n]; // link -> joint (spec index)
        let mut ends = Vec::with_capacity(self.joints.len());
        for (ji, j) in self.joints.iter().enumerate() {
            let find = |name: &str, role: &'static str| {
                link_ix
                    .get(name)
                    .copied()
                    .ok_or_else(|| ModelError::UnknownLink {
                        joint: j.name.clone(),
                        role,
                        link: name.to_string(),
                        at: Locator::new(ItemKind::Joint, ji, role),
                    })
            };
            let p = find(&j.parent, "parent")?;
            let c = find(&j.child, "child")?;
            if p == c {
                return Err(ModelError::Cycle {
                    joint: j.name.clone(),
                    link: j.child.clone(),
                    at: Locator::new(ItemKind::Joint, ji, "child"),
                });
            }
            if let Some(first) = parent_of[c] {
                return Err(ModelError::TwoParents {
                    link: j.child.clone(),
                    first: self.joints[first].name.clone(),
                    second: j.name.clone(),
                    at: Locator::new(ItemKind::Joint, ji, "child"),
                });
            }
            parent_of[c] = Some(ji);
            ends.push((p, c));
        }
        // Cycles: walking up from any link must reach a root within n steps.
        for start in 0..n {
            let mut l = start;
            for _ in 0..=n {
                match parent_of[l] {
                    None => break,
                    Some(ji) => l = ends[ji].0,
                }
            }
            if let Some(ji) = parent_of[l] {
                // Still inside a loop after n steps: l is on the cycle.
                return Err(ModelError::Cycle {
                    joint: self.joints[ji].name.clone(),
                    link: self.links[l].name.clone(),
                    at: Locator::new(ItemKind::Joint, ji, "parent"),
                });
            }
        }
        let roots: Vec<usize> = (0..n).filter(|&l| parent_of[l].is_none()).collect();
        if roots.len() != 1 {
            let names = roots
                .iter()
                .map(|&l| format!("`{}`", self.links[l].name))
                .collect::<Vec<_>>();
            return Err(ModelError::ManyRoots {
                count: roots.len(),
                names: names.join(", "),
                at: Locator::new(ItemKind::Link, roots[1], "name"),
            });
        }

        // Per-item checks.
        for (ji, j) in self.joints.iter().enumerate() {
            let item = format!("joint `{}`", j.name);
            check_pose(
                &item,
                "origin",
                &j.origin,
                Locator::new(ItemKind::Joint, ji, "origin"),
            )?;
            let nv = match j.joint_type {
                JointType::Revolute | JointType::Prismatic => 1,
                JointType::Fixed => 0,
                JointType::Floating => 6,
            };
            if matches!(j.joint_type, JointType::Revolute | JointType::Prismatic) {
                for v in j.axis.iter() {
                    check_finite(&item, "axis", *v, Locator::new(ItemKind::Joint, ji, "axis"))?;
                }
                if j.axis.norm() < 1e-12 {
                    return Err(ModelError::ZeroAxis {
                        joint: j.name.clone(),
                        at: Locator::new(ItemKind::Joint, ji, "axis"),
                    });
                }
            }
            if !j.limits.is_empty() && j.limits.len() != nv {
                return Err(ModelError::LimitCount {
                    joint: j.name.clone(),
                    got: j.limits.len(),
                    expected: nv,
                    at: Locator::new(ItemKind::Joint, ji, "limits"),
                });
            }
            for l in &j.limits {
                check_limits(&j.name, ji, l)?;
            }
        }
        for (li, l) in self.links.iter().enumerate() {
            for (si, s) in l.shapes.iter().enumerate() {
                check_shape(&l.name, li, si, s)?;
            }
        }

        // Topological order: breadth first from the root, children in description order.
        let mut children: Vec<Vec<usize>> = vec![Vec::new(); n]; // link -> joints (spec)
        for (ji, &(p, _)) in ends.iter().enumerate() {
            children[p].push(ji);
        }
        let mut order = vec![roots[0]]; // new index -> spec link index
        let mut joint_order = Vec::with_capacity(self.joints.len()); // spec joint indices
        let mut head = 0;
        while head < order.len() {
            let l = order[head];
            head += 1;
            for &ji in &children[l] {
                joint_order.push(ji);
                order.push(ends[ji].1);
            }
        }
        let mut new_index = vec![0usize; n];
        for (new, &old) in order.iter().enumerate() {
            new_index[old] = new;
        }

        let mut joints = Vec::with_capacity(joint_order.len());
        let (mut qi, mut vi) = (0, 0);
        for &ji in &joint_order {
            let j = &self.joints[ji];
            let kind = match j.joint_type {
                JointType::Revolute => JointKind::Revolute {
                    axis: Unit::new_normalize(j.axis),
                },
                JointType::Prismatic => JointKind::Prismatic {
                    axis: Unit::new_normalize(j.axis),
                },
                JointType::Fixed => JointKind::Fixed,
                JointType::Floating => JointKind::Floating,
            };
            let limits = if j.limits.is_empty() {
                vec![Limits::UNBOUNDED; kind.nv()]
            } else {
                j.limits.clone()
            };
            let (nq, nv) = (kind.nq(), kind.nv());
            joints.push(Joint {
                name: j.name.clone(),
                kind,
                parent: new_index[ends[ji].0],
                child: new_index[ends[ji].1],
                origin: j.origin,
                limits,
                passive: j.passive,
                q_index: qi,
                v_index: vi,
            });
            qi += nq;
            vi += nv;
        }
        let links: Vec<Link> = order
            .iter()
            .enumerate()
            .map(|(new, &old)| Link {
                name: self.links[old].name.clone(),
                parent_joint: if new == 0 { None } else { Some(new - 1) },
                shapes: self.links[old].shapes.clone(),
            })
            .collect();
        debug_assert!(joints.iter().enumerate().all(|(i, j)| j.child == i + 1));

        let mut effectors = Vec::with_capacity(self.effectors.len());
        for (ei, e) in self.effectors.iter().enumerate() {
            let link = link_ix.get(e.link.as_str()).copied().ok_or_else(|| {
                ModelError::UnknownEffectorLink {
                    effector: e.name.clone(),
                    link: e.link.clone(),
                    at: Locator::new(ItemKind::Effector, ei, "link"),
                }
            })?;
            check_pose(
                &format!("effector `{}`", e.name),
                "grip",
                &e.grip,
                Locator::new(ItemKind::Effector, ei, "grip"),
            )?;
            effectors.push(Effector {
                name: e.name.clone(),
                link: new_index[link],
                grip: e.grip,
            });
        }

        let mut ignored = Vec::new();
        for (pi, (a, b)) in self.ignored_pairs.iter().enumerate() {
            let find = |name: &String, field| {
                link_ix
                    .get(name.as_str())
                    .copied()
                    .ok_or_else(|| ModelError::UnknownPairLink {
                        link: name.clone(),
                        at: Locator::new(ItemKind::IgnoredPair, pi, field),
                    })
            };
            let (a, b) = (new_index[find(a, "first")?], new_index[find(b, "second")?]);
            ignored.push((a.min(b), a.max(b)));
        }
        if self.ignore_adjacent {
            for j in &joints {
                ignored.push((j.parent.min(j.child), j.parent.max(j.child)));
            }
        }
        ignored.sort_unstable();
        ignored.dedup();

        Ok(Robot {
            name: self.name.clone(),
            links,
            joints,
            effectors,
            ignored_pairs: ignored,
            nq: qi,
            nv: vi,
        })
    }
}
