//! Narrow phase: the signed distance of one pair of colliders.
//!
//! Both queries go through the library's `closest_points` on the cores (see `collider.rs`)
//! with a cut-off, and fall back to its `contact` query (EPA for convex pairs) only when
//! the cores overlap, to get a penetration depth. Accuracy follows the library's query:
//! closed form for ball/segment pairs and point projections on primitives (exact to
//! rounding), GJK for other convex pairs. GJK on polytopes ends on the exact feature, but
//! on curved shapes it can stop early on a stalled simplex: measured 5.3e-6 m too far on
//! a 0.12 m segment-cylinder gap. The segment-cylinder pair (a capsule against a cylinder)
//! is therefore solved here by a 1-D search instead; cylinder pairs with boxes, meshes and
//! other cylinders remain on GJK (see the module docs of `collision`).

use parry3d_f64::math::{Pose as PPose, Vector as PVector};
use parry3d_f64::query::{self, ClosestPoints, PointQuery, Unsupported};
use parry3d_f64::shape::{Cylinder, Segment};

use super::collider::Collider;

/// Core distance below which the direction between two witness points is not defined.
const DEGENERATE: f64 = 1e-12;

/// Iterations of the golden-section search: the bracket shrinks by 0.618 per step, so 80
/// steps take the unit interval below 1e-16.
const GOLDEN_STEPS: usize = 80;

/// Distance between a segment core and a cylinder, with the closest points (world), by
/// minimising the point-to-cylinder distance along the segment. The distance from a point
/// to a convex set is convex in the point, hence in the segment parameter, so a golden-
/// section search finds the minimum; each evaluation is the library's closed-form point
/// projection on the cylinder. Hand-written because the library's GJK stalls on this pair
/// (see the module docs).
fn segment_cylinder(
    seg: &Segment,
    ps: &PPose,
    cyl: &Cylinder,
    pc: &PPose,
) -> (f64, PVector, PVector) {
    let a = pc.inverse_transform_point(*ps * seg.a);
    let b = pc.inverse_transform_point(*ps * seg.b);
    let at = |t: f64| a + (b - a) * t;
    let f = |t: f64| {
        let p = at(t);
        (cyl.project_local_point(p, true).point - p).length()
    };
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    let (mut x1, mut x2) = (hi - g * (hi - lo), lo + g * (hi - lo));
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..GOLDEN_STEPS {
        if f1 <= f2 {
            hi = x2;
            (x2, f2) = (x1, f1);
            x1 = hi - g * (hi - lo);
            f1 = f(x1);
        } else {
            lo = x1;
            (x1, f1) = (x2, f2);
            x2 = lo + g * (hi - lo);
            f2 = f(x2);
        }
    }
    // The minimum may sit on an end point of the segment.
    let t = [(f1, x1), (f(0.0), 0.0), (f(1.0), 1.0)]
        .into_iter()
        .fold((f64::INFINITY, 0.0), |m, c| if c.0 < m.0 { c } else { m })
        .1;
    let p = at(t);
    let q = cyl.project_local_point(p, true).point;
    ((q - p).length(), *pc * p, *pc * q)
}

/// The segment and cylinder of a capsule-cylinder pair, `swapped` if the cylinder is `a`.
fn as_segment_cylinder<'a>(
    a: &'a Collider,
    b: &'a Collider,
) -> Option<(&'a Segment, &'a Cylinder, bool)> {
    let sa = a.core.as_segment();
    let sb = b.core.as_segment();
    match (sa, b.core.as_cylinder(), a.core.as_cylinder(), sb) {
        (Some(s), Some(c), _, _) => Some((s, c, false)),
        (_, _, Some(c), Some(s)) => Some((s, c, true)),
        _ => None,
    }
}

/// Core distance and witnesses of a capsule-cylinder pair, in (a, b) order.
fn core_segment_cylinder(
    a: &Collider,
    pa: &PPose,
    b: &Collider,
    pb: &PPose,
) -> Option<(f64, PVector, PVector)> {
    let (s, c, swapped) = as_segment_cylinder(a, b)?;
    Some(if swapped {
        let (d, ps, pc) = segment_cylinder(s, pb, c, pa);
        (d, pc, ps)
    } else {
        segment_cylinder(s, pa, c, pb)
    })
}

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
    if let Some((d, p1, p2)) = core_segment_cylinder(a, pa, b, pb) {
        let found = if d > DEGENERATE {
            let n = (p2 - p1) / d;
            PairDistance {
                distance: d - rr,
                point_a: p1 + n * a.radius,
                point_b: p2 - n * b.radius,
            }
        } else {
            penetration(a, pa, b, pb, p1, p2)?
        };
        return Ok((found.distance <= max_dist).then_some(found));
    }
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
