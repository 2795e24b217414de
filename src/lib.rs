//! Clamber plans motions for robots that hold on to the world while they move.
//!
//! This crate is built up in layers, each a module with one concept (see ARCHITECTURE.md):
//! - [`model`]: robot models as plain immutable data (links, joints, limits, effectors, shapes);
//! - [`robot_file`]: reading robot files (our TOML format, URDF) and writing URDF;
//! - [`configuration`]: operations on configurations `q` (integrate, difference, sample);
//! - [`kinematics`]: forward kinematics and Jacobians, pure functions of `q`;
//! - [`collision`]: collision and clearance queries through parry3d.

pub mod collision;
pub mod configuration;
pub mod constraint;
pub mod cspace;
pub mod demo;
pub mod grip_position;
pub mod kinematics;
pub mod math;
pub mod model;
pub mod motion;
pub mod nearest;
pub mod output;
pub mod planner;
pub mod plot;
pub mod plot_data;
pub mod projection;
pub mod reach;
pub mod report;
pub mod robot_file;
pub mod route;
pub mod route_file;
pub mod sampling;
pub mod scenario;
pub mod scenario_file;
pub mod scene;
pub mod settings;
pub mod shortcut;
pub mod timing;
pub mod verify;
pub mod walk;

pub use math::Pose;
pub use model::{Robot, RobotSpec};
