#!/usr/bin/env bash
# Create or reuse .venv, install CPU torch and the project (editable, with test extras). Sourced by demo.sh/test.sh.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
PYTHON="${PYTHON:-python3}"
[ -x .venv/bin/python ] || "$PYTHON" -m venv .venv
# CPU build of torch first: an unpinned torch would pull a multi-GB CUDA build.
.venv/bin/python -m pip install --quiet --disable-pip-version-check "torch==2.13.0"
.venv/bin/python -m pip install --quiet --disable-pip-version-check -e ".[test]"
