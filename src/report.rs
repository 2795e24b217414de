//! Summaries of robot models, printed by `clamber robot`: degrees of freedom, joints and
//! limits, effectors, links and shapes, and a sampled estimate of each effector's reach.
//! [`RobotReport`] is plain data; [`RobotReport::to_text`] renders it for people and
//! serde renders it as JSON for programs.

use nalgebra::Vector3;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use crate::kinematics::{forward_kinematics, KinematicsError};
use crate::math::{rpy_of, Pose};
use crate::model::{Geometry, JointKind, LinkId, Robot, Shape};

/// Number of random configurations used for the reach estimate.
pub const REACH_SAMPLES: usize = 2000;
/// Seed of the ChaCha8 generator used for the reach estimate (the estimate is deterministic).
pub const REACH_SEED: u64 = 0;

/// Everything `clamber robot` prints.
#[derive(Clone, Debug, Serialize)]
pub struct RobotReport {
    pub name: String,
    /// Length of a configuration vector.
    pub nq: usize,
    /// Degrees of freedom (length of a tangent vector).
    pub nv: usize,
    /// How many of the `nv` degrees of freedom belong to passive joints.
    pub passive_dof: usize,
    pub joints: Vec<JointRow>,
    pub effectors: Vec<EffectorRow>,
    pub links: Vec<LinkRow>,
    /// Number of link pairs never checked for self-collision.
    pub ignored_pairs: usize,
    pub reach: Vec<ReachRow>,
}

/// One joint. Limits are listed per tangent coordinate; `None` means unbounded.
#[derive(Clone, Debug, Serialize)]
pub struct JointRow {
    pub name: String,
    #[serde(rename = "type")]
    pub kind: String,
    pub parent: String,
    pub child: String,
    /// Unit axis in the joint frame (revolute and prismatic joints only).
    pub axis: Option<[f64; 3]>,
    pub limits: Vec<LimitRow>,
    pub passive: bool,
}

/// Limits of one tangent coordinate; `None` is unbounded.
#[derive(Clone, Debug, Serialize)]
pub struct LimitRow {
    pub coordinate: String,
    pub lower: Option<f64>,
    pub upper: Option<f64>,
    pub velocity: Option<f64>,
    pub acceleration: Option<f64>,
}

#[derive(Clone, Debug, Serialize)]
pub struct EffectorRow {
    pub name: String,
    pub link: String,
    /// Grip frame in the link frame.
    pub xyz: [f64; 3],
    pub rpy: [f64; 3],
}

#[derive(Clone, Debug, Serialize)]
pub struct LinkRow {
    pub name: String,
    /// The joint whose child this link is (`None` for the root).
    pub parent_joint: Option<String>,
    pub shapes: Vec<ShapeRow>,
}

/// One collision shape, placed in its link frame.
#[derive(Clone, Debug, Serialize)]
pub struct ShapeRow {
    #[serde(rename = "type")]
    pub kind: String,
    /// Dimensions in words, e.g. `r=0.05 length=0.2`.
    pub dimensions: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub radius: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub length: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub size: Option<[f64; 3]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mesh_file: Option<String>,
    pub xyz: [f64; 3],
    pub rpy: [f64; 3],
}

/// Sampled reach of one effector: the largest distance, over [`REACH_SAMPLES`] random
/// configurations, from the grip frame origin to the origin of `from_link`, the first
/// link on the way from the root to the effector whose joint moves (the root if none
/// does). A lower bound on the true maximum.
#[derive(Clone, Debug, Serialize)]
pub struct ReachRow {
    pub effector: String,
    pub from_link: String,
    pub max_distance: f64,
    pub samples: usize,
    pub seed: u64,
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn arr(v: &Vector3<f64>) -> [f64; 3] {
    [v.x, v.y, v.z]
}

fn xyz_rpy(p: &Pose) -> ([f64; 3], [f64; 3]) {
    (arr(&p.translation.vector), rpy_of(&p.rotation))
}

fn shape_row(s: &Shape) -> ShapeRow {
    let (xyz, rpy) = xyz_rpy(&s.origin);
    let mut row = ShapeRow {
        kind: s.geometry.type_name().to_string(),
        dimensions: String::new(),
        radius: None,
        length: None,
        size: None,
        mesh_file: s.source.as_ref().map(|m| m.path.display().to_string()),
        xyz,
        rpy,
    };
    row.dimensions = match &s.geometry {
        Geometry::Sphere { radius } => {
            row.radius = Some(*radius);
            format!("radius {}", num(*radius))
        }
        Geometry::Cuboid { size } => {
            row.size = Some(arr(size));
            format!("size {} x {} x {}", num(size.x), num(size.y), num(size.z))
        }
        Geometry::Capsule { radius, length } | Geometry::Cylinder { radius, length } => {
            row.radius = Some(*radius);
            row.length = Some(*length);
            format!("radius {}, length {}", num(*radius), num(*length))
        }
        Geometry::ConvexMesh { points } => format!("{} hull points", points.len()),
        Geometry::TriMesh {
            vertices,
            triangles,
        } => {
            format!("{} vertices, {} triangles", vertices.len(), triangles.len())
        }
    };
    if let Some(m) = &s.source {
        let sc = m.scale;
        row.dimensions.push_str(&format!(
            ", from {} (scale {})",
            m.path.display(),
            vec_text(&[sc.x, sc.y, sc.z])
        ));
    }
    row
}

fn joint_row(robot: &Robot, j: &crate::model::Joint) -> JointRow {
    let links = robot.links();
    let name_of = |l: LinkId| links.get(l).map(|l| l.name.clone()).unwrap_or_default();
    let axis = match &j.kind {
        JointKind::Revolute { axis } | JointKind::Prismatic { axis } => Some(arr(axis)),
        _ => None,
    };
    let coords: Vec<String> = match j.kind {
        JointKind::Floating => ["x", "y", "z", "wx", "wy", "wz"]
            .iter()
            .map(|s| format!("{}.{s}", j.name))
            .collect(),
        _ => vec![j.name.clone()],
    };
    let limits = j
        .limits
        .iter()
        .zip(coords)
        .map(|(l, coordinate)| LimitRow {
            coordinate,
            lower: finite(l.lower),
            upper: finite(l.upper),
            velocity: finite(l.velocity),
            acceleration: finite(l.acceleration),
        })
        .collect();
    JointRow {
        name: j.name.clone(),
        kind: j.kind.type_name().to_string(),
        parent: name_of(j.parent),
        child: name_of(j.child),
        axis,
        limits,
        passive: j.passive,
    }
}

/// The link reach is measured from for an effector on `link`: the child of the first
/// moving joint on the path from the root, or the root.
fn reach_origin(robot: &Robot, link: LinkId) -> LinkId {
    let mut path = Vec::new(); // joints from `link` up to the root
    let mut l = link;
    while let Some(j) = robot.links().get(l).and_then(|l| l.parent_joint) {
        path.push(j);
        match robot.joints().get(j) {
            Some(joint) => l = joint.parent,
            None => break,
        }
    }
    path.iter()
        .rev()
        .filter_map(|&j| robot.joints().get(j))
        .find(|j| j.kind.nv() > 0)
        .map_or(0, |j| j.child)
}

fn reach(robot: &Robot) -> Result<Vec<ReachRow>, KinematicsError> {
    let mut rng = ChaCha8Rng::seed_from_u64(REACH_SEED);
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let origins: Vec<LinkId> = robot
        .effectors()
        .iter()
        .map(|e| reach_origin(robot, e.link))
        .collect();
    let mut best = vec![0.0f64; robot.effectors().len()];
    for _ in 0..REACH_SAMPLES {
        let q = robot.random_configuration(&mut rng);
        forward_kinematics(robot, &q, &mut poses)?;
        for ((e, &from), best) in robot.effectors().iter().zip(&origins).zip(best.iter_mut()) {
            let (Some(link_pose), Some(from_pose)) = (poses.get(e.link), poses.get(from)) else {
                return Err(KinematicsError::NoSuchLink(e.link.max(from)));
            };
            let grip = link_pose * e.grip;
            let d = (grip.translation.vector - from_pose.translation.vector).norm();
            *best = best.max(d);
        }
    }
    Ok(robot
        .effectors()
        .iter()
        .zip(origins)
        .zip(best)
        .map(|((e, from), max_distance)| ReachRow {
            effector: e.name.clone(),
            from_link: robot
                .links()
                .get(from)
                .map(|l| l.name.clone())
                .unwrap_or_default(),
            max_distance,
            samples: REACH_SAMPLES,
            seed: REACH_SEED,
        })
        .collect())
}

impl RobotReport {
    /// Summarize `robot`. Runs [`REACH_SAMPLES`] forward kinematics passes for the reach
    /// estimate.
    pub fn new(robot: &Robot) -> Result<Self, KinematicsError> {
        let links = robot.links();
        let name_of = |l: LinkId| links.get(l).map(|l| l.name.clone()).unwrap_or_default();
        Ok(RobotReport {
            name: robot.name().to_string(),
            nq: robot.nq(),
            nv: robot.nv(),
            passive_dof: robot.passive_dof(),
            joints: robot.joints().iter().map(|j| joint_row(robot, j)).collect(),
            effectors: robot
                .effectors()
                .iter()
                .map(|e| {
                    let (xyz, rpy) = xyz_rpy(&e.grip);
                    EffectorRow {
                        name: e.name.clone(),
                        link: name_of(e.link),
                        xyz,
                        rpy,
                    }
                })
                .collect(),
            links: links
                .iter()
                .map(|l| LinkRow {
                    name: l.name.clone(),
                    parent_joint: l
                        .parent_joint
                        .and_then(|j| robot.joints().get(j))
                        .map(|j| j.name.clone()),
                    shapes: l.shapes.iter().map(shape_row).collect(),
                })
                .collect(),
            ignored_pairs: robot.ignored_pairs().len(),
            reach: reach(robot)?,
        })
    }

    /// The report as aligned plain-text tables.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        out.push_str(&format!("robot: {}\n", self.name));
        out.push_str(&format!(
            "DOF: nq = {}, nv = {} ({} passive, {} driven)\n",
            self.nq,
            self.nv,
            self.passive_dof,
            self.nv - self.passive_dof.min(self.nv)
        ));

        out.push_str(&format!("\njoints ({}); limits in rad or m, rad/s or m/s, rad/s^2 or m/s^2; - = no limit; floating joints: translation x y z, then [linear, angular]\n", self.joints.len()));
        let mut rows = vec![row(&[
            "name",
            "type",
            "parent -> child",
            "axis",
            "lower",
            "upper",
            "velocity",
            "acceleration",
            "passive",
        ])];
        for j in &self.joints {
            rows.push(vec![
                j.name.clone(),
                j.kind.clone(),
                format!("{} -> {}", j.parent, j.child),
                j.axis.map_or("-".into(), |a| vec_text(&a)),
                limit_text(j, |l| l.lower, false),
                limit_text(j, |l| l.upper, false),
                limit_text(j, |l| l.velocity, true),
                limit_text(j, |l| l.acceleration, true),
                if j.passive { "yes".into() } else { "no".into() },
            ]);
        }
        out.push_str(&table(&rows));

        out.push_str(&format!(
            "\neffectors ({}); grip frame in the link frame\n",
            self.effectors.len()
        ));
        let mut rows = vec![row(&["name", "link", "grip xyz (m)", "grip rpy (rad)"])];
        for e in &self.effectors {
            rows.push(vec![
                e.name.clone(),
                e.link.clone(),
                vec_text(&e.xyz),
                vec_text(&e.rpy),
            ]);
        }
        out.push_str(&table(&rows));

        out.push_str(&format!(
            "\nlinks ({}) and collision shapes (m, placed in the link frame)\n",
            self.links.len()
        ));
        let mut rows = vec![row(&[
            "link",
            "parent joint",
            "shape",
            "dimensions",
            "xyz",
            "rpy",
        ])];
        for l in &self.links {
            let parent = l.parent_joint.clone().unwrap_or_else(|| "(root)".into());
            if l.shapes.is_empty() {
                rows.push(vec![
                    l.name.clone(),
                    parent.clone(),
                    "-".into(),
                    String::new(),
                    String::new(),
                    String::new(),
                ]);
            }
            for (k, s) in l.shapes.iter().enumerate() {
                let (name, parent) = if k == 0 {
                    (l.name.clone(), parent.clone())
                } else {
                    (String::new(), String::new())
                };
                rows.push(vec![
                    name,
                    parent,
                    s.kind.clone(),
                    s.dimensions.clone(),
                    vec_text(&s.xyz),
                    vec_text(&s.rpy),
                ]);
            }
        }
        out.push_str(&table(&rows));
        out.push_str(&format!(
            "\nignored self-collision pairs: {}\n",
            self.ignored_pairs
        ));

        out.push_str(
            "\nreach (sampled max distance from the grip frame to <link> origin; a lower bound)\n",
        );
        for r in &self.reach {
            out.push_str(&format!(
                "  {}: {:.3} m = sampled max distance from `{}` origin over {} samples (seed {})\n",
                r.effector, r.max_distance, r.from_link, r.samples, r.seed
            ));
        }
        if self.reach.is_empty() {
            out.push_str("  (no effectors)\n");
        }
        out
    }
}

/// A number for the text report: at most 6 decimals (a micrometre or microradian),
/// trailing zeros dropped. The JSON report keeps full precision.
fn num(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        &s
    };
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}

fn row(cells: &[&str]) -> Vec<String> {
    cells.iter().map(|s| s.to_string()).collect()
}

fn vec_text(v: &[f64]) -> String {
    let parts: Vec<String> = v.iter().map(|&x| num(x)).collect();
    format!("[{}]", parts.join(", "))
}

fn opt_text(v: Option<f64>) -> String {
    v.map_or_else(|| "-".into(), num)
}

/// One limit column of a joint row. Floating joints show the translation bounds as a
/// 3-array and rates as `[linear, angular]`.
fn limit_text(j: &JointRow, get: impl Fn(&LimitRow) -> Option<f64>, rate: bool) -> String {
    match j.limits.len() {
        0 => "-".into(),
        1 => opt_text(j.limits.first().and_then(&get)),
        _ => {
            let picks: Vec<Option<f64>> = if rate {
                [0, 3]
                    .iter()
                    .map(|&k| j.limits.get(k).and_then(&get))
                    .collect()
            } else {
                j.limits.iter().take(3).map(&get).collect()
            };
            if picks.iter().all(Option::is_none) {
                return "-".into();
            }
            let parts: Vec<String> = picks.into_iter().map(opt_text).collect();
            format!("[{}]", parts.join(", "))
        }
    }
}

/// Left-aligned columns separated by two spaces, the first row being the header. Written
/// by hand: a table crate would add a dependency for a dozen lines.
fn table(rows: &[Vec<String>]) -> String {
    let ncol = rows.iter().map(Vec::len).max().unwrap_or(0);
    let widths: Vec<usize> = (0..ncol)
        .map(|c| {
            rows.iter()
                .filter_map(|r| r.get(c))
                .map(|s| s.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut out = String::new();
    for r in rows {
        let mut line = String::from("  ");
        for (c, cell) in r.iter().enumerate() {
            let w = widths.get(c).copied().unwrap_or(0);
            line.push_str(cell);
            if c + 1 < r.len() {
                line.push_str(&" ".repeat(w - cell.chars().count() + 2));
            }
        }
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}
