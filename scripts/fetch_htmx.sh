#!/usr/bin/env bash
# Re-fetch the vendored htmx from the npm registry and check it against the recorded checksum.
# Usage: bash scripts/fetch_htmx.sh [--update]   (--update records a new checksum instead)
set -euo pipefail
cd "$(dirname "$0")/.."
version=$(sed -n 's/^version=//p' static/htmx.version)
expected=$(sed -n 's/^sha256=//p' static/htmx.version)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
(cd "$work" && npm pack --silent "htmx.org@${version}" >/dev/null)
tar -xzf "$work"/htmx.org-"${version}".tgz -C "$work" package/dist/htmx.min.js
actual=$(sha256sum "$work/package/dist/htmx.min.js" | cut -d' ' -f1)
if [ "${1:-}" = "--update" ]; then
  cp "$work/package/dist/htmx.min.js" static/htmx.min.js
  sed -i "s/^sha256=.*/sha256=${actual}/" static/htmx.version
  echo "static/htmx.min.js is htmx ${version}, sha256 ${actual}"
elif [ "$actual" = "$expected" ]; then
  cp "$work/package/dist/htmx.min.js" static/htmx.min.js
  echo "htmx ${version} fetched and verified (sha256 ${actual})"
else
  echo "checksum mismatch for htmx ${version}: registry ${actual}, recorded ${expected}" >&2
  exit 1
fi
