#!/usr/bin/env bash
# The sharded archive run with GNU parallel instead of Slurm: histograms of every shard,
# then the palette, then every shard mapped onto it. The same steps as the Slurm job
# scripts (deploy/shards.sh), so the same run folder layout and the same outputs.
#
#   archive.sh MANIFEST RUN [--jobs N] [--parallel-flags 'FLAGS'] [run options]
#
# Run options are those of deploy/slurm/submit.sh (--per-shard, --bin, -k, --root,
# --learn-flags, --apply-flags). --jobs N runs N shards at once (default: one per core).
# --parallel-flags go to every `parallel` call; for other machines give for instance
# '--sshloginfile nodes.txt' (RUN, the inputs and the binary must then be on a shared
# file system, at the same paths). Running the same command again redoes only what is
# missing. Each step's job log is RUN/logs/parallel-STEP.log.
set -euo pipefail

shards_sh=$(cd "$(dirname "$0")/.." && pwd)/shards.sh
die() {
  printf 'archive.sh: %s\n' "$*" >&2
  exit 2
}
[ $# -ge 2 ] || die "usage: archive.sh MANIFEST RUN [--jobs N] [--parallel-flags 'FLAGS'] [run options]"
manifest=$1 run=$2
shift 2
jobs=$(nproc) pflags="" prepare_args=()
while [ $# -gt 0 ]; do
  [ $# -ge 2 ] || die "$1 needs a value"
  case $1 in
    --jobs) jobs=$2 ;;
    --parallel-flags) pflags=$2 ;;
    *) prepare_args+=("$1" "$2") ;;
  esac
  shift 2
done
command -v parallel >/dev/null || die "GNU parallel not found (Debian package 'parallel')"
count=$("$shards_sh" prepare archive "$run" "$manifest" "${prepare_args[@]}")
run=$(realpath -ms -- "$run")
extra=()
read -r -a extra <<<"$pflags"

each_shard() {
  # Every shard is tried even when one fails; parallel then exits non-zero.
  seq 0 $((count - 1)) | parallel --will-cite --jobs "$jobs" "${extra[@]}" \
    --joblog "$run/logs/parallel-$1.log" "$shards_sh" "$1" "$run" '{}'
}
each_shard archive-histogram
"$shards_sh" archive-learn "$run"
each_shard archive-apply
printf 'archive.sh: %s shards done; outputs in %s/out\n' "$count" "$run" >&2
