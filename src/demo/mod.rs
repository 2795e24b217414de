//! Bundled demo scenarios, invented for Clamber's examples, tests and benchmarks. Each
//! builder returns a complete [`Scenario`](crate::scenario::Scenario) whose start satisfies its
//! stance.

pub mod bar_slide;
pub mod carry;
pub mod climb;
pub mod door;
pub mod kit;
pub mod lever;
