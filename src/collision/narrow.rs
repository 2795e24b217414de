//! Narrow phase: the signed distance of one pair of colliders.
//!
//! Both queries go through the library's `closest_points` on the cores (see `collider.rs`)
//! with a cut-off, and fall back to its `contact` query (EPA for convex pairs) only when
//! the cores overlap, to get a penetration depth. Accuracy follows the library's query:
//! closed form for ball/segment pairs and point projections on primitives (exact to
//! rounding), GJK with its relative tolerance (about 5e-8 of the distance) for other
//! convex pairs.

use parry3d_f64::math::{Pose as PPose, Vector as PVector};
use parry3d_f64::query::{self, ClosestPoints, Unsupported};

use super::collider::Collider;

/// Core distance below which the direction between two witness points is not defined.
const DEGENERATE: f64 = 1e-12;

/// Signed distance of a pair and its witness points (world; on `a`, on `b`).
#[derive(Clone, Copy, Debug)]
pub(crate) struct PairDistance {
    pub distance: f64,
    pub point_a: PVector,
    pub point_b: PVector,
}

/// The signed distance of `a` at `pa` and `b` at `pb` if it is at most `max_dist`
/// (`None` if it is known to be larger). `max_dist` may be infinite or negative.
pub(crate) fn signed_distance(
    a: &Collider,
    pa: &PPose,
    b: &Collider,
    pb: &PPose,
    max_dist: f64,
) -> Result<Option<PairDistance>, Unsupported> {
    let rr = a.radius + b.radius;
    // The library asserts a non-negative cut-off: core distances are never negative.
    let cut = (max_dist + rr).max(0.0);
    match query::closest_points(pa, &*a.core, pb, &*b.core, cut)? {
        ClosestPoints::Disjoint => Ok(None),
        ClosestPoints::WithinMargin(p1, p2) => {
            let (n, d) = (p2 - p1).normalize_and_length();
            let found = if d > DEGENERATE {
                PairDistance {
                    distance: d - rr,
                    point_a: p1 + n * a.radius,
                    point_b: p2 - n * b.radius,
                }
            } else if a.thin && b.thin {
                // Two cores without interior that meet: core depth is zero.
                PairDistance {
                    distance: d - rr,
                    point_a: p1,
                    point_b: p2,
                }
            } else {
                penetration(a, pa, b, pb, p1, p2)?
            };
            Ok((found.distance <= max_dist).then_some(found))
        }
        ClosestPoints::Intersecting => {
            let found = penetration(a, pa, b, pb, pa.translation, pb.translation)?;
            Ok((found.distance <= max_dist).then_some(found))
        }
    }
}

/// Depth of overlapping cores through the library's contact query. If it finds no contact
/// (its EPA can fail on flat configurations) the cores still overlap, so the pair is
/// reported at core depth zero with the given fallback witnesses: never as free.
fn penetration(
    a: &Collider,
    pa: &PPose,
    b: &Collider,
    pb: &PPose,
    fallback_a: PVector,
    fallback_b: PVector,
) -> Result<PairDistance, Unsupported> {
    let rr = a.radius + b.radius;
    Ok(match query::contact(pa, &*a.core, pb, &*b.core, 0.0)? {
        Some(c) => PairDistance {
            distance: c.dist.min(0.0) - rr,
            point_a: c.point1 + c.normal1 * a.radius,
            point_b: c.point2 + c.normal2 * b.radius,
        },
        None => PairDistance {
            distance: -rr,
            point_a: fallback_a,
            point_b: fallback_b,
        },
    })
}

/// Whether the signed distance of the pair is at most `margin` (`margin >= 0`).
#[inline]
pub(crate) fn within(
    a: &Collider,
    pa: &PPose,
    b: &Collider,
    pb: &PPose,
    margin: f64,
) -> Result<bool, Unsupported> {
    let rr = a.radius + b.radius;
    Ok(
        match query::closest_points(pa, &*a.core, pb, &*b.core, margin + rr)? {
            ClosestPoints::Disjoint => false,
            ClosestPoints::Intersecting => true,
            // The solver may stop with witnesses slightly beyond the cut-off: compare the
            // distance it found, as `signed_distance` does.
            ClosestPoints::WithinMargin(p1, p2) => (p2 - p1).length() - rr <= margin,
        },
    )
}
