#!/usr/bin/env bash
# Fetch the Jupyter widgets HTML manager (the JavaScript that renders embedded
# widget state in a static page) from the npm registry, for offline reports:
#
#   scripts/fetch_widget_bundles.sh [DIR]        (default: widget-bundles)
#   fxnet report NETWORK PLAN IMAGE -o report.html --offline DIR/html-manager
#
# Leaves DIR/html-manager/dist/embed-amd.js (and its font files). Needs npm.
set -euo pipefail
dir="${1:-widget-bundles}"
version="${HTML_MANAGER_VERSION:-1}"
if ! command -v npm >/dev/null 2>&1; then
  echo "fetch_widget_bundles.sh: npm is needed (apt-get install npm)" >&2
  exit 2
fi
mkdir -p "$dir"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
( cd "$work" && npm pack --silent "@jupyter-widgets/html-manager@${version}" >/dev/null )
tarball="$(ls "$work"/jupyter-widgets-html-manager-*.tgz)"
rm -rf "$dir/html-manager"
mkdir -p "$dir/html-manager"
tar -xzf "$tarball" -C "$dir/html-manager" --strip-components=1
if [ ! -f "$dir/html-manager/dist/embed-amd.js" ]; then
  echo "fetch_widget_bundles.sh: $tarball has no dist/embed-amd.js" >&2
  exit 1
fi
echo "$dir/html-manager"
