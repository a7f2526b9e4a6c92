#!/usr/bin/env bash
# End-to-end: kill -9 `tallyd serve` at random moments while it follows a
# growing feed; the final alert log must equal an uninterrupted replay.
# Usage: serve_crash_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/serve_crash.py" "$1" "$2"
