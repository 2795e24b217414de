//! Sampling-based planners written once against [`ConfigSpace`]: the same code plans in the
//! free joint box and on a constraint manifold.
//!
//! - [`rrt_connect`]: a single-query bidirectional tree (Kuffner & LaValle 2000).
//! - [`Roadmap`] / [`lazy_prm`]: lazy PRM (Bohlin & Kavraki 2000), a roadmap whose edges are
//!   checked only when a shortest path uses them; the roadmap is kept for further queries in
//!   the same stance.
//!
//! Both return a [`Plan`]: the path (start to goal, each consecutive pair joined by a valid
//! motion of the space: in a constrained space the points of the manifold walks, not chords)
//! and [`PlanStats`] for that call. Nearest neighbours come from [`crate::nearest`].
//!
//! [`ConfigSpace`]: crate::cspace::ConfigSpace

use std::time::Duration;

use thiserror::Error;

use crate::cspace::{CSpaceError, CSpaceStats};

mod lazy_prm;
mod rrt_connect;

pub use lazy_prm::{lazy_prm, EdgeCounts, PrmSettings, Roadmap};
pub use rrt_connect::{rrt_connect, RrtSettings};

/// What one planner call did. Counts are for this call only (a reused roadmap's earlier work
/// is not counted again).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct PlanStats {
    /// Random samples drawn (including failed ones).
    pub samples: usize,
    /// Nodes in the tree(s) or roadmap at the end of the call.
    pub nodes: usize,
    /// Nodes this call added.
    pub new_nodes: usize,
    /// Motions (extend calls of the space) checked.
    pub motions_checked: usize,
    /// The space's own counters (samples, projections, collision checks) during this call.
    pub space: CSpaceStats,
    pub elapsed: Duration,
}

/// A planner's answer: the path (start to goal, each consecutive pair joined by a valid
/// motion of the space), or `None` if none was found within the limits; and what it cost.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    pub path: Option<Vec<Vec<f64>>>,
    pub stats: PlanStats,
}

/// Why planning could not start.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum PlanError {
    #[error("the {which} configuration is not valid (limits, constraints or collision)")]
    InvalidEndpoint { which: &'static str },
    #[error("the {which} configuration has {got} coordinates, the robot has {expected}")]
    WrongLength {
        which: &'static str,
        got: usize,
        expected: usize,
    },
    #[error(transparent)]
    Space(#[from] CSpaceError),
    #[error(transparent)]
    Nearest(#[from] crate::nearest::NearestError),
}

/// `after - before`, counter by counter.
pub(crate) fn stats_delta(after: CSpaceStats, before: CSpaceStats) -> CSpaceStats {
    CSpaceStats {
        samples: after.samples - before.samples,
        projections: after.projections - before.projections,
        collision_checks: after.collision_checks - before.collision_checks,
    }
}

/// Check both endpoints' lengths and validity.
pub(crate) fn check_endpoints<S: crate::cspace::ConfigSpace>(
    space: &mut S,
    start: &[f64],
    goal: &[f64],
) -> Result<(), PlanError> {
    let nq = space.robot().nq();
    for (which, q) in [("start", start), ("goal", goal)] {
        if q.len() != nq {
            return Err(PlanError::WrongLength {
                which,
                got: q.len(),
                expected: nq,
            });
        }
        if !space.is_valid(q)? {
            return Err(PlanError::InvalidEndpoint { which });
        }
    }
    Ok(())
}
