#!/usr/bin/env bash
# Compare Clamber's forward kinematics and frame Jacobians with Pinocchio (PyPI `pin`) for
# every robot file in robots/*.toml plus the robots built into the dump example (those
# cover oblique axes, a floating joint below the root and unbounded revolute joints).
#
#   reference/check_all.sh                 # robots/*.toml + builtins, N=1000 each
#   reference/check_all.sh --builtins-only # while robots/ is not there
#
# Env: N (configurations per robot, default 1000), SEED (default 1), CARGO_TARGET_DIR.
# Also compares path timing with toppra (reference/toppra_check.py).
# Needs: python3 with `pip install -r reference/requirements.txt`.
set -euo pipefail
cd "$(dirname "$0")/.."

N="${N:-1000}"
SEED="${SEED:-1}"
BUILTINS=(arm7 climber mobile mixed)
builtins_only=0
if [[ "${1:-}" == "--builtins-only" ]]; then builtins_only=1; fi

PY="${PYTHON:-python3}"
if ! "$PY" -c "import pinocchio, numpy, toppra" 2>/dev/null; then
    echo "reference/check_all.sh: Python packages missing; run: pip install -r reference/requirements.txt" >&2
    exit 2
fi

shopt -s nullglob
files=(robots/*.toml)
if [[ $builtins_only == 0 && ${#files[@]} == 0 ]]; then
    echo "reference/check_all.sh: no robots/*.toml found (use --builtins-only to check only the builtin robots)" >&2
    exit 2
fi
[[ $builtins_only == 1 ]] && files=()

cargo build --quiet --example kinematics_dump
target="${CARGO_TARGET_DIR:-target}"
dump="$target/debug/examples/kinematics_dump"

out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
dirs=()
for f in "${files[@]}"; do
    name="$(basename "$f" .toml)"
    "$dump" "$f" --count "$N" --seed "$SEED" --out "$out/$name"
    dirs+=("$out/$name")
done
for b in "${BUILTINS[@]}"; do
    "$dump" --builtin "$b" --count "$N" --seed "$SEED" --out "$out/builtin-$b"
    dirs+=("$out/builtin-$b")
done

# The comparison must be able to fail: a corrupted Jacobian column has to be caught.
"$PY" reference/pinocchio_check.py --negative-control --min-samples "$N" "${dirs[-1]}" > "$out/negative.log" || {
    cat "$out/negative.log"; echo "negative control failed" >&2; exit 1; }
"$PY" reference/pinocchio_check.py --min-samples "$N" "${dirs[@]}"

# Time-optimal path timing against toppra (PyPI `toppra`): durations within 1 %, with a
# negative control (limits scaled by 0.9 on our side must be detected).
cargo build --quiet --example timing_dump
"$PY" reference/toppra_check.py --dump "$target/debug/examples/timing_dump"
