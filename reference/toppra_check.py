#!/usr/bin/env python3
"""Compare Clamber's time-optimal path timing with toppra (PyPI `toppra`, an implementation
of TOPP-RA by its authors: H. Pham, Q.-C. Pham, IEEE Transactions on Robotics 34(3), 2018).

For each case the script builds a path with toppra's SplineInterpolator through fixed
waypoints, solves it with toppra on an explicit grid (constant-acceleration parametrizer;
acceleration constraints collocated at the grid points, and again with toppra's
interpolation scheme), and writes the same grid with q'(s),
q''(s), the limits and toppra's duration to a JSON file. The Rust example `timing_dump` runs
`clamber::timing::parameterize` on exactly those samples. The check fails if any duration
differs from toppra's by more than 1 %.

Negative control: the same samples with every limit scaled by 0.9 on our side only must
fail the comparison (the durations grow by about 5-11 %), so the check can fail.

    python3 reference/toppra_check.py --dump target/debug/examples/timing_dump [--out cases.json]
"""

import argparse
import json
import subprocess
import sys
import tempfile

import numpy as np
import toppra as ta
import toppra.algorithm as algo
import toppra.constraint as constraint

TOLERANCE = 0.01  # acceptance: |ours - toppra| / toppra <= 1 %


def make_cases():
    rng = np.random.default_rng(7)
    cases = []

    # 7-DOF path through 5 waypoints (arm-like ranges and limits).
    wp7 = rng.uniform(-1.5, 1.5, size=(5, 7))
    cases.append(dict(name="arm7_5wp", ss=np.linspace(0.0, 1.0, 5), wp=wp7,
                      vmax=np.array([2.0, 2.0, 2.2, 2.2, 2.6, 2.6, 3.0]),
                      amax=np.array([6.0, 6.0, 7.0, 7.0, 9.0, 9.0, 12.0]),
                      bc="not-a-knot", grid=600, sd_start=0.0, sd_end=0.0))

    # 2-DOF path through 4 waypoints, uneven knots, different limits per joint.
    wp2 = np.array([[0.0, 0.0], [0.6, -0.4], [1.1, 0.5], [0.4, 1.2]])
    cases.append(dict(name="planar2_4wp", ss=np.array([0.0, 0.3, 0.8, 1.0]), wp=wp2,
                      vmax=np.array([1.0, 0.7]), amax=np.array([3.0, 1.5]),
                      bc="not-a-knot", grid=500, sd_start=0.0, sd_end=0.0))

    # 3-DOF clamped spline (q'(s) = 0 at both ends: no velocity bound there).
    wp3 = rng.uniform(-1.0, 1.0, size=(6, 3))
    cases.append(dict(name="clamped3_6wp", ss=np.linspace(0.0, 2.0, 6), wp=wp3,
                      vmax=np.array([1.5, 1.2, 1.8]), amax=np.array([4.0, 3.0, 5.0]),
                      bc="clamped", grid=500, sd_start=0.0, sd_end=0.0))

    # 7-DOF path ending at a nonzero path speed.
    wp7b = rng.uniform(-1.0, 1.0, size=(4, 7))
    cases.append(dict(name="arm7_moving_end", ss=np.linspace(0.0, 1.0, 4), wp=wp7b,
                      vmax=np.full(7, 2.0), amax=np.full(7, 8.0),
                      bc="not-a-knot", grid=500, sd_start=0.0, sd_end=0.1))
    return cases


SCHEMES = {
    "collocation": constraint.DiscretizationType.Collocation,
    "interpolation": constraint.DiscretizationType.Interpolation,
}


def solve_toppra(c, scheme):
    path = ta.SplineInterpolator(c["ss"], c["wp"], bc_type=c["bc"])
    grid = np.linspace(c["ss"][0], c["ss"][-1], c["grid"] + 1)
    vlim = np.column_stack([-c["vmax"], c["vmax"]])
    alim = np.column_stack([-c["amax"], c["amax"]])
    pc_vel = constraint.JointVelocityConstraint(vlim)
    pc_acc = constraint.JointAccelerationConstraint(
        alim, discretization_scheme=SCHEMES[scheme])
    inst = algo.TOPPRA([pc_vel, pc_acc], path, gridpoints=grid,
                       parametrizer="ParametrizeConstAccel")
    traj = inst.compute_trajectory(c["sd_start"], c["sd_end"])
    if traj is None:
        raise RuntimeError(f"toppra found no parameterization for {c['name']}")
    sd = np.asarray(inst.problem_data.sd_vec)
    # Duration by the constant-acceleration rule on toppra's own profile, and toppra's
    # trajectory duration; they must agree (same rule).
    ds = np.diff(grid)
    rule = float(np.sum(2.0 * ds / (sd[:-1] + sd[1:])))
    return path, grid, float(traj.duration), rule, sd


def run_dump(dump, cases_file, scale=None):
    cmd = [dump, cases_file]
    if scale is not None:
        cmd += ["--scale-limits", str(scale)]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    return {r["name"]: r for r in json.loads(out)["results"]}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--dump", required=True, help="path of the built timing_dump example")
    ap.add_argument("--out", help="where to write the cases JSON (default: temporary file)")
    args = ap.parse_args()

    cases = make_cases()
    doc = {"cases": []}
    ref = {}
    for c in cases:
        for scheme in SCHEMES:
            name = f"{c['name']}/{scheme}"
            path, grid, dur, rule, sd = solve_toppra(c, scheme)
            if abs(dur - rule) > 1e-9 * dur:
                print(f"{name}: toppra duration {dur} differs from the const-accel rule {rule}")
                return 1
            ref[name] = (dur, sd)
            doc["cases"].append(dict(
                name=name, s=grid.tolist(), dq=path(grid, 1).tolist(),
                ddq=path(grid, 2).tolist(), vmax=c["vmax"].tolist(),
                amax=c["amax"].tolist(), sd_start=c["sd_start"], sd_end=c["sd_end"],
                scheme=scheme, toppra_duration=dur))

    with tempfile.TemporaryDirectory() as tmp:
        cases_file = args.out or f"{tmp}/timing_cases.json"
        with open(cases_file, "w") as f:
            json.dump(doc, f)
        ours = run_dump(args.dump, cases_file)
        control = run_dump(args.dump, cases_file, scale=0.9)

    failed = False
    for name, (dur, sd) in ref.items():
        r = ours.get(name, {})
        if "duration" not in r:
            print(f"FAIL {name}: ours failed: {r.get('error')}")
            failed = True
            continue
        rel = abs(r["duration"] - dur) / dur
        # The speed profiles are printed for information: under collocation, where q'(s) is
        # near zero (clamped spline ends) the discrete problem lets the path speed jump at a
        # grid point, and toppra's internal caps on x and u pick a different (slower) jump.
        sd_ours = np.asarray(r["sd"])
        sd_diff = float(np.max(np.abs(sd_ours - sd)) / np.max(sd))
        ok = rel <= TOLERANCE
        failed |= not ok
        print(f"{'ok  ' if ok else 'FAIL'} {name}: toppra {dur:.6f} s, ours {r['duration']:.6f} s, "
              f"diff {100 * rel:.4f} % (max sdot diff {100 * sd_diff:.4f} % of peak)")
        c = control.get(name, {})
        if "duration" in c and abs(c["duration"] - dur) / dur <= TOLERANCE:
            print(f"FAIL {name}: negative control (limits x0.9) not detected: "
                  f"{c['duration']:.6f} s vs {dur:.6f} s")
            failed = True
    if failed:
        print(f"toppra comparison FAILED (tolerance {100 * TOLERANCE} %)")
        return 1
    print(f"toppra comparison passed: {len(ref)} paths within {100 * TOLERANCE} %; "
          "negative control (limits x0.9) detected")
    return 0


if __name__ == "__main__":
    sys.exit(main())
