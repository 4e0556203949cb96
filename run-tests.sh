#!/usr/bin/env bash
# Run the whole test suite (unit, outside checks, property, app and browser tests).
set -euo pipefail
cd "$(dirname "$0")"
scripts/ensure-venv.sh requirements-dev.txt
.venv/bin/python -m pytest -q -n 2 "$@"
