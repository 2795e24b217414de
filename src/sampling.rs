//! Constrained sampling: draw a configuration uniformly within the joint limits, then project
//! it onto the manifold. Reports how often projection failed.

use rand::Rng;

use crate::constraint::{ConstraintError, ConstraintStack};
use crate::model::Robot;
use crate::projection::{project, ProjectionBuffer, ProjectionSettings};

/// Counts from constrained sampling.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct SamplingStats {
    pub attempts: usize,
    pub failures: usize,
}

impl SamplingStats {
    /// Fraction of attempts whose projection did not converge.
    pub fn failure_rate(&self) -> f64 {
        if self.attempts == 0 {
            0.0
        } else {
            self.failures as f64 / self.attempts as f64
        }
    }
}

/// Try up to `max_attempts` random configurations; return the first that projects onto the
/// manifold (within the tolerance and the limits), or `None`. `stats` accumulates.
pub fn sample_on_manifold<R: Rng + ?Sized>(
    robot: &Robot,
    stack: &ConstraintStack,
    settings: &ProjectionSettings,
    rng: &mut R,
    max_attempts: usize,
    buf: &mut ProjectionBuffer,
    stats: &mut SamplingStats,
) -> Result<Option<Vec<f64>>, ConstraintError> {
    for _ in 0..max_attempts {
        let mut q = robot.random_configuration(rng);
        stats.attempts += 1;
        let rep = project(robot, stack, settings, &mut q, buf)?;
        if rep.converged() {
            return Ok(Some(q));
        }
        stats.failures += 1;
    }
    Ok(None)
}
