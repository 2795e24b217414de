//! Robot models: plain data, no algorithms. Kinematics live in [`crate::kinematics`],
//! collision in [`crate::collision`], file formats in [`crate::robot_file`].

mod error;
mod joint;
mod mechanism;
mod robot;
mod shape;

pub use error::{ItemKind, Locator, ModelError};
pub use joint::{Joint, JointId, JointKind, Limits};
pub use robot::{
    Effector, EffectorSpec, JointSpec, JointType, Link, LinkId, LinkSpec, Robot, RobotSpec,
};
pub use shape::{Geometry, MeshSource, Shape};
