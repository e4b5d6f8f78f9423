#!/usr/bin/env bash
# Installs what is missing, then runs the whole test suite (unit, integration, doc tests).
set -euo pipefail
cd "$(dirname "$0")/.."
./tools/setup.sh
cargo test --locked --all-targets "$@"
cargo test --locked --doc
