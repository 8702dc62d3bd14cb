#!/usr/bin/env bash
# The work of one shard, shared by the Slurm job scripts (deploy/slurm/) and the GNU
# parallel runner (deploy/parallel/). A run lives in one folder, RUN:
#
#   RUN/run.env            settings, written once by `prepare` (shell-quoted assignments)
#   RUN/manifest.txt       the manifest's inputs as absolute paths, one per line
#   RUN/logs/              job logs (Slurm) or task logs (parallel)
#   archive:  RUN/hist/shard-NNNNN.hist, RUN/palette.json, RUN/out/shard-NNNNN/...
#   scene:    RUN/samples/NAME.sample, RUN/samples.list, RUN/model.json, RUN/classes/...
#
# Shard i (0-based, the job array index) is the block of lines i*P+1 .. (i+1)*P of the
# manifest, P = --per-shard. Every step skips work whose outputs are already complete, so a
# step can be run again for any shard; chromasift writes each output to a temporary file and
# renames it into place only when complete, so a killed task leaves no half-written output.
#
#   shards.sh prepare archive|scene RUN MANIFEST [options]   (prints the number of shards)
#   shards.sh count RUN
#   shards.sh archive-histogram RUN INDEX | archive-learn RUN | archive-apply RUN INDEX
#   shards.sh scene-sample RUN INDEX | scene-fit RUN | scene-apply RUN INDEX
set -euo pipefail

say() { printf 'shards: %s\n' "$*" >&2; }
die() {
  say "$*"
  exit 2
}

usage() {
  cat >&2 <<'EOF'
usage: shards.sh prepare archive RUN MANIFEST [--per-shard N] [--root DIR] [--bin PATH]
                         [-k K] [--learn-flags 'FLAGS'] [--apply-flags 'FLAGS']
       shards.sh prepare scene RUN MANIFEST [--per-shard N] [--bin PATH] [-k K]
                         [--seed S] [--sample N] [--scene-flags 'FLAGS'] [--fit-flags 'FLAGS']
       shards.sh count RUN
       shards.sh archive-histogram|archive-apply|scene-sample|scene-apply RUN INDEX
       shards.sh archive-learn|scene-fit RUN
EOF
  exit 2
}

# --- prepare -------------------------------------------------------------------------

# Absolute form of a path, with `.` and `..` folded but links kept.
absolute() { realpath -ms -- "$1"; }

prepare() {
  local pipeline=$1 run=$2 manifest=$3
  shift 3
  case $pipeline in archive | scene) ;; *) die "prepare: pipeline must be archive or scene, not '$pipeline'" ;; esac
  [ -f "$manifest" ] || die "$manifest: manifest not found"
  local per_shard=1 root=$PWD bin="" k=8 seed="" sample=""
  local learn_flags="" apply_flags="" scene_flags="" fit_flags=""
  while [ $# -gt 0 ]; do
    [ $# -ge 2 ] || die "prepare: $1 needs a value"
    case $1 in
      --per-shard) per_shard=$2 ;;
      --root) root=$2 ;;
      --bin) bin=$2 ;;
      -k) k=$2 ;;
      --seed) seed=$2 ;;
      --sample) sample=$2 ;;
      --learn-flags) learn_flags=$2 ;;
      --apply-flags) apply_flags=$2 ;;
      --scene-flags) scene_flags=$2 ;;
      --fit-flags) fit_flags=$2 ;;
      *) die "prepare: unknown option '$1'" ;;
    esac
    shift 2
  done
  [[ $per_shard =~ ^[1-9][0-9]*$ ]] || die "--per-shard must be a whole number of at least 1, not '$per_shard'"
  if [ -z "$bin" ]; then
    bin=$(command -v chromasift) || die "chromasift is not on PATH; give --bin PATH"
  fi
  bin=$(absolute "$bin")
  [ -x "$bin" ] || die "$bin: not an executable chromasift"
  root=$(absolute "$root")

  mkdir -p "$run"
  run=$(absolute "$run")
  local tmp_manifest="$run/.manifest.new" tmp_env="$run/.run.env.new"
  # Blank lines and lines starting with '#' are skipped; relative paths are taken from the
  # current folder; every input must exist.
  local line n=0 path
  : >"$tmp_manifest"
  while IFS= read -r line || [ -n "$line" ]; do
    n=$((n + 1))
    line=${line%$'\r'}
    case $line in '' | '#'*) continue ;; esac
    path=$(absolute "$line")
    [ -e "$path" ] || die "$manifest: line $n: $line does not exist"
    if [ "$pipeline" = archive ]; then
      case $path/ in "$root"/*) ;; *) die "$manifest: line $n: $line is not inside the root folder $root (--root)" ;; esac
      [ "$path" != "$root" ] || die "$manifest: line $n: the root folder itself cannot be a line; list its images or sub-folders"
    else
      [ -f "$path" ] || die "$manifest: line $n: $line is not a file (a scene manifest lists rasters)"
    fi
    printf '%s\n' "$path" >>"$tmp_manifest"
  done <"$manifest"
  local lines
  lines=$(wc -l <"$tmp_manifest")
  [ "$lines" -gt 0 ] || die "$manifest: no input paths"
  if [ "$pipeline" = scene ]; then
    # Outputs are named by the raster's stem in one folder, and a model records its
    # sources by file name: both must be unique.
    local dup
    dup=$(sed -e 's#.*/##' -e 's/\.[^.]*$//' "$tmp_manifest" | tr '[:upper:]' '[:lower:]' | sort | uniq -d | head -n 1)
    [ -z "$dup" ] || die "$manifest: two rasters share the name '$dup'; scene outputs go to one folder, so names must differ"
  fi
  {
    printf 'CS_PIPELINE=%q\n' "$pipeline"
    printf 'CS_BIN=%q\n' "$bin"
    printf 'CS_PER_SHARD=%q\n' "$per_shard"
    printf 'CS_LINES=%q\n' "$lines"
    printf 'CS_K=%q\n' "$k"
    if [ "$pipeline" = archive ]; then
      printf 'CS_ROOT=%q\n' "$root"
      printf 'CS_LEARN_FLAGS=%q\n' "$learn_flags"
      printf 'CS_APPLY_FLAGS=%q\n' "$apply_flags"
    else
      printf 'CS_SEED=%q\n' "$seed"
      printf 'CS_SAMPLE=%q\n' "$sample"
      printf 'CS_SCENE_FLAGS=%q\n' "$scene_flags"
      printf 'CS_FIT_FLAGS=%q\n' "$fit_flags"
    fi
  } >"$tmp_env"
  # A run folder holds one run: the same manifest and settings may be prepared again (to
  # resubmit), different ones are refused.
  if [ -e "$run/run.env" ] || [ -e "$run/manifest.txt" ]; then
    if ! cmp -s "$tmp_env" "$run/run.env" || ! cmp -s "$tmp_manifest" "$run/manifest.txt"; then
      rm -f "$tmp_env" "$tmp_manifest"
      die "$run: this run folder holds a run with another manifest or other settings; use a new folder"
    fi
    rm -f "$tmp_env" "$tmp_manifest"
  else
    mv "$tmp_manifest" "$run/manifest.txt"
    mv "$tmp_env" "$run/run.env"
  fi
  mkdir -p "$run/logs"
  shard_count "$run"
}

# --- shards --------------------------------------------------------------------------

load() {
  RUN=$(absolute "$1")
  [ -f "$RUN/run.env" ] || die "$RUN: not a prepared run folder (no run.env)"
  # shellcheck source=/dev/null
  . "$RUN/run.env"
}

shard_count() {
  load "$1"
  echo $(((CS_LINES + CS_PER_SHARD - 1) / CS_PER_SHARD))
}

shard_name() { printf 'shard-%05d' "$1"; }

# The inputs of shard $1, one per line.
shard_lines() {
  local i=$1 count
  [[ $i =~ ^[0-9]+$ ]] || die "shard index must be a whole number, not '$i'"
  count=$(((CS_LINES + CS_PER_SHARD - 1) / CS_PER_SHARD))
  [ "$i" -lt "$count" ] || die "shard $i does not exist: $RUN has shards 0 to $((count - 1))"
  sed -n "$((i * CS_PER_SHARD + 1)),$(((i + 1) * CS_PER_SHARD))p" "$RUN/manifest.txt"
}

need() { [ "$CS_PIPELINE" = "$1" ] || die "$RUN: this is a $CS_PIPELINE run, not a $1 run"; }

# Whether $1 exists and is newer than every later argument.
newer_than_all() {
  local f=$1
  shift
  [ -s "$f" ] || return 1
  local g
  for g in "$@"; do
    [ "$f" -nt "$g" ] || return 1
  done
}

# --- archive -------------------------------------------------------------------------

archive_histogram() {
  load "$1"
  need archive
  local name hist
  name=$(shard_name "$2")
  mkdir -p "$RUN/hist"
  hist="$RUN/hist/$name.hist"
  if [ -s "$hist" ]; then
    say "$name: histogram already written, skipped"
    return 0
  fi
  local inputs=()
  mapfile -t inputs < <(shard_lines "$2")
  if ! "$CS_BIN" histogram "${inputs[@]}" -o "$hist"; then
    # An unreadable image must not leave a histogram that a rerun would take as complete.
    rm -f "$hist"
    die "$name: histogram failed; fix the input named above, then run this shard again"
  fi
}

archive_learn() {
  load "$1"
  need archive
  local count i hists=()
  count=$(shard_count "$RUN")
  for ((i = 0; i < count; i++)); do
    hists+=("$RUN/hist/$(shard_name "$i").hist")
    [ -s "${hists[-1]}" ] || die "$(shard_name "$i"): no histogram yet; run its histogram step first"
  done
  if newer_than_all "$RUN/palette.json" "${hists[@]}"; then
    say "palette already learned from these histograms, skipped"
    return 0
  fi
  local flags=()
  read -r -a flags <<<"$CS_LEARN_FLAGS"
  "$CS_BIN" learn "${hists[@]}" -k "$CS_K" "${flags[@]}" -o "$RUN/palette.json"
}

archive_apply() {
  load "$1"
  need archive
  local name stage out path rel
  name=$(shard_name "$2")
  [ -s "$RUN/palette.json" ] || die "$RUN/palette.json: no palette yet; run the learn step first"
  # `batch` takes one folder: the shard's inputs are linked into a folder of their own,
  # under their paths relative to the root, and their outputs mirror those paths.
  stage="$RUN/stage/$name"
  out="$RUN/out/$name"
  rm -rf "$stage"
  mkdir -p "$stage" "$out"
  while IFS= read -r path; do
    rel=${path#"$CS_ROOT"/}
    if [ -d "$path" ]; then
      # Links to folders are not followed by `batch`: link each file of the folder.
      while IFS= read -r -d '' f; do
        mkdir -p "$stage/$(dirname "$rel/${f#"$path"/}")"
        ln -s "$f" "$stage/$rel/${f#"$path"/}"
      done < <(find "$path" \( -type f -o -type l \) -print0)
    else
      mkdir -p "$stage/$(dirname "$rel")"
      ln -s "$path" "$stage/$rel"
    fi
  done < <(shard_lines "$2")
  local flags=() status=0
  read -r -a flags <<<"$CS_APPLY_FLAGS"
  # A rerun skips every image whose outputs are complete and made from the same file with
  # the same palette and settings (batch's own resume).
  "$CS_BIN" batch "$stage" --palette "$RUN/palette.json" "${flags[@]}" \
    --jobs "${SLURM_CPUS_PER_TASK:-1}" --quiet -o "$out" || status=$?
  rm -rf "$stage"
  rmdir "$RUN/stage" 2>/dev/null || true
  [ "$status" -eq 0 ] || die "$name: some images failed (see $out/batch-report.csv); run this shard again once fixed"
}

# --- scene ---------------------------------------------------------------------------

scene_sample() {
  load "$1"
  need scene
  local name tile base flags=()
  name=$(shard_name "$2")
  mkdir -p "$RUN/samples"
  read -r -a flags <<<"$CS_SCENE_FLAGS"
  while IFS= read -r tile; do
    base=$(basename "$tile")
    if newer_than_all "$RUN/samples/$base.sample" "$tile"; then
      say "$name: $base: sample already written, skipped"
      continue
    fi
    "$CS_BIN" landcover-sample "$tile" ${CS_SEED:+--seed "$CS_SEED"} ${CS_SAMPLE:+--sample "$CS_SAMPLE"} \
      "${flags[@]}" -o "$RUN/samples/$base.sample"
  done < <(shard_lines "$2")
}

scene_fit() {
  load "$1"
  need scene
  local tile sample samples=()
  # The fit reads the samples in manifest order: the model then matches a fit made
  # straight from the rasters in that order on one machine.
  : >"$RUN/.samples.list.new"
  while IFS= read -r tile; do
    sample="$RUN/samples/$(basename "$tile").sample"
    [ -s "$sample" ] || die "$sample: no sample yet; run the sample step for its shard first"
    samples+=("$sample")
    printf '%s\n' "$sample" >>"$RUN/.samples.list.new"
  done <"$RUN/manifest.txt"
  mv "$RUN/.samples.list.new" "$RUN/samples.list"
  if newer_than_all "$RUN/model.json" "${samples[@]}"; then
    say "model already fitted from these samples, skipped"
    return 0
  fi
  local flags=()
  read -r -a flags <<<"$CS_FIT_FLAGS"
  "$CS_BIN" landcover-fit --list "$RUN/samples.list" -k "$CS_K" ${CS_SEED:+--seed "$CS_SEED"} \
    "${flags[@]}" -o "$RUN/model.json"
}

scene_apply() {
  load "$1"
  need scene
  local name tile base stem
  name=$(shard_name "$2")
  [ -s "$RUN/model.json" ] || die "$RUN/model.json: no model yet; run the fit step first"
  mkdir -p "$RUN/classes"
  while IFS= read -r tile; do
    base=$(basename "$tile")
    stem=${base%.*}
    # The five outputs of a tile are renamed into place together, so the last of them
    # being newer than the model and the tile means the tile is done.
    if [ -s "$RUN/classes/$stem.classes.tif" ] && [ -s "$RUN/classes/$stem.uncertainty.tif" ] &&
      [ -s "$RUN/classes/$stem.classes.png" ] && [ -s "$RUN/classes/$stem.classes.csv" ] &&
      newer_than_all "$RUN/classes/$stem.classes.json" "$RUN/model.json" "$tile"; then
      say "$name: $base: classes already written, skipped"
      continue
    fi
    "$CS_BIN" landcover "$tile" --model "$RUN/model.json" -o "$RUN/classes"
  done < <(shard_lines "$2")
}

# --- entry ---------------------------------------------------------------------------

[ $# -ge 2 ] || usage
step=$1
shift
case $step in
  prepare)
    [ $# -ge 3 ] || usage
    prepare "$@"
    ;;
  count | archive-learn | scene-fit)
    [ $# -eq 1 ] || usage
    case $step in
      count) shard_count "$1" ;;
      archive-learn) archive_learn "$1" ;;
      scene-fit) scene_fit "$1" ;;
    esac
    ;;
  archive-histogram | archive-apply | scene-sample | scene-apply)
    [ $# -eq 2 ] || usage
    "${step//-/_}" "$1" "$2"
    ;;
  *) usage ;;
esac
