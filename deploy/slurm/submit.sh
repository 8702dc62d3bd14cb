#!/usr/bin/env bash
# Submits a sharded chromasift run to Slurm as three jobs chained with
# --dependency=afterok: a job array over the shards, one job over all of them, and a
# second job array over the shards.
#
#   submit.sh archive MANIFEST RUN [options]   histogram per shard -> learn -> apply per shard
#   submit.sh scene MANIFEST RUN [options]     sample per shard -> fit -> apply per shard
#
# Options of the run (kept in RUN/run.env; the same run folder only takes the same ones):
#   --per-shard N          manifest lines per shard (default 1)
#   --bin PATH             the chromasift binary, on a path every node sees (default: PATH's)
#   -k K                   colours (archive) or classes (scene)
#   archive: --root DIR    outputs mirror input paths below DIR (default: the current folder)
#            --learn-flags 'FLAGS', --apply-flags 'FLAGS'   more flags for learn / batch
#   scene:   --seed S, --sample N, --scene-flags 'FLAGS' (--bands, --index, --nodata),
#            --fit-flags 'FLAGS' (engine flags of landcover-fit)
# Options of this submission:
#   --from STEP            start at step 1, 2 or 3 (default 1), e.g. to re-apply only
#   --shards LIST          Slurm array indices for the first submitted step if it is per
#                          shard (e.g. 7 or 3,7-9); later per-shard steps cover every shard
#                          and skip the finished ones
#   --at-once N            at most N tasks of each array run at once
#   --sbatch-flags 'FLAGS' passed to every sbatch (e.g. '--partition=long --account=x')
#
# Prints the job ids, also appended to RUN/jobs.txt. Logs go to RUN/logs/.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
shards_sh=$(cd "$here/.." && pwd)/shards.sh

die() {
  printf 'submit: %s\n' "$*" >&2
  exit 2
}

[ $# -ge 3 ] || die "usage: submit.sh archive|scene MANIFEST RUN [options] (see the top of this file)"
pipeline=$1 manifest=$2 run=$3
shift 3
case $pipeline in
  archive) steps=(archive-histogram archive-learn archive-apply) ;;
  scene) steps=(scene-sample scene-fit scene-apply) ;;
  *) die "the pipeline is archive or scene, not '$pipeline'" ;;
esac

from=1 shards="" at_once="" sbatch_flags="" prepare_args=()
while [ $# -gt 0 ]; do
  [ $# -ge 2 ] || die "$1 needs a value"
  case $1 in
    --from) from=$2 ;;
    --shards) shards=$2 ;;
    --at-once) at_once=$2 ;;
    --sbatch-flags) sbatch_flags=$2 ;;
    *) prepare_args+=("$1" "$2") ;;
  esac
  shift 2
done
case $from in 1 | 2 | 3) ;; *) die "--from must be 1, 2 or 3, not '$from'" ;; esac
[ -z "$at_once" ] || [[ $at_once =~ ^[1-9][0-9]*$ ]] || die "--at-once must be a whole number of at least 1"
command -v sbatch >/dev/null || die "sbatch not found: run this on a Slurm login node"

count=$("$shards_sh" prepare "$pipeline" "$run" "$manifest" "${prepare_args[@]}")
run=$(realpath -ms -- "$run")
# Slurm's default MaxArraySize is 1001 (indices 0 to 1000).
if [ "$count" -gt 1001 ]; then
  printf 'submit: note: %s shards; clusters often allow at most 1001 array tasks: raise --per-shard if sbatch refuses\n' "$count" >&2
fi

extra=()
read -r -a extra <<<"$sbatch_flags"
throttle=${at_once:+%$at_once}
dependency=()
for step in 1 2 3; do
  [ "$step" -ge "$from" ] || continue
  name=${steps[$((step - 1))]}
  args=(--parsable --export="ALL,CS_RUN=$run,CS_SHARDS=$shards_sh" "${dependency[@]}" "${extra[@]}")
  if [ "$step" -eq 2 ]; then
    args+=(--output="$run/logs/%x-%j.log")
  else
    indices="0-$((count - 1))"
    [ "$step" -ne "$from" ] || [ -z "$shards" ] || indices=$shards
    args+=(--array="$indices$throttle" --output="$run/logs/%x-%A_%a.log")
  fi
  id=$(sbatch "${args[@]}" "$here/$name.sbatch")
  id=${id%%;*}
  printf '%s %s\n' "$name" "$id" | tee -a "$run/jobs.txt"
  # A failed task cancels the jobs waiting for it instead of leaving them pending forever.
  dependency=(--dependency="afterok:$id" --kill-on-invalid-dep=yes)
done
