//! Why no route was found: the furthest stance the search reached and, for each switch that
//! blocked the way on, why (from the failures the search recorded and the reach test), as
//! text ([`std::fmt::Display`]) and JSON (serde).

use serde::Serialize;

use super::graph::StanceGraph;
use super::search::{SearchOutcome, SearchStats};
use super::switch::SwitchFailure;
use super::{named, NamedStance};
use crate::scenario::{Goal, Scenario};
use crate::scene::{Scene, Stance};

/// One switch out of the reached stances that could not be made.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BlockingSwitch {
    pub from: NamedStance,
    pub to: NamedStance,
    /// `grab` or `release`.
    pub action: &'static str,
    pub effector: String,
    pub hold: String,
    /// Attempts made (0: ruled out by the reach test before any projection).
    pub attempts: usize,
    /// Why, one entry per failed attempt (or the reach test's verdict).
    pub reasons: Vec<SwitchFailure>,
}

/// The explanation of a failed route search.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Explanation {
    pub format_version: u32,
    pub scenario: String,
    pub goal: String,
    /// The reached stance closest to the goal.
    pub furthest: NamedStance,
    /// Distance from its holds to the goal (metres).
    pub furthest_distance_to_goal: f64,
    pub stances_reached: usize,
    /// Switches out of the reached stances that blocked the way, closest to the goal first.
    pub blocking: Vec<BlockingSwitch>,
    /// The search ran out of candidate sequences (every way on was tried or ruled out).
    pub exhausted: bool,
    /// The time limit ended the search.
    pub timed_out: bool,
    /// Region goals: stances reached from which the reach test allowed the region, but where
    /// no pose with the link inside it (on the stance's manifold, within limits, with
    /// clearance) and leg to it were found.
    pub region_not_reached_from: Vec<NamedStance>,
    pub stats: SearchStats,
}

fn describe_goal(goal: &Goal, scene: &Scene) -> String {
    match goal {
        Goal::Stance(s) => format!("stance {}", s.describe(scene)),
        Goal::Grip { effector, hold } => format!(
            "{effector} on {}",
            scene.holds.get(*hold).map_or("?", |h| h.name.as_str())
        ),
        Goal::BodyInRegion { link, min, max } => format!(
            "link {link} inside [{:.3}, {:.3}, {:.3}] .. [{:.3}, {:.3}, {:.3}]",
            min.x, min.y, min.z, max.x, max.y, max.z
        ),
        Goal::Configuration(_) => "a configuration".into(),
    }
}

/// Pruned grabs listed per furthest stance.
const PRUNED_PER_STANCE: usize = 3;

pub(crate) fn explain(
    scenario: &Scenario,
    graph: &StanceGraph,
    outcome: &SearchOutcome,
) -> Explanation {
    let scene = &scenario.scene;
    let goal = &scenario.goal;
    let dist = |s: &Stance| graph.distance_to_goal(s, goal);
    let mut furthest: Option<(&Stance, f64)> = None;
    for s in outcome.reached.keys() {
        let d = dist(s);
        if furthest.is_none_or(|(_, b)| d < b) {
            furthest = Some((s, d));
        }
    }
    let (furthest_stance, furthest_d) = furthest
        .map(|(s, d)| (s.clone(), d))
        .unwrap_or((scenario.start.stance.clone(), f64::INFINITY));
    let hold_name = |h: usize| {
        scene
            .holds
            .get(h)
            .map_or("?".to_string(), |h| h.name.clone())
    };
    let mut blocking: Vec<(f64, BlockingSwitch)> = Vec::new();
    // Switches attempted from a reached stance that never succeeded.
    for (edge, rec) in &outcome.records {
        if outcome.reached.contains_key(&edge.to) || rec.failures.is_empty() {
            continue;
        }
        blocking.push((
            dist(&edge.to),
            BlockingSwitch {
                from: named(&edge.from, scene),
                to: named(&edge.to, scene),
                action: if edge.grab { "grab" } else { "release" },
                effector: edge.effector.clone(),
                hold: hold_name(edge.hold),
                attempts: rec.attempts,
                reasons: rec.failures.clone(),
            },
        ));
    }
    // Grabs the reach test ruled out from the furthest stances (and the stances one release
    // away from them, which need no pose search), toward the goal.
    let mut near: Vec<Stance> = Vec::new();
    for s in outcome
        .reached
        .keys()
        .filter(|s| dist(s) <= furthest_d + 1e-9)
    {
        near.push(s.clone());
        if !graph.free_flying || s.grips.len() > 1 {
            for e in s.grips.keys() {
                near.push(s.clone().without(e));
            }
        }
    }
    near.sort();
    near.dedup();
    for s in &near {
        let (_, pruned) = graph.neighbours(s, scene.holds.len());
        let mut toward: Vec<_> = pruned
            .iter()
            .filter(|p| !outcome.reached.contains_key(&p.edge.to))
            .map(|p| {
                let d = graph.distance_to_goal(
                    &Stance::new().with(p.edge.effector.clone(), p.edge.hold),
                    goal,
                );
                (d, p)
            })
            .filter(|(d, _)| *d < furthest_d)
            .collect();
        toward.sort_by(|a, b| a.1.excess.total_cmp(&b.1.excess).then(a.0.total_cmp(&b.0)));
        for (d, p) in toward.into_iter().take(PRUNED_PER_STANCE) {
            blocking.push((
                d,
                BlockingSwitch {
                    from: named(&p.edge.from, scene),
                    to: named(&p.edge.to, scene),
                    action: "grab",
                    effector: p.edge.effector.clone(),
                    hold: hold_name(p.edge.hold),
                    attempts: 0,
                    reasons: vec![SwitchFailure::OutOfReach {
                        hold: hold_name(p.edge.hold),
                        anchor: p
                            .anchor_hold
                            .map_or_else(|| "the robot's base".into(), hold_name),
                        anchor_effector: p.anchor_effector.clone().unwrap_or_else(|| "base".into()),
                        distance: p.distance,
                        bound: p.bound,
                        by: p.excess,
                    }],
                },
            ));
        }
    }
    blocking.sort_by(|a, b| a.0.total_cmp(&b.0));
    Explanation {
        format_version: super::FORMAT_VERSION,
        scenario: scenario.name.clone(),
        goal: describe_goal(goal, scene),
        furthest: named(&furthest_stance, scene),
        furthest_distance_to_goal: furthest_d,
        stances_reached: outcome.reached.len(),
        blocking: blocking.into_iter().map(|(_, b)| b).collect(),
        exhausted: outcome.exhausted,
        timed_out: outcome.stats.timed_out,
        region_not_reached_from: outcome.struck.iter().map(|s| named(s, scene)).collect(),
        stats: outcome.stats,
    }
}

fn stance_text(s: &NamedStance) -> String {
    if s.is_empty() {
        return "(no grip)".into();
    }
    s.iter()
        .map(|(e, h)| format!("{e}@{h}"))
        .collect::<Vec<_>>()
        .join(" ")
}

impl std::fmt::Display for Explanation {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        writeln!(f, "no route for `{}` to {}", self.scenario, self.goal)?;
        let why = if self.timed_out {
            "the time limit ended the search"
        } else {
            "every way on was tried or ruled out"
        };
        writeln!(f, "  {why}; {} stances reached", self.stances_reached)?;
        writeln!(
            f,
            "  furthest stance: {} ({:.3} m from the goal)",
            stance_text(&self.furthest),
            self.furthest_distance_to_goal
        )?;
        for s in &self.region_not_reached_from {
            writeln!(
                f,
                "  from {}: no pose with the link in the region and no leg to one was found",
                stance_text(s)
            )?;
        }
        if self.blocking.is_empty() {
            writeln!(f, "  no switch out of the reached stances was found")?;
        }
        for b in &self.blocking {
            writeln!(
                f,
                "  blocked: {} {} {} (from {}; {} attempts)",
                b.effector,
                b.action,
                b.hold,
                stance_text(&b.from),
                b.attempts
            )?;
            for r in &b.reasons {
                writeln!(f, "    - {r}")?;
            }
        }
        Ok(())
    }
}
