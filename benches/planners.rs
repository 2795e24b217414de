//! Planner timings: RRT-Connect against lazy PRM on the two queries of tests/rrt_connect.rs
//! and tests/lazy_prm.rs, and a lazy PRM query on a fresh roadmap against the same query on a
//! roadmap kept from an earlier query in the same stance.
//!
//! ```text
//! cargo bench --bench planners
//! ```
//! - `free`: `robots/sevenfold.toml` around a wall (free space, collision resolution 0.01);
//! - `bar`: the same arm sliding its grip along a bar past a ball (constrained space, stride
//!   0.02, collision resolution 0.005);
//! - `reuse`: on `bar`, the query b -> c with a fresh roadmap (`cold`) and with the roadmap
//!   the query a -> b left (`warm`, cloned for each run).
//!
//! Each run uses the next seed of 0, 1, 2, ... (so the times cover several seeds). Before
//! timing, success counts and mean statistics over seeds 0..20 are printed to stderr.

use std::hint::black_box;
use std::path::Path;
use std::time::Duration;

use clamber::collision::{CollisionModel, Obstacle};
use clamber::constraint::{BarGrip, ConstraintStack};
use clamber::cspace::{ConstrainedSpace, FreeSpace};
use clamber::grip_position::choose_grip_position;
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::planner::{lazy_prm, rrt_connect, Plan, PrmSettings, Roadmap, RrtSettings};
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::walk::{walk, WalkSettings};
use criterion::{BatchSize, Criterion};
use nalgebra::{Point3, Vector3};

fn obstacle(name: &str, at: [f64; 3], geometry: Geometry) -> Obstacle {
    Obstacle {
        name: name.into(),
        shape: Shape {
            origin: pose_from_xyz_rpy(at, [0.0; 3]),
            geometry,
            source: None,
        },
    }
}

struct Bar {
    stack: ConstraintStack,
    model: CollisionModel,
    walk: WalkSettings,
    a: Vec<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
}

/// The bar query of tests/lazy_prm.rs.
fn bar(robot: &Robot) -> Bar {
    let bar = BarGrip::new(
        robot,
        "hand",
        Point3::new(0.5, -0.4, 0.6),
        Point3::new(0.5, 0.4, 0.6),
        Vector3::x(),
        true,
    )
    .unwrap();
    let stack = ConstraintStack::new().with(bar.clone());
    let ps = ProjectionSettings::default();
    let part = |start: f64| BarGrip {
        start: bar.start + bar.axis.into_inner() * start,
        length: 0.2,
        ..bar.clone()
    };
    let grip = |s: f64, seed: &[f64]| {
        choose_grip_position(robot, &ConstraintStack::new(), &part(s), seed, &ps, 5)
            .unwrap()
            .unwrap()
            .q
    };
    let a = grip(0.05, &[0.0, 0.6, 0.0, 1.2, 0.0, 0.8, 0.0]);
    let b = grip(0.55, &a);
    let c = grip(0.15, &b);
    let walk_settings = WalkSettings {
        stride: 0.02,
        ..Default::default()
    };
    let mut buf = ProjectionBuffer::new(robot, &stack);
    let direct = walk(robot, &stack, &a, &b, &walk_settings, &mut buf).unwrap();
    let mid = &direct.path[direct.path.len() / 2];
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, mid, &mut poses).unwrap();
    let wrist = poses[robot.link_id("link6").unwrap()].translation.vector;
    let ball = obstacle(
        "ball",
        [wrist.x, wrist.y, wrist.z],
        Geometry::Sphere { radius: 0.03 },
    );
    let model = CollisionModel::new(robot, &[ball]).unwrap();
    Bar {
        stack,
        model,
        walk: walk_settings,
        a,
        b,
        c,
    }
}

fn prm(seed: u64) -> PrmSettings {
    PrmSettings::new(10, 1.5, 50, 5_000, Duration::from_secs(60), seed).unwrap()
}

fn free_prm(seed: u64) -> PrmSettings {
    PrmSettings::new(10, f64::INFINITY, 50, 20_000, Duration::from_secs(60), seed).unwrap()
}

fn summary(name: &str, plans: &[Plan]) {
    let ok = plans.iter().filter(|p| p.path.is_some()).count();
    let n = plans.len() as f64;
    let mean = |f: &dyn Fn(&Plan) -> f64| plans.iter().map(f).sum::<f64>() / n;
    eprintln!(
        "{name}: {ok}/{} solved; mean samples {:.0}, motions {:.0}, projections {:.0}, \
         collision checks {:.0}, time {:.1} ms",
        plans.len(),
        mean(&|p| p.stats.samples as f64),
        mean(&|p| p.stats.motions_checked as f64),
        mean(&|p| p.stats.space.projections as f64),
        mean(&|p| p.stats.space.collision_checks as f64),
        mean(&|p| p.stats.elapsed.as_secs_f64() * 1e3),
    );
}

fn main() {
    let robot = clamber::robot_file::load_robot(Path::new("robots/sevenfold.toml")).unwrap();
    let wall = obstacle(
        "wall",
        [0.45, 0.0, 0.5],
        Geometry::Cuboid {
            size: Vector3::new(0.1, 0.1, 1.0),
        },
    );
    let wall_model = CollisionModel::new(&robot, std::slice::from_ref(&wall)).unwrap();
    let start = vec![1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    let goal = vec![-1.0, 1.0, 0.0, 0.8, 0.0, 0.5, 0.0];
    let bar = bar(&robot);
    let free_space = || FreeSpace::new(&robot, Some(&wall_model), 0.01).unwrap();
    let bar_space =
        || ConstrainedSpace::new(&robot, &bar.stack, Some(&bar.model), bar.walk, 0.005).unwrap();
    let rrt = |seed| RrtSettings::new(0.3, 20_000, Duration::from_secs(60), seed).unwrap();
    let warm = {
        let mut r = Roadmap::new(&robot, prm(0));
        let p = r.query(&mut bar_space(), &bar.a, &bar.b).unwrap();
        assert!(p.path.is_some());
        r
    };

    let seeds = 0..20u64;
    let plans = |f: &dyn Fn(u64) -> Plan| seeds.clone().map(f).collect::<Vec<_>>();
    summary(
        "free rrt_connect",
        &plans(&|s| rrt_connect(&mut free_space(), &start, &goal, &rrt(s)).unwrap()),
    );
    summary(
        "free lazy_prm",
        &plans(&|s| lazy_prm(&mut free_space(), &start, &goal, &free_prm(s)).unwrap()),
    );
    summary(
        "bar rrt_connect",
        &plans(&|s| rrt_connect(&mut bar_space(), &bar.a, &bar.b, &rrt(s)).unwrap()),
    );
    summary(
        "bar lazy_prm",
        &plans(&|s| lazy_prm(&mut bar_space(), &bar.a, &bar.b, &prm(s)).unwrap()),
    );
    summary(
        "reuse cold (b -> c, fresh roadmap)",
        &plans(&|s| lazy_prm(&mut bar_space(), &bar.b, &bar.c, &prm(s)).unwrap()),
    );
    summary(
        "reuse warm (b -> c, roadmap of a -> b, seed 0)",
        &plans(&|_| {
            warm.clone()
                .query(&mut bar_space(), &bar.b, &bar.c)
                .unwrap()
        }),
    );

    let mut c = Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(3))
        .configure_from_args();
    let mut seed = 0u64;
    let mut next = || {
        seed += 1;
        seed
    };
    let mut g = c.benchmark_group("free");
    g.bench_function("rrt_connect", |b| {
        b.iter(|| black_box(rrt_connect(&mut free_space(), &start, &goal, &rrt(next())).unwrap()))
    });
    g.bench_function("lazy_prm", |b| {
        b.iter(|| black_box(lazy_prm(&mut free_space(), &start, &goal, &free_prm(next())).unwrap()))
    });
    g.finish();
    let mut g = c.benchmark_group("bar");
    g.bench_function("rrt_connect", |b| {
        b.iter(|| black_box(rrt_connect(&mut bar_space(), &bar.a, &bar.b, &rrt(next())).unwrap()))
    });
    g.bench_function("lazy_prm", |b| {
        b.iter(|| black_box(lazy_prm(&mut bar_space(), &bar.a, &bar.b, &prm(next())).unwrap()))
    });
    g.finish();
    let mut g = c.benchmark_group("reuse");
    g.bench_function("cold", |b| {
        b.iter(|| black_box(lazy_prm(&mut bar_space(), &bar.b, &bar.c, &prm(next())).unwrap()))
    });
    g.bench_function("warm", |b| {
        b.iter_batched(
            || warm.clone(),
            |mut r| black_box(r.query(&mut bar_space(), &bar.b, &bar.c).unwrap()),
            BatchSize::SmallInput,
        )
    });
    g.finish();
    c.final_summary();
}
