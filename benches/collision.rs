//! Full-robot collision checks: `in_collision` and `clearance` (link poses given, FK not
//! timed) of the shipped robots `robots/sevenfold.toml` and `robots/brachia.toml` among ten
//! obstacles of every type, at a free configuration and at a near-contact one (a few
//! millimetres from the first contact), both found by seeded sampling.
//!
//! Run: `cargo bench --bench collision -- --warm-up-time 1 --measurement-time 3`

use std::f64::consts::FRAC_PI_2;
use std::hint::black_box;
use std::path::Path;
use std::sync::Arc;

use clamber::collision::{CollisionModel, CollisionScratch, Obstacle};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use criterion::{criterion_group, criterion_main, Criterion};
use nalgebra::{Point3, Vector3};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

fn shape(geometry: Geometry, origin: Pose) -> Shape {
    Shape {
        origin,
        geometry,
        source: None,
    }
}

fn cube(h: f64) -> Vec<Point3<f64>> {
    let mut v = Vec::new();
    for i in 0..8 {
        let s = |b: usize| if i & b != 0 { h } else { -h };
        v.push(Point3::new(s(1), s(2), s(4)));
    }
    v
}

/// Ten obstacles in a ring around the arm's workspace, every type represented.
fn obstacles() -> Vec<Obstacle> {
    let tri = Geometry::TriMesh {
        vertices: Arc::new(vec![
            Point3::new(-0.3, -0.3, 0.0),
            Point3::new(0.3, -0.3, 0.0),
            Point3::new(0.3, 0.3, 0.0),
            Point3::new(-0.3, 0.3, 0.0),
            Point3::new(0.0, 0.0, 0.15),
        ]),
        triangles: Arc::new(vec![
            [0, 1, 4],
            [1, 2, 4],
            [2, 3, 4],
            [3, 0, 4],
            [0, 2, 1],
            [0, 3, 2],
        ]),
    };
    let geoms = [
        Geometry::Cuboid {
            size: Vector3::new(0.3, 0.2, 0.5),
        },
        Geometry::Sphere { radius: 0.12 },
        Geometry::Capsule {
            radius: 0.05,
            length: 0.6,
        },
        Geometry::Cylinder {
            radius: 0.08,
            length: 0.5,
        },
        Geometry::ConvexMesh {
            points: Arc::new(cube(0.1)),
        },
        Geometry::Cuboid {
            size: Vector3::new(1.2, 0.05, 0.05),
        },
        tri,
        Geometry::Sphere { radius: 0.07 },
        Geometry::Capsule {
            radius: 0.03,
            length: 0.4,
        },
        Geometry::Cuboid {
            size: Vector3::new(0.25, 0.25, 0.02),
        },
    ];
    geoms
        .into_iter()
        .enumerate()
        .map(|(k, g)| {
            let a = k as f64 * std::f64::consts::TAU / 10.0;
            let (r, z) = (0.55 + 0.1 * (k % 3) as f64, 0.15 + 0.12 * (k % 5) as f64);
            Obstacle {
                name: format!("obstacle{k}"),
                shape: shape(
                    g,
                    pose_from_xyz_rpy(
                        [r * a.cos(), r * a.sin(), z],
                        [0.3 * k as f64, FRAC_PI_2 * (k % 2) as f64, a],
                    ),
                ),
            }
        })
        .collect()
}

fn poses(robot: &Robot, q: &[f64]) -> Vec<Pose> {
    let mut p = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut p).expect("fk");
    p
}

/// A free configuration and a near-contact one: sample (seeded) until one free and one
/// colliding configuration are found, then bisect the segment between them to the last
/// free point. Prints the clearance of both.
fn free_and_near(robot: &Robot, model: &CollisionModel) -> (Vec<f64>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let mut s = CollisionScratch::new();
    let mut hit_at = |q: &[f64]| model.in_collision(&poses(robot, q), &mut s).expect("query");
    let (mut free, mut hit) = (None, None);
    for _ in 0..100_000 {
        if free.is_some() && hit.is_some() {
            break;
        }
        let q = robot.random_configuration(&mut rng);
        if hit_at(&q) {
            hit.get_or_insert(q);
        } else if free.is_none() {
            // Prefer a free configuration with some room: skip ones within 2 cm (the pedestal keeps every configuration within 5 cm).
            let c = model
                .clearance(&poses(robot, &q), &mut CollisionScratch::new())
                .expect("clearance");
            if c.distance > 0.02 {
                free = Some(q);
            }
        }
    }
    let (free, hit) = (
        free.expect("no free configuration with 2 cm clearance in 100000 samples"),
        hit.expect("no colliding configuration in 100000 samples"),
    );
    let (mut lo, mut hi) = (0.0, 1.0);
    let mut q = free.clone();
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        robot
            .interpolate(&free, &hit, mid, &mut q)
            .expect("interpolate");
        if hit_at(&q) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    // Back off to a few millimetres of clearance so the near case is a real near miss.
    let mut near = q.clone();
    let mut t = lo;
    loop {
        robot
            .interpolate(&free, &hit, t, &mut near)
            .expect("interpolate");
        let c = model
            .clearance(&poses(robot, &near), &mut CollisionScratch::new())
            .expect("clearance");
        if c.distance >= 0.003 || t <= 0.0 {
            break;
        }
        t -= 0.001;
    }
    let mut s = CollisionScratch::new();
    let cf = model
        .clearance(&poses(robot, &free), &mut s)
        .expect("clearance");
    let cn = model
        .clearance(&poses(robot, &near), &mut s)
        .expect("clearance");
    eprintln!(
        "{}: {} self pairs, {} obstacle pairs; free clearance {:.4} m ({:?}), near clearance {:.5} m ({:?})",
        robot.name(),
        model.self_pair_count(),
        model.obstacle_pair_count(),
        cf.distance,
        cf.pair,
        cn.distance,
        cn.pair
    );
    (free, near)
}

fn bench_robot(c: &mut Criterion, label: &str, robot: &Robot) {
    let obstacles = obstacles();
    let model = CollisionModel::new(robot, &obstacles).expect("collision model");
    let (free, near) = free_and_near(robot, &model);
    let mut group = c.benchmark_group(format!("collision/{label}"));
    for (case, q) in [("free", &free), ("near", &near)] {
        let p = poses(robot, q);
        let mut s = CollisionScratch::new();
        group.bench_function(format!("in_collision/{case}"), |b| {
            b.iter(|| model.in_collision(black_box(&p), &mut s).expect("query"))
        });
        group.bench_function(format!("clearance/{case}"), |b| {
            b.iter(|| model.clearance(black_box(&p), &mut s).expect("query"))
        });
    }
    group.finish();
}

fn collision(c: &mut Criterion) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("robots");
    for name in ["sevenfold", "brachia"] {
        let robot = clamber::robot_file::load_robot(&root.join(format!("{name}.toml")))
            .unwrap_or_else(|e| panic!("{e}"));
        bench_robot(c, name, &robot);
    }
}

criterion_group!(benches, collision);
criterion_main!(benches);
