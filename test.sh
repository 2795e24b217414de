#!/usr/bin/env bash
# Clamber's test command (the README's second command; CI runs it through .ci/run).
# 1. every Rust test (unit, integration, property tests, doc tests);
# 2. the reference check of FK and Jacobians against Pinocchio (PyPI `pin`), installed into
#    a private virtual environment under target/ the first time.
set -euo pipefail
cd "$(dirname "$0")"

# The viewer (viewer/, a workspace member) renders pictures in its tests on the Vulkan software
# driver when there is no GPU.
if ! ls /usr/share/vulkan/icd.d/*.json >/dev/null 2>&1; then
    echo "test.sh: no Vulkan driver found (/usr/share/vulkan/icd.d is empty): the viewer's" >&2
    echo "  rendering tests will fail. Install the software driver:" >&2
    echo "  apt-get install mesa-vulkan-drivers libvulkan1   (and xvfb for the window test)" >&2
    exit 1
fi

echo "== cargo test"
cargo test --workspace --all-targets
cargo test --workspace --doc

echo "== reference check against Pinocchio"
venv=target/pyref
if [ ! -x "$venv/bin/python" ] || ! "$venv/bin/python" -c "import pinocchio, numpy" 2>/dev/null; then
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet --disable-pip-version-check -r reference/requirements.txt
fi
PYTHON="$venv/bin/python" bash reference/check_all.sh
