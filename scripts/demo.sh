#!/usr/bin/env bash
# Set up, then run the whole chain on the invented samples with the packaged encoder. Extra args go to adapt-demo.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
bash scripts/setup.sh
export HF_HUB_OFFLINE=1
exec .venv/bin/adapt-demo "$@"
