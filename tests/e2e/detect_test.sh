#!/usr/bin/env bash
# End-to-end: the detectors beside the bound, through the real binary.
# Usage: detect_test.sh TALLYD SOURCE_DIR
set -euo pipefail
tallyd=$1
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# Weekly counts around 4 for 40 weeks, then a dead trap (zeros) in trap-a;
# trap-b keeps counting and has one spike in week 42.
feed=$tmp/traps.csv
{
  echo "time,series,count"
  pattern=(3 5 4 6 2 4 5 3 4 5)
  for w in $(seq 0 47); do
    t=$(( 1735776000 + w * 604800 ))  # 2025-01-02T00:00:00Z plus w weeks
    a=${pattern[$((w % 10))]}; [[ $w -ge 40 ]] && a=0
    b=${pattern[$(((w + 3) % 10))]}; [[ $w -eq 42 ]] && b=40
    echo "$t,trap-a,$a"
    echo "$((t + 60)),trap-b,$b"
  done
} > "$feed"

cat > "$tmp/detect.toml" <<'TOML'
[model]
family = "poisson"
min_history = 20
[detect]
low_run = true
shift = true
TOML
"$tallyd" replay "$feed" --config "$tmp/detect.toml" --alerts "$tmp/a1.jsonl" -q
grep -q '"series":"trap-a".*"direction":"low".*"detector":"low_run","statistic":' "$tmp/a1.jsonl" \
  || { cat "$tmp/a1.jsonl"; fail "no low_run alert for the dead trap"; }
# Mean about 4.1: P(Y <= 1) = 0.085 (Poisson) is near the 0.1 quantile, so
# c is 1 (three zeros: 0.085^3 = 6e-4) or, with parameter uncertainty, 0
# (two zeros: 0.017^2 = 3e-4): the first low_run alert is at the 2nd or 3rd silent week.
first=$(grep '"detector":"low_run"' "$tmp/a1.jsonl" | head -1 | grep -oE '"time":"[^"]+"')
[[ $first == '"time":"2025-10-16T00:00:00Z"' || $first == '"time":"2025-10-23T00:00:00Z"' ]] \
  || { cat "$tmp/a1.jsonl"; fail "first low_run alert at $first"; }
grep -q '"series":"trap-b".*"count":40.*"detector":"bound"' "$tmp/a1.jsonl" || fail "no bound alert for the spike"
# Determinism: the same replay gives a byte-identical file.
"$tallyd" replay "$feed" --config "$tmp/detect.toml" --alerts "$tmp/a2.jsonl" -q
cmp -s "$tmp/a1.jsonl" "$tmp/a2.jsonl" || fail "two replays differ"

# Control across series: the spike is decided when its week closes, labelled bound_fdr.
cat > "$tmp/fdr.toml" <<'TOML'
[model]
family = "poisson"
min_history = 20
[alert]
direction = "high"
[fdr]
rate = 0.05
step = "7d"
TOML
"$tallyd" replay "$feed" --config "$tmp/fdr.toml" --alerts "$tmp/f.jsonl" -q
grep -q '"series":"trap-b".*"count":40.*"detector":"bound_fdr"' "$tmp/f.jsonl" || { cat "$tmp/f.jsonl"; fail "no bound_fdr alert"; }
if grep -q '"detector":"bound"' "$tmp/f.jsonl"; then fail "per-record bound alerts written while [fdr] is on"; fi

# A bad detector key is refused with file, line and key.
printf '[detect]\nshift_factor = 0.5\n' > "$tmp/bad.toml"
set +e
"$tallyd" replay "$feed" --config "$tmp/bad.toml" -q 2>"$tmp/err.txt"
rc=$?
set -e
[[ $rc -eq 1 ]] || fail "bad config exited $rc"
grep -qF "bad.toml:2: detect.shift_factor: must be a number above 1" "$tmp/err.txt" || { cat "$tmp/err.txt"; fail "message"; }
echo "detect e2e: ok"
