#!/usr/bin/env bash
# Speed and memory benchmark (benches/pipeline.rs): decode alone vs the full
# `twistmark analyze` on the same rendered 1280x720 H.264 (monochrome and colour) and FFV1 clips, and peak RSS for a
# short clip and one ten times longer. Prints the ratios and the targets; never fails on timing.
#
#   tools/bench.sh            short mode (150 / 1,500 frames; what CI may run)
#   tools/bench.sh --full     2,000 / 20,000 frames (renders and encodes about 45,000 frames
#                             on the first run; cached in target/bench-clips/ afterwards)
#   tools/bench.sh --frames N N / 10 N frames
#   add --runs R              R alternating decode/analyze pairs per clip (default 3); the
#                             verdict uses the median pair, the fastest of each is shown too
#   add --codecs h264         only these clips (comma list of h264, h264c (colour), ffv1); e.g. --full --codecs h264
#                             measures the 20,000-frame RSS without the 5.8 GB FFV1 clip
#
# Needs /usr/bin/time (Debian package 'time'); uses the ffmpeg command as an outside
# reference when it is installed.
set -euo pipefail
cd "$(dirname "$0")/.."
args=("$@")
[ ${#args[@]} -eq 0 ] && args=(--short)
exec cargo bench --bench pipeline -- "${args[@]}"
