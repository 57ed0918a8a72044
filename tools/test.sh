#!/usr/bin/env bash
# Set up everything cablekit's tests need and run the whole suite.
# Works on a fresh machine with Python 3.11 and the package registries (as root it also
# installs Debian's chromium and poppler-utils for the browser and PDF tests).
# Extra arguments go to pytest, e.g.  bash tools/test.sh -k design
set -euo pipefail
cd "$(dirname "$0")/.."
PYTHON=${PYTHON:-python3}
if [ ! -x .venv/bin/python ]; then
  "$PYTHON" -m venv .venv
fi
export PIP_DISABLE_PIP_VERSION_CHECK=1
.venv/bin/python -m pip install -q --upgrade pip >/dev/null
.venv/bin/python -m pip install -q -e '.[test]'
if ! command -v chromium >/dev/null 2>&1 || ! command -v pdftoppm >/dev/null 2>&1; then
  if [ "$(id -u)" = "0" ]; then
    apt-get update -q >/dev/null
    DEBIAN_FRONTEND=noninteractive apt-get install -y -q chromium poppler-utils >/dev/null
  else
    echo "note: chromium/poppler-utils missing and not root: browser and PDF tests will be skipped" >&2
  fi
fi
mkdir -p artifacts
# a private code-generation cache for the run, so tests see a clean cache every time
export CABLEKIT_CACHE_DIR="${CABLEKIT_CACHE_DIR:-$PWD/artifacts/codegen-cache}"
exec .venv/bin/python -m pytest "$@"
