//! Writing a [`Scenario`] as a scenario file, so scenarios built in code (the bundled
//! demos) can be exported and edited. The file is built as a TOML value tree and printed
//! by the `toml` crate, which takes care of quoting; numbers are written with the shortest
//! representation that reads back to the same `f64`.

use std::path::Path;

use nalgebra::UnitQuaternion;
use thiserror::Error;
use toml::{Table, Value};

use super::Outputs;
use crate::math::{rpy_of, Pose};
use crate::model::{Geometry, JointType, Limits, RobotSpec, Shape};
use crate::scenario::{Goal, Scenario};
use crate::scene::{HoldKind, Stance};

/// A scenario that cannot be written as a file.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ScenarioWriteError {
    #[error(
        "the scenario has {0} constraint(s) active in every stance (carried objects, keep-level \
         rows); scenario files cannot express them yet"
    )]
    ConstantConstraints(usize),
    #[error("{what}: a mesh without a source file cannot be written")]
    MeshWithoutSource { what: String },
    #[error("{what}: {field} = {value} cannot be written (TOML numbers are finite)")]
    NotFinite {
        what: String,
        field: &'static str,
        value: f64,
    },
    #[error("stance refers to hold #{0}, which the scene does not have")]
    NoSuchHold(usize),
    #[error("configuration has length {got}, the robot needs {expected}")]
    Length { got: usize, expected: usize },
    #[error("path `{0}` is not valid UTF-8")]
    Path(String),
    #[error("cannot print the TOML: {0}")]
    Toml(String),
}

type Res<T> = Result<T, ScenarioWriteError>;

fn num(what: &str, field: &'static str, x: f64) -> Res<Value> {
    if x.is_finite() {
        Ok(Value::Float(x))
    } else {
        Err(ScenarioWriteError::NotFinite {
            what: what.to_string(),
            field,
            value: x,
        })
    }
}

fn arr(what: &str, field: &'static str, xs: &[f64]) -> Res<Value> {
    xs.iter()
        .map(|&x| num(what, field, x))
        .collect::<Res<Vec<_>>>()
        .map(Value::Array)
}

fn text(s: &str) -> Value {
    Value::String(s.to_string())
}

fn path_text(p: &Path) -> Res<Value> {
    p.to_str()
        .map(text)
        .ok_or_else(|| ScenarioWriteError::Path(p.display().to_string()))
}

/// `xyz` and `rpy` of a pose, leaving out zeros.
fn put_pose(t: &mut Table, what: &str, pose: &Pose) -> Res<()> {
    let xyz = pose.translation.vector;
    if xyz != nalgebra::Vector3::zeros() {
        t.insert("xyz".into(), arr(what, "xyz", xyz.as_slice())?);
    }
    let rpy = rpy_of(&pose.rotation);
    if rpy != [0.0; 3] {
        t.insert("rpy".into(), arr(what, "rpy", &rpy)?);
    }
    Ok(())
}

fn shape_table(what: &str, shape: &Shape) -> Res<Table> {
    let mut t = Table::new();
    let kind = match &shape.geometry {
        Geometry::Sphere { radius } => {
            t.insert("radius".into(), num(what, "radius", *radius)?);
            "sphere"
        }
        Geometry::Cuboid { size } => {
            t.insert("size".into(), arr(what, "size", size.as_slice())?);
            "box"
        }
        Geometry::Capsule { radius, length } | Geometry::Cylinder { radius, length } => {
            t.insert("radius".into(), num(what, "radius", *radius)?);
            t.insert("length".into(), num(what, "length", *length)?);
            if matches!(shape.geometry, Geometry::Capsule { .. }) {
                "capsule"
            } else {
                "cylinder"
            }
        }
        Geometry::ConvexMesh { .. } | Geometry::TriMesh { .. } => {
            let source =
                shape
                    .source
                    .as_ref()
                    .ok_or_else(|| ScenarioWriteError::MeshWithoutSource {
                        what: what.to_string(),
                    })?;
            t.insert("file".into(), path_text(&source.path)?);
            if source.scale != nalgebra::Vector3::new(1.0, 1.0, 1.0) {
                t.insert("scale".into(), arr(what, "scale", source.scale.as_slice())?);
            }
            t.insert(
                "convex".into(),
                Value::Boolean(matches!(shape.geometry, Geometry::ConvexMesh { .. })),
            );
            "mesh"
        }
    };
    t.insert("type".into(), text(kind));
    put_pose(&mut t, what, &shape.origin)?;
    Ok(t)
}

/// Limit keys of a one-DOF joint: each finite bound written, infinite ones left out (the
/// reader's default).
fn put_limits(t: &mut Table, what: &str, limits: &[Limits]) -> Res<()> {
    let Some(l) = limits.first() else {
        return Ok(());
    };
    for (key, x) in [
        ("lower", l.lower),
        ("upper", l.upper),
        ("velocity", l.velocity),
        ("acceleration", l.acceleration),
    ] {
        if x.is_finite() {
            t.insert(key.into(), num(what, "limits", x)?);
        }
    }
    Ok(())
}

/// A mechanism's robot-format tables, written inline.
fn mechanism_table(spec: &RobotSpec) -> Res<Table> {
    let mut t = Table::new();
    t.insert("name".into(), text(&spec.name));
    if !spec.ignore_adjacent || !spec.ignored_pairs.is_empty() {
        let mut col = Table::new();
        col.insert(
            "ignore_adjacent".into(),
            Value::Boolean(spec.ignore_adjacent),
        );
        if !spec.ignored_pairs.is_empty() {
            col.insert(
                "ignore".into(),
                Value::Array(
                    spec.ignored_pairs
                        .iter()
                        .map(|(a, b)| Value::Array(vec![text(a), text(b)]))
                        .collect(),
                ),
            );
        }
        t.insert("collision".into(), Value::Table(col));
    }
    let mut links = Vec::new();
    for l in &spec.links {
        let mut lt = Table::new();
        lt.insert("name".into(), text(&l.name));
        if !l.shapes.is_empty() {
            let shapes = l
                .shapes
                .iter()
                .enumerate()
                .map(|(i, s)| {
                    shape_table(&format!("link `{}` shape {i}", l.name), s).map(Value::Table)
                })
                .collect::<Res<Vec<_>>>()?;
            lt.insert("shape".into(), Value::Array(shapes));
        }
        links.push(Value::Table(lt));
    }
    t.insert("link".into(), Value::Array(links));
    let mut joints = Vec::new();
    for j in &spec.joints {
        let what = format!("joint `{}`", j.name);
        let mut jt = Table::new();
        jt.insert("name".into(), text(&j.name));
        let kind = match j.joint_type {
            JointType::Revolute => "revolute",
            JointType::Prismatic => "prismatic",
            JointType::Fixed => "fixed",
            JointType::Floating => "floating",
        };
        jt.insert("type".into(), text(kind));
        jt.insert("parent".into(), text(&j.parent));
        jt.insert("child".into(), text(&j.child));
        put_pose(&mut jt, &what, &j.origin)?;
        match j.joint_type {
            JointType::Revolute | JointType::Prismatic => {
                jt.insert("axis".into(), arr(&what, "axis", j.axis.as_slice())?);
                put_limits(&mut jt, &what, &j.limits)?;
            }
            JointType::Floating => {
                // Translation bounds (3 each), linear and angular velocity/acceleration.
                if j.limits.len() == 6 {
                    let lower: Vec<f64> = j.limits[..3].iter().map(|l| l.lower).collect();
                    let upper: Vec<f64> = j.limits[..3].iter().map(|l| l.upper).collect();
                    let vel = [j.limits[0].velocity, j.limits[3].velocity];
                    let acc = [j.limits[0].acceleration, j.limits[3].acceleration];
                    for (key, xs) in [
                        ("lower", &lower[..]),
                        ("upper", &upper[..]),
                        ("velocity", &vel[..]),
                        ("acceleration", &acc[..]),
                    ] {
                        if xs.iter().all(|x| x.is_finite()) {
                            jt.insert(key.into(), arr(&what, "limits", xs)?);
                        }
                    }
                }
            }
            JointType::Fixed => {}
        }
        if j.passive {
            jt.insert("passive".into(), Value::Boolean(true));
        }
        joints.push(Value::Table(jt));
    }
    if !joints.is_empty() {
        t.insert("joint".into(), Value::Array(joints));
    }
    let mut effectors = Vec::new();
    for e in &spec.effectors {
        let mut et = Table::new();
        et.insert("name".into(), text(&e.name));
        et.insert("link".into(), text(&e.link));
        put_pose(&mut et, &format!("effector `{}`", e.name), &e.grip)?;
        effectors.push(Value::Table(et));
    }
    if !effectors.is_empty() {
        t.insert("effector".into(), Value::Array(effectors));
    }
    Ok(t)
}

fn stance_table(scenario: &Scenario, stance: &Stance) -> Res<Table> {
    let mut t = Table::new();
    for (effector, &hold) in &stance.grips {
        let h = scenario
            .scene
            .holds
            .get(hold)
            .ok_or(ScenarioWriteError::NoSuchHold(hold))?;
        t.insert(effector.clone(), text(&h.name));
    }
    Ok(t)
}

/// Every movable joint's value by name (`[x, y, z, roll, pitch, yaw]` for a floating joint).
fn q_table(scenario: &Scenario, q: &[f64]) -> Res<Table> {
    let robot = &scenario.robot;
    if q.len() != robot.nq() {
        return Err(ScenarioWriteError::Length {
            got: q.len(),
            expected: robot.nq(),
        });
    }
    let mut t = Table::new();
    for j in robot.joints() {
        let i = j.q_index;
        let what = format!("joint `{}`", j.name);
        match j.kind {
            crate::model::JointKind::Fixed => {}
            crate::model::JointKind::Floating => {
                let quat = UnitQuaternion::from_quaternion(nalgebra::Quaternion::new(
                    q[i + 6],
                    q[i + 3],
                    q[i + 4],
                    q[i + 5],
                ));
                let rpy = rpy_of(&quat.to_rotation_matrix());
                let x = [q[i], q[i + 1], q[i + 2], rpy[0], rpy[1], rpy[2]];
                t.insert(j.name.clone(), arr(&what, "q", &x)?);
            }
            _ => {
                t.insert(j.name.clone(), num(&what, "q", q[i])?);
            }
        }
    }
    Ok(t)
}

/// The scenario as a scenario file. `robot_file` is written as given (relative paths are
/// read relative to the file's directory); mechanisms are written inline; the start is
/// written as settled (its `q` satisfies its stance), so `settle` is left out.
pub fn to_toml(scenario: &Scenario, robot_file: &Path, outputs: &Outputs) -> Res<String> {
    if !scenario.constant.is_empty() {
        return Err(ScenarioWriteError::ConstantConstraints(
            scenario.constant.len(),
        ));
    }
    let mut doc = Table::new();
    doc.insert("name".into(), text(&scenario.name));
    doc.insert("robot".into(), path_text(robot_file)?);

    let scene = &scenario.scene;
    let mut st = Table::new();
    let obstacles = scene
        .obstacles
        .iter()
        .map(|o| {
            let mut t = shape_table(&format!("obstacle `{}`", o.name), &o.shape)?;
            t.insert("name".into(), text(&o.name));
            Ok(Value::Table(t))
        })
        .collect::<Res<Vec<_>>>()?;
    if !obstacles.is_empty() {
        st.insert("obstacle".into(), Value::Array(obstacles));
    }
    let mut holds = Vec::new();
    for h in &scene.holds {
        let what = format!("hold `{}`", h.name);
        let mut t = Table::new();
        t.insert("name".into(), text(&h.name));
        match &h.kind {
            HoldKind::Point { pose, turn_free } => {
                t.insert("type".into(), text("point"));
                put_pose(&mut t, &what, pose)?;
                if *turn_free {
                    t.insert("turn_free".into(), Value::Boolean(true));
                }
            }
            HoldKind::Bar {
                start,
                end,
                approach,
                turn_free,
            } => {
                t.insert("type".into(), text("bar"));
                t.insert(
                    "start".into(),
                    arr(&what, "start", start.coords.as_slice())?,
                );
                t.insert("end".into(), arr(&what, "end", end.coords.as_slice())?);
                t.insert(
                    "approach".into(),
                    arr(&what, "approach", approach.as_slice())?,
                );
                if *turn_free {
                    t.insert("turn_free".into(), Value::Boolean(true));
                }
            }
            HoldKind::Handle { link, pose } => {
                t.insert("type".into(), text("handle"));
                t.insert("link".into(), text(link));
                put_pose(&mut t, &what, pose)?;
            }
        }
        holds.push(Value::Table(t));
    }
    if !holds.is_empty() {
        st.insert("hold".into(), Value::Array(holds));
    }
    let mechanisms = scene
        .mechanisms
        .iter()
        .map(|m| mechanism_table(&m.spec).map(Value::Table))
        .collect::<Res<Vec<_>>>()?;
    if !mechanisms.is_empty() {
        st.insert("mechanism".into(), Value::Array(mechanisms));
    }
    if !st.is_empty() {
        doc.insert("scene".into(), Value::Table(st));
    }

    let mut start = Table::new();
    start.insert(
        "q".into(),
        Value::Table(q_table(scenario, &scenario.start.q)?),
    );
    if !scenario.start.stance.grips.is_empty() {
        start.insert(
            "stance".into(),
            Value::Table(stance_table(scenario, &scenario.start.stance)?),
        );
    }
    doc.insert("start".into(), Value::Table(start));

    let mut goal = Table::new();
    match &scenario.goal {
        Goal::Configuration(q) => {
            goal.insert("q".into(), Value::Table(q_table(scenario, q)?));
        }
        Goal::Stance(s) => {
            goal.insert("stance".into(), Value::Table(stance_table(scenario, s)?));
        }
        Goal::Grip { effector, hold } => {
            let h = scenario
                .scene
                .holds
                .get(*hold)
                .ok_or(ScenarioWriteError::NoSuchHold(*hold))?;
            let mut g = Table::new();
            g.insert("effector".into(), text(effector));
            g.insert("hold".into(), text(&h.name));
            goal.insert("grip".into(), Value::Table(g));
        }
        Goal::BodyInRegion { link, min, max } => {
            let mut r = Table::new();
            r.insert("link".into(), text(link));
            r.insert(
                "min".into(),
                arr("goal region", "min", min.coords.as_slice())?,
            );
            r.insert(
                "max".into(),
                arr("goal region", "max", max.coords.as_slice())?,
            );
            goal.insert("region".into(), Value::Table(r));
        }
    }
    doc.insert("goal".into(), Value::Table(goal));

    let l = &scenario.limits;
    let mut limits = Table::new();
    limits.insert("tolerance".into(), num("limits", "tolerance", l.tolerance)?);
    limits.insert("stride".into(), num("limits", "stride", l.stride)?);
    limits.insert(
        "time_limit".into(),
        num("limits", "time_limit", l.time_limit.as_secs_f64())?,
    );
    let seed = i64::try_from(l.seed).map_err(|_| ScenarioWriteError::NotFinite {
        what: "limits".into(),
        field: "seed",
        value: l.seed as f64,
    })?;
    limits.insert("seed".into(), Value::Integer(seed));
    doc.insert("limits".into(), Value::Table(limits));

    let mut out = Table::new();
    for (key, p) in [
        ("route", &outputs.route),
        ("trajectory", &outputs.trajectory),
        ("summary", &outputs.summary),
        ("picture", &outputs.picture),
        ("plots", &outputs.plots),
    ] {
        if let Some(p) = p {
            out.insert(key.into(), path_text(p)?);
        }
    }
    if !out.is_empty() {
        doc.insert("outputs".into(), Value::Table(out));
    }
    toml::to_string_pretty(&doc).map_err(|e| ScenarioWriteError::Toml(e.to_string()))
}
