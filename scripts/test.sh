#!/usr/bin/env bash
# Set up and run Loadline's whole test suite: lint, every test on SQLite (browser tests included,
# through Debian's chromium), then the migration and API tests again on a real local PostgreSQL
# server that this script starts and stops. Installs chromium and PostgreSQL through apt-get
# when they are missing. Safe to run again.
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)

python3 -m venv .venv >/dev/null 2>&1 || true
[ -x .venv/bin/pip ] || { echo "python3 -m venv failed; install Python 3.11+ with venv" >&2; exit 1; }
# Install only when pyproject.toml changed since the last install (a stamp in .venv).
stamp=.venv/.installed-test-$(sha256sum pyproject.toml | cut -c1-16)
if [ ! -f "$stamp" ]; then
  echo "Installing Loadline and what it needs into .venv (once; log in .venv/install.log)"
  if ! .venv/bin/python -m pip install --disable-pip-version-check -e '.[test]' > .venv/install.log 2>&1; then
    tail -n 30 .venv/install.log >&2
    exit 1
  fi
  .venv/bin/python -c 'import server, fastapi, playwright, schemathesis' && touch "$stamp"
fi

apt_updated=0
apt_install() {
  if [ "$(id -u)" != 0 ]; then
    echo "missing $* and not root: install it, or run this script as root" >&2
    exit 1
  fi
  if [ $apt_updated = 0 ]; then apt-get update -qq; apt_updated=1; fi
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "$@" >/dev/null
}
command -v chromium >/dev/null 2>&1 || apt_install chromium
pg_bin=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1 || true)
if [ -z "$pg_bin" ] || [ ! -x "$pg_bin/pg_ctl" ]; then
  apt_install postgresql
  pg_bin=$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -n 1)
fi

echo "== lint"
.venv/bin/ruff check .
.venv/bin/ruff format --check .

# pytest exits 5 when it collected no tests: for this suite that is a failure, said plainly.
run_pytest() {
  local status=0
  .venv/bin/python -m pytest "$@" || status=$?
  if [ $status = 5 ]; then echo "pytest collected no tests for: $*" >&2; fi
  return $status
}

echo "== tests on SQLite"
run_pytest -p no:cacheprovider -q

echo "== migration and API tests on PostgreSQL"
pg_dir=$(mktemp -d)
chown postgres "$pg_dir"
pg_port=$(.venv/bin/python -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
as_postgres() { if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi; }
stop_pg() { as_postgres "$pg_bin/pg_ctl" -D "$pg_dir/data" -m immediate stop >/dev/null 2>&1 || true; rm -rf "$pg_dir"; }
trap stop_pg EXIT
as_postgres "$pg_bin/initdb" -D "$pg_dir/data" -A trust -U postgres >/dev/null
as_postgres "$pg_bin/pg_ctl" -D "$pg_dir/data" -l "$pg_dir/server.log" -w \
  -o "-k $pg_dir -c listen_addresses=127.0.0.1 -p $pg_port -c fsync=off -c max_connections=200" start >/dev/null
export LOADLINE_TEST_POSTGRES_URL="postgresql+psycopg://postgres@127.0.0.1:${pg_port}/postgres"
cd "$root"
run_pytest -p no:cacheprovider -q -m "not browser" tests/api tests/test_migrations.py tests/test_backup.py tests/postgres tests/test_access.py
echo "== all tests passed"
