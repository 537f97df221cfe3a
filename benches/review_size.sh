#!/usr/bin/env bash
# The review page's size against the QC movie's, on 1024 x 1024 recordings of 100, 400 and
# 1000 frames (~300 nuclei of 14 px, synthesized; the seed of benches/versus_python.sh), each
# tracked with the defaults. Prints per recording: the review folder in MB (and its display
# frames, full-resolution frames and data), the GIF in MB with its frame count, and the
# movie-and-review pass's time from run.json.
#
#   bash benches/review_size.sh [WORK_DIR] [FRAME_COUNTS...]     # ~4 min for 100 400 1000
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-$(mktemp -d)}"
shift || true
counts=("${@:-100 400 1000}")
mkdir -p "$work"
cargo build --release --locked --quiet
bin="$PWD/target/release/caravan"
mb() { du -sb "$1" | awk '{printf "%.1f", $1 / 1e6}'; }
printf "%-7s %-10s %-8s %-8s %-6s %-8s %-11s %-10s\n" frames review_MB frames_MB full_MB data_MB gif_MB gif_frames pass_s
for n in ${counts[*]}; do
  rec="$work/rec$n"
  [ -f "$rec/recording.tif" ] || "$bin" synth -o "$rec" --size 1024x1024 --frames "$n" --nuclei 300 \
    --compression none --seed 11 >/dev/null
  run="$work/run$n"
  "$bin" track "$rec/recording.tif" -o "$run" --force --no-analysis >/dev/null
  gif_frames=$(python3 -c "
import sys
data = open(sys.argv[1], 'rb').read()
print(data.count(b'\x00\x21\xf9\x04'))" "$run/qc_movie.gif")
  pass_s=$(python3 -c "import json,sys; print(round(json.load(open(sys.argv[1]))['timings_s']['movie'], 2))" "$run/run.json")
  printf "%-7s %-10s %-8s %-8s %-6s %-8s %-11s %-10s\n" "$n" "$(mb "$run/review")" "$(mb "$run/review/frames")" \
    "$(mb "$run/review/full")" "$(mb "$run/review/data")" "$(mb "$run/qc_movie.gif")" "$gif_frames" "$pass_s"
done
