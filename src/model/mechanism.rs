//! Mechanisms: passive articulated bodies in the scene (a door on a hinge, a lever on a
//! pivot, a drawer on a slide). A mechanism is described like a robot; attaching it joins its
//! links and joints to the robot's tree, so its joints become passive joints of `q` and a
//! tether between an effector and its handle is an ordinary closed chain.

use super::robot::RobotSpec;

impl RobotSpec {
    /// Join `mechanism` to this description. The mechanism's root link stands for the world:
    /// its child joints are attached to this robot's root link instead (both are fixed at
    /// the world origin). Every mechanism joint is marked passive. Names must not clash with
    /// the robot's (checked when the result is built).
    pub fn attach_mechanism(&mut self, mechanism: &RobotSpec) {
        let Some(robot_root) = self.root_link_name() else {
            return;
        };
        let Some(mech_root) = mechanism.root_link_name() else {
            return;
        };
        for l in &mechanism.links {
            if l.name != mech_root {
                self.links.push(l.clone());
            }
        }
        for j in &mechanism.joints {
            let mut j = j.clone();
            if j.parent == mech_root {
                j.parent = robot_root.clone();
            }
            j.passive = true;
            self.joints.push(j);
        }
        self.effectors.extend(mechanism.effectors.iter().cloned());
    }

    /// The link no joint has as child (the first such, in description order).
    pub fn root_link_name(&self) -> Option<String> {
        self.links
            .iter()
            .find(|l| !self.joints.iter().any(|j| j.child == l.name))
            .map(|l| l.name.clone())
    }
}
