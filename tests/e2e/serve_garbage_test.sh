#!/usr/bin/env bash
# End-to-end: a million malformed lines over TCP and in a followed file (see serve_garbage.py).
# Usage: serve_garbage_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/serve_garbage.py" "$1" "$2"
