#!/usr/bin/env bash
# Time Pinocchio's C++ forward kinematics and frame Jacobian on the 7-DOF arm, to compare
# with `cargo bench --bench kinematics`. NOT part of CI (a 2-minute C++ build, and timings
# belong in docs/performance.md, not in pass/fail checks).
#
#   reference/run_pinocchio_bench.sh [ROBOT.toml|ROBOT.urdf] [RUNS]
#   MARCH=x86-64 reference/run_pinocchio_bench.sh   # same instruction set as a default
#                                                   # Rust build (default: MARCH=native)
#
# Default robot: robots/sevenfold.toml, or the dump example's builtin `arm7` (same joint
# layout) when that file is not there. Needs python3 with `pip install -r
# reference/requirements.txt cmeel-eigen` (the `pin` wheel ships Pinocchio's and Boost's
# headers; Eigen's come from `cmeel-eigen`) and g++.
set -euo pipefail
cd "$(dirname "$0")/.."

robot="${1:-robots/sevenfold.toml}"
runs="${2:-11}"
target="${CARGO_TARGET_DIR:-target}"
work="$target/pinocchio-bench"
mkdir -p "$work"

prefix="$(python3 -c 'import sysconfig; print(sysconfig.get_paths()["purelib"])')/cmeel.prefix"
if [[ ! -d "$prefix/include/pinocchio" || ! -d "$prefix/include/eigen3" ]]; then
    echo "Pinocchio or Eigen headers missing under $prefix; run: pip install -r reference/requirements.txt cmeel-eigen" >&2
    exit 2
fi

# 1. URDF export of the robot.
cargo build --quiet --example kinematics_dump
dump="$target/debug/examples/kinematics_dump"
if [[ -f "$robot" ]]; then
    "$dump" "$robot" --count 1 --out "$work/robot" > /dev/null
else
    echo "$robot not found; using the builtin arm7" >&2
    "$dump" --builtin arm7 --count 1 --out "$work/robot" > /dev/null
fi

# 2. Model, configurations and check values, from Pinocchio's own URDF parser.
python3 - "$work/robot/robot.urdf" "$work/model.txt" <<'PY'
import sys
import numpy as np
import pinocchio as pin

urdf, out = sys.argv[1], sys.argv[2]
model = pin.buildModelFromUrdf(urdf)
data = model.createData()
grips = [f for f in model.frames if f.name.endswith("_grip")]
if not grips:
    sys.exit("no effector grip frame in the URDF")
frame = grips[0]
fid = model.getFrameId(frame.name)
rng = np.random.default_rng(1)
lines = [f"joints {model.njoints - 1}"]
for i in range(1, model.njoints):
    jm = model.joints[i]
    axis = getattr(jm, "axis", np.zeros(3))
    m = model.jointPlacements[i]
    vals = list(m.rotation.flatten()) + list(m.translation)
    lines.append(f"{model.names[i]} {model.parents[i]} {jm.shortname()} "
                 + " ".join(repr(float(x)) for x in list(axis) + vals))
fp = frame.placement
lines.append(f"frame {frame.name} {frame.parentJoint} "
             + " ".join(repr(float(x)) for x in list(fp.rotation.flatten()) + list(fp.translation)))
qs = []
for _ in range(1024):
    lo, hi = model.lowerPositionLimit, model.upperPositionLimit
    lo = np.where(np.isfinite(lo), lo, -np.pi)
    hi = np.where(np.isfinite(hi), hi, np.pi)
    qs.append(pin.normalize(model, rng.uniform(lo, hi)))
lines.append(f"configs {len(qs)} {model.nq}")
lines += [" ".join(repr(float(x)) for x in q) for q in qs]
lines.append("check 16")
for q in qs[:16]:
    pin.framesForwardKinematics(model, data, q)
    pin.computeJointJacobians(model, data, q)
    J = pin.getFrameJacobian(model, data, fid, pin.LOCAL_WORLD_ALIGNED)
    lines.append(" ".join(repr(float(x)) for x in data.oMf[fid].homogeneous.flatten()))
    lines.append(" ".join(repr(float(x)) for x in J.flatten()))
open(out, "w").write("\n".join(lines) + "\n")
print(f"Pinocchio {pin.__version__}: {model.name}, nq {model.nq}, nv {model.nv}, frame {frame.name}, "
      f"joints: {' '.join(model.joints[i].shortname() for i in range(1, model.njoints))}")
PY

# 3. Header-only build (no prebuilt Pinocchio library is linked).
march="${MARCH:-native}"
exe="$work/pinocchio_bench-$march"
if [[ ! -x "$exe" || reference/pinocchio_bench.cpp -nt "$exe" ]]; then
    echo "compiling reference/pinocchio_bench.cpp (about 2 minutes)..." >&2
    g++ -O3 -march="$march" -DNDEBUG -std=c++17 \
        -DBOOST_MPL_LIMIT_LIST_SIZE=30 -DBOOST_MPL_LIMIT_VECTOR_SIZE=30 \
        -DBOOST_MPL_CFG_NO_PREPROCESSED_HEADERS -DBOOST_FUSION_INVOKE_MAX_ARITY=12 \
        -isystem "$prefix/include" -isystem "$prefix/include/eigen3" \
        -w reference/pinocchio_bench.cpp -o "$exe"
fi
echo "g++ $(g++ -dumpfullversion), -O3 -march=$march; $(nproc) cores, $(lscpu | grep 'Model name' | sed 's/ \+/ /g'); load average $(cut -d' ' -f1-3 /proc/loadavg)"

# 4. Time it.
"$exe" "$work/model.txt" "$runs"
