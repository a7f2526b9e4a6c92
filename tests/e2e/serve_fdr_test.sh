#!/usr/bin/env bash
# End-to-end: `tallyd serve` with [fdr] releases its open time step by rule (see serve_fdr.py).
# Usage: serve_fdr_test.sh TALLYD SOURCE_DIR
set -euo pipefail
exec python3 "$(dirname "$0")/serve_fdr.py" "$1" "$2"
