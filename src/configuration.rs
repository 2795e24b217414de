//! Operations on configurations `q` and tangent vectors `v` of a robot: the joint space is
//! not a plain vector space because a floating joint's rotation is a unit quaternion.
//!
//! Conventions (see `docs/kinematics.md`): a floating joint stores `x y z qx qy qz qw` in
//! `q` and `vx vy vz wx wy wz` in `v`, both velocities in the body (child) frame.
//! `integrate(q, v)` moves the translation by `R v_lin` and the rotation by `R exp(w)`
//! (the product R^3 x SO(3)), so `interpolate` is a straight line in translation and a
//! slerp in rotation. Every other joint is Euclidean.

use nalgebra::{Quaternion, UnitQuaternion, Vector3};
use rand::Rng;
use thiserror::Error;

use crate::math::{so3_exp, so3_log};
use crate::model::{JointKind, Robot};

/// A configuration or tangent vector that does not fit the robot.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ConfigurationError {
    #[error("{what} has length {got}, the robot needs {expected}")]
    Length {
        what: &'static str,
        got: usize,
        expected: usize,
    },
    #[error("coordinate {index} ({name}) is not finite: {value}")]
    NotFinite {
        index: usize,
        name: String,
        value: f64,
    },
    #[error("joint `{joint}`: quaternion has norm {norm}, expected 1 (within 1e-6)")]
    NotUnit { joint: String, norm: f64 },
}

pub(crate) fn check_len(
    what: &'static str,
    got: usize,
    expected: usize,
) -> Result<(), ConfigurationError> {
    if got == expected {
        Ok(())
    } else {
        Err(ConfigurationError::Length {
            what,
            got,
            expected,
        })
    }
}

#[inline]
fn quat_at(q: &[f64], i: usize) -> UnitQuaternion<f64> {
    UnitQuaternion::new_normalize(Quaternion::new(q[i + 6], q[i + 3], q[i + 4], q[i + 5]))
}

#[inline]
fn put_quat(q: &mut [f64], i: usize, r: &UnitQuaternion<f64>) {
    let c = r.quaternion().coords; // (x, y, z, w)
    q[i + 3] = c[0];
    q[i + 4] = c[1];
    q[i + 5] = c[2];
    q[i + 6] = c[3];
}

impl Robot {
    /// Check length, finiteness and unit quaternions of a configuration.
    pub fn check_configuration(&self, q: &[f64]) -> Result<(), ConfigurationError> {
        check_len("configuration", q.len(), self.nq())?;
        for j in self.joints() {
            for k in 0..j.kind.nq() {
                let v = q[j.q_index + k];
                if !v.is_finite() {
                    return Err(ConfigurationError::NotFinite {
                        index: j.q_index + k,
                        name: j.name.clone(),
                        value: v,
                    });
                }
            }
            if let JointKind::Floating = j.kind {
                let n = q[j.q_index + 3..j.q_index + 7]
                    .iter()
                    .map(|x| x * x)
                    .sum::<f64>()
                    .sqrt();
                if (n - 1.0).abs() > 1e-6 {
                    return Err(ConfigurationError::NotUnit {
                        joint: j.name.clone(),
                        norm: n,
                    });
                }
            }
        }
        Ok(())
    }

    /// The neutral configuration: every joint at zero (or at the middle of its range when
    /// zero is outside it), floating joints at the identity.
    pub fn neutral(&self) -> Vec<f64> {
        let mut q = vec![0.0; self.nq()];
        for j in self.joints() {
            match j.kind {
                JointKind::Floating => {
                    for k in 0..3 {
                        q[j.q_index + k] = mid_or_zero(j.limits[k].lower, j.limits[k].upper);
                    }
                    q[j.q_index + 6] = 1.0;
                }
                JointKind::Fixed => {}
                _ => q[j.q_index] = mid_or_zero(j.limits[0].lower, j.limits[0].upper),
            }
        }
        q
    }

    /// `q ⊕ v`: move from `q` along tangent `v`. Writes into `out` (may not alias).
    pub fn integrate(
        &self,
        q: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ConfigurationError> {
        check_len("configuration", q.len(), self.nq())?;
        check_len("tangent", v.len(), self.nv())?;
        check_len("output", out.len(), self.nq())?;
        for j in self.joints() {
            let (qi, vi) = (j.q_index, j.v_index);
            match j.kind {
                JointKind::Floating => {
                    let r = quat_at(q, qi);
                    let dp = r * Vector3::new(v[vi], v[vi + 1], v[vi + 2]);
                    for k in 0..3 {
                        out[qi + k] = q[qi + k] + dp[k];
                    }
                    let r2 = r * so3_exp(&Vector3::new(v[vi + 3], v[vi + 4], v[vi + 5]));
                    put_quat(out, qi, &r2);
                }
                JointKind::Fixed => {}
                _ => out[qi] = q[qi] + v[vi],
            }
        }
        Ok(())
    }

    /// `q1 ⊖ q0`: the tangent `v` with `q0 ⊕ v = q1` (shortest rotation for floating joints).
    pub fn difference(
        &self,
        q0: &[f64],
        q1: &[f64],
        out: &mut [f64],
    ) -> Result<(), ConfigurationError> {
        check_len("configuration", q0.len(), self.nq())?;
        check_len("configuration", q1.len(), self.nq())?;
        check_len("output", out.len(), self.nv())?;
        for j in self.joints() {
            let (qi, vi) = (j.q_index, j.v_index);
            match j.kind {
                JointKind::Floating => {
                    let r0 = quat_at(q0, qi);
                    let r1 = quat_at(q1, qi);
                    let dp = Vector3::new(
                        q1[qi] - q0[qi],
                        q1[qi + 1] - q0[qi + 1],
                        q1[qi + 2] - q0[qi + 2],
                    );
                    let lin = r0.inverse() * dp;
                    let ang = so3_log(&(r0.inverse() * r1));
                    out[vi..vi + 3].copy_from_slice(lin.as_slice());
                    out[vi + 3..vi + 6].copy_from_slice(ang.as_slice());
                }
                JointKind::Fixed => {}
                _ => out[vi] = q1[qi] - q0[qi],
            }
        }
        Ok(())
    }

    /// Point at fraction `t` of the way from `q0` to `q1`: linear for Euclidean joints and
    /// for floating translation, slerp for floating rotation.
    pub fn interpolate(
        &self,
        q0: &[f64],
        q1: &[f64],
        t: f64,
        out: &mut [f64],
    ) -> Result<(), ConfigurationError> {
        check_len("configuration", q0.len(), self.nq())?;
        check_len("configuration", q1.len(), self.nq())?;
        check_len("output", out.len(), self.nq())?;
        for j in self.joints() {
            let qi = j.q_index;
            match j.kind {
                JointKind::Floating => {
                    for k in 0..3 {
                        out[qi + k] = q0[qi + k] + t * (q1[qi + k] - q0[qi + k]);
                    }
                    let r0 = quat_at(q0, qi);
                    let r1 = quat_at(q1, qi);
                    let rel = so3_log(&(r0.inverse() * r1));
                    put_quat(out, qi, &(r0 * so3_exp(&(rel * t))));
                }
                JointKind::Fixed => {}
                _ => out[qi] = q0[qi] + t * (q1[qi] - q0[qi]),
            }
        }
        Ok(())
    }

    /// Joint-space distance: Euclidean norm of `q1 ⊖ q0` (radians and metres added as they
    /// are; common practice for sampling-based planning).
    pub fn distance(&self, q0: &[f64], q1: &[f64]) -> Result<f64, ConfigurationError> {
        let mut v = vec![0.0; self.nv()];
        self.difference(q0, q1, &mut v)?;
        Ok(v.iter().map(|x| x * x).sum::<f64>().sqrt())
    }

    /// A random configuration: uniform within the limits for one-DOF joints (unbounded
    /// revolute joints in [-pi, pi]), uniform in the translation box for floating joints
    /// (unbounded translation in [-1, 1] m) and uniform on SO(3) for their rotation
    /// (Shoemake, "Uniform random rotations", Graphics Gems III, 1992).
    pub fn random_configuration<R: Rng + ?Sized>(&self, rng: &mut R) -> Vec<f64> {
        let mut q = vec![0.0; self.nq()];
        for j in self.joints() {
            let qi = j.q_index;
            match j.kind {
                JointKind::Floating => {
                    for k in 0..3 {
                        q[qi + k] = uniform_in(rng, j.limits[k].lower, j.limits[k].upper, 1.0);
                    }
                    let (u1, u2, u3): (f64, f64, f64) = (rng.random(), rng.random(), rng.random());
                    let tau = std::f64::consts::TAU;
                    let (a, b) = ((1.0 - u1).sqrt(), u1.sqrt());
                    q[qi + 3] = a * (tau * u2).sin();
                    q[qi + 4] = a * (tau * u2).cos();
                    q[qi + 5] = b * (tau * u3).sin();
                    q[qi + 6] = b * (tau * u3).cos();
                }
                JointKind::Fixed => {}
                JointKind::Revolute { .. } => {
                    q[qi] = uniform_in(
                        rng,
                        j.limits[0].lower,
                        j.limits[0].upper,
                        std::f64::consts::PI,
                    )
                }
                _ => q[qi] = uniform_in(rng, j.limits[0].lower, j.limits[0].upper, 1.0),
            }
        }
        q
    }

    /// True if every bounded coordinate is within its position limits, widened by `slack`.
    pub fn within_limits(&self, q: &[f64], slack: f64) -> bool {
        q.len() == self.nq()
            && self
                .joints()
                .iter()
                .flat_map(|j| j.bounded_coordinates())
                .all(|(i, l)| q[i] >= l.lower - slack && q[i] <= l.upper + slack)
    }

    /// Clamp every bounded coordinate into its limits and renormalize quaternions. Returns
    /// true if a coordinate was outside its limits (renormalizing does not count).
    pub fn clamp_to_limits(&self, q: &mut [f64]) -> bool {
        if q.len() != self.nq() {
            return false;
        }
        let mut moved = false;
        for j in self.joints() {
            for (i, l) in j.bounded_coordinates() {
                let c = q[i].clamp(l.lower, l.upper);
                if c != q[i] {
                    moved = true;
                    q[i] = c;
                }
            }
            if let JointKind::Floating = j.kind {
                let r = quat_at(q, j.q_index);
                put_quat(q, j.q_index, &r);
            }
        }
        moved
    }

    /// Reach margin at `q`: the smallest distance of any driven (non-passive) bounded
    /// coordinate to its nearer position limit (radians or metres; floating rotation and
    /// unbounded coordinates do not count). Infinite when nothing is bounded.
    pub fn reach_margin(&self, q: &[f64]) -> f64 {
        if q.len() != self.nq() {
            return f64::NAN;
        }
        self.joints()
            .iter()
            .filter(|j| !j.passive)
            .flat_map(|j| j.bounded_coordinates())
            .fold(f64::INFINITY, |m, (i, l)| {
                m.min(q[i] - l.lower).min(l.upper - q[i])
            })
    }
}

fn mid_or_zero(lo: f64, hi: f64) -> f64 {
    if lo <= 0.0 && 0.0 <= hi {
        0.0
    } else if lo.is_finite() && hi.is_finite() {
        0.5 * (lo + hi)
    } else if lo.is_finite() {
        lo
    } else {
        hi
    }
}

fn uniform_in<R: Rng + ?Sized>(rng: &mut R, lo: f64, hi: f64, default_half: f64) -> f64 {
    let lo = if lo.is_finite() { lo } else { -default_half };
    let hi = if hi.is_finite() { hi } else { default_half };
    if hi <= lo {
        lo
    } else {
        rng.random_range(lo..=hi)
    }
}
