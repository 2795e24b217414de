//! Same seed, same motion: two runs of `plan_motion` with one seed serialize to the same
//! bytes; wall-clock stage times are kept out of the serialized motion for that reason.

use clamber::demo::{carry, door};
use clamber::motion::{plan_motion, MotionSettings};
use clamber::scenario::Scenario;

fn json(s: &Scenario, seed: u64) -> String {
    let mut s = s.clone();
    s.limits.seed = seed;
    plan_motion(&s, &MotionSettings::default())
        .unwrap()
        .to_json()
        .unwrap()
}

#[test]
fn same_seed_gives_byte_identical_json() {
    for s in [door::scenario().unwrap(), carry::scenario().unwrap()] {
        let a = json(&s, 5);
        let b = json(&s, 5);
        println!("{}: {} bytes", s.name, a.len());
        assert!(a.len() > 1000);
        assert!(a.as_bytes() == b.as_bytes(), "{}: runs differ", s.name);
        // Field order is the struct's: the header fields come first, in this order.
        let keys = [
            "\"scenario\"",
            "\"robot\"",
            "\"dof_names\"",
            "\"seed\"",
            "\"tolerances\"",
            "\"path\"",
            "\"samples\"",
            "\"stats\"",
        ];
        let at: Vec<usize> = keys.iter().map(|k| a.find(k).unwrap()).collect();
        assert!(at.windows(2).all(|w| w[0] < w[1]), "{at:?}");
        // The seed is written.
        assert!(a.contains("\"seed\":5"));
    }
}

#[test]
fn another_seed_gives_another_door_motion() {
    // The pillar blocks the direct motion, so the door needs random samples: a different
    // seed draws different ones.
    let s = door::scenario().unwrap();
    let a = json(&s, 5);
    let c = json(&s, 6);
    assert_ne!(a, c);
}
