#!/usr/bin/env bash
# Set up a local environment, migrate the database, load the demo when it is empty, and serve
# Loadline on http://127.0.0.1:8000. Safe to run again: it only installs what is missing.
set -euo pipefail
cd "$(dirname "$0")/.."
python3 -m venv .venv >/dev/null 2>&1 || true
[ -x .venv/bin/pip ] || { echo "python3 -m venv failed; install Python 3.11+ with venv" >&2; exit 1; }
.venv/bin/python -m pip install --quiet --disable-pip-version-check -e . 2>&1 | grep -v '^WARNING: Location' || true
exec .venv/bin/loadline serve "$@"
