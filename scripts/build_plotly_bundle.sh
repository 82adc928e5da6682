#!/bin/sh
# Build the page's plotly.js bundle: plotly.js's core (scatter) plus the heatmap and contour traces only,
# the three trace types the page draws (web/figures.py, web/warm.py).  A maintainer step: the built file
# is committed, and `make demo` / `make test` never run this.  Needs node and the npm registry.
#
#   scripts/build_plotly_bundle.sh [PLOTLY_JS_VERSION]
#
# Writes src/speciakin/web/static/plotly-scatter-heatmap-contour.min.js (and the licence beside it).
# The version must be the plotly.js of the installed `plotly` package (tests/web/test_bundles.py checks).
set -eu
VERSION="${1:-4.1.1}"
ESBUILD=0.24.2
ROOT="$(cd "$(dirname "$0")/.." && pwd)"
OUT="$ROOT/src/speciakin/web/static/plotly-scatter-heatmap-contour.min.js"
WORK="$(mktemp -d)"
trap 'rm -rf "$WORK"' EXIT
cd "$WORK"
npm init -y >/dev/null
npm install --no-audit --no-fund --save-exact "plotly.js@$VERSION" "esbuild@$ESBUILD" >/dev/null
cat > entry.js <<'JS'
var Plotly = require('plotly.js/lib/core');
Plotly.register([require('plotly.js/lib/heatmap'), require('plotly.js/lib/contour')]);
module.exports = Plotly;
JS
# the same esbuild settings as plotly.js's own dist bundles (its esbuild-config.js), wrapped the way they are
cat > banner.js <<JS
/**
* plotly.js (scatter, heatmap, contour - minified) v$VERSION
* Copyright 2012-2026, Plotly, Inc.
* All rights reserved.
* Licensed under the MIT license
*/
(
 function(root, factory) {
  if (typeof module === "object" && module.exports) {
   module.exports = factory();
  } else {
   root.moduleName = factory();
  }
} (typeof self !== "undefined" ? self : this, () => {
"use strict";
JS
printf '\nwindow.Plotly = Plotly;\nreturn Plotly;\n}));\n' > footer.js
npx esbuild entry.js --bundle --minify --format=iife --global-name=Plotly --target=es2016 \
    --define:global=window --define:define.amd=false --define:process.env.NODE_DEBUG=false \
    --alias:stream=stream-browserify --legal-comments=eof --log-level=warning --outfile=body.js
cat banner.js body.js footer.js > "$OUT.tmp"
mv "$OUT.tmp" "$OUT"
cp node_modules/plotly.js/LICENSE "${OUT%.min.js}.LICENSE.txt"
ls -l "$OUT"
