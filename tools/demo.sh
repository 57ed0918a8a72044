#!/usr/bin/env bash
# Set up cablekit and run the main job on the bundled demo design: validate it and write
# its design-review sheet to out/review.html. Works on a fresh machine with Python 3.11.
set -euo pipefail
cd "$(dirname "$0")/.."
PYTHON=${PYTHON:-python3}
DEMO=${1:-examples/greenhouse_tray_3cable.toml}
if [ ! -x .venv/bin/python ]; then
  "$PYTHON" -m venv .venv
fi
export PIP_DISABLE_PIP_VERSION_CHECK=1
.venv/bin/python -m pip install -q --upgrade pip >/dev/null
.venv/bin/python -m pip install -q -e .
mkdir -p out
.venv/bin/cablekit check "$DEMO"
.venv/bin/cablekit points "$DEMO" examples/greenhouse_points.csv -o out/points.csv
