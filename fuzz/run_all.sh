#!/usr/bin/env bash
# Runs every fuzz target in turn and prints one line per target: executions, seconds,
# corpus entries and findings (files libFuzzer left in artifacts/<target>/).
#
#   fuzz/run_all.sh [SECONDS_FOR_BINARY_FORMATS] [RUNS_FOR_TEXT_PARSERS]
#
# Text parsers (cli_values, cli_args, ink_library, palette_document, histogram_file) run
# until RUNS executions (default 5 000 000) or 30 minutes, whichever comes first; the
# image decoders (decode_image, geotiff) run for SECONDS (default 900). One libFuzzer
# process at a time, so it keeps to one core. Full logs go to fuzz/logs/ (git-ignored).
set -euo pipefail
cd "$(dirname "$0")"
secs="${1:-900}"
runs="${2:-5000000}"
export RUSTC_BOOTSTRAP=1
tdir="${CARGO_TARGET_DIR:-$PWD/target}"
cargo fuzz build -O -a --target-dir "$tdir" >/dev/null
bin="$tdir/$(rustc -vV | sed -n 's/^host: //p')/release"
mkdir -p logs
common=(-timeout=10 -rss_limit_mb=1024 -malloc_limit_mb=512 -print_final_stats=1)
run() {
  local target="$1"
  shift
  mkdir -p "corpus/$target" "artifacts/$target"
  local before
  before=$(find "artifacts/$target" -type f | wc -l)
  local start
  start=$(date +%s)
  # A finding stops libFuzzer with a non-zero exit; record it and go on to the next target.
  # The binaries cargo fuzz built, run directly, so no rebuild happens between targets.
  "$bin/$target" "corpus/$target" "seeds/$target" -artifact_prefix="artifacts/$target/" \
    "${common[@]}" "$@" >"logs/$target.log" 2>&1 || true
  local took=$(($(date +%s) - start))
  local done_runs
  done_runs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "logs/$target.log" | grep -o '[0-9]*$' | tail -1)
  local after
  after=$(find "artifacts/$target" -type f | wc -l)
  printf '%-17s executions %-10s seconds %-5s corpus %-6s new findings %s\n' \
    "$target" "${done_runs:-?}" "$took" "$(find "corpus/$target" -type f | wc -l)" $((after - before))
}
for t in cli_values cli_args ink_library palette_document histogram_file; do
  run "$t" -runs="$runs" -max_total_time=1800
done
for t in decode_image geotiff; do
  run "$t" -max_total_time="$secs"
done
