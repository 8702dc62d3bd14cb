#!/bin/sh
# Renders a sweep chart (sweep.svg) to PNG in headless Chromium, so the layout can be
# looked at as a browser draws it: labels clear of each other and of the curves, the
# recommended K marked in every panel.
#
# Usage, from the repository root:
#   tests/reference/render_sweep_chart.sh [IMAGE] [OUT_DIR] [K_RANGE]
# Defaults: the demo poster, target/sweep-chart, 1..16. Writes OUT_DIR/sweep.svg (and the
# rest of the sweep) and OUT_DIR/sweep.png. Installs Debian's chromium when it is missing.
set -eu
image=${1:-fixtures/demo/harbour-poster.png}
out=${2:-target/sweep-chart}
range=${3:-1..16}
if ! command -v chromium >/dev/null 2>&1; then
    apt-get update && apt-get install -y chromium
fi
cargo run --release --quiet -- sweep "$image" --k "$range" -o "$out"
profile=$(mktemp -d)
svg=$(cd "$out" && pwd)/sweep.svg
width=$(sed -n 's/^<svg[^>]* width="\([0-9]*\)".*/\1/p' "$svg")
height=$(sed -n 's/^<svg[^>]* height="\([0-9]*\)".*/\1/p' "$svg")
chromium --headless --no-sandbox --disable-gpu --disable-background-networking \
    --disable-component-update --disable-sync --no-first-run \
    --user-data-dir="$profile" --hide-scrollbars \
    --screenshot="$(cd "$out" && pwd)/sweep.png" --window-size="$width,$height" "file://$svg"
rm -rf "$profile"
echo "wrote $out/sweep.png (${width}x${height})"
