#!/usr/bin/env bash
# End-to-end: `tallyd serve` on real files and sockets (see serve_sources.py).
# Usage: serve_sources_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/serve_sources.py" "$1" "$2"
