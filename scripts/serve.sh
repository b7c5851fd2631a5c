#!/usr/bin/env bash
# Set up a local environment, migrate the database, load the demo when it is empty, and serve
# Loadline on http://127.0.0.1:8000. Safe to run again: it only installs what is missing.
set -euo pipefail
cd "$(dirname "$0")/.."
python3 -m venv .venv >/dev/null 2>&1 || true
[ -x .venv/bin/pip ] || { echo "python3 -m venv failed; install Python 3.11+ with venv" >&2; exit 1; }
# Install only when pyproject.toml changed since the last install (a stamp in .venv).
stamp=.venv/.installed-$(sha256sum pyproject.toml | cut -c1-16)
if [ ! -f "$stamp" ]; then
  echo "Installing Loadline and what it needs into .venv (once; log in .venv/install.log)"
  if ! .venv/bin/python -m pip install --disable-pip-version-check -e . > .venv/install.log 2>&1; then
    tail -n 30 .venv/install.log >&2
    exit 1
  fi
  .venv/bin/python -c 'import server, fastapi, uvicorn' && touch "$stamp"
fi
exec .venv/bin/loadline serve "$@"
