//! URDF robot files: reading them into a [`RobotSpec`] and writing any [`Robot`] as URDF.
//!
//! # Reading
//! The values are read by the `urdf-rs` crate. That crate reports errors without a place
//! in the file and is lenient with numbers (`xyz="1 x 2 3"` reads as `1 2 3`), so the text
//! is first parsed with `roxmltree`, which gives line and column of every element and of
//! malformed XML, and every element and attribute Clamber uses is checked there. The
//! element positions also map model errors ([`crate::model::ModelError::locator`]) back to
//! the line of the `<joint>`, `<limit>`, `<collision>` ... at fault.
//!
//! How URDF maps onto the model:
//! - `revolute`, `prismatic`, `fixed`, `floating` joints map one to one; `continuous` is a
//!   revolute joint with unbounded position (its `<limit>` is optional and only its
//!   `velocity` is used). `planar` and `spherical` joints are rejected with an error.
//! - `<limit>` is required on revolute and prismatic joints (as the URDF specification
//!   says). `lower`/`upper`/`velocity` follow `urdf-rs`: before URDF 1.2 a missing bound
//!   is 0 and `velocity` is required; from 1.2 a missing value is unbounded. URDF before
//!   1.2 has no `acceleration`; Clamber reads that attribute in every version (other URDF
//!   readers ignore it) and leaves the bound infinite without it. A bound of magnitude
//!   `f64::MAX` (1.7976931348623157e308) reads as infinite: that is how [`write_urdf`]
//!   writes unbounded limits, because URDF readers cannot parse `inf`. A `<limit>` on a
//!   fixed or floating joint is ignored. `velocity="0"` is refused by the model (a joint
//!   that may not move is no use to a planner).
//! - `<mimic>` is ignored without an error: the joint is imported as an independent joint.
//!   Coupled joints (mostly gripper fingers) are thus free in the planner; a robot whose
//!   mimic joints matter must be written in the TOML format with the coupling removed.
//! - `<collision>` elements become shapes: `box`, `sphere`, `cylinder`, `capsule` and
//!   `mesh` (STL or OBJ, read by [`super::mesh::load_mesh`] as a convex hull, since URDF has
//!   no way to ask for a triangle mesh). Mesh file names may be relative to the URDF file,
//!   absolute, `file://` URIs or `package://NAME/rest`, which is read as `rest` relative to
//!   the directory of the URDF file (there is no package search path).
//! - `<visual>` and `<inertial>` are checked for form but not used.
//! - URDF has no effectors. Clamber reads an extension element at the top level,
//!   `<clamber_effector name=".." link=".."><origin xyz=".." rpy=".."/></clamber_effector>`;
//!   other URDF readers skip unknown elements (`urdf-rs` drops them before parsing).
//!
//! # Writing
//! See [`write_urdf_with`].

// `RobotFileError` (shared with the TOML reader) is large because it carries a
// `ModelError`; boxing belongs in that shared type, not here.
#![allow(clippy::result_large_err)]

use std::collections::HashSet;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use nalgebra::{Translation3, Vector3};
use roxmltree::{Document, Node};

use super::mesh::load_mesh;
use super::RobotFileError;
use crate::math::{pose_from_xyz_rpy, rpy_of, Pose};
use crate::model::{
    EffectorSpec, Geometry, ItemKind, JointKind, JointSpec, JointType, Limits, LinkSpec, Locator,
    MeshSource, Robot, RobotSpec, Shape,
};

/// Name of the top-level extension element that declares an effector.
pub const EFFECTOR_ELEMENT: &str = "clamber_effector";

// ---------------------------------------------------------------------------------------
// Source positions

#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
struct Pos {
    line: usize,
    column: usize,
}

#[derive(Clone, Debug, Default)]
struct ShapePos {
    at: Pos,
    origin: Option<Pos>,
    /// The `<box>`, `<sphere>` ... element and its name.
    geometry: Pos,
    geometry_name: String,
}

#[derive(Clone, Debug, Default)]
struct LinkPos {
    at: Pos,
    shapes: Vec<ShapePos>,
}

#[derive(Clone, Debug, Default)]
struct JointPos {
    at: Pos,
    origin: Option<Pos>,
    axis: Option<Pos>,
    limit: Option<Pos>,
    parent: Option<Pos>,
    child: Option<Pos>,
}

#[derive(Clone, Debug, Default)]
struct EffectorPos {
    at: Pos,
    origin: Option<Pos>,
}

/// Source positions of the items of a URDF file, in the order of the [`RobotSpec`] built
/// from it, used to map a [`Locator`] to line/column.
#[derive(Clone, Debug, Default)]
pub struct SourceMap {
    robot: Pos,
    links: Vec<LinkPos>,
    joints: Vec<JointPos>,
    effectors: Vec<EffectorPos>,
}

impl SourceMap {
    /// Line and column (1-based) of the element that `at` points to, and the name of the
    /// field as written in URDF. Without a locator (or with one that does not fit), the
    /// `<robot>` element.
    pub fn locate(&self, at: Option<&Locator>) -> (usize, usize, String) {
        let found = at.and_then(|at| self.find(at));
        let (pos, field) =
            found.unwrap_or_else(|| (self.robot, at.map_or("robot", |a| a.field).to_string()));
        (pos.line, pos.column, field)
    }

    fn find(&self, at: &Locator) -> Option<(Pos, String)> {
        match at.kind {
            ItemKind::Robot | ItemKind::IgnoredPair => Some((self.robot, at.field.to_string())),
            ItemKind::Link => Some((self.links.get(at.index)?.at, format!("link {}", at.field))),
            ItemKind::Joint => {
                let j = self.joints.get(at.index)?;
                let (pos, field) = match at.field {
                    "origin" => (j.origin, "origin".to_string()),
                    "axis" => (j.axis, "axis xyz".to_string()),
                    "parent" => (j.parent, "parent link".to_string()),
                    "child" => (j.child, "child link".to_string()),
                    "limits" => (j.limit, "limit".to_string()),
                    f @ ("lower" | "upper" | "velocity" | "acceleration") => {
                        (j.limit, format!("limit {f}"))
                    }
                    f => (None, format!("joint {f}")),
                };
                Some((pos.unwrap_or(j.at), field))
            }
            ItemKind::Shape => {
                let s = self.links.get(at.index)?.shapes.get(at.sub_index)?;
                Some(match at.field {
                    "origin" => (s.origin.unwrap_or(s.at), "collision origin".to_string()),
                    "mesh" => (s.geometry, "mesh filename".to_string()),
                    f => (s.geometry, format!("{} {f}", s.geometry_name)),
                })
            }
            ItemKind::Effector => {
                let e = self.effectors.get(at.index)?;
                Some(match at.field {
                    "grip" => (
                        e.origin.unwrap_or(e.at),
                        format!("{EFFECTOR_ELEMENT} origin"),
                    ),
                    f => (e.at, format!("{EFFECTOR_ELEMENT} {f}")),
                })
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// Reading

/// What the checking pass learns about a joint that `urdf-rs` does not tell.
struct JointExtra {
    has_limit: bool,
    /// The `acceleration` attribute of `<limit>`, read in every URDF version.
    acceleration: Option<f64>,
}

struct Checker<'a, 'input> {
    path: &'a Path,
    doc: &'a Document<'input>,
    /// URDF 1.2 or later (missing limit values mean unbounded).
    v1_2: bool,
}

impl<'input> Checker<'_, 'input> {
    fn pos_of(&self, byte: usize) -> Pos {
        let p = self.doc.text_pos_at(byte);
        Pos {
            line: p.row as usize,
            column: p.col as usize,
        }
    }

    fn pos(&self, node: Node<'_, 'input>) -> Pos {
        self.pos_of(node.range().start)
    }

    fn err(&self, pos: Pos, message: impl Into<String>) -> RobotFileError {
        RobotFileError::Syntax {
            path: self.path.to_path_buf(),
            line: pos.line,
            column: pos.column,
            message: message.into(),
        }
    }

    fn attr_pos(&self, node: Node<'_, 'input>, name: &str) -> Pos {
        match node.attribute_node(name) {
            Some(a) => self.pos_of(a.range_value().start),
            None => self.pos(node),
        }
    }

    fn required_attr<'n>(
        &self,
        node: Node<'n, 'input>,
        name: &str,
    ) -> Result<&'n str, RobotFileError> {
        node.attribute(name).ok_or_else(|| {
            self.err(
                self.pos(node),
                format!("<{}> needs a `{name}` attribute", node.tag_name().name()),
            )
        })
    }

    /// The attribute as exactly `n` numbers separated by white space, if present.
    fn numbers(
        &self,
        node: Node<'_, 'input>,
        name: &str,
        n: usize,
    ) -> Result<Option<Vec<f64>>, RobotFileError> {
        let Some(text) = node.attribute(name) else {
            return Ok(None);
        };
        let values: Result<Vec<f64>, _> = text.split_whitespace().map(str::parse::<f64>).collect();
        match values {
            Ok(v) if v.len() == n => Ok(Some(v)),
            _ => {
                let what = if n == 1 {
                    "a number".to_string()
                } else {
                    format!("{n} numbers separated by spaces")
                };
                Err(self.err(
                    self.attr_pos(node, name),
                    format!(
                        "`{name}` of <{}>: expected {what}, got `{text}`",
                        node.tag_name().name()
                    ),
                ))
            }
        }
    }

    fn required_numbers(
        &self,
        node: Node<'_, 'input>,
        name: &str,
        n: usize,
    ) -> Result<Vec<f64>, RobotFileError> {
        self.numbers(node, name, n)?.ok_or_else(|| {
            self.err(
                self.pos(node),
                format!("<{}> needs a `{name}` attribute", node.tag_name().name()),
            )
        })
    }

    fn origin(&self, parent: Node<'_, 'input>) -> Result<Option<(Pos, Pose)>, RobotFileError> {
        let Some(o) = child(parent, "origin") else {
            return Ok(None);
        };
        let xyz = self.numbers(o, "xyz", 3)?.unwrap_or_else(|| vec![0.0; 3]);
        let rpy = self.numbers(o, "rpy", 3)?.unwrap_or_else(|| vec![0.0; 3]);
        let pose = pose_from_xyz_rpy([xyz[0], xyz[1], xyz[2]], [rpy[0], rpy[1], rpy[2]]);
        Ok(Some((self.pos(o), pose)))
    }

    /// Checks a `<geometry>` holder (`<collision>` or `<visual>`); returns the shape element.
    fn geometry<'n>(&self, holder: Node<'n, 'input>) -> Result<Node<'n, 'input>, RobotFileError> {
        let tag = holder.tag_name().name();
        let g = child(holder, "geometry").ok_or_else(|| {
            self.err(
                self.pos(holder),
                format!("<{tag}> needs a <geometry> element"),
            )
        })?;
        let mut shapes = g.children().filter(Node::is_element);
        let s = shapes.next().ok_or_else(|| {
            self.err(
                self.pos(g),
                "<geometry> needs one of <box>, <sphere>, <cylinder>, <capsule>, <mesh>",
            )
        })?;
        if let Some(extra) = shapes.next() {
            return Err(self.err(
                self.pos(extra),
                "<geometry> holds more than one shape; use one <collision> per shape",
            ));
        }
        match s.tag_name().name() {
            "box" => {
                self.required_numbers(s, "size", 3)?;
            }
            "sphere" => {
                self.required_numbers(s, "radius", 1)?;
            }
            "cylinder" | "capsule" => {
                self.required_numbers(s, "radius", 1)?;
                self.required_numbers(s, "length", 1)?;
            }
            "mesh" => {
                self.required_attr(s, "filename")?;
                self.numbers(s, "scale", 3)?;
            }
            other => {
                return Err(self.err(
                    self.pos(s),
                    format!("unknown geometry <{other}>: expected <box>, <sphere>, <cylinder>, <capsule> or <mesh>"),
                ))
            }
        }
        Ok(s)
    }

    fn link(&self, node: Node<'_, 'input>) -> Result<LinkPos, RobotFileError> {
        self.required_attr(node, "name")?;
        let mut out = LinkPos {
            at: self.pos(node),
            shapes: Vec::new(),
        };
        for c in node.children().filter(Node::is_element) {
            match c.tag_name().name() {
                "collision" => {
                    let origin = self.origin(c)?.map(|(p, _)| p);
                    let g = self.geometry(c)?;
                    out.shapes.push(ShapePos {
                        at: self.pos(c),
                        origin,
                        geometry: self.pos(g),
                        geometry_name: g.tag_name().name().to_string(),
                    });
                }
                "visual" => {
                    self.origin(c)?;
                    self.geometry(c)?;
                }
                "inertial" => {
                    self.origin(c)?;
                    let m = child(c, "mass").ok_or_else(|| {
                        self.err(self.pos(c), "<inertial> needs a <mass> element")
                    })?;
                    self.required_numbers(m, "value", 1)?;
                    let i = child(c, "inertia").ok_or_else(|| {
                        self.err(self.pos(c), "<inertial> needs an <inertia> element")
                    })?;
                    for a in ["ixx", "ixy", "ixz", "iyy", "iyz", "izz"] {
                        self.required_numbers(i, a, 1)?;
                    }
                }
                _ => {}
            }
        }
        Ok(out)
    }

    fn joint(&self, node: Node<'_, 'input>) -> Result<(JointPos, JointExtra), RobotFileError> {
        let name = self.required_attr(node, "name")?;
        let ty = self.required_attr(node, "type")?;
        let one_dof = match ty {
            "revolute" | "prismatic" => true,
            "continuous" | "fixed" | "floating" => false,
            "planar" | "spherical" => {
                return Err(self.err(
                    self.attr_pos(node, "type"),
                    format!(
                        "joint `{name}`: unsupported joint type `{ty}`: Clamber joints are revolute, \
                         continuous, prismatic, fixed or floating; model a {ty} joint as a chain of \
                         those joined by massless links"
                    ),
                ))
            }
            _ => {
                return Err(self.err(
                    self.attr_pos(node, "type"),
                    format!(
                        "joint `{name}`: unknown joint type `{ty}`: expected revolute, continuous, \
                         prismatic, fixed or floating"
                    ),
                ))
            }
        };
        let mut pos = JointPos {
            at: self.pos(node),
            ..Default::default()
        };
        for role in ["parent", "child"] {
            let c = child(node, role).ok_or_else(|| {
                self.err(
                    pos.at,
                    format!("joint `{name}` needs a <{role} link=\"..\"/> element"),
                )
            })?;
            self.required_attr(c, "link")?;
            let p = Some(self.pos(c));
            if role == "parent" {
                pos.parent = p;
            } else {
                pos.child = p;
            }
        }
        pos.origin = self.origin(node)?.map(|(p, _)| p);
        if let Some(a) = child(node, "axis") {
            self.required_numbers(a, "xyz", 3)?;
            pos.axis = Some(self.pos(a));
        }
        let limit = child(node, "limit");
        let mut acceleration = None;
        match limit {
            Some(l) => {
                pos.limit = Some(self.pos(l));
                for a in ["lower", "upper", "effort"] {
                    self.numbers(l, a, 1)?;
                }
                if self.v1_2 {
                    self.numbers(l, "velocity", 1)?;
                } else {
                    self.required_numbers(l, "velocity", 1)?;
                }
                acceleration = self.numbers(l, "acceleration", 1)?.map(|v| v[0]);
            }
            None if one_dof => {
                return Err(self.err(
                    pos.at,
                    format!(
                        "joint `{name}` of type {ty} needs a <limit> element (URDF requires one)"
                    ),
                ))
            }
            None => {}
        }
        let extra = JointExtra {
            has_limit: limit.is_some(),
            acceleration,
        };
        Ok((pos, extra))
    }

    fn effector(
        &self,
        node: Node<'_, 'input>,
    ) -> Result<(EffectorPos, EffectorSpec), RobotFileError> {
        let name = self.required_attr(node, "name")?;
        let link = self.required_attr(node, "link")?;
        let origin = self.origin(node)?;
        let pos = EffectorPos {
            at: self.pos(node),
            origin: origin.map(|(p, _)| p),
        };
        let spec = EffectorSpec {
            name: name.to_string(),
            link: link.to_string(),
            grip: origin.map(|(_, g)| g).unwrap_or_else(Pose::identity),
        };
        Ok((pos, spec))
    }
}

fn child<'a, 'input>(node: Node<'a, 'input>, name: &str) -> Option<Node<'a, 'input>> {
    node.children()
        .find(|c| c.is_element() && c.tag_name().name() == name)
}

/// URDF version attribute at least 1.2 (same reading as `urdf-rs`: missing or malformed
/// means 1.0).
fn version_at_least_1_2(robot: Node<'_, '_>) -> bool {
    robot
        .attribute("version")
        .and_then(|v| {
            let (major, minor) = v.trim().split_once('.')?;
            Some((major.parse::<u32>().ok()?, minor.parse::<u32>().ok()?))
        })
        .is_some_and(|v| v >= (1, 2))
}

/// `f64::MAX` in magnitude (how unbounded limits are written) reads as infinite.
fn unbounded_if_max(v: f64) -> f64 {
    if v.abs() == f64::MAX {
        v.signum() * f64::INFINITY
    } else {
        v
    }
}

/// Where a mesh file name points, and a note to add when it is not found.
fn resolve_mesh(
    filename: &str,
    urdf_path: &Path,
) -> Result<(PathBuf, Option<&'static str>), String> {
    let dir = urdf_path.parent().unwrap_or(Path::new(""));
    if let Some(rest) = filename.strip_prefix("package://") {
        let rel = rest.split_once('/').map(|(_, r)| r).unwrap_or("");
        if rel.is_empty() {
            return Err(format!("`{filename}` names no file inside the package"));
        }
        return Ok((
            dir.join(rel),
            Some("`package://NAME/` is read as the directory of the URDF file; put the mesh there or use a relative path"),
        ));
    }
    let file = filename.strip_prefix("file://").unwrap_or(filename);
    if let Some((scheme, _)) = file.split_once("://") {
        return Err(format!(
            "unsupported URI scheme `{scheme}://`: expected a file path, `file://` or `package://`"
        ));
    }
    Ok((dir.join(file), None))
}

fn mesh_error(path: &Path, pos: Pos, mesh: PathBuf, message: String) -> RobotFileError {
    RobotFileError::Mesh {
        path: path.to_path_buf(),
        line: pos.line,
        column: pos.column,
        field: "mesh filename".into(),
        mesh,
        message,
    }
}

fn shape_of(c: &urdf_rs::Collision, pos: &ShapePos, path: &Path) -> Result<Shape, RobotFileError> {
    let origin = pose_from_xyz_rpy(c.origin.xyz.0, c.origin.rpy.0);
    let (geometry, source) = match &c.geometry {
        urdf_rs::Geometry::Box { size } => (
            Geometry::Cuboid {
                size: Vector3::from(size.0),
            },
            None,
        ),
        urdf_rs::Geometry::Sphere { radius } => (Geometry::Sphere { radius: *radius }, None),
        urdf_rs::Geometry::Cylinder { radius, length } => (
            Geometry::Cylinder {
                radius: *radius,
                length: *length,
            },
            None,
        ),
        urdf_rs::Geometry::Capsule { radius, length } => (
            Geometry::Capsule {
                radius: *radius,
                length: *length,
            },
            None,
        ),
        urdf_rs::Geometry::Mesh { filename, scale } => {
            let scale = Vector3::from(scale.map(|s| s.0).unwrap_or([1.0; 3]));
            let (file, note) = resolve_mesh(filename, path)
                .map_err(|m| mesh_error(path, pos.geometry, PathBuf::from(filename), m))?;
            let geometry = load_mesh(&file, scale, true).map_err(|m| {
                let message = match note {
                    Some(n) => format!("{m} ({n})"),
                    None => m,
                };
                mesh_error(path, pos.geometry, file.clone(), message)
            })?;
            // The file was just read, so it exists and has a canonical path.
            let abs = std::fs::canonicalize(&file)
                .or_else(|_| std::path::absolute(&file))
                .unwrap_or(file);
            (geometry, Some(MeshSource { path: abs, scale }))
        }
    };
    Ok(Shape {
        origin,
        geometry,
        source,
    })
}

/// Parse a URDF text (read from `path`, which is used in errors and to find meshes) into a
/// robot description, without building it.
pub fn parse(text: &str, path: &Path) -> Result<(RobotSpec, SourceMap), RobotFileError> {
    let doc = Document::parse(text).map_err(|e| {
        let p = e.pos();
        RobotFileError::Syntax {
            path: path.to_path_buf(),
            line: p.row as usize,
            column: p.col as usize,
            message: format!("malformed XML: {e}"),
        }
    })?;
    let root = doc.root_element();
    let ck = Checker {
        path,
        doc: &doc,
        v1_2: version_at_least_1_2(root),
    };
    if root.tag_name().name() != "robot" {
        return Err(ck.err(
            ck.pos(root),
            format!(
                "expected a <robot> element at the top of a URDF file, found <{}>",
                root.tag_name().name()
            ),
        ));
    }
    let mut map = SourceMap {
        robot: ck.pos(root),
        ..Default::default()
    };
    let mut extras = Vec::new();
    let mut effectors = Vec::new();
    for c in root.children().filter(Node::is_element) {
        match c.tag_name().name() {
            "link" => map.links.push(ck.link(c)?),
            "joint" => {
                let (p, e) = ck.joint(c)?;
                map.joints.push(p);
                extras.push(e);
            }
            EFFECTOR_ELEMENT => {
                let (p, e) = ck.effector(c)?;
                map.effectors.push(p);
                effectors.push(e);
            }
            _ => {}
        }
    }

    let urdf =
        urdf_rs::read_from_string(text).map_err(|e| ck.err(map.robot, format!("URDF: {e}")))?;
    let mismatch = urdf.links.len() != map.links.len()
        || urdf.joints.len() != map.joints.len()
        || urdf
            .links
            .iter()
            .zip(&map.links)
            .any(|(l, p)| l.collision.len() != p.shapes.len());
    if mismatch {
        return Err(ck.err(
            map.robot,
            "the URDF reader and the XML reader disagree on the links, joints or collision elements \
             of this file; check for nested or namespaced <link>/<joint> elements",
        ));
    }

    let mut spec = RobotSpec {
        name: urdf.name.clone(),
        effectors,
        ..Default::default()
    };
    for (l, lp) in urdf.links.iter().zip(&map.links) {
        let shapes = l
            .collision
            .iter()
            .zip(&lp.shapes)
            .map(|(c, p)| shape_of(c, p, path))
            .collect::<Result<Vec<_>, _>>()?;
        spec.links.push(LinkSpec {
            name: l.name.clone(),
            shapes,
        });
    }
    for (j, extra) in urdf.joints.iter().zip(&extras) {
        let acceleration = extra
            .acceleration
            .map(unbounded_if_max)
            .unwrap_or(f64::INFINITY);
        let l = &j.limit;
        let (joint_type, limits) = match j.joint_type {
            urdf_rs::JointType::Revolute | urdf_rs::JointType::Prismatic => {
                let t = if j.joint_type == urdf_rs::JointType::Revolute {
                    JointType::Revolute
                } else {
                    JointType::Prismatic
                };
                let lim = Limits {
                    lower: unbounded_if_max(l.lower),
                    upper: unbounded_if_max(l.upper),
                    velocity: unbounded_if_max(l.velocity),
                    acceleration,
                };
                (t, vec![lim])
            }
            urdf_rs::JointType::Continuous => {
                let velocity = if extra.has_limit {
                    unbounded_if_max(l.velocity)
                } else {
                    f64::INFINITY
                };
                let lim = Limits {
                    lower: f64::NEG_INFINITY,
                    upper: f64::INFINITY,
                    velocity,
                    acceleration,
                };
                (JointType::Revolute, vec![lim])
            }
            urdf_rs::JointType::Fixed => (JointType::Fixed, Vec::new()),
            urdf_rs::JointType::Floating => (JointType::Floating, Vec::new()),
            // Rejected with a position by the checking pass; kept as a fallback.
            urdf_rs::JointType::Planar | urdf_rs::JointType::Spherical => {
                return Err(ck.err(
                    map.robot,
                    format!("joint `{}`: unsupported joint type", j.name),
                ))
            }
        };
        spec.joints.push(JointSpec {
            name: j.name.clone(),
            joint_type,
            parent: j.parent.link.clone(),
            child: j.child.link.clone(),
            origin: pose_from_xyz_rpy(j.origin.xyz.0, j.origin.rpy.0),
            axis: Vector3::from(j.axis.xyz.0),
            limits,
            passive: false,
        });
    }
    Ok((spec, map))
}

/// Parse and build a robot from URDF text read from `path`.
pub fn load_str(text: &str, path: &Path) -> Result<Robot, RobotFileError> {
    let (spec, map) = parse(text, path)?;
    spec.build().map_err(|source| {
        let (line, column, field) = map.locate(source.locator().as_ref());
        RobotFileError::Model {
            path: path.to_path_buf(),
            line,
            column,
            field,
            source,
        }
    })
}

// ---------------------------------------------------------------------------------------
// Writing

/// Choices for [`write_urdf_with`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct UrdfExportOptions {
    /// Also write every effector's grip frame as a massless link `<effector>_grip` on a
    /// fixed joint `<effector>_grip_joint`, so other URDF readers see it as a frame (the
    /// reference checks need that). Reading the file back then gives these extra links.
    pub effector_frames: bool,
}

impl Default for UrdfExportOptions {
    fn default() -> Self {
        UrdfExportOptions {
            effector_frames: true,
        }
    }
}

/// [`write_urdf_with`] with the default options (grip frames written as links).
pub fn write_urdf(robot: &Robot) -> String {
    write_urdf_with(robot, &UrdfExportOptions::default())
}

/// Write a robot as URDF 1.0 that `urdfdom`-based readers accept. Numbers are written in
/// the shortest form that reads back to the same `f64`, so reading the file back gives the
/// same kinematics exactly, apart from the Euler-angle round trip of every rotation
/// ([`rpy_of`]: a few ulps).
///
/// - Joints keep their type, origin (`xyz`, `rpy`), axis and limits. A revolute joint
///   unbounded on both sides is written `continuous`; note that some readers (Pinocchio)
///   give continuous joints two coordinates (cos, sin), so robots meant for reference
///   checks use bounded revolute joints. Other unbounded values are written as
///   `+-1.7976931348623157e308` (`f64::MAX`), which [`parse`] reads back as infinite;
///   `acceleration` is written when finite (readers of URDF 1.0 ignore it). `effort="0"`
///   fills URDF's required attribute.
/// - Lost on the way (each marked by an XML comment): the `passive` flag, the translation
///   and velocity bounds of floating joints (URDF has none), and ignored collision pairs.
/// - Shapes: spheres, boxes and cylinders are written as such. A capsule is written as the
///   three URDF shapes whose union it exactly is, a cylinder and two spheres, because
///   `urdfdom` rejects `<capsule>`. Meshes are written as `<mesh>` with the absolute path
///   of their source file and scale; a triangle mesh reads back as a convex hull. A mesh
///   without a source file cannot be written and is left out (with a comment).
/// - Every link gets a small inertial (1 g) that some readers need; it has no effect on
///   kinematics. Grip links (see [`UrdfExportOptions`]) get none.
/// - Effectors are written as `<clamber_effector>` elements (see the module docs).
pub fn write_urdf_with(robot: &Robot, opts: &UrdfExportOptions) -> String {
    let mut out = String::new();
    let name = if robot.name().is_empty() {
        "robot"
    } else {
        robot.name()
    };
    out.push_str("<?xml version=\"1.0\"?>\n");
    let _ = writeln!(
        out,
        "<!-- Written by Clamber from robot `{}`. -->",
        comment(name)
    );
    let _ = writeln!(out, "<robot name=\"{}\">", esc(name));
    if !robot.ignored_pairs().is_empty() {
        out.push_str("  <!-- Ignored self-collision pairs are not written: URDF has no place for them. -->\n");
    }
    for link in robot.links() {
        write_link(&mut out, link);
    }
    for j in robot.joints() {
        let parent = &robot.links()[j.parent].name;
        let child = &robot.links()[j.child].name;
        write_joint(&mut out, j, parent, child);
    }
    for e in robot.effectors() {
        let _ = writeln!(
            out,
            "  <{EFFECTOR_ELEMENT} name=\"{}\" link=\"{}\">\n    {}\n  </{EFFECTOR_ELEMENT}>",
            esc(&e.name),
            esc(&robot.links()[e.link].name),
            origin_element(&e.grip)
        );
    }
    if opts.effector_frames {
        let mut taken: HashSet<String> = robot.links().iter().map(|l| l.name.clone()).collect();
        taken.extend(robot.joints().iter().map(|j| j.name.clone()));
        for e in robot.effectors() {
            let link = unique(&mut taken, format!("{}_grip", e.name));
            let joint = unique(&mut taken, format!("{}_grip_joint", e.name));
            let _ = writeln!(
                out,
                "  <!-- Grip frame of effector `{}`. -->",
                comment(&e.name)
            );
            let _ = writeln!(out, "  <link name=\"{}\"/>", esc(&link));
            let _ = writeln!(
                out,
                "  <joint name=\"{}\" type=\"fixed\">\n    <parent link=\"{}\"/>\n    <child link=\"{}\"/>\n    {}\n  </joint>",
                esc(&joint),
                esc(&robot.links()[e.link].name),
                esc(&link),
                origin_element(&e.grip)
            );
        }
    }
    out.push_str("</robot>\n");
    out
}

fn unique(taken: &mut HashSet<String>, base: String) -> String {
    let mut name = base.clone();
    let mut k = 2;
    while taken.contains(&name) {
        name = format!("{base}_{k}");
        k += 1;
    }
    taken.insert(name.clone());
    name
}

fn write_link(out: &mut String, link: &crate::model::Link) {
    let _ = writeln!(out, "  <link name=\"{}\">", esc(&link.name));
    out.push_str(
        "    <inertial>\n      <mass value=\"0.001\"/>\n      \
         <inertia ixx=\"1e-6\" ixy=\"0\" ixz=\"0\" iyy=\"1e-6\" iyz=\"0\" izz=\"1e-6\"/>\n    </inertial>\n",
    );
    for s in &link.shapes {
        let collision = |out: &mut String, origin: &Pose, geometry: &str| {
            let _ = writeln!(
                out,
                "    <collision>\n      {}\n      <geometry>\n        {geometry}\n      </geometry>\n    </collision>",
                origin_element(origin)
            );
        };
        match &s.geometry {
            Geometry::Sphere { radius } => collision(
                out,
                &s.origin,
                &format!("<sphere radius=\"{}\"/>", num(*radius)),
            ),
            Geometry::Cuboid { size } => {
                collision(out, &s.origin, &format!("<box size=\"{}\"/>", vec3(size)))
            }
            Geometry::Cylinder { radius, length } => collision(
                out,
                &s.origin,
                &format!(
                    "<cylinder radius=\"{}\" length=\"{}\"/>",
                    num(*radius),
                    num(*length)
                ),
            ),
            Geometry::Capsule { radius, length } => {
                let _ = writeln!(
                    out,
                    "    <!-- One capsule (radius {radius:?}, length {length:?}) as the cylinder and two spheres it is made of. -->"
                );
                collision(
                    out,
                    &s.origin,
                    &format!(
                        "<cylinder radius=\"{}\" length=\"{}\"/>",
                        num(*radius),
                        num(*length)
                    ),
                );
                for sign in [1.0, -1.0] {
                    let cap = s.origin * Translation3::new(0.0, 0.0, sign * 0.5 * length);
                    collision(out, &cap, &format!("<sphere radius=\"{}\"/>", num(*radius)));
                }
            }
            Geometry::ConvexMesh { .. } | Geometry::TriMesh { .. } => match &s.source {
                Some(src) => {
                    if matches!(s.geometry, Geometry::TriMesh { .. }) {
                        out.push_str("    <!-- A triangle mesh; read back from URDF it becomes a convex hull. -->\n");
                    }
                    let file = std::path::absolute(&src.path).unwrap_or_else(|_| src.path.clone());
                    collision(
                        out,
                        &s.origin,
                        &format!(
                            "<mesh filename=\"{}\" scale=\"{}\"/>",
                            esc(&file.to_string_lossy()),
                            vec3(&src.scale)
                        ),
                    );
                }
                None => {
                    out.push_str("    <!-- A mesh shape without a source file is left out. -->\n")
                }
            },
        }
    }
    out.push_str("  </link>\n");
}

fn write_joint(out: &mut String, j: &crate::model::Joint, parent: &str, child: &str) {
    let unbounded = |l: &Limits| l.lower == f64::NEG_INFINITY && l.upper == f64::INFINITY;
    let (ty, axis) = match &j.kind {
        JointKind::Revolute { axis } if j.limits.first().is_some_and(unbounded) => {
            ("continuous", Some(axis))
        }
        JointKind::Revolute { axis } => ("revolute", Some(axis)),
        JointKind::Prismatic { axis } => ("prismatic", Some(axis)),
        JointKind::Floating => ("floating", None),
        _ => ("fixed", None),
    };
    let _ = writeln!(out, "  <joint name=\"{}\" type=\"{ty}\">", esc(&j.name));
    if j.passive {
        out.push_str("    <!-- Passive: a mechanism joint not driven by the robot. -->\n");
    }
    let _ = writeln!(
        out,
        "    <parent link=\"{}\"/>\n    <child link=\"{}\"/>",
        esc(parent),
        esc(child)
    );
    let _ = writeln!(out, "    {}", origin_element(&j.origin));
    if let Some(axis) = axis {
        let _ = writeln!(out, "    <axis xyz=\"{}\"/>", vec3(axis));
        if let Some(l) = j.limits.first() {
            let mut attrs = String::new();
            if ty != "continuous" {
                let _ = write!(
                    attrs,
                    "lower=\"{}\" upper=\"{}\" ",
                    bound(l.lower),
                    bound(l.upper)
                );
            }
            let _ = write!(attrs, "effort=\"0\" velocity=\"{}\"", bound(l.velocity));
            if l.acceleration.is_finite() {
                let _ = write!(attrs, " acceleration=\"{}\"", num(l.acceleration));
            }
            if ty != "continuous" || l.velocity.is_finite() || l.acceleration.is_finite() {
                let _ = writeln!(out, "    <limit {attrs}/>");
            }
        }
    }
    if matches!(j.kind, JointKind::Floating) && j.limits.iter().any(|l| *l != Limits::UNBOUNDED) {
        let list: Vec<String> = j
            .limits
            .iter()
            .map(|l| {
                format!(
                    "[{:?}, {:?}] v {:?} a {:?}",
                    l.lower, l.upper, l.velocity, l.acceleration
                )
            })
            .collect();
        let _ = writeln!(
            out,
            "    <!-- Limits not written (URDF floating joints have none), x y z wx wy wz: {} -->",
            list.join("; ")
        );
    }
    out.push_str("  </joint>\n");
}

fn origin_element(p: &Pose) -> String {
    let rpy = Vector3::from(rpy_of(&p.rotation));
    format!(
        "<origin xyz=\"{}\" rpy=\"{}\"/>",
        vec3(&p.translation.vector),
        vec3(&rpy)
    )
}

/// Shortest text that reads back to the same value; `-0.0` is written `0.0`.
fn num(v: f64) -> String {
    format!("{:?}", v + 0.0)
}

fn vec3(v: &Vector3<f64>) -> String {
    format!("{} {} {}", num(v.x), num(v.y), num(v.z))
}

/// A limit value; infinite ones as `+-f64::MAX`, which URDF readers can parse.
fn bound(v: f64) -> String {
    if v.is_infinite() {
        format!("{:?}", v.signum() * f64::MAX)
    } else {
        num(v)
    }
}

fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            c => o.push(c),
        }
    }
    o
}

/// Text safe inside an XML comment (no `--`).
fn comment(s: &str) -> String {
    let mut t = s.to_string();
    while t.contains("--") {
        t = t.replace("--", "- -");
    }
    t
}
