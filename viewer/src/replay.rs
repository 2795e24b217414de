//! The replay model: time -> configuration, active stance and switch moments of a planned
//! route or motion. Pure data and arithmetic (no drawing), so it is unit-tested on its own.
//!
//! A route file stores, per leg, waypoints joined by straight joint-space segments and the
//! route time at each waypoint. Between two waypoints the replay moves at constant speed
//! along the segment: the geometric path is exact (the segment is the planned one), only the
//! speed profile inside a segment is simplified, because the file does not keep the timing's
//! inner samples. A motion file stores its timed samples at a fixed step, so it replays
//! exactly at its sample times.

use std::path::Path;

use clamber::model::Robot;
use serde_json::Value;

use crate::error::ViewError;

/// A stretch of time spent in one stance.
#[derive(Clone, Debug, PartialEq)]
pub struct Span {
    /// Start and end time (seconds).
    pub t0: f64,
    pub t1: f64,
    /// The stance as `effector@hold` words (empty stance: `free`).
    pub label: String,
    /// Hold names gripped in this span (to highlight them).
    pub holds: Vec<String>,
    /// Timed waypoints, times increasing, `times[0] == t0`, last `== t1`.
    pub times: Vec<f64>,
    pub path: Vec<Vec<f64>>,
}

/// A grab or release at a moment of the route.
#[derive(Clone, Debug, PartialEq)]
pub struct SwitchMark {
    pub time: f64,
    /// `grab hand on peg`, `release hand from rail`.
    pub label: String,
}

/// What the viewer shows at one moment.
#[derive(Clone, Debug, PartialEq)]
pub struct Frame {
    pub time: f64,
    pub q: Vec<f64>,
    /// Index of the span active at `time`.
    pub span: usize,
}

/// A whole route (or motion) ready to replay.
#[derive(Clone, Debug, PartialEq)]
pub struct Replay {
    pub spans: Vec<Span>,
    pub switches: Vec<SwitchMark>,
}

fn field_err(file: &Path, field: &str, expected: &str) -> ViewError {
    ViewError::RouteFile {
        path: file.to_path_buf(),
        field: field.to_string(),
        expected: expected.to_string(),
    }
}

fn numbers(v: &Value, file: &Path, field: &str, nq: usize) -> Result<Vec<f64>, ViewError> {
    let q: Option<Vec<f64>> = v
        .as_array()
        .and_then(|a| a.iter().map(Value::as_f64).collect());
    let q = q.ok_or_else(|| field_err(file, field, "a list of numbers"))?;
    if q.len() != nq {
        return Err(field_err(
            file,
            field,
            &format!(
                "{nq} values (one per coordinate of the robot), found {}",
                q.len()
            ),
        ));
    }
    if q.iter().any(|x| !x.is_finite()) {
        return Err(field_err(file, field, "finite numbers"));
    }
    Ok(q)
}

fn stance_label(
    v: Option<&Value>,
    file: &Path,
    field: &str,
) -> Result<(String, Vec<String>), ViewError> {
    let Some(v) = v else {
        return Ok(("free".into(), Vec::new()));
    };
    let map = v
        .as_object()
        .ok_or_else(|| field_err(file, field, "an object effector -> hold name"))?;
    let mut words = Vec::new();
    let mut holds = Vec::new();
    for (e, h) in map {
        let h = h
            .as_str()
            .ok_or_else(|| field_err(file, &format!("{field}.{e}"), "a hold name"))?;
        words.push(format!("{e}@{h}"));
        holds.push(h.to_string());
    }
    let label = if words.is_empty() {
        "free".to_string()
    } else {
        words.join(" ")
    };
    Ok((label, holds))
}

fn increasing(times: &[f64], file: &Path, field: &str) -> Result<(), ViewError> {
    if times.iter().any(|t| !t.is_finite()) || times.windows(2).any(|w| w[1] < w[0]) {
        return Err(field_err(file, field, "finite, non-decreasing times"));
    }
    Ok(())
}

impl Replay {
    /// Read a route or motion JSON written by `clamber plan`, for a robot with `nq`
    /// coordinates. `file` names the file in errors.
    pub fn from_json(text: &str, file: &Path, nq: usize) -> Result<Replay, ViewError> {
        let doc: Value = serde_json::from_str(text).map_err(|e| ViewError::RouteJson {
            path: file.to_path_buf(),
            line: e.line(),
            column: e.column(),
            message: e.to_string(),
        })?;
        if let Some(legs) = doc.get("legs") {
            let legs = legs
                .as_array()
                .ok_or_else(|| field_err(file, "legs", "a list of legs"))?;
            let mut spans = Vec::new();
            for (i, l) in legs.iter().enumerate() {
                let (label, holds) =
                    stance_label(l.get("stance"), file, &format!("legs[{i}].stance"))?;
                let path = l
                    .get("path")
                    .and_then(Value::as_array)
                    .ok_or_else(|| {
                        field_err(file, &format!("legs[{i}].path"), "a list of configurations")
                    })?
                    .iter()
                    .enumerate()
                    .map(|(k, q)| numbers(q, file, &format!("legs[{i}].path[{k}]"), nq))
                    .collect::<Result<Vec<_>, _>>()?;
                let times: Option<Vec<f64>> = l
                    .get("times")
                    .and_then(Value::as_array)
                    .and_then(|a| a.iter().map(Value::as_f64).collect());
                let times = times.ok_or_else(|| {
                    field_err(file, &format!("legs[{i}].times"), "a list of numbers")
                })?;
                if times.len() != path.len() || path.is_empty() {
                    return Err(field_err(
                        file,
                        &format!("legs[{i}].times"),
                        &format!(
                            "one time per waypoint ({} waypoints, {} times)",
                            path.len(),
                            times.len()
                        ),
                    ));
                }
                increasing(&times, file, &format!("legs[{i}].times"))?;
                spans.push(Span {
                    t0: times[0],
                    t1: *times.last().unwrap_or(&times[0]),
                    label,
                    holds,
                    times,
                    path,
                });
            }
            let mut switches = Vec::new();
            if let Some(ws) = doc.get("switches").and_then(Value::as_array) {
                for (i, w) in ws.iter().enumerate() {
                    let time = w
                        .get("time")
                        .and_then(Value::as_f64)
                        .filter(|t| t.is_finite())
                        .ok_or_else(|| {
                            field_err(file, &format!("switches[{i}].time"), "a number")
                        })?;
                    let s = |k: &str| w.get(k).and_then(Value::as_str).unwrap_or("?").to_string();
                    let action = s("action");
                    let word = if action == "release" { "from" } else { "on" };
                    switches.push(SwitchMark {
                        time,
                        label: format!("{action} {} {word} {}", s("effector"), s("hold")),
                    });
                }
            }
            Replay::new(spans, switches).map_err(|what| field_err(file, "legs", &what))
        } else if let Some(samples) = doc.get("samples") {
            let samples = samples
                .as_array()
                .ok_or_else(|| field_err(file, "samples", "a list of timed samples"))?;
            let mut times = Vec::with_capacity(samples.len());
            let mut path = Vec::with_capacity(samples.len());
            for (i, s) in samples.iter().enumerate() {
                let t = s
                    .get("t")
                    .and_then(Value::as_f64)
                    .ok_or_else(|| field_err(file, &format!("samples[{i}].t"), "a number"))?;
                times.push(t);
                path.push(numbers(
                    s.get("q").unwrap_or(&Value::Null),
                    file,
                    &format!("samples[{i}].q"),
                    nq,
                )?);
            }
            if path.is_empty() {
                return Err(field_err(file, "samples", "at least one sample"));
            }
            increasing(&times, file, "samples")?;
            let span = Span {
                t0: times[0],
                t1: *times.last().unwrap_or(&times[0]),
                label: "single stance".into(),
                holds: Vec::new(),
                times,
                path,
            };
            Replay::new(vec![span], Vec::new()).map_err(|what| field_err(file, "samples", &what))
        } else {
            Err(field_err(
                file,
                "(top level)",
                "`legs` (a route file) or `samples` (a motion file)",
            ))
        }
    }

    /// Read a route or motion file from disk.
    pub fn load(file: &Path, robot: &Robot) -> Result<Replay, ViewError> {
        let text = std::fs::read_to_string(file).map_err(|source| ViewError::Io {
            path: file.to_path_buf(),
            source,
        })?;
        Replay::from_json(&text, file, robot.nq())
    }

    /// A replay from spans in time order (each with at least one waypoint).
    pub fn new(spans: Vec<Span>, switches: Vec<SwitchMark>) -> Result<Replay, String> {
        if spans.is_empty() {
            return Err("at least one leg".into());
        }
        for s in &spans {
            if s.path.is_empty() || s.path.len() != s.times.len() {
                return Err("one time per waypoint and at least one waypoint".into());
            }
        }
        if spans.windows(2).any(|w| w[1].t0 < w[0].t1 - 1e-9) {
            return Err("legs in time order, not overlapping".into());
        }
        Ok(Replay { spans, switches })
    }

    pub fn start(&self) -> f64 {
        self.spans[0].t0
    }

    pub fn end(&self) -> f64 {
        self.spans[self.spans.len() - 1].t1
    }

    pub fn duration(&self) -> f64 {
        self.end() - self.start()
    }

    /// Index of the span active at `t` (clamped to the route's time range). At a switch
    /// moment shared by two spans, the later span is active (the switch has happened).
    pub fn span_at(&self, t: f64) -> usize {
        let t = t.clamp(self.start(), self.end());
        let mut active = 0;
        for (i, s) in self.spans.iter().enumerate() {
            if s.t0 <= t {
                active = i;
            }
        }
        // A zero-length last span at the very end stays active; a gap between spans keeps
        // the earlier span's last pose.
        active
    }

    /// The configuration at time `t` (clamped to the route), interpolated on the robot's
    /// configuration space (slerp for floating-base rotations).
    pub fn frame(&self, robot: &Robot, t: f64) -> Frame {
        let t = t.clamp(self.start(), self.end());
        let span = self.span_at(t);
        let s = &self.spans[span];
        let q = if t >= s.t1 {
            s.path[s.path.len() - 1].clone()
        } else if t <= s.t0 {
            s.path[0].clone()
        } else {
            // First waypoint time >= t (k >= 1 because t > t0).
            let k = s.times.partition_point(|&x| x < t).max(1);
            let (ta, tb) = (s.times[k - 1], s.times[k]);
            let f = if tb > ta { (t - ta) / (tb - ta) } else { 1.0 };
            let mut out = vec![0.0; robot.nq()];
            match robot.interpolate(&s.path[k - 1], &s.path[k], f, &mut out) {
                Ok(()) => out,
                // Lengths were checked on reading; a robot with another nq is a caller bug,
                // shown as the nearest waypoint rather than a panic.
                Err(_) => s.path[if f < 0.5 { k - 1 } else { k }].clone(),
            }
        };
        Frame { time: t, q, span }
    }

    /// `n` evenly spaced key times from start to end (both included; one key frame: the
    /// middle).
    pub fn key_times(&self, n: usize) -> Vec<f64> {
        match n {
            0 => Vec::new(),
            1 => vec![0.5 * (self.start() + self.end())],
            _ => (0..n)
                .map(|i| self.start() + self.duration() * i as f64 / (n - 1) as f64)
                .collect(),
        }
    }

    /// Fraction of the route's duration at time `t` (0 at start, 1 at end), for the
    /// timeline; 0 for a route of zero duration.
    pub fn fraction(&self, t: f64) -> f64 {
        let d = self.duration();
        if d > 0.0 {
            ((t - self.start()) / d).clamp(0.0, 1.0)
        } else {
            0.0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clamber::model::{JointSpec, JointType, LinkSpec, RobotSpec};
    use clamber::Pose;
    use nalgebra::Vector3;

    /// Two revolute joints in a chain (analytic case: interpolation is linear per joint).
    fn two_joint_robot() -> Robot {
        let link = |n: &str| LinkSpec {
            name: n.into(),
            shapes: vec![],
        };
        let joint = |n: &str, p: &str, c: &str, axis: Vector3<f64>| JointSpec {
            name: n.into(),
            joint_type: JointType::Revolute,
            parent: p.into(),
            child: c.into(),
            origin: Pose::identity(),
            axis,
            limits: vec![],
            passive: false,
        };
        let spec = RobotSpec {
            name: "pair".into(),
            links: vec![link("base"), link("a"), link("b")],
            joints: vec![
                joint("j1", "base", "a", Vector3::z()),
                joint("j2", "a", "b", Vector3::y()),
            ],
            ..Default::default()
        };
        spec.build().expect("valid robot")
    }

    fn replay() -> Replay {
        let spans = vec![
            Span {
                t0: 0.0,
                t1: 2.0,
                label: "hand@rail".into(),
                holds: vec!["rail".into()],
                times: vec![0.0, 1.0, 2.0],
                path: vec![vec![0.0, 0.0], vec![1.0, -1.0], vec![1.0, 1.0]],
            },
            Span {
                t0: 2.0,
                t1: 3.0,
                label: "free".into(),
                holds: vec![],
                times: vec![2.0, 3.0],
                path: vec![vec![1.0, 1.0], vec![2.0, 1.0]],
            },
        ];
        let sw = vec![SwitchMark {
            time: 2.0,
            label: "release hand from rail".into(),
        }];
        Replay::new(spans, sw).unwrap()
    }

    #[test]
    fn interpolates_linearly_between_waypoints() {
        let r = replay();
        let robot = two_joint_robot();
        let f = r.frame(&robot, 0.25);
        assert!(
            (f.q[0] - 0.25).abs() < 1e-12 && (f.q[1] + 0.25).abs() < 1e-12,
            "{:?}",
            f.q
        );
        let f = r.frame(&robot, 1.5);
        assert!(
            (f.q[0] - 1.0).abs() < 1e-12 && f.q[1].abs() < 1e-12,
            "{:?}",
            f.q
        );
        let f = r.frame(&robot, 2.5);
        assert!((f.q[0] - 1.5).abs() < 1e-12 && (f.q[1] - 1.0).abs() < 1e-12);
        assert_eq!(f.span, 1);
    }

    #[test]
    fn hits_waypoints_exactly_and_clamps_outside() {
        let r = replay();
        let robot = two_joint_robot();
        assert_eq!(r.frame(&robot, 1.0).q, vec![1.0, -1.0]);
        assert_eq!(r.frame(&robot, -5.0).q, vec![0.0, 0.0]);
        assert_eq!(r.frame(&robot, 99.0).q, vec![2.0, 1.0]);
        assert_eq!(r.frame(&robot, 99.0).time, 3.0);
    }

    #[test]
    fn stance_switches_at_the_switch_time() {
        let r = replay();
        assert_eq!(r.span_at(1.999), 0);
        assert_eq!(r.span_at(2.0), 1);
        assert_eq!(r.spans[r.span_at(2.5)].label, "free");
        assert_eq!(r.duration(), 3.0);
        assert_eq!(r.key_times(4), vec![0.0, 1.0, 2.0, 3.0]);
        assert_eq!(r.key_times(1), vec![1.5]);
        assert!((r.fraction(1.5) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn reads_a_route_file_and_rejects_bad_ones() {
        let text = r#"{"legs":[
            {"stance":{"hand":"rail"},"path":[[0,0],[1,1]],"times":[0,2]},
            {"stance":{},"path":[[1,1],[0,1]],"times":[2,4]}],
            "switches":[{"action":"release","effector":"hand","hold":"rail","time":2}]}"#;
        let r = Replay::from_json(text, Path::new("r.json"), 2).unwrap();
        assert_eq!(r.spans[0].label, "hand@rail");
        assert_eq!(r.spans[1].label, "free");
        assert_eq!(r.switches[0].label, "release hand from rail");
        assert_eq!(r.end(), 4.0);

        let wrong_len = text.replace("[[0,0],[1,1]]", "[[0,0,0],[1,1]]");
        let e = Replay::from_json(&wrong_len, Path::new("r.json"), 2).unwrap_err();
        let msg = e.to_string();
        assert!(
            msg.contains("r.json") && msg.contains("legs[0].path[0]"),
            "{msg}"
        );

        let e = Replay::from_json("{\"legs\": [", Path::new("r.json"), 2).unwrap_err();
        assert!(e.to_string().contains("line 1"), "{e}");

        let e = Replay::from_json("{}", Path::new("r.json"), 2).unwrap_err();
        assert!(e.to_string().contains("legs"), "{e}");

        let backwards = text.replace("\"times\":[0,2]", "\"times\":[2,0]");
        assert!(Replay::from_json(&backwards, Path::new("r.json"), 2).is_err());
    }

    #[test]
    fn reads_a_motion_file() {
        let text = r#"{"samples":[{"t":0,"q":[0,0]},{"t":0.5,"q":[1,2]}]}"#;
        let r = Replay::from_json(text, Path::new("m.json"), 2).unwrap();
        let robot = two_joint_robot();
        let f = r.frame(&robot, 0.25);
        assert_eq!(f.q, vec![0.5, 1.0]);
        assert!(r.switches.is_empty());
    }
}
