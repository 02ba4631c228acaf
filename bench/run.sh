#!/usr/bin/env bash
# One command for the stet vs scikit-learn benchmark (see bench/README.md):
# builds stet in release mode, makes bench/.venv with scikit-learn if needed,
# and runs bench/compare.py with any arguments given here (e.g. --runs 5).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
venv=bench/.venv
if ! "$venv/bin/python" -c 'import sklearn, threadpoolctl' 2>/dev/null; then
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet -r bench/requirements.txt
fi
exec "$venv/bin/python" bench/compare.py "$@"
