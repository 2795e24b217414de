//! Errors found while building a robot model from a description.

use thiserror::Error;

/// Which part of a robot description an error is about, so a file loader can point at the
/// right place in the source text (file, line, field).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ItemKind {
    Robot,
    Link,
    Joint,
    Effector,
    Shape,
    IgnoredPair,
}

/// A place in a [`crate::model::RobotSpec`]: the `index`-th item of `kind` (for a shape:
/// the link index and the shape index), and the field at fault.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Locator {
    pub kind: ItemKind,
    pub index: usize,
    /// For shapes, the index of the shape within its link.
    pub sub_index: usize,
    pub field: &'static str,
}

impl Locator {
    pub fn new(kind: ItemKind, index: usize, field: &'static str) -> Self {
        Locator {
            kind,
            index,
            sub_index: 0,
            field,
        }
    }
}

/// A robot description that cannot form a valid model.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ModelError {
    #[error("the robot has no links")]
    NoLinks,
    #[error("duplicate {what} name `{name}` (first used by item {first})")]
    DuplicateName {
        what: &'static str,
        name: String,
        first: usize,
        at: Locator,
    },
    #[error("joint `{joint}` names {role} link `{link}`, which does not exist")]
    UnknownLink {
        joint: String,
        role: &'static str,
        link: String,
        at: Locator,
    },
    #[error("link `{link}` is the child of two joints (`{first}` and `{second}`): a kinematic tree gives each link one parent")]
    TwoParents {
        link: String,
        first: String,
        second: String,
        at: Locator,
    },
    #[error(
        "joint `{joint}` closes a cycle in the kinematic tree (link `{link}` is its own ancestor)"
    )]
    Cycle {
        joint: String,
        link: String,
        at: Locator,
    },
    #[error(
        "the robot has {count} root links ({names}); exactly one link may have no parent joint"
    )]
    ManyRoots {
        count: usize,
        names: String,
        at: Locator,
    },
    #[error("joint `{joint}`: lower limit {lower} is above upper limit {upper}")]
    LimitsReversed {
        joint: String,
        lower: f64,
        upper: f64,
        at: Locator,
    },
    #[error("{item}: `{field}` must be a finite number, got {value}")]
    NotFinite {
        item: String,
        field: &'static str,
        value: f64,
        at: Locator,
    },
    #[error("{item}: `{field}` must be positive, got {value}")]
    NotPositive {
        item: String,
        field: &'static str,
        value: f64,
        at: Locator,
    },
    #[error("joint `{joint}`: axis has zero length")]
    ZeroAxis { joint: String, at: Locator },
    #[error("effector `{effector}` is on link `{link}`, which does not exist")]
    UnknownEffectorLink {
        effector: String,
        link: String,
        at: Locator,
    },
    #[error("ignored collision pair names link `{link}`, which does not exist")]
    UnknownPairLink { link: String, at: Locator },
    #[error("joint `{joint}` has {got} limit entries, its type takes {expected}")]
    LimitCount {
        joint: String,
        got: usize,
        expected: usize,
        at: Locator,
    },
    #[error("link `{link}`: shape {index}: {reason}")]
    BadShape {
        link: String,
        index: usize,
        reason: String,
        at: Locator,
    },
}

impl ModelError {
    /// Where in the description the error is, when it is about one place.
    pub fn locator(&self) -> Option<Locator> {
        use ModelError::*;
        match self {
            NoLinks => None,
            DuplicateName { at, .. }
            | UnknownLink { at, .. }
            | TwoParents { at, .. }
            | Cycle { at, .. }
            | ManyRoots { at, .. }
            | LimitsReversed { at, .. }
            | NotFinite { at, .. }
            | NotPositive { at, .. }
            | ZeroAxis { at, .. }
            | UnknownEffectorLink { at, .. }
            | UnknownPairLink { at, .. }
            | LimitCount { at, .. }
            | BadShape { at, .. } => Some(*at),
        }
    }
}
