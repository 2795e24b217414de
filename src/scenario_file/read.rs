//! Checking a scenario document and building the [`Scenario`]: types and forms of values,
//! references between names (joints, effectors, holds, links), and the start's stance.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Duration;

use nalgebra::{Point3, Vector3};
use toml::Spanned;

use super::raw::{
    FileRaw, GoalRaw, HoldRaw, LimitsRaw, MechanismRaw, Named, ObstacleRaw, OutputsRaw, SceneRaw,
    StartRaw, SECTIONS,
};
use super::{Outputs, ScenarioFile, ScenarioFileError, SETTLE_ITERATIONS};
use crate::collision::Obstacle;
use crate::math::{pose_from_xyz_rpy, Pose};
use crate::model::{JointKind, Robot, RobotSpec};
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};
use crate::robot_file::toml_format::{
    backticked, did_you_mean, locate_model_error, name_duplicate_key, parse_parts, parse_shape,
    rewrite_unknown_key, Field, One, Raw, ShapeRaw,
};
use crate::robot_file::{line_col, load_robot, load_robot_spec, RobotFileError};
use crate::scenario::{Goal, Scenario, ScenarioLimits, Start};
use crate::scene::{Hold, HoldKind, Mechanism, Scene, Stance};

type Span = Range<usize>;
type Res<T> = Result<T, ScenarioFileError>;

const HOLD_TYPES: &[&str] = &["point", "bar", "handle"];

/// Bars shorter than this, and approach directions closer than this to the bar's axis
/// (sine of the angle), are rejected: the grip would be ill-defined.
const MIN_BAR_LENGTH: f64 = 1e-6;
const MIN_APPROACH_SINE: f64 = 1e-6;

struct Checker<'a> {
    text: &'a str,
    path: &'a Path,
    base_dir: PathBuf,
}

impl Checker<'_> {
    fn pos(&self, span: &Span) -> (usize, usize) {
        line_col(self.text, span.start)
    }

    fn field(&self, span: &Span, field: &str, message: String) -> ScenarioFileError {
        let (line, column) = self.pos(span);
        ScenarioFileError::Field {
            path: self.path.to_path_buf(),
            line,
            column,
            field: field.to_string(),
            message,
        }
    }

    fn referenced(&self, span: &Span, field: &str, source: RobotFileError) -> ScenarioFileError {
        let (line, column) = self.pos(span);
        ScenarioFileError::Referenced {
            path: self.path.to_path_buf(),
            line,
            column,
            field: field.to_string(),
            source: Box::new(source),
        }
    }

    /// An error of the robot-format reader about a part of this file (an inline mechanism,
    /// an obstacle shape): same file, same positions, in this module's variants.
    fn embedded(&self, e: RobotFileError) -> ScenarioFileError {
        let path = self.path.to_path_buf();
        match e {
            RobotFileError::Syntax {
                line,
                column,
                message,
                ..
            } => {
                // Value messages start with the key: "`radius` expected a number, ...".
                let keyed = message
                    .strip_prefix('`')
                    .and_then(|rest| rest.split_once('`'))
                    .map(|(k, m)| (k.to_string(), m.trim_start().to_string()));
                match keyed {
                    Some((field, message)) => ScenarioFileError::Field {
                        path,
                        line,
                        column,
                        field,
                        message,
                    },
                    None => ScenarioFileError::Syntax {
                        path,
                        line,
                        column,
                        message,
                    },
                }
            }
            RobotFileError::Model {
                line,
                column,
                field,
                source,
                ..
            } => ScenarioFileError::Field {
                path,
                line,
                column,
                field,
                message: source.to_string(),
            },
            RobotFileError::Mesh {
                line,
                column,
                field,
                mesh,
                message,
                ..
            } => ScenarioFileError::Field {
                path,
                line,
                column,
                field,
                message: format!("mesh `{}`: {message}", mesh.display()),
            },
            other => ScenarioFileError::Referenced {
                path,
                line: 1,
                column: 1,
                field: String::new(),
                source: Box::new(other),
            },
        }
    }

    fn wrong_type(&self, field: &str, expected: &str, v: &Spanned<Raw>) -> ScenarioFileError {
        self.field(
            &v.span(),
            field,
            format!("expected {expected}, found {}", v.get_ref().describe()),
        )
    }

    fn required<'v>(
        &self,
        v: &'v Field,
        field: &str,
        table: &Span,
        what: &str,
    ) -> Res<&'v Spanned<Raw>> {
        v.as_ref().ok_or_else(|| {
            self.field(
                table,
                field,
                format!("{what}: missing required key `{field}`"),
            )
        })
    }

    fn forbid(&self, v: &Field, field: &str, why: &str) -> Res<()> {
        match v {
            Some(v) => Err(self.field(&v.span(), field, format!("not allowed {why}"))),
            None => Ok(()),
        }
    }

    fn string(&self, v: &Spanned<Raw>, field: &str) -> Res<String> {
        match v.get_ref() {
            Raw::Str(s) if !s.is_empty() => Ok(s.clone()),
            Raw::Str(_) => Err(self.field(&v.span(), field, "expected a non-empty string".into())),
            _ => Err(self.wrong_type(field, "a string", v)),
        }
    }

    fn boolean(&self, v: &Spanned<Raw>, field: &str) -> Res<bool> {
        match v.get_ref() {
            Raw::Bool(b) => Ok(*b),
            _ => Err(self.wrong_type(field, "a boolean (true or false)", v)),
        }
    }

    fn finite(&self, x: f64, span: &Span, field: &str, expected: &str) -> Res<f64> {
        if x.is_finite() {
            Ok(x)
        } else {
            Err(self.field(span, field, format!("expected {expected}, found {x}")))
        }
    }

    /// A finite number (integers are accepted).
    fn number(&self, v: &Spanned<Raw>, field: &str) -> Res<f64> {
        match v.get_ref() {
            Raw::Int(i) => Ok(*i as f64),
            Raw::Float(x) => self.finite(*x, &v.span(), field, "a finite number"),
            _ => Err(self.wrong_type(field, "a number", v)),
        }
    }

    /// A finite number greater than zero.
    fn positive(&self, v: &Spanned<Raw>, field: &str) -> Res<f64> {
        let x = match v.get_ref() {
            Raw::Int(i) => *i as f64,
            Raw::Float(x) => self.finite(*x, &v.span(), field, "a finite number greater than 0")?,
            _ => return Err(self.wrong_type(field, "a number greater than 0", v)),
        };
        if x > 0.0 {
            Ok(x)
        } else {
            Err(self.field(
                &v.span(),
                field,
                format!("expected a number greater than 0, found {x}"),
            ))
        }
    }

    /// An array of exactly `n` finite numbers.
    fn numbers(&self, v: &Spanned<Raw>, field: &str, n: usize) -> Res<Vec<f64>> {
        let expected = format!("an array of {n} numbers");
        match v.get_ref() {
            Raw::Array(items) if items.len() == n => items
                .iter()
                .enumerate()
                .map(|(k, x)| match x.get_ref() {
                    Raw::Int(i) => Ok(*i as f64),
                    Raw::Float(f) => self.finite(
                        *f,
                        &x.span(),
                        field,
                        &format!("{expected} (item {} finite)", k + 1),
                    ),
                    other => Err(self.field(
                        &x.span(),
                        field,
                        format!(
                            "expected {expected}, but item {} is {}",
                            k + 1,
                            other.describe()
                        ),
                    )),
                })
                .collect(),
            _ => Err(self.wrong_type(field, &expected, v)),
        }
    }

    fn vec3(&self, v: &Spanned<Raw>, field: &str) -> Res<Vector3<f64>> {
        Ok(Vector3::from_iterator(self.numbers(v, field, 3)?))
    }

    fn pose(&self, xyz: &Field, rpy: &Field) -> Res<Pose> {
        let t = match xyz {
            Some(v) => self.vec3(v, "xyz")?,
            None => Vector3::zeros(),
        };
        let r = match rpy {
            Some(v) => self.vec3(v, "rpy")?,
            None => Vector3::zeros(),
        };
        Ok(pose_from_xyz_rpy([t.x, t.y, t.z], [r.x, r.y, r.z]))
    }

    fn choice(&self, v: &Spanned<Raw>, field: &str, choices: &[&str]) -> Res<String> {
        match v.get_ref() {
            Raw::Str(s) if choices.contains(&s.as_str()) => Ok(s.clone()),
            Raw::Str(s) => Err(self.field(
                &v.span(),
                field,
                format!(
                    "expected one of {}, found \"{s}\"{}",
                    backticked(choices),
                    did_you_mean(s, choices)
                ),
            )),
            _ => Err(self.wrong_type(field, &format!("one of {}", backticked(choices)), v)),
        }
    }

    /// A path relative to the scenario file's directory that must name an existing file.
    fn existing_file(&self, v: &Spanned<Raw>, field: &str, what: &str) -> Res<PathBuf> {
        let rel = self.string(v, field)?;
        let path = self.base_dir.join(&rel);
        if path.is_file() {
            Ok(path)
        } else {
            Err(self.field(
                &v.span(),
                field,
                format!(
                    "{what} `{}` not found (paths are relative to the scenario file's directory, `{}`)",
                    path.display(),
                    self.base_dir.display()
                ),
            ))
        }
    }

    /// A name that must be one of `names` (the message lists close ones).
    fn reference(&self, v: &Spanned<String>, field: &str, kind: &str, names: &[&str]) -> Res<()> {
        let got = v.get_ref();
        if names.contains(&got.as_str()) {
            return Ok(());
        }
        Err(self.field(
            &v.span(),
            field,
            format!(
                "no {kind} named `{got}`; expected one of {}{}",
                if names.is_empty() {
                    "(none defined)".to_string()
                } else {
                    backticked(names)
                },
                did_you_mean(got, names)
            ),
        ))
    }
}

// ---------------------------------------------------------------------------------------

pub(super) fn read(text: &str, path: &Path) -> Res<ScenarioFile> {
    let raw: FileRaw = toml::from_str(text).map_err(|e| {
        let (line, column) = e.span().map_or((1, 1), |s| line_col(text, s.start));
        ScenarioFileError::Syntax {
            path: path.to_path_buf(),
            line,
            column,
            message: name_duplicate_key(
                rewrite_unknown_key(e.message().trim_end(), SECTIONS),
                text,
                e.span(),
            ),
        }
    })?;
    let c = Checker {
        text,
        path,
        base_dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    let start_of_file = 0..0;

    let name = match &raw.name {
        Some(v) => c.string(v, "name")?,
        None => default_name(path),
    };
    let robot_v = raw.robot.as_ref().ok_or_else(|| {
        c.field(
            &start_of_file,
            "robot",
            "missing required key `robot` (the robot file, `.toml` or `.urdf`, relative to this file)"
                .into(),
        )
    })?;
    let robot_file = c.existing_file(robot_v, "robot", "robot file")?;
    // Loaded whole first so errors inside the robot file point into it.
    load_robot(&robot_file).map_err(|e| c.referenced(&robot_v.span(), "robot", e))?;
    let robot_spec =
        load_robot_spec(&robot_file).map_err(|e| c.referenced(&robot_v.span(), "robot", e))?;

    let empty_scene;
    let scene_raw: &SceneRaw = match &raw.scene {
        Some(s) => &s.get_ref().0,
        None => {
            empty_scene = SceneRaw {
                obstacle: Default::default(),
                hold: Default::default(),
                mechanism: Default::default(),
            };
            &empty_scene
        }
    };
    let mut scene = Scene::default();
    for o in &scene_raw.obstacle.0 {
        scene.obstacles.push(obstacle(&c, o, &scene.obstacles)?);
    }
    let mut mech_spans = Vec::new();
    for m in &scene_raw.mechanism.0 {
        scene.mechanisms.push(mechanism(&c, m)?);
        mech_spans.push(m.span());
    }
    let robot = Arc::new(attach(&c, robot_spec, &scene, &mech_spans, robot_v)?);
    let mut hold_lines: Vec<(String, usize)> = Vec::new();
    for h in &scene_raw.hold.0 {
        let hold = hold(&c, h, &robot, &hold_lines)?;
        hold_lines.push((hold.name.clone(), c.pos(&h.span()).0));
        scene.holds.push(hold);
    }

    let limits = limits(&c, raw.limits.as_ref().map(|l| &l.get_ref().0))?;
    let (start, settled) = start(&c, raw.start.as_ref(), &robot, &scene, &limits)?;
    let goal = goal(&c, raw.goal.as_ref(), &robot, &scene, &start, &limits)?;
    let outputs = outputs(&c, raw.outputs.as_ref().map(|o| &o.get_ref().0))?;

    Ok(ScenarioFile {
        scenario: Scenario {
            name,
            robot,
            scene,
            start,
            goal,
            constant: Vec::new(),
            limits,
        },
        robot_file,
        outputs,
        settled,
    })
}

/// The file name without `.scenario.toml` (or its last extension).
fn default_name(path: &Path) -> String {
    let file = path
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_default();
    match file.strip_suffix(".scenario.toml") {
        Some(s) => s.to_string(),
        None => path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or(file),
    }
}

fn obstacle(c: &Checker, raw: &Spanned<ObstacleRaw>, earlier: &[Obstacle]) -> Res<Obstacle> {
    let span = raw.span();
    let o = raw.get_ref();
    let what = format!("[[scene.obstacle]] number {}", earlier.len() + 1);
    let name_v = c.required(&o.name, "name", &span, &what)?;
    let name = c.string(name_v, "name")?;
    if earlier.iter().any(|e| e.name == name) {
        return Err(c.field(
            &name_v.span(),
            "name",
            format!(
                "two obstacles are named `{name}`; expected a name not used by another obstacle"
            ),
        ));
    }
    let shape = ShapeRaw {
        kind: o.kind.clone(),
        radius: o.radius.clone(),
        length: o.length.clone(),
        size: o.size.clone(),
        file: o.file.clone(),
        scale: o.scale.clone(),
        convex: o.convex.clone(),
        xyz: o.xyz.clone(),
        rpy: o.rpy.clone(),
    };
    let shape = parse_shape(c.text, c.path, &name, &Spanned::new(span, shape)).map_err(|e| {
        match c.embedded(e) {
            // The model names a shape by its link; an obstacle is not on one.
            ScenarioFileError::Field {
                path,
                line,
                column,
                field,
                message,
            } => ScenarioFileError::Field {
                path,
                line,
                column,
                field,
                message: message.replace(
                    &format!("link `{name}` shape 0"),
                    &format!("obstacle `{name}`"),
                ),
            },
            e => e,
        }
    })?;
    Ok(Obstacle { name, shape })
}

fn mechanism(c: &Checker, raw: &Spanned<MechanismRaw>) -> Res<Mechanism> {
    let span = raw.span();
    let m = raw.get_ref();
    let inline = !m.link.0.is_empty()
        || !m.joint.0.is_empty()
        || !m.effector.0.is_empty()
        || m.collision.is_some();
    let name = match &m.name {
        Some(v) => Some(c.string(v, "name")?),
        None => None,
    };
    let spec = match (&m.file, inline) {
        (Some(f), true) => {
            return Err(c.field(
                &f.span(),
                "file",
                "expected either `file` or inline tables (`link`, `joint`, ...), not both".into(),
            ))
        }
        (Some(f), false) => {
            let file = c.existing_file(f, "file", "mechanism file")?;
            load_robot(&file).map_err(|e| c.referenced(&f.span(), "file", e))?;
            let mut spec =
                load_robot_spec(&file).map_err(|e| c.referenced(&f.span(), "file", e))?;
            if let Some(n) = name {
                spec.name = n;
            }
            spec
        }
        (None, true) => {
            let name = name.ok_or_else(|| {
                c.field(
                    &span,
                    "name",
                    "an inline [[scene.mechanism]]: missing required key `name`".into(),
                )
            })?;
            let (spec, map) = parse_parts(
                c.text,
                c.path,
                name,
                &m.collision,
                &m.link,
                &m.joint,
                &m.effector,
            )
            .map_err(|e| c.embedded(e))?;
            spec.build()
                .map_err(|e| c.embedded(locate_model_error(e, &map, c.path)))?;
            spec
        }
        (None, false) => {
            return Err(c.field(
                &span,
                "file",
                "a [[scene.mechanism]] needs a `file` (robot format or URDF) or inline \
                 [[scene.mechanism.link]] and [[scene.mechanism.joint]] tables"
                    .into(),
            ))
        }
    };
    Ok(Mechanism { spec })
}

/// The robot with every mechanism attached. Attached one at a time so a clash (a name used
/// by the robot and a mechanism) is reported at the mechanism that brings it.
fn attach(
    c: &Checker,
    mut spec: RobotSpec,
    scene: &Scene,
    mech_spans: &[Span],
    robot_v: &Spanned<Raw>,
) -> Res<Robot> {
    for (m, span) in scene.mechanisms.iter().zip(mech_spans) {
        spec.attach_mechanism(&m.spec);
        spec.build().map_err(|e| {
            c.field(
                span,
                "mechanism",
                format!(
                    "mechanism `{}` cannot be attached to the robot: {e}; expected names \
                     not used by the robot or another mechanism",
                    m.spec.name
                ),
            )
        })?;
    }
    spec.build().map_err(|e| {
        c.field(
            &robot_v.span(),
            "robot",
            format!("the robot cannot be built: {e}"),
        )
    })
}

fn hold(
    c: &Checker,
    raw: &Spanned<HoldRaw>,
    robot: &Robot,
    earlier: &[(String, usize)],
) -> Res<Hold> {
    let span = raw.span();
    let h = raw.get_ref();
    let what = format!("[[scene.hold]] number {}", earlier.len() + 1);
    let name_v = c.required(&h.name, "name", &span, &what)?;
    let name = c.string(name_v, "name")?;
    if let Some((_, line)) = earlier.iter().find(|(n, _)| *n == name) {
        return Err(c.field(
            &name_v.span(),
            "name",
            format!(
                "two holds are named `{name}` (the first on line {line}); expected a name \
                 not used by another hold"
            ),
        ));
    }
    let what = format!("hold `{name}`");
    let kind = c.choice(
        c.required(&h.kind, "type", &span, &what)?,
        "type",
        HOLD_TYPES,
    )?;
    let takes: &[&str] = match kind.as_str() {
        "point" => &["xyz", "rpy", "turn_free"],
        "bar" => &["start", "end", "approach", "turn_free"],
        _ => &["link", "xyz", "rpy"],
    };
    for (key, v) in [
        ("xyz", &h.xyz),
        ("rpy", &h.rpy),
        ("turn_free", &h.turn_free),
        ("start", &h.start),
        ("end", &h.end),
        ("approach", &h.approach),
        ("link", &h.link),
    ] {
        if !takes.contains(&key) {
            c.forbid(
                v,
                key,
                &format!("on a {kind} hold (it takes {})", backticked(takes)),
            )?;
        }
    }
    let turn_free = match &h.turn_free {
        Some(v) => c.boolean(v, "turn_free")?,
        None => false,
    };
    let kind = match kind.as_str() {
        "point" => HoldKind::Point {
            pose: c.pose(&h.xyz, &h.rpy)?,
            turn_free,
        },
        "bar" => {
            let what = format!("{what} (bar)");
            let start = c.vec3(c.required(&h.start, "start", &span, &what)?, "start")?;
            let end_v = c.required(&h.end, "end", &span, &what)?;
            let end = c.vec3(end_v, "end")?;
            let approach_v = c.required(&h.approach, "approach", &span, &what)?;
            let approach = c.vec3(approach_v, "approach")?;
            let axis = end - start;
            if axis.norm() < MIN_BAR_LENGTH {
                return Err(c.field(
                    &end_v.span(),
                    "end",
                    format!(
                        "expected a point at least {MIN_BAR_LENGTH} m from `start` (a bar \
                         has a length), found {}",
                        axis.norm()
                    ),
                ));
            }
            let sine =
                axis.normalize().cross(&approach).norm() / approach.norm().max(f64::MIN_POSITIVE);
            if approach.norm() == 0.0 || sine < MIN_APPROACH_SINE {
                return Err(c.field(
                    &approach_v.span(),
                    "approach",
                    "expected a direction not along the bar (the hand moves onto the bar \
                     from the side)"
                        .into(),
                ));
            }
            HoldKind::Bar {
                start: Point3::from(start),
                end: Point3::from(end),
                approach,
                turn_free,
            }
        }
        _ => {
            let link_v = c.required(&h.link, "link", &span, &format!("{what} (handle)"))?;
            let link = c.string(link_v, "link")?;
            let names: Vec<&str> = robot.links().iter().map(|l| l.name.as_str()).collect();
            c.reference(
                &Spanned::new(link_v.span(), link.clone()),
                "link",
                "link of the robot or its mechanisms",
                &names,
            )?;
            HoldKind::Handle {
                link,
                pose: c.pose(&h.xyz, &h.rpy)?,
            }
        }
    };
    Ok(Hold { name, kind })
}

fn limits(c: &Checker, raw: Option<&LimitsRaw>) -> Res<ScenarioLimits> {
    let mut limits = ScenarioLimits::default();
    let Some(l) = raw else { return Ok(limits) };
    if let Some(v) = &l.tolerance {
        limits.tolerance = c.positive(v, "tolerance")?;
    }
    if let Some(v) = &l.stride {
        limits.stride = c.positive(v, "stride")?;
    }
    if let Some(v) = &l.time_limit {
        let secs = c.positive(v, "time_limit")?;
        limits.time_limit = Duration::try_from_secs_f64(secs).map_err(|_| {
            c.field(
                &v.span(),
                "time_limit",
                format!("expected a number of seconds that fits a duration, found {secs}"),
            )
        })?;
    }
    if let Some(v) = &l.seed {
        limits.seed = match v.get_ref() {
            Raw::Int(i) if *i >= 0 => *i as u64,
            Raw::Int(i) => {
                return Err(c.field(
                    &v.span(),
                    "seed",
                    format!("expected a whole number 0 or greater, found {i}"),
                ))
            }
            _ => return Err(c.wrong_type("seed", "a whole number 0 or greater", v)),
        };
    }
    Ok(limits)
}

/// Joint values by name over `q`: one number per one-DOF joint, `[x, y, z, roll, pitch,
/// yaw]` for a floating joint. Each value must lie within the joint's position limits.
fn joint_values(c: &Checker, named: &Spanned<Named>, robot: &Robot, q: &mut [f64]) -> Res<()> {
    let names: Vec<&str> = robot
        .joints()
        .iter()
        .filter(|j| j.kind != JointKind::Fixed)
        .map(|j| j.name.as_str())
        .collect();
    let mut seen: BTreeMap<&str, ()> = BTreeMap::new();
    for (key, value) in &named.get_ref().0 {
        let field = format!("q.{}", key.get_ref());
        let joint = match robot.joint_id(key.get_ref()) {
            Some(j) if robot.joints()[j].kind != JointKind::Fixed => &robot.joints()[j],
            Some(_) => {
                return Err(c.field(
                    &key.span(),
                    &field,
                    format!(
                        "joint `{}` is fixed and has no value; expected one of {}",
                        key.get_ref(),
                        backticked(&names)
                    ),
                ))
            }
            None => {
                c.reference(key, &field, "movable joint", &names)?;
                continue;
            }
        };
        if seen.insert(key.get_ref().as_str(), ()).is_some() {
            return Err(c.field(&key.span(), &field, "given twice".into()));
        }
        let i = joint.q_index;
        if joint.kind == JointKind::Floating {
            let x = c.numbers(value, &field, 6).map_err(|e| match e {
                ScenarioFileError::Field {
                    path,
                    line,
                    column,
                    field,
                    message,
                } => ScenarioFileError::Field {
                    path,
                    line,
                    column,
                    field,
                    message: format!("{message} (a floating joint: [x, y, z, roll, pitch, yaw])"),
                },
                e => e,
            })?;
            let pose = pose_from_xyz_rpy([x[0], x[1], x[2]], [x[3], x[4], x[5]]);
            let quat = nalgebra::UnitQuaternion::from_rotation_matrix(&pose.rotation);
            let v = quat.quaternion().coords; // (x, y, z, w)
            q[i..i + 3].copy_from_slice(&x[..3]);
            q[i + 3..i + 7].copy_from_slice(&[v[0], v[1], v[2], v[3]]);
        } else {
            q[i] = c.number(value, &field)?;
        }
        for (k, lim) in joint.bounded_coordinates() {
            let x = q[k];
            if x < lim.lower || x > lim.upper {
                return Err(c.field(
                    &value.span(),
                    &field,
                    format!(
                        "expected a value within joint `{}`'s limits [{}, {}], found {x}",
                        joint.name, lim.lower, lim.upper
                    ),
                ));
            }
        }
    }
    Ok(())
}

/// `effector = "hold"` entries.
fn stance(
    c: &Checker,
    named: &Spanned<Named>,
    prefix: &str,
    robot: &Robot,
    scene: &Scene,
) -> Res<Stance> {
    let effectors: Vec<&str> = robot.effectors().iter().map(|e| e.name.as_str()).collect();
    let holds: Vec<&str> = scene.holds.iter().map(|h| h.name.as_str()).collect();
    let mut stance = Stance::new();
    for (key, value) in &named.get_ref().0 {
        let field = format!("{prefix}.{}", key.get_ref());
        c.reference(key, &field, "effector", &effectors)?;
        if stance.grips.contains_key(key.get_ref()) {
            return Err(c.field(&key.span(), &field, "given twice".into()));
        }
        let hold = c.string(value, &field)?;
        c.reference(
            &Spanned::new(value.span(), hold.clone()),
            &field,
            "hold",
            &holds,
        )?;
        let (index, _) = scene
            .hold(&hold)
            .map_err(|e| c.field(&value.span(), &field, e.to_string()))?;
        stance.grips.insert(key.get_ref().clone(), index);
    }
    Ok(stance)
}

fn start(
    c: &Checker,
    raw: Option<&Spanned<One<StartRaw>>>,
    robot: &Robot,
    scene: &Scene,
    limits: &ScenarioLimits,
) -> Res<(Start, bool)> {
    let mut q = robot.neutral();
    let Some(raw) = raw else {
        return Ok((
            Start {
                q,
                stance: Stance::new(),
            },
            false,
        ));
    };
    let s = &raw.get_ref().0;
    if let Some(named) = &s.q {
        joint_values(c, named, robot, &mut q)?;
    }
    let stance = match &s.stance {
        Some(named) => stance(c, named, "stance", robot, scene)?,
        None => Stance::new(),
    };
    let settle = match &s.settle {
        Some(v) => c.boolean(v, "settle")?,
        None => false,
    };
    if stance.grips.is_empty() {
        return Ok((Start { q, stance }, settle));
    }
    let stance_span = s.stance.as_ref().map_or(raw.span(), |v| v.span());
    let stack = stance
        .constraints(robot, scene, &[])
        .map_err(|e| c.field(&stance_span, "stance", e.to_string()))?;
    let constraint_error =
        |e: crate::constraint::ConstraintError| c.field(&stance_span, "stance", e.to_string());
    if settle {
        // Settled well inside the scenario's tolerance (a thousandth of it, as the planners'
        // projections), so the start also passes the planners' stricter validity checks.
        let settings = ProjectionSettings {
            tolerance: (limits.tolerance * 1e-3).max(1e-13),
            max_iterations: SETTLE_ITERATIONS,
            ..ProjectionSettings::default()
        };
        let mut buf = ProjectionBuffer::new(robot, &stack);
        let report =
            project(robot, &stack, &settings, &mut q, &mut buf).map_err(constraint_error)?;
        if !report.converged() {
            let settle_span = s.settle.as_ref().map_or(raw.span(), |v| v.span());
            return Err(c.field(
                &settle_span,
                "settle",
                format!(
                    "could not settle the start onto its stance {}: residual {:.3e} after {} \
                     steps (tolerance {:e}); expected a start `q` closer to the stance",
                    stance.describe(scene),
                    report.residual,
                    report.iterations,
                    limits.tolerance
                ),
            ));
        }
    } else {
        let mut buf = stack.buffer(robot);
        let residual = stack
            .evaluate(robot, &q, &mut buf, false)
            .map_err(constraint_error)?;
        if residual.is_nan() || residual > limits.tolerance {
            return Err(c.field(
                &stance_span,
                "stance",
                format!(
                    "the start configuration is {residual:.3e} off this stance (tolerance \
                     {:e}); expected a `q` that satisfies it, or `settle = true` to project it on",
                    limits.tolerance
                ),
            ));
        }
    }
    Ok((Start { q, stance }, settle))
}

/// A configuration goal lies in the start's stance: project it onto that stance's manifold
/// with the joints the file names held at their values (the others, passive mechanism joints
/// included, move). A goal that already satisfies the stance is left as it is.
fn settle_goal(
    c: &Checker,
    named: &Spanned<Named>,
    robot: &Robot,
    scene: &Scene,
    start: &Start,
    limits: &ScenarioLimits,
    q: &mut [f64],
) -> Res<()> {
    if start.stance.grips.is_empty() {
        return Ok(());
    }
    let field_error = |e: String| c.field(&named.span(), "q", e);
    let stack = start
        .stance
        .constraints(robot, scene, &[])
        .map_err(|e| field_error(e.to_string()))?;
    let settings = ProjectionSettings {
        tolerance: (limits.tolerance * 1e-3).max(1e-13),
        max_iterations: SETTLE_ITERATIONS,
        ..ProjectionSettings::default()
    };
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let mut held = Vec::new();
    for (key, _) in &named.get_ref().0 {
        if let Some(j) = robot.joint_id(key.get_ref()).map(|j| &robot.joints()[j]) {
            if let Some(&v) = q.get(j.q_index) {
                if buf.pin(j.v_index, v) {
                    held.push(key.get_ref().as_str());
                }
            }
        }
    }
    let report =
        project(robot, &stack, &settings, q, &mut buf).map_err(|e| field_error(e.to_string()))?;
    if !report.converged() {
        return Err(field_error(format!(
            "the goal configuration cannot hold the start's stance {} with {} at the values              given: residual {:.3e} after {} steps (tolerance {:e}); expected joint values              the stance allows",
            start.stance.describe(scene),
            if held.is_empty() {
                "the joints".to_string()
            } else {
                backticked(&held)
            },
            report.residual,
            report.iterations,
            limits.tolerance
        )));
    }
    Ok(())
}

fn goal(
    c: &Checker,
    raw: Option<&Spanned<One<GoalRaw>>>,
    robot: &Robot,
    scene: &Scene,
    start: &Start,
    limits: &ScenarioLimits,
) -> Res<Goal> {
    let raw = raw.ok_or_else(|| {
        c.field(
            &(0..0),
            "goal",
            "missing required table [goal] (with one of `q`, `stance`, `grip`, `region`)".into(),
        )
    })?;
    let g = &raw.get_ref().0;
    let given: Vec<(&str, Span)> = [
        ("q", g.q.as_ref().map(|v| v.span())),
        ("stance", g.stance.as_ref().map(|v| v.span())),
        ("grip", g.grip.as_ref().map(|v| v.span())),
        ("region", g.region.as_ref().map(|v| v.span())),
    ]
    .into_iter()
    .filter_map(|(k, s)| s.map(|s| (k, s)))
    .collect();
    // The second one in the file is the one at fault.
    let mut given = given;
    given.sort_by_key(|(_, s)| s.start);
    match given.as_slice() {
        [] => {
            return Err(c.field(
                &raw.span(),
                "goal",
                "expected exactly one of `q`, `stance`, `grip`, `region`, found none".into(),
            ))
        }
        [_] => {}
        [(first, _), (second, span), ..] => {
            return Err(c.field(
                span,
                second,
                format!(
                    "expected exactly one of `q`, `stance`, `grip`, `region`; `{first}` is \
                     already given"
                ),
            ))
        }
    }
    if let Some(named) = &g.q {
        let mut q = start.q.clone();
        joint_values(c, named, robot, &mut q)?;
        settle_goal(c, named, robot, scene, start, limits, &mut q)?;
        return Ok(Goal::Configuration(q));
    }
    if let Some(named) = &g.stance {
        let st = stance(c, named, "stance", robot, scene)?;
        if st.grips.is_empty() {
            return Err(c.field(
                &named.span(),
                "stance",
                "expected at least one `effector = \"hold\"` entry".into(),
            ));
        }
        return Ok(Goal::Stance(st));
    }
    if let Some(grip) = &g.grip {
        let span = grip.span();
        let gr = &grip.get_ref().0;
        let effector_v = c.required(&gr.effector, "effector", &span, "[goal.grip]")?;
        let effector = c.string(effector_v, "effector")?;
        let effectors: Vec<&str> = robot.effectors().iter().map(|e| e.name.as_str()).collect();
        c.reference(
            &Spanned::new(effector_v.span(), effector.clone()),
            "effector",
            "effector",
            &effectors,
        )?;
        let hold_v = c.required(&gr.hold, "hold", &span, "[goal.grip]")?;
        let hold = c.string(hold_v, "hold")?;
        let holds: Vec<&str> = scene.holds.iter().map(|h| h.name.as_str()).collect();
        c.reference(
            &Spanned::new(hold_v.span(), hold.clone()),
            "hold",
            "hold",
            &holds,
        )?;
        let (index, _) = scene
            .hold(&hold)
            .map_err(|e| c.field(&hold_v.span(), "hold", e.to_string()))?;
        return Ok(Goal::Grip {
            effector,
            hold: index,
        });
    }
    let Some(region) = &g.region else {
        return Err(c.field(&raw.span(), "goal", "expected a goal".into()));
    };
    let span = region.span();
    let r = &region.get_ref().0;
    let link_v = c.required(&r.link, "link", &span, "[goal.region]")?;
    let link = c.string(link_v, "link")?;
    let links: Vec<&str> = robot.links().iter().map(|l| l.name.as_str()).collect();
    c.reference(
        &Spanned::new(link_v.span(), link.clone()),
        "link",
        "link",
        &links,
    )?;
    let min = c.vec3(c.required(&r.min, "min", &span, "[goal.region]")?, "min")?;
    let max_v = c.required(&r.max, "max", &span, "[goal.region]")?;
    let max = c.vec3(max_v, "max")?;
    for (k, axis) in ["x", "y", "z"].iter().enumerate() {
        if max[k] < min[k] {
            return Err(c.field(
                &max_v.span(),
                "max",
                format!(
                    "expected each coordinate at least `min`'s (an empty region can never be \
                     reached), found {axis} = {} < {}",
                    max[k], min[k]
                ),
            ));
        }
    }
    Ok(Goal::BodyInRegion {
        link,
        min: Point3::from(min),
        max: Point3::from(max),
    })
}

fn outputs(c: &Checker, raw: Option<&OutputsRaw>) -> Res<Outputs> {
    let mut out = Outputs::default();
    let Some(o) = raw else { return Ok(out) };
    for (key, v, slot) in [
        ("route", &o.route, &mut out.route),
        ("trajectory", &o.trajectory, &mut out.trajectory),
        ("summary", &o.summary, &mut out.summary),
        ("picture", &o.picture, &mut out.picture),
        ("plots", &o.plots, &mut out.plots),
    ] {
        if let Some(v) = v {
            *slot = Some(c.base_dir.join(c.string(v, key)?));
        }
    }
    Ok(out)
}
