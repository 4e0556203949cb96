#!/usr/bin/env bash
# Create or reuse .venv and install the given requirements file when it changed.
# Usage: scripts/ensure-venv.sh requirements.txt|requirements-dev.txt
set -euo pipefail
cd "$(dirname "$0")/.."
req="$1"
if [ ! -x .venv/bin/python ]; then
  python3 -m venv .venv
fi
stamp=".venv/.installed-$(basename "$req")"
digest=$(cat requirements.txt "$req" | sha256sum | cut -d' ' -f1)
if [ ! -f "$stamp" ] || [ "$(cat "$stamp")" != "$digest" ]; then
  .venv/bin/python -m pip install --quiet --disable-pip-version-check --upgrade pip
  .venv/bin/python -m pip install --quiet --disable-pip-version-check -r "$req"
  echo "$digest" > "$stamp"
fi
