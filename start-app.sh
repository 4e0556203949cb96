#!/usr/bin/env bash
# Start Formwise on the built-in demo data at http://127.0.0.1:8501 (localhost only).
set -euo pipefail
cd "$(dirname "$0")"
scripts/ensure-venv.sh requirements.txt
exec .venv/bin/python -m streamlit run app/main.py "$@"
