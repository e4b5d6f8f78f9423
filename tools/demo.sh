#!/usr/bin/env bash
# Installs what is missing, builds twistmark, and analyses the bundled demo clip
# (a scene from the project's own invented test bench, rendered with known truth).
set -euo pipefail
cd "$(dirname "$0")/.."
./tools/setup.sh
cargo build --release --locked
demo=fixtures/demo
./target/release/twistmark info "$demo/clip_h264.mp4"
./target/release/twistmark analyze "$demo/clip_h264.mp4" --rig "$demo/rig.json" --out demo-out --force "$@"
echo
echo "Results are in demo-out/ (report.json, blows.csv, trace.csv and plots)."
echo "The demo's true values are in $demo/truth.json, for comparison."
