#!/usr/bin/env bash
# Installs what is missing (with headless Chromium for the HTML report test), then runs the whole test suite (unit, integration, doc tests; the doc tests of the scenes crate too).
set -euo pipefail
cd "$(dirname "$0")/.."
./tools/setup.sh --browser
cargo test --locked --all-targets "$@"
cargo test --locked --workspace --doc
