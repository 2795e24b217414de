//! The scenario document as serde reads it: tables whose values keep their spans. Unknown
//! keys are rejected here (`deny_unknown_fields`); types and forms are checked in `read`.
//! The `*_KEYS` lists are the keys of each table in field order (serde names them in that
//! order in its unknown-key message, which is how the message is matched to its table).

use std::fmt;

use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use toml::Spanned;

use crate::robot_file::toml_format::{
    CollisionRaw, EffectorRaw, Field, JointRaw, LinkRaw, One, Raw, Section, Tables, COLLISION_KEYS,
    EFFECTOR_KEYS, JOINT_KEYS, LINK_KEYS, SHAPE_KEYS,
};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct FileRaw {
    pub name: Field,
    pub robot: Field,
    pub scene: Option<Spanned<One<SceneRaw>>>,
    pub start: Option<Spanned<One<StartRaw>>>,
    pub goal: Option<Spanned<One<GoalRaw>>>,
    pub limits: Option<Spanned<One<LimitsRaw>>>,
    pub outputs: Option<Spanned<One<OutputsRaw>>>,
}
/// Keys at the top level of a scenario file.
pub const FILE_KEYS: &[&str] = &[
    "name", "robot", "scene", "start", "goal", "limits", "outputs",
];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SceneRaw {
    #[serde(default)]
    pub obstacle: Tables<ObstacleRaw>,
    #[serde(default)]
    pub hold: Tables<HoldRaw>,
    #[serde(default)]
    pub mechanism: Tables<MechanismRaw>,
}
impl Section for SceneRaw {
    const KEY: &'static str = "scene";
    const HEADER: &'static str = "[scene]";
}
/// Keys of `[scene]`.
pub const SCENE_KEYS: &[&str] = &["obstacle", "hold", "mechanism"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ObstacleRaw {
    pub name: Field,
    #[serde(rename = "type")]
    pub kind: Field,
    pub radius: Field,
    pub length: Field,
    pub size: Field,
    pub file: Field,
    pub scale: Field,
    pub convex: Field,
    pub xyz: Field,
    pub rpy: Field,
}
impl Section for ObstacleRaw {
    const KEY: &'static str = "obstacle";
    const HEADER: &'static str = "[[scene.obstacle]]";
}
/// Keys of `[[scene.obstacle]]`: a name and the keys of a robot file's `[[link.shape]]`.
pub const OBSTACLE_KEYS: &[&str] = &[
    "name", "type", "radius", "length", "size", "file", "scale", "convex", "xyz", "rpy",
];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct HoldRaw {
    pub name: Field,
    #[serde(rename = "type")]
    pub kind: Field,
    pub xyz: Field,
    pub rpy: Field,
    pub turn_free: Field,
    pub start: Field,
    pub end: Field,
    pub approach: Field,
    pub link: Field,
}
impl Section for HoldRaw {
    const KEY: &'static str = "hold";
    const HEADER: &'static str = "[[scene.hold]]";
}
/// Keys of `[[scene.hold]]`.
pub const HOLD_KEYS: &[&str] = &[
    "name",
    "type",
    "xyz",
    "rpy",
    "turn_free",
    "start",
    "end",
    "approach",
    "link",
];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct MechanismRaw {
    pub name: Field,
    pub file: Field,
    pub collision: Option<Spanned<One<CollisionRaw>>>,
    #[serde(default)]
    pub link: Tables<LinkRaw>,
    #[serde(default)]
    pub joint: Tables<JointRaw>,
    #[serde(default)]
    pub effector: Tables<EffectorRaw>,
}
impl Section for MechanismRaw {
    const KEY: &'static str = "mechanism";
    const HEADER: &'static str = "[[scene.mechanism]]";
}
/// Keys of `[[scene.mechanism]]`: a `file`, or a `name` and robot-format tables inline.
pub const MECHANISM_KEYS: &[&str] = &["name", "file", "collision", "link", "joint", "effector"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct StartRaw {
    pub q: Option<Spanned<Named>>,
    pub stance: Option<Spanned<Named>>,
    pub settle: Field,
}
impl Section for StartRaw {
    const KEY: &'static str = "start";
    const HEADER: &'static str = "[start]";
}
/// Keys of `[start]`.
pub const START_KEYS: &[&str] = &["q", "stance", "settle"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct GoalRaw {
    pub q: Option<Spanned<Named>>,
    pub stance: Option<Spanned<Named>>,
    pub grip: Option<Spanned<One<GripRaw>>>,
    pub region: Option<Spanned<One<RegionRaw>>>,
}
impl Section for GoalRaw {
    const KEY: &'static str = "goal";
    const HEADER: &'static str = "[goal]";
}
/// Keys of `[goal]` (exactly one is given).
pub const GOAL_KEYS: &[&str] = &["q", "stance", "grip", "region"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct GripRaw {
    pub effector: Field,
    pub hold: Field,
}
impl Section for GripRaw {
    const KEY: &'static str = "grip";
    const HEADER: &'static str = "[goal.grip]";
}
/// Keys of `[goal.grip]`.
pub const GRIP_KEYS: &[&str] = &["effector", "hold"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RegionRaw {
    pub link: Field,
    pub min: Field,
    pub max: Field,
}
impl Section for RegionRaw {
    const KEY: &'static str = "region";
    const HEADER: &'static str = "[goal.region]";
}
/// Keys of `[goal.region]`.
pub const REGION_KEYS: &[&str] = &["link", "min", "max"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct LimitsRaw {
    pub tolerance: Field,
    pub stride: Field,
    pub time_limit: Field,
    pub seed: Field,
}
impl Section for LimitsRaw {
    const KEY: &'static str = "limits";
    const HEADER: &'static str = "[limits]";
}
/// Keys of `[limits]`.
pub const LIMITS_KEYS: &[&str] = &["tolerance", "stride", "time_limit", "seed"];

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct OutputsRaw {
    pub route: Field,
    pub trajectory: Field,
    pub summary: Field,
    pub picture: Field,
    pub plots: Field,
}
impl Section for OutputsRaw {
    const KEY: &'static str = "outputs";
    const HEADER: &'static str = "[outputs]";
}
/// Keys of `[outputs]`.
pub const OUTPUTS_KEYS: &[&str] = &["route", "trajectory", "summary", "picture", "plots"];

/// Where each set of keys is allowed, to name the table in an unknown-key message. The
/// robot-format tables are those of an inline mechanism.
pub(super) const SECTIONS: &[(&str, &[&str])] = &[
    ("at the top level", FILE_KEYS),
    ("in [scene]", SCENE_KEYS),
    ("in [[scene.obstacle]]", OBSTACLE_KEYS),
    ("in [[scene.hold]]", HOLD_KEYS),
    ("in [[scene.mechanism]]", MECHANISM_KEYS),
    ("in [scene.mechanism.collision]", COLLISION_KEYS),
    ("in [[scene.mechanism.link]]", LINK_KEYS),
    ("in [[scene.mechanism.link.shape]]", SHAPE_KEYS),
    ("in [[scene.mechanism.joint]]", JOINT_KEYS),
    ("in [[scene.mechanism.effector]]", EFFECTOR_KEYS),
    ("in [start]", START_KEYS),
    ("in [goal]", GOAL_KEYS),
    ("in [goal.grip]", GRIP_KEYS),
    ("in [goal.region]", REGION_KEYS),
    ("in [limits]", LIMITS_KEYS),
    ("in [outputs]", OUTPUTS_KEYS),
];

/// A table whose keys are names chosen by the user (joint names in `q`, effector names in
/// `stance`), each key and value with its span, in file order.
pub(super) struct Named(pub Vec<(Spanned<String>, Spanned<Raw>)>);

impl<'de> Deserialize<'de> for Named {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Named;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a table of `name = value` entries")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Named, A::Error> {
                let mut items = Vec::new();
                while let Some(key) = map.next_key::<Spanned<String>>()? {
                    let value = map.next_value::<Spanned<Raw>>()?;
                    items.push((key, value));
                }
                Ok(Named(items))
            }
        }
        d.deserialize_map(V).map_err(|e: D::Error| {
            let m = e.to_string();
            if m.contains("invalid type") {
                de::Error::custom(
                    "expected a table of `name = value` entries, like { joint_a = 0.5 }",
                )
            } else {
                e
            }
        })
    }
}
