#!/usr/bin/env bash
# Re-fetch the vendored files listed in static/vendor/MANIFEST from the npm registry and check
# each against its recorded sha256.
# Usage: bash scripts/fetch_vendor.sh [--update]   (--update records new checksums instead)
set -euo pipefail
cd "$(dirname "$0")/.."
manifest=static/vendor/MANIFEST
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
status=0
while read -r package version inner file expected; do
  case "$package" in ''|'#'*) continue ;; esac
  tarball="$work/${package}-${version}.tgz"  # the name npm pack gives an unscoped package
  [ -f "$tarball" ] || (cd "$work" && npm pack --silent "${package}@${version}" >/dev/null)
  mkdir -p "$work/x"
  tar -xzf "$tarball" -C "$work/x" "$inner"
  actual=$(sha256sum "$work/x/$inner" | cut -d' ' -f1)
  if [ "${1:-}" = "--update" ]; then
    cp "$work/x/$inner" "static/vendor/$file"
    sed -i "s|^\(${package} ${version} ${inner} ${file}\) .*|\1 ${actual}|" "$manifest"
    echo "static/vendor/$file: ${package} ${version}, sha256 ${actual}"
  elif [ "$actual" = "$expected" ]; then
    cp "$work/x/$inner" "static/vendor/$file"
    echo "static/vendor/$file verified (${package} ${version})"
  else
    echo "checksum mismatch for static/vendor/$file: registry ${actual}, recorded ${expected}" >&2
    status=1
  fi
done < "$manifest"
exit $status
