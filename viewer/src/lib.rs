//! `clamber-view`: the 3D viewer and off-screen renderer of Clamber routes.
//!
//! Kept out of the core crate so `clamber` builds without any graphics stack. Layers:
//! - [`replay`]: time -> configuration, active stance and switch moments (pure, no drawing);
//! - [`stage`]: the kiss3d scene built from a scenario and posed by forward kinematics;
//! - [`framing`]: the camera that frames a route;
//! - [`overlay`]: caption and timeline over the 3D view;
//! - [`render`]: pictures with no window (PNG), [`show`]: the interactive window.

pub mod error;
pub mod framing;
pub mod overlay;
pub mod palette;
pub mod render;
pub mod replay;
pub mod show;
pub mod stage;

pub use error::ViewError;
pub use replay::Replay;
