//! Nearest-neighbour search over configurations, in the joint-space distance of
//! [`Robot::distance`](crate::model::Robot) (Euclidean norm of `q1 ⊖ q0`: coordinates of
//! one-DOF joints and floating translations as they are, floating rotations by their geodesic
//! angle).
//!
//! Hand-written exact linear scan, chosen by measurement (`cargo bench --bench nearest`,
//! numbers in docs/performance.md, "Nearest neighbours"). On 20-D samples of the climber
//! (`robots/brachia.toml`, k = 10) a vantage-point tree (`vpsearch`, same metric, exact)
//! answered a query 2x (1k points) to 4.6x (20k points) faster than this scan, and a k-d tree
//! (`kiddo`, Euclidean embedding plus an exact re-rank) 2x faster; but both are built in one
//! piece (50x to 120x the cost of inserting the points here) and cannot take one more point,
//! while the planners insert one node and query at once, over and over. At the planners'
//! sizes (trees and roadmaps of 10^2 to a few 10^3 nodes) a rebuild per batch of 50 nodes
//! costs about what the faster queries save. The scan also needs no dependency and is
//! exact with deterministic ties. For roadmaps of many thousands of nodes the measured next
//! step is a vantage-point tree over the older nodes plus this scan over the newest,
//! rebuilt when the scanned part passes a fixed fraction.
//!
//! The distance is computed on the raw coordinates: for each floating joint the translation
//! difference (its norm is the same in the world and the body frame) and the rotation angle
//! `2 atan2(|v|, |w|)` of `conj(r0) r1 = (w, v)` (the angle of the shortest rotation, the one
//! `so3_log` returns), so no tangent vector is formed.

use thiserror::Error;

use crate::model::{JointKind, Robot};

/// A configuration of the wrong length was given to an index.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum NearestError {
    #[error("configuration has {got} coordinates, the index was built for {expected}")]
    WrongLength { got: usize, expected: usize },
}

/// How the coordinates of one robot enter the distance.
#[derive(Clone, Debug, PartialEq)]
struct Layout {
    nq: usize,
    /// `q` indices compared as plain numbers.
    euclidean: Vec<usize>,
    /// `q` index of each floating joint's quaternion `(x, y, z, w)`.
    rotations: Vec<usize>,
}

impl Layout {
    fn new(robot: &Robot) -> Self {
        let mut euclidean = Vec::new();
        let mut rotations = Vec::new();
        for j in robot.joints() {
            match j.kind {
                JointKind::Floating => {
                    euclidean.extend(j.q_index..j.q_index + 3);
                    rotations.push(j.q_index + 3);
                }
                JointKind::Fixed => {}
                _ => euclidean.push(j.q_index),
            }
        }
        Layout {
            nq: robot.nq(),
            euclidean,
            rotations,
        }
    }

    /// Squared distance, or any value above `bound` once the partial sum exceeds `bound`.
    #[inline]
    fn squared_bounded(&self, a: &[f64], b: &[f64], bound: f64) -> f64 {
        let mut s = 0.0;
        for &r in &self.rotations {
            let t = rotation_angle(&a[r..r + 4], &b[r..r + 4]);
            s += t * t;
        }
        for (n, &i) in self.euclidean.iter().enumerate() {
            let d = a[i] - b[i];
            s += d * d;
            // Check every 4 coordinates: cheap enough, and stops most rejected candidates early.
            if n % 4 == 3 && s > bound {
                return s;
            }
        }
        s
    }
}

/// Angle of the shortest rotation from unit quaternion `a` to `b` (both `x y z w`).
#[inline]
fn rotation_angle(a: &[f64], b: &[f64]) -> f64 {
    let (v0, w0) = ([a[0], a[1], a[2]], a[3]);
    let (v1, w1) = ([b[0], b[1], b[2]], b[3]);
    // conj(a) * b = (w0 w1 + v0.v1, w0 v1 - w1 v0 - v0 x v1)
    let w = w0 * w1 + v0[0] * v1[0] + v0[1] * v1[1] + v0[2] * v1[2];
    let cross = [
        v0[1] * v1[2] - v0[2] * v1[1],
        v0[2] * v1[0] - v0[0] * v1[2],
        v0[0] * v1[1] - v0[1] * v1[0],
    ];
    let v = [
        w0 * v1[0] - w1 * v0[0] - cross[0],
        w0 * v1[1] - w1 * v0[1] - cross[1],
        w0 * v1[2] - w1 * v0[2] - cross[2],
    ];
    let vn = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    2.0 * vn.atan2(w.abs())
}

/// An exact nearest-neighbour index (linear scan) that grows by insertion. Points are
/// numbered in insertion order; ties are broken by the lower number, so results do not
/// depend on anything but the inserted points and the query.
#[derive(Clone, Debug)]
pub struct NearestIndex {
    layout: Layout,
    data: Vec<f64>,
}

impl NearestIndex {
    /// An empty index for configurations of `robot`.
    pub fn new(robot: &Robot) -> Self {
        NearestIndex {
            layout: Layout::new(robot),
            data: Vec::new(),
        }
    }

    pub fn len(&self) -> usize {
        self.data.len() / self.layout.nq.max(1)
    }

    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    /// Coordinates of point `i`, if there is one.
    pub fn point(&self, i: usize) -> Option<&[f64]> {
        let nq = self.layout.nq;
        self.data.get(i * nq..(i + 1) * nq)
    }

    fn check(&self, q: &[f64]) -> Result<(), NearestError> {
        if q.len() != self.layout.nq {
            return Err(NearestError::WrongLength {
                got: q.len(),
                expected: self.layout.nq,
            });
        }
        Ok(())
    }

    /// Add a point; returns its number.
    pub fn insert(&mut self, q: &[f64]) -> Result<usize, NearestError> {
        self.check(q)?;
        self.data.extend_from_slice(q);
        Ok(self.len() - 1)
    }

    /// The joint-space distance between two configurations of the robot (equal to
    /// `Robot::distance` up to rounding).
    pub fn distance(&self, a: &[f64], b: &[f64]) -> Result<f64, NearestError> {
        self.check(a)?;
        self.check(b)?;
        Ok(self.layout.squared_bounded(a, b, f64::INFINITY).sqrt())
    }

    /// The nearest point: `(number, distance)`, or `None` when the index is empty.
    pub fn nearest(&self, q: &[f64]) -> Result<Option<(usize, f64)>, NearestError> {
        let mut out = Vec::with_capacity(1);
        self.k_nearest(q, 1, &mut out)?;
        Ok(out.first().copied())
    }

    /// The `k` nearest points as `(number, distance)`, nearest first (ties: lower number
    /// first), written into `out` (cleared first). Fewer when the index has fewer points.
    pub fn k_nearest(
        &self,
        q: &[f64],
        k: usize,
        out: &mut Vec<(usize, f64)>,
    ) -> Result<(), NearestError> {
        self.check(q)?;
        out.clear();
        if k == 0 {
            return Ok(());
        }
        let nq = self.layout.nq;
        // Squared distances while scanning; the bound is the k-th best so far.
        let mut bound = f64::INFINITY;
        for (i, p) in self.data.chunks_exact(nq.max(1)).enumerate() {
            let s = self.layout.squared_bounded(q, p, bound);
            if s > bound || (s == bound && out.len() == k) {
                continue;
            }
            // Insert keeping (distance, number) order; equal distances keep scan order.
            let at = out.partition_point(|&(_, d)| d <= s);
            out.insert(at, (i, s));
            if out.len() > k {
                out.pop();
            }
            if out.len() == k {
                bound = out[k - 1].1;
            }
        }
        for e in out.iter_mut() {
            e.1 = e.1.sqrt();
        }
        Ok(())
    }

    /// Every point within `radius` (inclusive) as `(number, distance)`, nearest first (ties:
    /// lower number first).
    pub fn within(
        &self,
        q: &[f64],
        radius: f64,
        out: &mut Vec<(usize, f64)>,
    ) -> Result<(), NearestError> {
        self.check(q)?;
        out.clear();
        let nq = self.layout.nq;
        let r2 = radius * radius;
        for (i, p) in self.data.chunks_exact(nq.max(1)).enumerate() {
            let s = self.layout.squared_bounded(q, p, r2);
            if s <= r2 {
                out.push((i, s.sqrt()));
            }
        }
        out.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use std::path::Path;

    fn brachia() -> Robot {
        crate::robot_file::load_robot(Path::new("robots/brachia.toml")).unwrap()
    }

    #[test]
    fn distance_equals_the_robot_distance() {
        // Reference: Robot::distance, the norm of the tangent difference q1 ⊖ q0.
        let robot = brachia();
        let index = NearestIndex::new(&robot);
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let mut worst = 0.0f64;
        for _ in 0..2000 {
            let a = robot.random_configuration(&mut rng);
            let b = robot.random_configuration(&mut rng);
            let d0 = robot.distance(&a, &b).unwrap();
            let d1 = index.distance(&a, &b).unwrap();
            worst = worst.max((d0 - d1).abs() / d0.max(1.0));
        }
        assert!(worst < 1e-9, "{worst}");
    }

    #[test]
    fn k_nearest_matches_a_full_sort() {
        // Reference: sort all points by Robot::distance (no pruning, no index).
        let robot = brachia();
        let mut index = NearestIndex::new(&robot);
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        let pts: Vec<Vec<f64>> = (0..500)
            .map(|_| robot.random_configuration(&mut rng))
            .collect();
        for p in &pts {
            index.insert(p).unwrap();
        }
        let mut out = Vec::new();
        for _ in 0..50 {
            let q = robot.random_configuration(&mut rng);
            let mut all: Vec<(usize, f64)> = pts
                .iter()
                .enumerate()
                .map(|(i, p)| (i, robot.distance(&q, p).unwrap()))
                .collect();
            all.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
            index.k_nearest(&q, 10, &mut out).unwrap();
            assert_eq!(out.len(), 10);
            for (got, want) in out.iter().zip(&all) {
                assert_eq!(got.0, want.0);
                assert!((got.1 - want.1).abs() < 1e-9);
            }
            let r = 0.5 * (all[20].1 + all[21].1);
            index.within(&q, r, &mut out).unwrap();
            assert_eq!(out.len(), 21);
        }
        assert!(matches!(
            index.insert(&[0.0; 3]),
            Err(NearestError::WrongLength { got: 3, .. })
        ));
    }
}
