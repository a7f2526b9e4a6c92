#!/usr/bin/env bash
# End-to-end: `tallyd serve` on a large followed-file backlog: the status
# endpoint answers while lines wait to be judged, a graceful stop in the middle
# judges what was read and checkpoints it, UDP datagrams are each counted as a
# record or as dropped, and the alert log equals a replay.
# Usage: serve_backlog_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/serve_backlog.py" "$1" "$2"
