#!/usr/bin/env bash
# The README accuracy table: `caravan synth` + `track` + `score` over scenarios of varied
# difficulty (our own invented scenes, seeded), each tracked twice: with the defaults, and
# with frame-to-frame linking only (no prediction, no gap closing, no divisions) for contrast.
#
#   bash benches/accuracy.sh [WORK_DIR]      # prints a Markdown table; about a minute
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --locked --quiet
bin="$PWD/target/release/caravan"
work="${1:-$(mktemp -d)}"
mkdir -p "$work"

# name | synth options | track options
scenarios=(
  "sparse, wandering|--scenario dish --frames 40 --seed 101|"
  "dense, touching|--scenario crowded --frames 30 --seed 102|"
  "low signal (peak 120 photons over 60)|--scenario dish --frames 40 --signal 120 --seed 103|"
  "fast stream (7 px/frame)|--scenario stripe --nuclei 80 --drift 7 --frames 30 --seed 104|--max-step 12px"
  "dividing (1% per frame)|--scenario dish --frames 40 --divisions 0.01 --seed 105|"
  "dividing dense stream|--scenario stripe --nuclei 80 --frames 40 --divisions 0.005 --seed 106|"
  "one-frame dropouts (5%)|--scenario dish --frames 40 --dropouts 0.05 --seed 107|"
  "strong bleaching (1% per frame)|--scenario stripe --frames 40 --bleach 0.01 --seed 108|"
)
baseline="--prediction off --max-gap 0 --divisions off"

for k in "${!scenarios[@]}"; do
  IFS='|' read -r name synth track <<<"${scenarios[$k]}"
  d="$work/s$k"
  # shellcheck disable=SC2086
  "$bin" synth -o "$d/syn" --size 384x384 $synth >/dev/null
  # shellcheck disable=SC2086
  "$bin" track "$d/syn/recording.tif" -o "$d/run" --diameter 14px --no-movie --force $track >/dev/null
  "$bin" score --truth "$d/syn" --tracks "$d/run" -o "$d/score.json" >/dev/null
  # shellcheck disable=SC2086
  "$bin" track "$d/syn/recording.tif" -o "$d/base" --diameter 14px --no-movie --force $track $baseline >/dev/null
  "$bin" score --truth "$d/syn" --tracks "$d/base" -o "$d/base_score.json" >/dev/null
  printf '%s\n' "$name" >"$d/name"
done

python3 - "$work" "${#scenarios[@]}" <<'PY'
import json, sys
work, n = sys.argv[1], int(sys.argv[2])
print("| scenario | detection F1 | TRA | DET | MOTA | link recall | ID switches | mostly tracked | divisions recovered / spurious | TRA, MT frame-to-frame only |")
print("|---|---|---|---|---|---|---|---|---|---|")
for k in range(n):
    d = f"{work}/s{k}"
    name = open(f"{d}/name").read().strip()
    s = json.load(open(f"{d}/score.json"))["score"]
    b = json.load(open(f"{d}/base_score.json"))["score"]
    dv = s["divisions"]
    div = f'{dv["recovered"]}/{dv["reference_events"]}, {dv["spurious"]}' if dv["reference_events"] or dv["found_events"] else "–"
    print(f'| {name} | {s["detection_f1"]:.3f} | {s["tra"]:.4f} | {s["det"]:.4f} | {s["clear_mot"]["mota"]:.4f} '
          f'| {s["link_recall"]:.3f} | {s["clear_mot"]["identity_switches"]} | {s["tracks"]["mostly_tracked"]:.3f} '
          f'| {div} | {b["tra"]:.4f}, {b["tracks"]["mostly_tracked"]:.3f} |')
PY
