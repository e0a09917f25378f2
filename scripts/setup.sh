#!/usr/bin/env bash
# Create or reuse .venv, install CPU torch and the project (editable, with test extras) at the locked versions.
# Run by demo.sh/test.sh.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
PYTHON="${PYTHON:-python3}"
[ -x .venv/bin/python ] || "$PYTHON" -m venv .venv
# Every version comes from constraints.txt, the set the test suite last passed with (its header says how to
# regenerate it). CPU build of torch first: an unpinned torch would pull a multi-GB CUDA build.
.venv/bin/python -m pip install --quiet --disable-pip-version-check "torch==2.13.0" -c constraints.txt
.venv/bin/python -m pip install --quiet --disable-pip-version-check -e ".[test]" -c constraints.txt
