//! Nearest-neighbour search on the climber's configurations: which index to use.
//!
//! ```text
//! cargo bench --bench nearest
//! ```
//! Points: uniform random configurations of `robots/brachia.toml` (floating torso and two
//! 7-DOF arms: nq 21, nv 20), seeded, at 1k / 5k / 20k points; 200 query configurations
//! drawn the same way; k = 10 (the roadmap's default neighbour count). Candidates:
//! - `scan_robot`: linear scan calling `Robot::distance` (the planners' distance before this
//!   index; allocates a tangent vector per call);
//! - `scan_index`: `clamber::nearest::NearestIndex`, linear scan with an allocation-free
//!   distance and early exit once a candidate cannot enter the best k (exact);
//! - `vptree`: the `vpsearch` crate's vantage-point tree with the same metric (exact: the
//!   metric is a true metric, the L2 product of Euclidean and SO(3) angle distances);
//! - `kdtree`: the `kiddo` crate's k-d tree on a Euclidean embedding (translation, the
//!   quaternion scaled by 2 and stored with both signs, joint values). The embedded distance
//!   is never larger than the true one (4 sin(theta/4) <= theta), so the k nearest in the
//!   embedding, re-ranked by the true distance, give a radius that contains the true k
//!   nearest; a radius query and a re-rank make the result exact.
//!
//! Before timing, each candidate's k nearest are compared with `scan_robot`'s for every
//! query (stderr: number of queries whose neighbour list differs). Build times: one build
//! of the whole set, per point set. Query times: one k-NN query, cycling over the queries.

use std::hint::black_box;
use std::num::NonZero;
use std::path::Path;
use std::time::Duration;

use clamber::model::{JointKind, Robot};
use clamber::nearest::NearestIndex;
use criterion::{BenchmarkId, Criterion};
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use vpsearch::{BestCandidate, MetricSpace};

const K: usize = 10;
const QUERIES: usize = 200;
/// Embedding dimension for brachia: 3 translation + 4 quaternion + 14 joints.
const D: usize = 21;

/// A configuration in the vantage-point tree; the metric comes from the index.
#[derive(Clone)]
struct Conf(Vec<f64>);

impl MetricSpace for Conf {
    type UserData = NearestIndex;
    type Distance = f64;
    fn distance(&self, other: &Self, index: &NearestIndex) -> f64 {
        index.distance(&self.0, &other.0).unwrap_or(f64::INFINITY)
    }
}

/// The best k seen, for vpsearch's k-NN search.
struct KBest {
    k: usize,
    best: Vec<(f64, usize)>,
}

impl BestCandidate<Conf, ()> for KBest {
    type Output = Vec<(usize, f64)>;
    fn consider(&mut self, _: &Conf, d: f64, i: usize, _: &NearestIndex) {
        if self.best.len() == self.k && d >= self.best[self.k - 1].0 {
            return;
        }
        let at = self.best.partition_point(|&(bd, _)| bd <= d);
        self.best.insert(at, (d, i));
        self.best.truncate(self.k);
    }
    fn distance(&self) -> f64 {
        if self.best.len() < self.k {
            f64::MAX
        } else {
            self.best[self.k - 1].0
        }
    }
    fn result(self, _: &NearestIndex) -> Vec<(usize, f64)> {
        self.best.into_iter().map(|(d, i)| (i, d)).collect()
    }
}

/// Euclidean embedding: translation, 2 x quaternion (sign `sign`), joint values.
fn embed(robot: &Robot, q: &[f64], sign: f64) -> [f64; D] {
    let mut out = [0.0; D];
    let mut n = 0;
    for j in robot.joints() {
        match j.kind {
            JointKind::Floating => {
                for k in 0..3 {
                    out[n] = q[j.q_index + k];
                    n += 1;
                }
                for k in 3..7 {
                    out[n] = 2.0 * sign * q[j.q_index + k];
                    n += 1;
                }
            }
            JointKind::Fixed => {}
            _ => {
                out[n] = q[j.q_index];
                n += 1;
            }
        }
    }
    assert_eq!(n, D, "embedding written for brachia");
    out
}

struct KdIndex {
    tree: ImmutableKdTree<f64, D>,
    points: Vec<Vec<f64>>,
}

impl KdIndex {
    fn build(robot: &Robot, points: &[Vec<f64>]) -> Self {
        let mut entries = Vec::with_capacity(2 * points.len());
        for p in points {
            entries.push(embed(robot, p, 1.0));
            entries.push(embed(robot, p, -1.0));
        }
        KdIndex {
            tree: ImmutableKdTree::new_from_slice(&entries).unwrap(),
            points: points.to_vec(),
        }
    }

    /// Exact k nearest: candidates from the embedding, a radius query, re-rank.
    fn k_nearest(&self, index: &NearestIndex, e: &[f64; D], q: &[f64]) -> Vec<(usize, f64)> {
        // 2k embedded neighbours hold at least k distinct points (two copies each at most).
        let cand = self
            .tree
            .query(e)
            .nearest_n::<SquaredEuclidean<f64>>(NonZero::new(2 * K).unwrap())
            .execute();
        let mut ranked = rerank(index, &self.points, q, cand.iter().map(|c| c.item as usize));
        let radius = ranked[K - 1].1;
        let within = self
            .tree
            .query(e)
            .within::<SquaredEuclidean<f64>>(radius * radius * (1.0 + 1e-12))
            .execute();
        ranked = rerank(
            index,
            &self.points,
            q,
            within.iter().map(|c| c.item as usize),
        );
        ranked.truncate(K);
        ranked
    }
}

fn rerank(
    index: &NearestIndex,
    points: &[Vec<f64>],
    q: &[f64],
    items: impl Iterator<Item = usize>,
) -> Vec<(usize, f64)> {
    let mut ids: Vec<usize> = items.map(|i| i / 2).collect();
    ids.sort_unstable();
    ids.dedup();
    let mut out: Vec<(usize, f64)> = ids
        .into_iter()
        .map(|i| (i, index.distance(q, &points[i]).unwrap()))
        .collect();
    out.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    out
}

fn scan_robot(robot: &Robot, points: &[Vec<f64>], q: &[f64]) -> Vec<(usize, f64)> {
    let mut all: Vec<(usize, f64)> = points
        .iter()
        .enumerate()
        .map(|(i, p)| (i, robot.distance(q, p).unwrap()))
        .collect();
    all.select_nth_unstable_by(K - 1, |a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    all.truncate(K);
    all.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    all
}

/// Same neighbour set (by number), distances within 1e-9.
fn same(a: &[(usize, f64)], b: &[(usize, f64)]) -> bool {
    let mut x: Vec<usize> = a.iter().map(|e| e.0).collect();
    let mut y: Vec<usize> = b.iter().map(|e| e.0).collect();
    x.sort_unstable();
    y.sort_unstable();
    x == y && a.iter().zip(b).all(|(p, q)| (p.1 - q.1).abs() < 1e-9)
}

fn main() {
    let robot = clamber::robot_file::load_robot(Path::new("robots/brachia.toml")).unwrap();
    assert_eq!((robot.nq(), robot.nv()), (21, 20));
    let mut c = Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
        .configure_from_args();
    for n in [1_000usize, 5_000, 20_000] {
        let mut rng = ChaCha8Rng::seed_from_u64(n as u64);
        let points: Vec<Vec<f64>> = (0..n)
            .map(|_| robot.random_configuration(&mut rng))
            .collect();
        let queries: Vec<Vec<f64>> = (0..QUERIES)
            .map(|_| robot.random_configuration(&mut rng))
            .collect();
        let mut index = NearestIndex::new(&robot);
        for p in &points {
            index.insert(p).unwrap();
        }
        let items: Vec<Conf> = points.iter().cloned().map(Conf).collect();
        let vp = vpsearch::Tree::new_with_user_data_ref(&items, &index);
        let kd = KdIndex::build(&robot, &points);
        let embedded: Vec<[f64; D]> = queries.iter().map(|q| embed(&robot, q, 1.0)).collect();

        // Correctness against the plain scan with Robot::distance.
        let (mut bad_index, mut bad_vp, mut bad_kd) = (0, 0, 0);
        let mut out = Vec::new();
        for (q, e) in queries.iter().zip(&embedded) {
            let want = scan_robot(&robot, &points, q);
            index.k_nearest(q, K, &mut out).unwrap();
            bad_index += usize::from(!same(&out, &want));
            let got = vp.find_nearest_custom(
                &Conf(q.clone()),
                &index,
                KBest {
                    k: K,
                    best: Vec::new(),
                },
            );
            bad_vp += usize::from(!same(&got, &want));
            bad_kd += usize::from(!same(&kd.k_nearest(&index, e, q), &want));
        }
        eprintln!(
            "n = {n}: queries whose {K} nearest differ from the Robot::distance scan: \
             scan_index {bad_index}, vptree {bad_vp}, kdtree {bad_kd} (of {QUERIES})"
        );

        let mut g = c.benchmark_group(format!("nearest_build/{n}"));
        g.bench_function("scan_index", |b| {
            b.iter(|| {
                let mut ix = NearestIndex::new(&robot);
                for p in &points {
                    ix.insert(p).unwrap();
                }
                black_box(ix.len())
            })
        });
        g.bench_function("vptree", |b| {
            b.iter(|| black_box(vpsearch::Tree::new_with_user_data_ref(&items, &index)))
        });
        g.bench_function("kdtree", |b| {
            b.iter(|| black_box(KdIndex::build(&robot, &points).points.len()))
        });
        g.finish();

        let mut g = c.benchmark_group(format!("nearest_query_k{K}"));
        let mut i = 0;
        g.bench_function(BenchmarkId::new("scan_robot", n), |b| {
            b.iter(|| {
                i = (i + 1) % QUERIES;
                black_box(scan_robot(&robot, &points, &queries[i]))
            })
        });
        g.bench_function(BenchmarkId::new("scan_index", n), |b| {
            b.iter(|| {
                i = (i + 1) % QUERIES;
                index.k_nearest(&queries[i], K, &mut out).unwrap();
                black_box(out.len())
            })
        });
        g.bench_function(BenchmarkId::new("vptree", n), |b| {
            b.iter(|| {
                i = (i + 1) % QUERIES;
                black_box(vp.find_nearest_custom(
                    &Conf(queries[i].clone()),
                    &index,
                    KBest {
                        k: K,
                        best: Vec::new(),
                    },
                ))
            })
        });
        g.bench_function(BenchmarkId::new("kdtree", n), |b| {
            b.iter(|| {
                i = (i + 1) % QUERIES;
                black_box(kd.k_nearest(&index, &embedded[i], &queries[i]))
            })
        });
        g.finish();
    }
    c.final_summary();
}
