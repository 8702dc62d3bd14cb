#!/usr/bin/env bash
# Brings up a one-node Slurm cluster on this machine, runs the sharded archive and scene
# pipelines of deploy/slurm/ on the bundled fixtures, and checks that every output is
# byte-identical to the same work done on one machine without sharding. Then runs the
# archive pipeline with GNU parallel (deploy/parallel/) and checks it the same way.
#
#   deploy/slurm/test/cluster-test.sh [CHROMASIFT_BINARY]
#
# The binary defaults to $CHROMASIFT_BIN, else target/release/chromasift. Needs root on
# Debian 12 (or a Debian-like system with Slurm 22.05): installs slurm-wlm, munge and
# parallel with apt-get when they are missing. Starts its own munged (as the munge user,
# with its own key and socket in /run/munge), slurmctld and slurmd, with the
# configuration slurm.conf.in of this folder and state, spool and logs in a temporary
# folder, and stops exactly those processes, by process id, when it ends, whatever
# happened. Settings: CS_TEST_KEEP=1 keeps the temporary folder; CS_TEST_CTLD_PORT and
# CS_TEST_SLURMD_PORT move the daemons' ports (default 16817, 16818); CS_TEST_JOB_LIMIT is
# the most seconds a submission may take (default 300); CS_TEST_SCENE=skip leaves out the
# scene pipeline.
set -euo pipefail
export PATH="$PATH:/usr/sbin:/sbin"
t_start=$SECONDS

here=$(cd "$(dirname "$0")" && pwd)
repo=$(cd "$here/../../.." && pwd)
bin=${1:-${CHROMASIFT_BIN:-$repo/target/release/chromasift}}

say() { printf 'cluster-test: %s\n' "$*" >&2; }
fail() {
  say "FAILED: $*"
  exit 1
}

[ "$(id -u)" -eq 0 ] || fail "must run as root (it installs packages and starts slurmd and munged)"
[ -x "$bin" ] || fail "$bin: no chromasift binary (build it, or give its path)"
bin=$(realpath "$bin")

# --- packages ------------------------------------------------------------------------

missing=()
for c in slurmctld slurmd sbatch munged parallel; do
  command -v "$c" >/dev/null || missing+=("$c")
done
if [ ${#missing[@]} -gt 0 ]; then
  say "installing slurm-wlm, munge and parallel (missing: ${missing[*]})"
  t0=$SECONDS
  export DEBIAN_FRONTEND=noninteractive
  # The packages must not start their own daemons: the test starts the ones it stops.
  # policy-rc.d is Debian's switch for that (101: action not allowed), kept only for the
  # install and only if the machine has none.
  own_policy=""
  if [ ! -e /usr/sbin/policy-rc.d ]; then
    printf '#!/bin/sh\nexit 101\n' >/usr/sbin/policy-rc.d
    chmod 0755 /usr/sbin/policy-rc.d
    own_policy=1
  fi
  status=0
  { apt-get update -qq && apt-get install -y -qq --no-install-recommends slurm-wlm munge parallel >/dev/null; } ||
    status=$?
  [ -z "$own_policy" ] || rm -f /usr/sbin/policy-rc.d
  [ "$status" -eq 0 ] || fail "apt-get could not install slurm-wlm, munge and parallel"
  say "installed in $((SECONDS - t0)) s"
fi
t_cluster=$SECONDS

# --- processes we start, stopped on any exit -----------------------------------------

work=$(mktemp -d /tmp/chromasift-slurm.XXXXXX)
chmod 0755 "$work"
munged_pid="" slurmctld_pid="" slurmd_pid=""
munge_socket=/run/munge/chromasift-test-$$.socket

stop_pid() { # name pid
  local name=$1 pid=$2 i
  [ -n "$pid" ] && kill -0 "$pid" 2>/dev/null || return 0
  kill -TERM "$pid" 2>/dev/null || true
  for ((i = 0; i < 100; i++)); do
    kill -0 "$pid" 2>/dev/null || break
    sleep 0.1
  done
  if kill -0 "$pid" 2>/dev/null; then
    say "$name ($pid) did not stop on SIGTERM; sending SIGKILL"
    kill -KILL "$pid" 2>/dev/null || true
  fi
  wait "$pid" 2>/dev/null || true
}

cleanup() {
  local status=$?
  set +e
  trap - EXIT INT TERM
  if [ -n "$slurmctld_pid" ] && kill -0 "$slurmctld_pid" 2>/dev/null; then
    # Jobs still queued or running are ended through Slurm, before the daemons.
    scancel --quiet --full --user=root 2>/dev/null
    for ((i = 0; i < 50; i++)); do
      [ -z "$(squeue -h -o %i 2>/dev/null)" ] && break
      sleep 0.2
    done
  fi
  # Each job step's slurmstepd keeps a socket in the spool folder until it has ended.
  for ((i = 0; i < 100; i++)); do
    [ -z "$(find "$work/spool" -type s 2>/dev/null)" ] && break
    sleep 0.1
  done
  stop_pid slurmd "$slurmd_pid"
  stop_pid slurmctld "$slurmctld_pid"
  stop_pid munged "$munged_pid"
  rm -f "$munge_socket" "$munge_socket.lock"
  if [ "$status" -ne 0 ]; then
    for log in "$work"/log/*.log "$work"/munge/munged.log; do
      [ -f "$log" ] || continue
      say "last lines of $log:"
      tail -n 15 "$log" >&2
    done
  fi
  if [ "${CS_TEST_KEEP:-0}" = 1 ]; then
    say "kept $work"
  else
    rm -rf "$work"
  fi
  exit "$status"
}
trap cleanup EXIT
trap 'say "interrupted"; exit 130' INT TERM

wait_until() { # seconds what command...
  local limit=$1 what=$2 i
  shift 2
  for ((i = 0; i < limit * 5; i++)); do
    "$@" >/dev/null 2>&1 && return 0
    sleep 0.2
  done
  fail "$what did not happen within $limit s"
}

# --- munge ---------------------------------------------------------------------------

install -d -o munge -g munge -m 0755 /run/munge
chown munge:munge /run/munge
install -d -o munge -g munge -m 0700 "$work/munge"
dd if=/dev/urandom of="$work/munge/munge.key" bs=1024 count=1 status=none
chown munge:munge "$work/munge/munge.key"
chmod 0400 "$work/munge/munge.key"
setpriv --reuid=munge --regid=munge --init-groups -- munged --foreground \
  --socket="$munge_socket" --key-file="$work/munge/munge.key" \
  --log-file="$work/munge/munged.log" --pid-file="$work/munge/munged.pid" \
  --seed-file="$work/munge/munged.seed" 2>"$work/munge/munged.err" &
munged_pid=$!
munge_works() { munge -n -S "$munge_socket" | unmunge -S "$munge_socket"; }
wait_until 20 "munged answering on $munge_socket" munge_works

# --- slurmctld and slurmd ------------------------------------------------------------

mkdir -p "$work/state" "$work/spool" "$work/run" "$work/log"
mem_mb=$(awk '/^MemTotal:/ { print int($2 / 1024 * 0.9) }' /proc/meminfo)
# Every job of the test asks for 400 MB (--sbatch-flags below), far more than the fixtures need.
[ "$mem_mb" -ge 1000 ] || fail "the node needs at least 1 GB of memory for the jobs' requests ($mem_mb MB usable)"
sed -e "s#@HOST@#$(hostname -s)#" -e "s#@DIR@#$work#g" -e "s#@MUNGE_SOCKET@#$munge_socket#" \
  -e "s#@CTLD_PORT@#${CS_TEST_CTLD_PORT:-16817}#" -e "s#@SLURMD_PORT@#${CS_TEST_SLURMD_PORT:-16818}#" \
  -e "s#@MEMORY_MB@#$mem_mb#" "$here/slurm.conf.in" >"$work/slurm.conf"
! grep -v '^#' "$work/slurm.conf" | grep -q '@[A-Z_]*@' || fail "slurm.conf.in has a placeholder the test does not fill"
export SLURM_CONF=$work/slurm.conf

slurmctld -D -i -f "$SLURM_CONF" >"$work/log/slurmctld.out" 2>&1 &
slurmctld_pid=$!
ctld_up() { scontrol ping | grep -q 'is UP'; }
wait_until 30 "slurmctld answering" ctld_up
slurmd -D -N csnode1 -f "$SLURM_CONF" >"$work/log/slurmd.out" 2>&1 &
slurmd_pid=$!
node_idle() { [ "$(sinfo -h -n csnode1 -o %T)" = idle ]; }
wait_until 60 "node csnode1 becoming idle" node_idle
say "one-node cluster up in $((SECONDS - t_cluster)) s ($(sinfo -h -o '%P %D node, %c CPUs, %m MB'))"

# --- helpers -------------------------------------------------------------------------

# Waits for the jobs whose ids submit.sh printed (lines "STEP JOBID" in $1).
wait_gone() {
  local ids
  ids=$(awk '{ print $2 }' "$1" | paste -sd, -)
  jobs_gone() { [ -z "$(squeue -h -j "$ids" -o %i 2>/dev/null)" ]; }
  wait_until "${CS_TEST_JOB_LIMIT:-300}" "jobs $ids finishing" jobs_gone
}

# The states of job $1's tasks, counted: "3 COMPLETED", "1 COMPLETED 1 FAILED", ...
job_states() {
  scontrol -o show job "$1" | grep -o 'JobState=[A-Z_]*' | cut -d= -f2 | sort | uniq -c |
    awk '{ printf "%s%s %s", (NR > 1 ? " " : ""), $1, $2 }'
}

# wait_gone, then checks that every job and array task completed.
wait_jobs() {
  local id state
  wait_gone "$1"
  while read -r _ id; do
    state=$(job_states "$id")
    [[ $state =~ ^[0-9]+\ COMPLETED$ ]] || fail "job $id did not complete: $state (see logs/ in its run folder)"
  done <"$1"
}

# cmp of every output under the one-machine folder $1 with the file at the same path
# below exactly one of the folders given after it, and no output more.
compare_outputs() {
  local ref=$1 n=0 f rel d found all
  shift
  while IFS= read -r -d '' f; do
    rel=${f#"$ref"/}
    found=()
    for d in "$@"; do
      [ ! -e "$d/$rel" ] || found+=("$d/$rel")
    done
    [ ${#found[@]} -eq 1 ] || fail "$rel: ${#found[@]} copies in $*, expected one"
    cmp "$f" "${found[0]}" || fail "$rel differs from the one-machine run"
    n=$((n + 1))
  done < <(find "$ref" -type f ! -name 'batch-report.*' -print0)
  all=$(find "$@" -type f ! -name 'batch-report.*' | wc -l)
  [ "$all" -eq "$n" ] || fail "$* hold $all outputs, the one-machine run $n"
  echo "$n"
}

cd "$repo"
k=8
small="--mem=400M --time=00:10:00"
photos=(fixtures/photos/*.png)
printf '%s\n' "${photos[@]}" >"$work/photos.txt"
one="$work/one-machine"

# --- archive: one machine ------------------------------------------------------------

t0=$SECONDS
# The folder by its absolute path, as the run's manifest holds the images: the palette
# lists each image it was learned from by the path it was given.
"$bin" learn "$repo/fixtures/photos" -k $k -o "$one/archive/palette.json" 2>/dev/null
"$bin" batch fixtures/photos --palette "$one/archive/palette.json" --quiet -o "$one/archive/out" 2>/dev/null
say "archive on one machine: ${#photos[@]} images in $((SECONDS - t0)) s"

# --- archive: Slurm ------------------------------------------------------------------

t0=$SECONDS
run="$work/slurm-archive"
# 9 images, 4 per shard: shards of 4, 4 and 1.
deploy/slurm/submit.sh archive "$work/photos.txt" "$run" --per-shard 4 --root fixtures/photos \
  --bin "$bin" -k $k --sbatch-flags "$small" >"$work/archive-jobs.txt"
wait_jobs "$work/archive-jobs.txt"
[ "$(deploy/shards.sh count "$run")" -eq 3 ] || fail "expected 3 archive shards"
cmp "$one/archive/palette.json" "$run/palette.json" || fail "the palette learned from shard histograms differs"
n=$(compare_outputs "$one/archive/out" "$run"/out/shard-*)
say "archive on Slurm: 3 shards, palette and $n outputs identical to one machine ($((SECONDS - t0)) s)"

# A lost output of shard 1: resubmit the apply step of that shard alone. Its other images
# are skipped as up to date (their files are not rewritten) and the lost one comes back.
t0=$SECONDS
lost=$(find "$run/out/shard-00001" -name '*.reduced.png' | sort | head -n 1)
kept=$(find "$run/out/shard-00001" -name '*.reduced.png' | sort | tail -n 1)
kept_before=$(stat -c '%i %y' "$kept")
rm "$lost"
deploy/slurm/submit.sh archive "$work/photos.txt" "$run" --per-shard 4 --root fixtures/photos \
  --bin "$bin" -k $k --from 3 --shards 1 --sbatch-flags "$small" >"$work/resubmit-jobs.txt"
wait_jobs "$work/resubmit-jobs.txt"
[ -f "$lost" ] || fail "resubmitting shard 1 did not write $lost again"
[ "$(stat -c '%i %y' "$kept")" = "$kept_before" ] ||
  fail "resubmitting shard 1 rewrote $kept, which was up to date"
n=$(compare_outputs "$one/archive/out" "$run"/out/shard-*)
resubmitted=$(awk '{ print $2 }' "$work/resubmit-jobs.txt")
task_logs=("$run"/logs/chromasift-archive-apply-"$resubmitted"_*.log)
[ "${task_logs[*]}" = "$run/logs/chromasift-archive-apply-${resubmitted}_1.log" ] ||
  fail "the resubmitted job ran other tasks than array task 1: ${task_logs[*]}"
say "archive on Slurm: shard 1 resubmitted alone, lost output rewritten, the rest skipped ($((SECONDS - t0)) s)"

# A task that fails: shard 1 of three holds a cut-off image. Its histogram task fails,
# and the learn and apply jobs waiting for it are cancelled rather than left pending.
# Once the image is replaced, resubmitting shard 1 alone finishes the run, with the same
# result as one machine on the mended folder.
t0=$SECONDS
mkdir -p "$work/mended"
cp fixtures/photos/chelsea.png fixtures/photos/coffee.png fixtures/photos/rocket.png "$work/mended/"
head -c 3000 fixtures/photos/coffee.png >"$work/mended/coffee.png"
printf '%s\n' "$work"/mended/*.png >"$work/mended.txt"
run="$work/slurm-failing"
deploy/slurm/submit.sh archive "$work/mended.txt" "$run" --root "$work/mended" --bin "$bin" -k $k \
  --sbatch-flags "$small" >"$work/failing-jobs.txt"
wait_gone "$work/failing-jobs.txt"
mapfile -t ids < <(awk '{ print $2 }' "$work/failing-jobs.txt")
[ "$(job_states "${ids[0]}")" = "2 COMPLETED 1 FAILED" ] ||
  fail "histogram job with a cut-off image: $(job_states "${ids[0]}"), expected 2 COMPLETED 1 FAILED"
[ "$(job_states "${ids[1]}")" = "1 CANCELLED" ] || fail "learn job after a failed task: $(job_states "${ids[1]}")"
[[ "$(job_states "${ids[2]}")" =~ ^[0-9]+\ CANCELLED$ ]] || fail "apply job after a failed task: $(job_states "${ids[2]}")"
[ ! -e "$run/hist/shard-00001.hist" ] || fail "the failed histogram task left its file"
grep -q 'coffee.png' "$run"/logs/chromasift-archive-histogram-"${ids[0]}"_1.log ||
  fail "the failed task's log does not name the cut-off image"
cp fixtures/photos/coffee.png "$work/mended/coffee.png"
deploy/slurm/submit.sh archive "$work/mended.txt" "$run" --root "$work/mended" --bin "$bin" -k $k \
  --shards 1 --sbatch-flags "$small" >"$work/mended-jobs.txt"
wait_jobs "$work/mended-jobs.txt"
"$bin" learn "$work/mended" -k $k -o "$one/mended/palette.json" 2>/dev/null
"$bin" batch "$work/mended" --palette "$one/mended/palette.json" --quiet -o "$one/mended/out" 2>/dev/null
cmp "$one/mended/palette.json" "$run/palette.json" || fail "the palette after the resubmission differs"
n=$(compare_outputs "$one/mended/out" "$run"/out/shard-*)
say "archive on Slurm: a failed task cancelled the later jobs; resubmitted alone, $n outputs identical to one machine ($((SECONDS - t0)) s)"

# --- scene tiles: one machine and Slurm ----------------------------------------------

if [ "${CS_TEST_SCENE:-run}" = skip ]; then
  say "scene pipeline SKIPPED (CS_TEST_SCENE=skip)"
else
  "$bin" landcover-sample --help >/dev/null 2>&1 ||
    fail "$bin has no landcover-sample command (the scene pipeline needs the land-cover model commands)"
  tiles=(fixtures/tiles/*.tif)
  printf '%s\n' "${tiles[@]}" >"$work/tiles.txt"
  scene_flags=(-k 5 --seed 7)
  sample=4000
  t0=$SECONDS
  "$bin" landcover-fit "${tiles[@]}" "${scene_flags[@]}" --sample $sample -o "$one/scene/model.json" 2>/dev/null
  for t in "${tiles[@]}"; do
    "$bin" landcover "$t" --model "$one/scene/model.json" -o "$one/scene/classes" 2>/dev/null
  done
  say "scene on one machine: ${#tiles[@]} tiles in $((SECONDS - t0)) s"
  t0=$SECONDS
  run="$work/slurm-scene"
  # 6 tiles, 2 per shard: 3 shards.
  deploy/slurm/submit.sh scene "$work/tiles.txt" "$run" --per-shard 2 --bin "$bin" \
    "${scene_flags[@]}" --sample $sample --sbatch-flags "$small" >"$work/scene-jobs.txt"
  wait_jobs "$work/scene-jobs.txt"
  [ "$(deploy/shards.sh count "$run")" -ge 3 ] || fail "expected at least 3 scene shards"
  cmp "$one/scene/model.json" "$run/model.json" || fail "the model fitted from tile samples differs"
  n=$(compare_outputs "$one/scene/classes" "$run/classes")
  say "scene on Slurm: $(deploy/shards.sh count "$run") shards, model and $n outputs identical to one machine ($((SECONDS - t0)) s)"
  # The same submission again: every step finds its work done and rewrites nothing.
  t0=$SECONDS
  before=$(stat -c '%n %i %y' "$run/model.json" "$run"/samples/* "$run"/classes/*)
  deploy/slurm/submit.sh scene "$work/tiles.txt" "$run" --per-shard 2 --bin "$bin" \
    "${scene_flags[@]}" --sample $sample --sbatch-flags "$small" >"$work/scene-again-jobs.txt"
  wait_jobs "$work/scene-again-jobs.txt"
  [ "$(stat -c '%n %i %y' "$run/model.json" "$run"/samples/* "$run"/classes/*)" = "$before" ] ||
    fail "submitting the finished scene run again rewrote some of its files"
  grep -q 'skipped' "$run"/logs/chromasift-scene-fit-"$(awk 'NR == 2 { print $2 }' "$work/scene-again-jobs.txt")".log ||
    fail "the fit job of the repeated scene run did not say it skipped"
  say "scene on Slurm: the finished run submitted again skips every step ($((SECONDS - t0)) s)"
fi

# --- archive: GNU parallel -----------------------------------------------------------

# The photos in sub-folders; the manifest names two folders and three images, two lines
# per shard: 3 shards, whose outputs mirror the sub-folders.
t0=$SECONDS
nested="$work/nested"
mkdir -p "$nested/harbour" "$nested/survey/2026"
cp fixtures/photos/{astronaut,chelsea,china}.png "$nested/harbour/"
cp fixtures/photos/{coffee,flower,hubble_deep_field}.png "$nested/survey/2026/"
cp fixtures/photos/{immunohistochemistry,retina,rocket}.png "$nested/"
printf '%s\n' "$nested/harbour" "$nested/survey" "$nested"/*.png >"$work/nested.txt"
"$bin" learn "$nested" -k $k -o "$one/nested/palette.json" 2>/dev/null
"$bin" batch "$nested" --palette "$one/nested/palette.json" --quiet -o "$one/nested/out" 2>/dev/null
# The same colours; the documents differ only in the paths of the images they list.
same_colours() {
  python3 -c 'import json, sys
a, b = (json.load(open(p)) for p in sys.argv[1:])
for d in (a, b):
    d.pop("input_profiles")
sys.exit(a != b)' "$1" "$2"
}
same_colours "$one/nested/palette.json" "$one/archive/palette.json" || fail "moving the photos into sub-folders changed the palette"
run="$work/parallel-archive"
deploy/parallel/archive.sh "$work/nested.txt" "$run" --jobs 2 --per-shard 2 --root "$nested" \
  --bin "$bin" -k $k 2>"$work/parallel.err" || {
  cat "$work/parallel.err" >&2
  fail "the GNU parallel run failed"
}
[ "$(deploy/shards.sh count "$run")" -eq 3 ] || fail "expected 3 shards in the GNU parallel run"
cmp "$one/nested/palette.json" "$run/palette.json" || fail "the palette of the GNU parallel run differs"
n=$(compare_outputs "$one/nested/out" "$run"/out/shard-*)
say "archive with GNU parallel: folders and images in 3 shards, palette and $n outputs identical to one machine ($((SECONDS - t0)) s)"

say "ok: cluster up and both pipelines checked in $((SECONDS - t_cluster)) s (whole test $((SECONDS - t_start)) s)"
