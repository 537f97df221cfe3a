#!/usr/bin/env bash
# The look-alike's cost against tracking, and its prediction against the truth, on the
# benchmark recording (1024 x 1024, 100 frames, ~300 nuclei of 14 px, seed 11, as
# benches/versus_python.sh). Alternating, ROUNDS times: `caravan track` with its defaults
# (no analysis), then `caravan lookalike` on that run. Prints the median of each, their ratio,
# and the predicted against the measured detection F1 and MOTA.
#
#   bash benches/lookalike.sh [WORK_DIR] [ROUNDS]     # ~1 min with 3 rounds
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-$(mktemp -d)}"
rounds="${2:-3}"
mkdir -p "$work"
cargo build --release --locked --quiet
bin="$PWD/target/release/caravan"
rec="$work/rec"
[ -f "$rec/recording.tif" ] || "$bin" synth -o "$rec" --size 1024x1024 --frames 100 --nuclei 300 \
  --compression none --seed 11 >/dev/null
rm -f "$work/track.times" "$work/lookalike.times"
for _ in $(seq "$rounds"); do
  /usr/bin/time -f "%e" -a -o "$work/track.times" "$bin" track "$rec/recording.tif" -o "$work/run" --force --no-analysis >/dev/null
  /usr/bin/time -f "%e" -a -o "$work/lookalike.times" "$bin" lookalike "$work/run" >"$work/lookalike.out"
done
median() { sort -n "$1" | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
t=$(median "$work/track.times"); l=$(median "$work/lookalike.times")
echo "track (defaults, 100 frames): $t s; lookalike: $l s; ratio $(echo "scale=2; $l / $t" | bc)"
"$bin" score --truth "$rec" --tracks "$work/run" | grep -E "F1|MOTA" | sed 's/^/measured: /'
grep -E "detection F1|MOTA" "$work/lookalike.out" | sed 's/^/predicted:/'
