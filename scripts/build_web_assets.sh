#!/bin/sh
# Build the vendored front-end assets of saltplan/web/static from the npm registry.
# Versions are pinned by web-assets/package.json + package-lock.json (npm ci).
# Output is committed, so `pip install .` and `saltplan serve` never need npm or a network.
set -eu
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here/web-assets"
npm ci --no-audit --no-fund --ignore-scripts
cp node_modules/htmx.org/dist/htmx.min.js "$here/saltplan/web/static/htmx.min.js"
cp node_modules/htmx.org/LICENSE "$here/saltplan/web/static/htmx.LICENSE.txt"
echo "vendored: htmx $(node -p 'require("./node_modules/htmx.org/package.json").version')"
