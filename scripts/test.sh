#!/usr/bin/env bash
# Set up, then run the test suite offline. Extra args go to pytest.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
bash scripts/setup.sh
export HF_HUB_OFFLINE=1
exec .venv/bin/python -m pytest -q "$@"
