//! The scene: everything around the robot. Obstacles (fixed shapes), holds (places an
//! effector can grip) and mechanisms (passive articulated bodies such as doors and levers).
//!
//! Plain data plus the one bridge every planner needs: turning "effector E on hold H" into a
//! grip constraint, and a set of such assignments (a [`Stance`]) into a constraint stack.

use std::collections::BTreeMap;
use std::sync::Arc;

use nalgebra::{Point3, Unit, Vector3};
use thiserror::Error;

use crate::collision::Obstacle;
use crate::constraint::{
    BarGrip, Constraint, ConstraintError, ConstraintStack, FrameMatch, MatchMode,
};
use crate::math::Pose;
use crate::model::{Robot, RobotSpec};

/// A scene built or used wrongly.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum SceneError {
    #[error("no hold named `{0}` in the scene")]
    NoSuchHold(String),
    #[error("hold `{hold}`: {source}")]
    Grip {
        hold: String,
        #[source]
        source: ConstraintError,
    },
    #[error("two holds are named `{0}`")]
    DuplicateHold(String),
}

/// A place in the scene an effector can grip.
#[derive(Clone, Debug, PartialEq)]
pub struct Hold {
    pub name: String,
    pub kind: HoldKind,
}

/// The geometry of a hold. Grip frame convention (shared with the constraints): the grip
/// frame's z axis is the approach direction (the hand moves along +z onto the hold).
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum HoldKind {
    /// One fixed grip frame in the world. With `turn_free` the effector may turn about the
    /// frame's z axis (5 rows instead of 6).
    Point { pose: Pose, turn_free: bool },
    /// A straight rail segment: grip anywhere from `start` to `end`. `approach` is the
    /// direction in which the hand moves onto the bar (projected perpendicular to it); with
    /// `turn_free` the hand may also turn about the bar's axis.
    Bar {
        start: Point3<f64>,
        end: Point3<f64>,
        approach: Vector3<f64>,
        turn_free: bool,
    },
    /// A handle: grip frame `pose` fixed on link `link` of a mechanism (moves with it).
    Handle { link: String, pose: Pose },
}

impl Hold {
    pub fn point(name: impl Into<String>, pose: Pose) -> Self {
        Hold {
            name: name.into(),
            kind: HoldKind::Point {
                pose,
                turn_free: false,
            },
        }
    }

    pub fn bar(
        name: impl Into<String>,
        start: Point3<f64>,
        end: Point3<f64>,
        approach: Vector3<f64>,
    ) -> Self {
        Hold {
            name: name.into(),
            kind: HoldKind::Bar {
                start,
                end,
                approach,
                turn_free: false,
            },
        }
    }

    pub fn is_bar(&self) -> bool {
        matches!(self.kind, HoldKind::Bar { .. })
    }

    /// The grip constraint "effector `effector` of `robot` on this hold".
    pub fn grip(&self, robot: &Robot, effector: &str) -> Result<Arc<dyn Constraint>, SceneError> {
        let wrap = |source| SceneError::Grip {
            hold: self.name.clone(),
            source,
        };
        let c: Arc<dyn Constraint> = match &self.kind {
            HoldKind::Point { pose, turn_free } => {
                let mode = if *turn_free {
                    MatchMode::TurnAbout(Unit::new_unchecked(Vector3::z()))
                } else {
                    MatchMode::Full
                };
                let mut g = FrameMatch::point_grip(robot, effector, *pose, mode).map_err(wrap)?;
                g.label = format!("{effector} on {}", self.name);
                Arc::new(g)
            }
            HoldKind::Bar {
                start,
                end,
                approach,
                turn_free,
            } => {
                let mut g = BarGrip::new(robot, effector, *start, *end, *approach, *turn_free)
                    .map_err(wrap)?;
                g.label = format!("{effector} on {}", self.name);
                Arc::new(g)
            }
            HoldKind::Handle { link, pose } => {
                let mut g =
                    FrameMatch::handle_tether(robot, effector, link, *pose).map_err(wrap)?;
                g.label = format!("{effector} on {}", self.name);
                Arc::new(g)
            }
        };
        Ok(c)
    }

    /// A point of the hold that does not move (for reach pruning), and the hold's half
    /// extent around it: the bar's midpoint and half length, a point hold's position and 0.
    /// `None` for handles (they move with their mechanism).
    pub fn fixed_extent(&self) -> Option<(Point3<f64>, f64)> {
        match &self.kind {
            HoldKind::Point { pose, .. } => Some((Point3::from(pose.translation.vector), 0.0)),
            HoldKind::Bar { start, end, .. } => {
                Some((nalgebra::center(start, end), 0.5 * (end - start).norm()))
            }
            HoldKind::Handle { .. } => None,
        }
    }
}

/// A passive articulated body described like a robot (its root link stands for the world).
/// Attached to the robot with [`RobotSpec::attach_mechanism`], its joints become passive
/// joints of `q`.
#[derive(Clone, Debug)]
pub struct Mechanism {
    pub spec: RobotSpec,
}

/// Everything around the robot.
#[derive(Clone, Debug, Default)]
pub struct Scene {
    pub obstacles: Vec<Obstacle>,
    pub holds: Vec<Hold>,
    pub mechanisms: Vec<Mechanism>,
}

impl Scene {
    /// The hold named `name` and its index.
    pub fn hold(&self, name: &str) -> Result<(usize, &Hold), SceneError> {
        self.holds
            .iter()
            .enumerate()
            .find(|(_, h)| h.name == name)
            .ok_or_else(|| SceneError::NoSuchHold(name.to_string()))
    }

    /// Hold names are unique.
    pub fn check(&self) -> Result<(), SceneError> {
        for (i, h) in self.holds.iter().enumerate() {
            if self.holds[..i].iter().any(|o| o.name == h.name) {
                return Err(SceneError::DuplicateHold(h.name.clone()));
            }
        }
        Ok(())
    }

    /// `robot` with every mechanism of the scene attached (its joints passive joints of `q`).
    pub fn attach_mechanisms(&self, robot: &mut RobotSpec) {
        for m in &self.mechanisms {
            robot.attach_mechanism(&m.spec);
        }
    }
}

/// A stance: which hold each gripping effector is on (effector name -> hold index). Effectors
/// not listed are free. A stance with a bar grip stands for the whole family of grip
/// positions along that bar; the position is a coordinate of the manifold, not of the stance.
#[derive(Clone, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Stance {
    pub grips: BTreeMap<String, usize>,
}

impl Stance {
    pub fn new() -> Self {
        Stance::default()
    }

    /// This stance with `effector` on hold `hold` (replacing any earlier grip of it).
    pub fn with(mut self, effector: impl Into<String>, hold: usize) -> Self {
        self.grips.insert(effector.into(), hold);
        self
    }

    /// This stance with `effector` free.
    pub fn without(mut self, effector: &str) -> Self {
        self.grips.remove(effector);
        self
    }

    /// The constraint stack of this stance, plus `extra` constraints that hold in every stance
    /// (a carried object, keep-level rows).
    pub fn constraints(
        &self,
        robot: &Robot,
        scene: &Scene,
        extra: &[Arc<dyn Constraint>],
    ) -> Result<ConstraintStack, SceneError> {
        let mut stack = ConstraintStack::new();
        for (effector, &hold) in &self.grips {
            let h = scene
                .holds
                .get(hold)
                .ok_or_else(|| SceneError::NoSuchHold(format!("#{hold}")))?;
            stack.push(h.grip(robot, effector)?);
        }
        for c in extra {
            stack.push(c.clone());
        }
        Ok(stack)
    }

    /// Human-readable: `left_gripper@bar3 right_gripper@bar4`.
    pub fn describe(&self, scene: &Scene) -> String {
        self.grips
            .iter()
            .map(|(e, &h)| {
                let name = scene.holds.get(h).map_or("?", |h| h.name.as_str());
                format!("{e}@{name}")
            })
            .collect::<Vec<_>>()
            .join(" ")
    }
}
