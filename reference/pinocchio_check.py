#!/usr/bin/env python3
"""Check Clamber's forward kinematics and frame Jacobians against Pinocchio.

Reference: Pinocchio, a general-purpose rigid-body dynamics library, PyPI package `pin`
(see reference/requirements.txt for the version).

Each argument is a directory written by `cargo run --example kinematics_dump`, holding
`robot.urdf` (Clamber's URDF export of the robot) and `samples.json` (configurations with
Clamber's world pose and 6 x nv frame Jacobian of every link frame and every effector grip
frame). For every sample this script loads the configuration into Pinocchio's model built
from the URDF, computes `framesForwardKinematics` and `computeJointJacobians`, takes
`getFrameJacobian(..., LOCAL_WORLD_ALIGNED)` (rows [v; w]: velocity of the frame origin
and angular velocity, both in world axes -- Clamber's convention) and compares entrywise.

Coordinate mapping (by joint name, never by position):
- Pinocchio orders joints depth-first as parsed; Clamber breadth-first. Each Clamber joint
  with coordinates is found with `model.getJointId(name)`; its `idx_q` / `idx_v` give the
  place of its coordinates in Pinocchio's q and v.
- A URDF `floating` joint becomes Pinocchio's free-flyer: q = x y z qx qy qz qw and
  v = linear and angular velocity in the LOCAL (child) frame -- the same layout and
  convention as Clamber's floating joint. This is checked, not assumed: the joint model
  type must be a free-flyer and the FK/Jacobian comparison would fail for any other
  ordering or frame.
- A revolute joint without limits may be exported as `continuous`, which Pinocchio
  represents with nq = 2 (cos, sin) and nv = 1; that case is mapped explicitly.

Exit status: 0 if every error is within the tolerance (default 1e-10), 1 otherwise.
`--negative-control` flips the sign of one Jacobian column of the dump before comparing
and expects the check to fail (proves the comparison can fail).
"""

import argparse
import json
import math
import os
import sys

import numpy as np
import pinocchio as pin

TOLERANCE = 1e-10


def joint_kind_ok(ours: str, theirs: str) -> bool:
    """Is Pinocchio's joint model `theirs` the right kind for a Clamber joint of type `ours`?"""
    if ours == "floating":
        return theirs == "JointModelFreeFlyer"
    if ours == "revolute":
        return "Revolute" in theirs or theirs in ("JointModelRX", "JointModelRY", "JointModelRZ") or (
            theirs.startswith("JointModelRUB")
        )
    if ours == "prismatic":
        return "Prismatic" in theirs or theirs in ("JointModelPX", "JointModelPY", "JointModelPZ")
    return False


def build_mapping(model, meta):
    """Return (q_map, v_perm): a function our q -> Pinocchio q, and for each of our tangent
    columns the index of Pinocchio's column."""
    nv = meta["nv"]
    v_perm = [-1] * nv
    copies = []  # (our q start, pin q start, n)
    unbounded = []  # (our q index, pin q start): cos, sin
    seen_pin_joints = set()
    for j in meta["joints"]:
        if j["nv"] == 0:
            continue
        name = j["name"]
        if not model.existJointName(name):
            raise SystemExit(f"joint `{name}` not in the Pinocchio model built from the URDF")
        jid = model.getJointId(name)
        jm = model.joints[jid]
        seen_pin_joints.add(jid)
        kind = jm.shortname()
        if not joint_kind_ok(j["type"], kind):
            raise SystemExit(f"joint `{name}`: Clamber type {j['type']} but Pinocchio made {kind}")
        if jm.nv != j["nv"]:
            raise SystemExit(f"joint `{name}`: nv {j['nv']} vs Pinocchio {jm.nv}")
        for k in range(j["nv"]):
            v_perm[j["v_index"] + k] = jm.idx_v + k
        if jm.nq == j["nq"]:
            copies.append((j["q_index"], jm.idx_q, j["nq"]))
        elif j["nq"] == 1 and jm.nq == 2:
            unbounded.append((j["q_index"], jm.idx_q))
        else:
            raise SystemExit(f"joint `{name}`: nq {j['nq']} vs Pinocchio {jm.nq}")
    if model.nv != nv or sorted(v_perm) != list(range(nv)):
        raise SystemExit(f"tangent spaces differ: Clamber nv {nv}, Pinocchio nv {model.nv}, map {v_perm}")
    if len(seen_pin_joints) != model.njoints - 1:
        raise SystemExit(f"Pinocchio has {model.njoints - 1} joints, Clamber maps {len(seen_pin_joints)}")

    def q_map(q_ours):
        q = np.zeros(model.nq)
        for a, b, n in copies:
            q[b : b + n] = q_ours[a : a + n]
        for a, b in unbounded:
            q[b] = math.cos(q_ours[a])
            q[b + 1] = math.sin(q_ours[a])
        return q

    return q_map, np.array(v_perm)


def check_dir(path, negative_control=False):
    with open(os.path.join(path, "samples.json")) as f:
        meta = json.load(f)
    model = pin.buildModelFromUrdf(os.path.join(path, "robot.urdf"))
    data = model.createData()
    q_map, v_perm = build_mapping(model, meta)
    nv = meta["nv"]

    frame_ids = []
    for fr in meta["frames"]:
        if not model.existFrame(fr["name"], pin.BODY):
            raise SystemExit(f"{meta['robot']}: frame `{fr['name']}` not in the Pinocchio model")
        frame_ids.append(model.getFrameId(fr["name"], pin.BODY))

    worst = {"fk_link": 0.0, "fk_grip": 0.0, "jac_link": 0.0, "jac_grip": 0.0}
    where = {}
    jac_magnitude = 0.0
    for si, s in enumerate(meta["samples"]):
        q = q_map(np.array(s["q"]))
        pin.framesForwardKinematics(model, data, q)
        pin.computeJointJacobians(model, data, q)
        for fi, (fr, fid) in enumerate(zip(meta["frames"], frame_ids)):
            ours_pose = np.array(s["poses"][fi]).reshape(4, 4)
            theirs_pose = data.oMf[fid].homogeneous
            e_fk = float(np.max(np.abs(ours_pose - theirs_pose)))
            ours_jac = np.array(s["jacobians"][fi]).reshape(6, nv)
            if negative_control and si == 0 and fi == len(frame_ids) - 1:
                ours_jac[:, nv - 1] *= -1.0
            theirs_jac = pin.getFrameJacobian(model, data, fid, pin.LOCAL_WORLD_ALIGNED)[:, v_perm]
            e_jac = float(np.max(np.abs(ours_jac - theirs_jac)))
            jac_magnitude = max(jac_magnitude, float(np.max(np.abs(theirs_jac))))
            for key, e in ((f"fk_{fr['kind']}", e_fk), (f"jac_{fr['kind']}", e_jac)):
                if e > worst[key]:
                    worst[key] = e
                    where[key] = (si, fr["name"])
    n = len(meta["samples"])
    ok = all(v <= TOLERANCE for v in worst.values())
    print(
        f"{meta['robot']:>12}: nq {meta['nq']:2d} nv {nv:2d}, {len(frame_ids)} frames x {n} configs | "
        f"max |dFK| links {worst['fk_link']:.2e} grips {worst['fk_grip']:.2e} | "
        f"max |dJ| links {worst['jac_link']:.2e} grips {worst['jac_grip']:.2e} "
        f"(max |J| {jac_magnitude:.2f}) {'OK' if ok else 'FAIL'}"
    )
    if not ok:
        for key, v in worst.items():
            if v > TOLERANCE:
                si, name = where[key]
                print(f"    {key}: {v:.3e} at sample {si}, frame `{name}`")
    if n < 1 or jac_magnitude == 0.0:
        print(f"    {meta['robot']}: nothing was compared")
        ok = False
    return ok


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("dirs", nargs="+", help="directories written by the kinematics_dump example")
    ap.add_argument("--min-samples", type=int, default=1000)
    ap.add_argument("--negative-control", action="store_true")
    args = ap.parse_args()
    print(f"Pinocchio {pin.__version__}, tolerance {TOLERANCE:g} (absolute, per entry)")
    all_ok = True
    for d in args.dirs:
        with open(os.path.join(d, "samples.json")) as f:
            count = len(json.load(f)["samples"])
        if count < args.min_samples:
            print(f"{d}: {count} samples, fewer than {args.min_samples}")
            all_ok = False
        all_ok &= check_dir(d, args.negative_control)
    if args.negative_control:
        if all_ok:
            print("negative control: a corrupted Jacobian column was NOT detected")
            sys.exit(1)
        print("negative control: corrupted Jacobian column detected, as it should be")
        sys.exit(0)
    sys.exit(0 if all_ok else 1)


if __name__ == "__main__":
    main()
