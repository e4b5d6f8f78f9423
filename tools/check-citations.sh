#!/usr/bin/env bash
# Docs, code and tests cite publications directly: no file outside the repository and no
# tracker numbers, which a reader of the project cannot look up. Fails listing each offending
# line. Run from anywhere: CI runs it before building anything.
set -euo pipefail
cd "$(dirname "$0")/.."
if hits=$(grep -rnE 'facts\.md|[Ii]ssues?[ -]#?[0-9]' docs src tests benches tools README.md DEVELOPERS.md fuzz/README.md); then
    echo "$hits" >&2
    echo "check-citations: cite the publication (author, title, table or equation) or the repository's own docs instead of the lines above." >&2
    exit 1
fi
echo "check-citations: no references to outside files or tracker numbers"
