#!/usr/bin/env bash
# End-to-end: late and duplicate records ([arrival]) and silence alerts
# ([detect] silence) in `tallyd replay` and `tallyd serve` (see arrival_silence.py).
# Usage: arrival_silence_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/arrival_silence.py" "$1" "$2"
