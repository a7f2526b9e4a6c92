#!/usr/bin/env bash
# End-to-end: the real binary on real files. Usage: replay_test.sh TALLYD SOURCE_DIR
set -euo pipefail
tallyd=$1
src=$2
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# --- 1. Every rejection reason: a clear message naming file and line; valid records around it processed.
feed=$tmp/traps.csv
{
  echo "time,series,count,exposure,temperature_c"
  for d in $(seq 10 29); do echo "2025-06-${d}T06:00:00Z,trap-a,$((d % 4 + 3)),1,18.5"; done
  echo "2025-06-30T06:00:00Z,trap-a,5,1,18.0"
  echo "not-a-time,trap-a,5,1,18.0"                       # line 23: bad_time
  echo "2025-07-01T06:00:00Z,trap-a,-3,1,18.0"            # line 24: bad_count (negative)
  echo "2025-07-02T06:00:00Z,trap-a,2.5,1,18.0"           # line 25: bad_count (non-integer)
  echo "2025-07-03T06:00:00Z,trap-a,4,abc,18.0"           # line 26: bad_exposure
  echo "2025-07-04T06:00:00Z,trap-a,4,0,18.0"             # line 27: zero_exposure
  echo "2025-07-05T06:00:00Z,trap-a,4,1,$(head -c 300 /dev/zero | tr '\0' 9)"  # line 28: line_too_long
  echo "2025-07-06T06:00:00Z,trap-a,4,1"                  # line 29: bad_format (column count)
  echo "2025-07-07T06:00:00Z,trap-a,6,1,19.0"             # line 30: valid
} > "$feed"
cat > "$tmp/monitor.toml" <<'TOML'
[model]
family = "poisson"
covariates = ["temperature_c"]
min_history = 10
TOML
set +e
"$tallyd" replay "$feed" --config "$tmp/monitor.toml" --alerts "$tmp/alerts.jsonl" --rejects "$tmp/rejects.txt" \
  --max-line-bytes 200 >"$tmp/out.txt" 2>"$tmp/err.txt"
rc=$?
set -e
[[ $rc -eq 0 ]] || { cat "$tmp/err.txt"; fail "replay with bad lines exited $rc"; }
expect_reject() {
  grep -qF "$1" "$tmp/rejects.txt" || { cat "$tmp/rejects.txt"; fail "no rejection line containing: $1"; }
  grep -qF "$1" "$tmp/err.txt" || fail "the terminal did not show: $1"
}
expect_reject "traps.csv:23: bad_time: time 'not-a-time'"
expect_reject "traps.csv:24: bad_count:"
expect_reject "traps.csv:25: bad_count:"
expect_reject "traps.csv:26: bad_exposure:"
expect_reject "traps.csv:27: zero_exposure:"
expect_reject "traps.csv:28: line_too_long:"
expect_reject "traps.csv:29: bad_format:"
[[ $(wc -l < "$tmp/rejects.txt") -eq 7 ]] || fail "expected 7 rejections, got $(wc -l < "$tmp/rejects.txt")"
# 21 valid rows before the junk and 1 after: all accepted (21 + 1 = 22 learned or judged).
grep -qE "29 records: [0-9]+ judged, [0-9]+ warming up, 7 rejected" "$tmp/err.txt" || { cat "$tmp/err.txt"; fail "summary counts"; }
judged=$(grep -oE '[0-9]+ judged' "$tmp/err.txt" | grep -oE '^[0-9]+')
warm=$(grep -oE '[0-9]+ warming up' "$tmp/err.txt" | grep -oE '^[0-9]+')
[[ $((judged + warm)) -eq 22 ]] || fail "expected 22 accepted records, got $judged + $warm"

# --- 2. A covariate the feed lacks: each record refused, named.
cat > "$tmp/humid.toml" <<'TOML'
[model]
covariates = ["humidity_pct"]
TOML
"$tallyd" replay "$feed" --config "$tmp/humid.toml" --rejects "$tmp/rej2.txt" -q >/dev/null 2>&1
grep -qF "traps.csv:2: missing_covariate: series 'trap-a' needs covariate 'humidity_pct'" "$tmp/rej2.txt" \
  || fail "missing covariate message"

# --- 3. Determinism: two replays with simulated bounds give byte-identical alert files.
cat > "$tmp/sim.toml" <<'TOML'
[model]
family = "quasipoisson"
min_history = 15
[[model.seasons]]
period = "1y"
harmonics = 1
[alert]
method = "simulate"
draws = 5000
alpha = 0.01
seed = 424242
TOML
"$tallyd" replay "$src/demo_feeds/moth_traps.csv" --config "$tmp/sim.toml" --alerts "$tmp/a1.jsonl" -q
"$tallyd" replay "$src/demo_feeds/moth_traps.csv" --config "$tmp/sim.toml" --alerts "$tmp/a2.jsonl" -q
[[ -s "$tmp/a1.jsonl" ]] || fail "the demo replay raised no alerts at all"
cmp -s "$tmp/a1.jsonl" "$tmp/a2.jsonl" || fail "two replays differ"

# --- 4. Exit codes and messages for usage and config errors.
printf '[alert]\nalpha = 2\n' > "$tmp/bad.toml"
set +e
"$tallyd" replay "$feed" --config "$tmp/bad.toml" 2>"$tmp/err4.txt" >/dev/null; rc=$?
set -e
[[ $rc -eq 1 ]] || fail "bad config should exit 1, got $rc"
grep -qF "bad.toml:2: alert.alpha:" "$tmp/err4.txt" || fail "bad config message: $(cat "$tmp/err4.txt")"
printf 'when,series,count\n2025-01-01T00:00:00Z,a,1\n' > "$tmp/nohead.csv"
set +e
"$tallyd" replay "$tmp/nohead.csv" 2>"$tmp/err5.txt" >/dev/null; rc=$?
set -e
[[ $rc -eq 2 ]] || fail "a feed without a time column should exit 2, got $rc"
grep -qF "nohead.csv" "$tmp/err5.txt" || fail "header error should name the file"
echo "replay e2e: all checks passed"
