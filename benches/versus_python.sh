#!/usr/bin/env bash
# End-to-end speed against the plain scientific-Python way (benches/python_baseline.py:
# scipy + scikit-image, frames segmented by two worker processes, as a scientist with two cores
# would run it), on the same synthetic recording, in the same run, alternating, with the
# accuracies against the truth. Caravan is timed as a user runs it: `caravan track` with its
# defaults (tracks, tables, QC movie, review page, analysis and report), and tracks only
# (`--no-movie --no-review --no-analysis`).
#
#   bash benches/versus_python.sh [WORK_DIR] [ROUNDS]     # ~4 min with 3 rounds
#
# Prints the median wall time of each, their ratio, the peak resident memory of each
# (/usr/bin/time), and detection F1, TRA and link recall of each (caravan score).
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-$(mktemp -d)}"
rounds="${2:-3}"
mkdir -p "$work"
cargo build --release --locked --quiet
bin="$PWD/target/release/caravan"
venv="${TMPDIR:-/tmp}/caravan-bench-venv"
[ -x "$venv/bin/python" ] || python3 -m venv "$venv"
"$venv/bin/pip" install --quiet numpy==2.4.6 scipy==1.17.1 scikit-image==0.26.0 tifffile==2026.3.3

rec="$work/rec"
[ -f "$rec/recording.tif" ] || "$bin" synth -o "$rec" --size 1024x1024 --frames 100 --nuclei 300 \
  --compression none --seed 11 >/dev/null

measure() { # label, command...: appends "seconds kilobytes" to $work/label.times
  local label=$1; shift
  /usr/bin/time -f "%e %M" -o "$work/$label.last" "$@" >/dev/null
  cat "$work/$label.last" >>"$work/$label.times"
}
rm -f "$work"/caravan.times "$work"/tracks_only.times "$work"/python.times
for _ in $(seq "$rounds"); do
  # Caravan with its defaults (diameter and step measured from the recording, as users run
  # it); the plain script has no estimate, so it is given the synthetic diameter.
  measure caravan "$bin" track "$rec/recording.tif" -o "$work/caravan_run" --force
  measure tracks_only "$bin" track "$rec/recording.tif" -o "$work/tracks_only_run" \
    --no-movie --no-review --no-analysis --force
  measure python "$venv/bin/python" benches/python_baseline.py "$rec/recording.tif" "$work/python_tracks.csv" 14 2
done
"$bin" score --truth "$rec" --tracks "$work/caravan_run" -o "$work/caravan_score.json" >/dev/null
"$bin" score --truth "$rec" --tracks "$work/python_tracks.csv" -o "$work/python_score.json" >/dev/null

python3 - "$work" "$rounds" <<'PY'
import json, statistics, sys, os, platform
work, rounds = sys.argv[1], int(sys.argv[2])
def times(label):
    rows = [l.split() for l in open(f"{work}/{label}.times") if l.strip()]
    return statistics.median(float(r[0]) for r in rows), max(int(r[1]) for r in rows) / 1024
(ct, cm), (ot, om), (pt, pm) = times("caravan"), times("tracks_only"), times("python")
cs = json.load(open(f"{work}/caravan_score.json"))["score"]
ps = json.load(open(f"{work}/python_score.json"))["score"]
cpu = next((l.split(":", 1)[1].strip() for l in open("/proc/cpuinfo") if l.startswith("model name")), platform.processor())
print(f"machine: {os.cpu_count()} cores, {cpu}; {rounds} rounds, 100 frames of 1024x1024 px, ~300 nuclei")
print("| | median wall time | peak memory | detection F1 | TRA | link recall |")
print("|---|---|---|---|---|---|")
rows = (("caravan track (defaults: all outputs)", ct, cm, cs), ("caravan track, tracks only", ot, om, cs),
        ("Python script, 2 worker processes", pt, pm, ps))
for name, t, m, s in rows:
    print(f"| {name} | {t:.2f} s | {m:.0f} MB | {s['detection_f1']:.4f} | {s['tra']:.4f} | {s['link_recall']:.4f} |")
print(f"speed ratio (Python / caravan): {pt / ct:.1f}x with every output, {pt / ot:.1f}x tracks only")
PY
