#!/usr/bin/env bash
# The README accuracy table: `caravan synth` + `caravan track` with its defaults (no
# --diameter, no --max-step: as a user runs it) + `caravan score`, over scenes of our own of
# varied difficulty (seeded), each also tracked with frame-to-frame linking only (no
# prediction, gap closing or divisions) and linked by a plain nearest-neighbour linker at the
# gate that suits it best (benches/nearest_linker.py) as the floor.
#
#   bash benches/accuracy.sh [WORK_DIR]      # prints a Markdown table; a few minutes
#   CARAVAN_BIN=/path/to/caravan bash benches/accuracy.sh   # another build, for before/after
#   CARAVAN_SYNTH_BIN=/path/to/new/caravan CARAVAN_BIN=/path/to/old/caravan bash benches/accuracy.sh
#       # the same scenes (made by the newer build's synth) tracked by an older build
set -euo pipefail
cd "$(dirname "$0")/.."
if [ -z "${CARAVAN_BIN:-}" ]; then
  cargo build --release --locked --quiet
  bin="$PWD/target/release/caravan"
else
  bin="$CARAVAN_BIN"
fi
synth_bin="${CARAVAN_SYNTH_BIN:-$bin}"
work="${1:-$(mktemp -d)}"
mkdir -p "$work"
venv="${TMPDIR:-/tmp}/caravan-bench-venv"
[ -x "$venv/bin/python" ] || python3 -m venv "$venv"
"$venv/bin/pip" install --quiet numpy==2.4.6 scipy==1.17.1
py="$venv/bin/python"

# name | synth options
scenarios=(
  "sparse, wandering|--scenario dish --frames 40 --seed 101"
  "dense, touching|--scenario crowded --frames 30 --seed 102"
  "dense, tissue look|--scenario crowded --look tissue --frames 30 --seed 109"
  "crowded field (30% area, ~65% touching, pressed)|--scenario crowded --nuclei 287 --look tissue --brightness-spread 0.25 --separation 0.7 --frames 30 --seed 113"
  "low signal (peak 120 photons over 60)|--scenario dish --frames 40 --signal 120 --seed 103"
  "dim (peak 3x noise, tissue look)|--scenario dish --frames 40 --snr 3 --look tissue --seed 110"
  "fast stream (7 px/frame)|--scenario stripe --nuclei 80 --drift 7 --frames 30 --seed 104"
  "fast persistent (0.8 diameters/frame)|--scenario dish --nuclei 47 --speed 11.2 --persistence 5 --frames 30 --seed 111"
  "dividing (1% per frame)|--scenario dish --frames 40 --divisions 0.01 --seed 105"
  "dividing dense stream|--scenario stripe --nuclei 80 --frames 40 --divisions 0.005 --seed 106"
  "frequent divisions (0.8%, mitotic rounding, crowded tissue)|--scenario crowded --look tissue --divisions 0.008 --mitosis-frames 2 --frames 40 --seed 114"
  "overnight-like (400 frames, 200 nuclei, divisions, dimming)|--scenario dish --nuclei 200 --look tissue --divisions 0.0005 --mitosis-frames 2 --dimming 0.01 --frames 400 --seed 115"
  "one-frame dropouts (5%)|--scenario dish --frames 40 --dropouts 0.05 --seed 107"
  "strong bleaching (1% per frame)|--scenario stripe --frames 40 --bleach 0.01 --seed 108"
)
baseline="--prediction off --max-gap 0 --divisions off"
gates="3 5 8 11 15 20 25 30"

for k in "${!scenarios[@]}"; do
  IFS='|' read -r name synth <<<"${scenarios[$k]}"
  d="$work/s$k"
  mkdir -p "$d/nn"
  # shellcheck disable=SC2086
  "$synth_bin" synth -o "$d/syn" --size 384x384 $synth >/dev/null
  "$bin" track "$d/syn/recording.tif" -o "$d/run" --no-movie --no-analysis --force >"$d/track.txt" || true
  "$bin" score --truth "$d/syn" --tracks "$d/run" -o "$d/score.json" >/dev/null
  # shellcheck disable=SC2086
  "$bin" track "$d/syn/recording.tif" -o "$d/base" --no-movie --no-analysis --force $baseline >/dev/null || true
  "$bin" score --truth "$d/syn" --tracks "$d/base" -o "$d/base_score.json" >/dev/null
  for g in $gates; do
    "$py" benches/nearest_linker.py "$d/run/detections.csv" "$g" "$d/nn/tracks_$g.csv"
    "$bin" score --truth "$d/syn" --tracks "$d/nn/tracks_$g.csv" -o "$d/nn/score_$g.json" >/dev/null
  done
  printf '%s\n' "$name" >"$d/name"
done

# Pure noise: no nuclei at all, defaults (the diameter estimate should refuse), then a given
# diameter (the verdict should fail).
"$synth_bin" synth -o "$work/noise/syn" --size 384x384 --frames 20 --nuclei 0 --seed 112 >/dev/null
set +e
"$bin" track "$work/noise/syn/recording.tif" -o "$work/noise/run" --no-movie --no-analysis --force \
  >/dev/null 2>"$work/noise/defaults.err"
echo $? >"$work/noise/defaults.rc"
"$bin" track "$work/noise/syn/recording.tif" -o "$work/noise/given" --diameter 14px --no-movie --no-analysis \
  --force >"$work/noise/given.txt" 2>&1
echo $? >"$work/noise/given.rc"
set -e

"$py" - "$work" "${#scenarios[@]}" "$gates" <<'PY'
import json, sys
work, n, gates = sys.argv[1], int(sys.argv[2]), sys.argv[3].split()
print("| scenario | detection F1 | TRA | DET | MOTA | link recall | ID switches | mostly tracked | divisions recovered / spurious | verdict | frame-to-frame only: TRA, MT | nearest neighbour at its best gate: MOTA, link recall (gate) |")
print("|---|---|---|---|---|---|---|---|---|---|---|---|")
for k in range(n):
    d = f"{work}/s{k}"
    name = open(f"{d}/name").read().strip()
    s = json.load(open(f"{d}/score.json"))["score"]
    b = json.load(open(f"{d}/base_score.json"))["score"]
    try:
        verdict = json.load(open(f"{d}/run/run.json")).get("verdict", {}).get("verdict", "–")
    except (OSError, ValueError):
        verdict = "–"
    nn = max(((json.load(open(f"{d}/nn/score_{g}.json"))["score"], g) for g in gates),
             key=lambda p: (p[0]["clear_mot"]["mota"], p[0]["link_recall"]))
    dv = s["divisions"]
    div = f'{dv["recovered"]}/{dv["reference_events"]}, {dv["spurious"]}' if dv["reference_events"] or dv["found_events"] else "–"
    print(f'| {name} | {s["detection_f1"]:.3f} | {s["tra"]:.4f} | {s["det"]:.4f} | {s["clear_mot"]["mota"]:.4f} '
          f'| {s["link_recall"]:.3f} | {s["clear_mot"]["identity_switches"]} | {s["tracks"]["mostly_tracked"]:.3f} '
          f'| {div} | {verdict} | {b["tra"]:.4f}, {b["tracks"]["mostly_tracked"]:.3f} '
          f'| {nn[0]["clear_mot"]["mota"]:.4f}, {nn[0]["link_recall"]:.3f} ({nn[1]} px) |')
print()
print("What broke the true tracks that are not mostly tracked (`caravan score`'s breakdown; tracks by main cause, events in brackets):")
print()
print("| scenario | tracks not mostly tracked | missed detection | merged with a neighbour | wrong link | division missed | division spurious |")
print("|---|---|---|---|---|---|---|")
causes = ["missed_detection", "merged_with_neighbour", "wrong_link", "division_missed", "division_spurious"]
for k in range(n):
    d = f"{work}/s{k}"
    b = json.load(open(f"{d}/score.json"))["score"]["breaks"]
    cells = " | ".join(f'{b["by_main_cause"][c]} ({b["events"][c]})' for c in causes)
    print(f'| {open(f"{d}/name").read().strip()} | {b["tracks_not_mostly_tracked"]} | {cells} |')
print()
rc = open(f"{work}/noise/defaults.rc").read().strip()
err = open(f"{work}/noise/defaults.err").read().strip().splitlines()
given_rc = open(f"{work}/noise/given.rc").read().strip()
try:
    given = json.load(open(f"{work}/noise/given/run.json"))
    per = given["counts"]["detections"] / given["counts"]["frames"]
    v = given.get("verdict", {}).get("verdict", "–")
except (OSError, ValueError, KeyError):
    per, v = float("nan"), "–"
print(f"Pure noise (20 frames, no nuclei): defaults exit {rc}" + (f" ({err[-1]})" if err else ""))
print(f"Pure noise with --diameter 14px: exit {given_rc}, {per:.0f} objects per frame, verdict {v}")
PY
