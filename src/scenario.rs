//! A scenario: the whole question put to Clamber. A robot, the scene around it, where the
//! robot starts (configuration and stance), what counts as arrived, and the limits to plan
//! within. `*.scenario.toml` files are read into this; the bundled demos build it in code.

use std::sync::Arc;
use std::time::Duration;

use nalgebra::Point3;

use crate::constraint::Constraint;
use crate::model::Robot;
use crate::scene::{Scene, Stance};

/// Where the robot starts: a configuration and the stance it holds there (the configuration
/// satisfies the stance's grips to the scenario's tolerance).
#[derive(Clone, Debug)]
pub struct Start {
    pub q: Vec<f64>,
    pub stance: Stance,
}

/// What counts as arrived. Any one kind; a route ends as soon as it holds.
#[derive(Clone, Debug)]
#[non_exhaustive]
pub enum Goal {
    /// Reach this configuration (single-stance motions: open the door to this angle).
    Configuration(Vec<f64>),
    /// Hold exactly this stance (any configuration on its manifold).
    Stance(Stance),
    /// Effector `effector` on hold `hold` (index into the scene's holds), others free to be anywhere.
    Grip { effector: String, hold: usize },
    /// The origin of link `link` inside the axis-aligned box `[min, max]` (world frame).
    BodyInRegion {
        link: String,
        min: Point3<f64>,
        max: Point3<f64>,
    },
}

/// The limits a scenario is planned within. Every output states them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ScenarioLimits {
    /// Largest allowed constraint residual norm (metres and radians).
    pub tolerance: f64,
    /// Largest joint-space distance between consecutive projected points on a manifold.
    pub stride: f64,
    /// Wall-clock limit for planning.
    pub time_limit: Duration,
    /// Seed of every random choice: same seed, same route.
    pub seed: u64,
}

impl Default for ScenarioLimits {
    fn default() -> Self {
        ScenarioLimits {
            tolerance: 1e-6,
            stride: 0.05,
            time_limit: Duration::from_secs(30),
            seed: 1,
        }
    }
}

/// A whole scenario. `robot` already has the scene's mechanisms attached (their joints are
/// passive joints of `q`). `constant` are constraints active in every stance (a carried
/// object held by two effectors, keep-level rows).
#[derive(Clone, Debug)]
pub struct Scenario {
    pub name: String,
    pub robot: Arc<Robot>,
    pub scene: Scene,
    pub start: Start,
    pub goal: Goal,
    pub constant: Vec<Arc<dyn Constraint>>,
    pub limits: ScenarioLimits,
}
