#!/usr/bin/env bash
# Renders a `kinglet vet --html` report with headless Chromium and writes a PNG, so a person can
# look at the report as a browser shows it. Not run by CI.
#
# Usage: scripts/vet-screenshot.sh [REPORT.html] [OUT.png]
#   Without REPORT, packs the digits example, vets it on its held-out rows and renders that.
# Installs Debian's chromium if it is missing (needs root and the Debian mirrors).
set -euo pipefail
cd "$(dirname "$0")/.."
report="${1:-}"
out="${2:-vet-report.png}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

if ! command -v chromium >/dev/null 2>&1; then
  apt-get update
  apt-get install -y chromium
fi

if [ -z "$report" ]; then
  cargo build -q --release -p kinglet-converter --bin kinglet
  bin="${CARGO_TARGET_DIR:-target}/release/kinglet"
  "$bin" pack examples/digits/model.onnx --calibration examples/digits/calibration.csv \
    -o "$work/digits.int8.kgl" >/dev/null
  report="$work/report.html"
  # Exit code 1 (a failed check) still leaves a report to look at.
  "$bin" vet examples/digits/model.onnx "$work/digits.int8.kgl" \
    --data examples/digits/heldout.csv --label label --max-drop 0.5 --html "$report" >/dev/null || [ $? -eq 1 ]
fi

chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
  --disable-background-networking --disable-component-update --disable-sync \
  --user-data-dir="$work/profile" --hide-scrollbars \
  --screenshot="$(realpath -m "$out")" --window-size=1200,1600 "file://$(realpath "$report")" 2>/dev/null
echo "wrote $out"
