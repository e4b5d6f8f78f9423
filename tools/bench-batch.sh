#!/usr/bin/env bash
# Batch benchmark: analyses every bundled fixture clip (rendered scenes of the invented
# test bench) once one by one and once as one `twistmark batch` run, in the same run of this
# script, and prints the wall times and their ratio. Never fails on timing; it only reports.
#
#   tools/bench-batch.sh [JOBS]      JOBS defaults to the number of cores
set -euo pipefail
cd "$(dirname "$0")/.."
jobs=${1:-$(nproc)}
cargo build --release --locked --quiet
bin=./target/release/twistmark
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
mkdir -p "$work/in"
n=0
for fx in fixtures/*/; do
  name=$(basename "$fx")
  for clip in "$fx"frames "$fx"clip_*; do
    [ -e "$clip" ] || continue
    stem="${name}_$(basename "$clip" | sed 's/\.[^.]*$//')"
    ext=""; [ -f "$clip" ] && ext=".${clip##*.}"
    cp -r "$clip" "$work/in/$stem$ext"
    cp "$fx/rig.json" "$work/in/$stem.rig.json"
    n=$((n + 1))
  done
done
now() { date +%s.%N; }
t0=$(now)
for clip in "$work"/in/*; do
  case "$clip" in *.rig.json) continue ;; esac
  stem=$(basename "$clip"); stem=${stem%.*}
  "$bin" analyze "$clip" --rig "$work/in/$stem.rig.json" --out "$work/single/$stem" >/dev/null 2>&1
done
t1=$(now)
"$bin" batch "$work/in" --rig fixtures/demo/rig.json --out "$work/batch" --jobs "$jobs" >/dev/null 2>&1
t2=$(now)
python3 - "$t0" "$t1" "$t2" "$n" "$jobs" "$(nproc)" <<'PY'
import sys
t0, t1, t2 = map(float, sys.argv[1:4]); n, jobs, cores = sys.argv[4:7]
single, batch = t1 - t0, t2 - t1
print(f"clips: {n}   cores: {cores}   batch --jobs {jobs}")
print(f"sum of single analyze runs: {single:7.2f} s")
print(f"one batch run:              {batch:7.2f} s")
print(f"batch / sum of singles:     {batch / single:7.2f}   (below 1 means the batch is faster)")
PY
