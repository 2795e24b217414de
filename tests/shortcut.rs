//! Shortcut and smoothing on the unit sphere (a point robot held on the sphere |p| = 1).
//! Outside references: the great-circle distance between the ends, acos(a . b) for unit
//! vectors a, b (the shortest curve on a sphere is the great-circle arc), the sphere's own
//! equation for the residual of every waypoint, and the independent verifier at a spacing of
//! a tenth of the stride for every point in between.

mod common;

use common::Sphere;

use clamber::constraint::{ConstraintStack, FrameRef};
use clamber::cspace::ConstrainedSpace;
use clamber::math::Pose;
use clamber::model::Robot;
use clamber::projection::ProjectionBuffer;
use clamber::shortcut::{path_length, shorten, ShortenSettings};
use clamber::verify::{verify_path, VerifySettings};
use clamber::walk::{walk, WalkSettings};

/// Off the unit sphere by its implicit equation x^2 + y^2 + z^2 = 1, as a distance.
fn sphere_error(p: &[f64]) -> f64 {
    let s = p[0] * p[0] + p[1] * p[1] + p[2] * p[2];
    ((s - 1.0) / (s.sqrt() + 1.0)).abs()
}

fn unit(v: [f64; 3]) -> Vec<f64> {
    let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    v.iter().map(|x| x / n).collect()
}

const STRIDE: f64 = 0.02;

struct Setup {
    robot: Robot,
    stack: ConstraintStack,
    walk: WalkSettings,
}

fn setup() -> Setup {
    let robot = common::point_robot(2.0);
    let stack = ConstraintStack::new().with(Sphere {
        point: FrameRef::on_link(&robot, "point", Pose::identity()).unwrap(),
    });
    Setup {
        robot,
        stack,
        walk: WalkSettings {
            stride: STRIDE,
            ..Default::default()
        },
    }
}

/// A long detour on the sphere from `a` to `b` through three via points, made of manifold
/// walks (so it is a valid path of the constrained space).
fn detour(s: &Setup, a: &[f64], b: &[f64]) -> Vec<Vec<f64>> {
    let vias = [
        unit([0.3, -0.5, 0.8]),
        unit([-0.4, 0.2, 0.9]),
        unit([0.2, 0.9, -0.4]),
    ];
    let mut buf = ProjectionBuffer::new(&s.robot, &s.stack);
    let mut path = vec![a.to_vec()];
    let mut at = a.to_vec();
    for next in vias.iter().chain(std::iter::once(&b.to_vec())) {
        let w = walk(&s.robot, &s.stack, &at, next, &s.walk, &mut buf).unwrap();
        assert!(w.reached(), "{:?}", w.stop);
        path.extend(w.path.into_iter().skip(1));
        at = next.clone();
    }
    path
}

fn great_circle(a: &[f64], b: &[f64]) -> f64 {
    (a[0] * b[0] + a[1] * b[1] + a[2] * b[2])
        .clamp(-1.0, 1.0)
        .acos()
}

/// Every waypoint on the sphere within the projection tolerance (by the sphere's equation)
/// and the whole path passing the verifier at a tenth of the stride. The residual bound
/// along a straight segment between two points of the unit sphere at most one stride s
/// apart is its sagitta, 1 - sqrt(1 - s^2 / 4) <= s^2 / 8 + s^4/64 (5.0e-5 for s = 0.02);
/// the verifier's tolerance is 1e-4.
fn check_valid(s: &Setup, path: &[Vec<f64>]) {
    let tol = s.walk.projection.tolerance;
    for (i, q) in path.iter().enumerate() {
        assert!(sphere_error(q) <= tol, "waypoint {i}: {}", sphere_error(q));
    }
    let v = VerifySettings::new(STRIDE / 10.0, 1e-4, STRIDE + 1e-9).unwrap();
    let rep = verify_path(&s.robot, &s.stack, None, path, &v).unwrap();
    assert!(rep.passed(), "{:?}", rep.defects);
    let sag = 1.0 - (1.0 - STRIDE * STRIDE / 4.0).sqrt();
    assert!(
        rep.max_residual <= sag + tol,
        "{} > {sag}",
        rep.max_residual
    );
}

/// A polyline with vertices on the unit sphere whose chords are at most `s` long is no
/// shorter than arc * (2 sin(phi/2) / phi) with phi = 2 asin(s/2) the largest angle a chord
/// spans (each chord 2 sin(phi_i / 2) is that fraction of its arc or more, and the arcs
/// together are at least the great-circle distance).
fn lower_bound(arc: f64) -> f64 {
    let phi = 2.0 * (STRIDE / 2.0).asin();
    arc * (2.0 * (phi / 2.0).sin() / phi)
}

#[test]
fn shortcut_and_smoothing_approach_the_great_circle() {
    let s = setup();
    let a = unit([1.0, 0.0, 0.1]);
    let b = unit([0.0, 1.0, 0.3]);
    let arc = great_circle(&a, &b);
    let path = detour(&s, &a, &b);
    check_valid(&s, &path);
    let mut space = ConstrainedSpace::new(&s.robot, &s.stack, None, s.walk, 0.005).unwrap();
    let before = path_length(&space, &path);
    assert!(before > 2.0 * arc, "the detour is long: {before} vs {arc}");

    let settings = ShortenSettings::new(100, 10, 0.5, 7).unwrap();
    let out = shorten(&mut space, &path, &settings).unwrap();
    let st = out.stats;
    println!("great circle {arc:.6}: {st:?}");
    assert_eq!(out.path.first().unwrap(), &a);
    assert_eq!(out.path.last().unwrap(), &b);
    assert!((st.length_before - before).abs() < 1e-12);
    assert!(st.length_after_shortcuts <= st.length_before);
    assert!(st.length_after <= st.length_after_shortcuts);
    assert!((st.length_after - path_length(&space, &out.path)).abs() < 1e-12);
    // Approaches the great circle: within 0.5 % above it, and not below the bound for
    // polylines on the sphere (a path cutting inside the sphere would be).
    assert!(
        st.length_after >= lower_bound(arc) - 1e-9,
        "{}",
        st.length_after
    );
    assert!(
        st.length_after <= arc * 1.005,
        "{} vs great circle {arc}",
        st.length_after
    );
    check_valid(&s, &out.path);

    // Same seed, same result; a fresh space gives the same answer.
    let mut space2 = ConstrainedSpace::new(&s.robot, &s.stack, None, s.walk, 0.005).unwrap();
    let again = shorten(&mut space2, &path, &settings).unwrap();
    assert_eq!(again.path, out.path);
    assert_eq!(again.stats, out.stats);
}

#[test]
fn smoothing_alone_never_lengthens_and_keeps_the_residual_bound() {
    let s = setup();
    let a = unit([1.0, 0.0, 0.1]);
    let b = unit([0.0, 1.0, 0.3]);
    let arc = great_circle(&a, &b);
    let path = detour(&s, &a, &b);
    let mut space = ConstrainedSpace::new(&s.robot, &s.stack, None, s.walk, 0.005).unwrap();
    let mut current = path.clone();
    let mut lengths = vec![path_length(&space, &current)];
    // One pass at a time: the length after each pass is never above the one before.
    for pass in 0..20 {
        let settings = ShortenSettings::new(0, 1, 0.5, pass).unwrap();
        let out = shorten(&mut space, &current, &settings).unwrap();
        assert_eq!(out.stats.shortcuts_tried, 0);
        assert!(out.stats.length_after <= out.stats.length_before);
        current = out.path;
        lengths.push(out.stats.length_after);
    }
    println!("great circle {arc:.4}; smoothing lengths {lengths:.4?}");
    assert!(
        lengths.last().unwrap() < &lengths[0],
        "smoothing did something"
    );
    assert!(*lengths.last().unwrap() >= lower_bound(arc) - 1e-9);
    check_valid(&s, &current);
}

#[test]
fn random_shortcuts_on_several_seeds() {
    let s = setup();
    let a = unit([0.0, -1.0, 0.2]);
    let b = unit([0.3, 0.8, -0.5]);
    let arc = great_circle(&a, &b);
    let path = detour(&s, &a, &b);
    let mut space = ConstrainedSpace::new(&s.robot, &s.stack, None, s.walk, 0.005).unwrap();
    for seed in 0..5 {
        let settings = ShortenSettings::new(50, 0, 0.5, seed).unwrap();
        let out = shorten(&mut space, &path, &settings).unwrap();
        let st = out.stats;
        assert!(st.shortcuts_accepted > 0);
        assert!(st.length_after < st.length_before);
        assert!(st.length_after >= lower_bound(arc) - 1e-9);
        check_valid(&s, &out.path);
        println!("seed {seed}: great circle {arc:.4}, {st:?}");
    }
    assert!(ShortenSettings::new(1, 1, 0.0, 0).is_err());
    assert!(ShortenSettings::new(1, 1, 1.5, 0).is_err());
    assert!(shorten(&mut space, &[], &ShortenSettings::default()).is_err());
    assert!(shorten(&mut space, &[vec![1.0, 0.0]], &ShortenSettings::default()).is_err());
}
