#!/usr/bin/env bash
# End-to-end: episodes in the alert log of `tallyd replay` (the rule of issue 3:
# an alert opens an episode for its series and direction, further alerts
# continue it, a configured number of records without an alert in that
# direction closes it). Expected lines are worked out by hand from that rule.
# Usage: episodes_test.sh TALLYD SOURCE_DIR
set -euo pipefail
tallyd=$1
src=$2
here=$(dirname "$0")
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# --- 1. A hand-made feed: weekly counts 2-6 in trap-b, spikes of 40 in weeks 30, 31 and 36.
feed=$tmp/traps.csv
{
  echo "time,series,count"
  pattern=(3 5 4 6 2 4 5 3 4 5)
  for w in $(seq 0 41); do
    b=${pattern[$((w % 10))]}
    [[ $w -eq 30 || $w -eq 31 || $w -eq 36 ]] && b=40
    echo "$(( 1735776000 + w * 604800 )),trap-b,$b"   # 2025-01-02T00:00:00Z plus w weeks
  done
} > "$feed"
cat > "$tmp/ep.toml" <<'TOML'
[model]
family = "poisson"
min_history = 20
[alert]
direction = "high"
episode_close_records = 3
TOML
"$tallyd" replay "$feed" --config "$tmp/ep.toml" --alerts "$tmp/a.jsonl" > "$tmp/text.txt" 2>"$tmp/err.txt" \
  || { cat "$tmp/err.txt"; fail "replay exited non-zero"; }
python3 - "$tmp/a.jsonl" <<'PY' || { cat "$tmp/a.jsonl"; fail "episode lines of the hand-made feed"; }
import json, sys
lines = [json.loads(l) for l in open(sys.argv[1])]
# Week w is 2025-01-02 plus w weeks: week 30 = 2025-07-31, 31 = 08-07, 34 = 08-28, 36 = 09-11, 39 = 10-02.
want = [
    ("alert", "2025-07-31T00:00:00Z", "trap-b/high/1", "new"),
    ("alert", "2025-08-07T00:00:00Z", "trap-b/high/1", "ongoing"),
    ("closed", "trap-b/high/1", "2025-07-31T00:00:00Z", "2025-08-07T00:00:00Z", "2025-08-28T00:00:00Z", 2, 3),
    ("alert", "2025-09-11T00:00:00Z", "trap-b/high/2", "new"),
    ("closed", "trap-b/high/2", "2025-09-11T00:00:00Z", "2025-09-11T00:00:00Z", "2025-10-02T00:00:00Z", 1, 3),
]
got = []
for o in lines:
    if "episode_closed" in o:
        got.append(("closed", o["episode_closed"], o["opened"], o["last_alert"], o["closed"], o["alerts"], o["quiet_records"]))
    else:
        assert o["count"] == 40 and o["detector"] == "bound", o
        got.append(("alert", o["time"], o["episode"], o["episode_state"]))
assert got == want, "\n%s\n!=\n%s" % (got, want)
PY
python3 "$here/episode_check.py" "$tmp/a.jsonl" 3 >/dev/null || fail "episode check of the hand-made feed"
grep -qF "2025-07-31T00:00:00Z trap-b HIGH count 40 > upper" "$tmp/text.txt" || { cat "$tmp/text.txt"; fail "no readable alert line"; }
grep -qF "[episode trap-b/high/1 new]" "$tmp/text.txt" || fail "the readable alert line lacks its episode"
grep -qF "2025-08-28T00:00:00Z trap-b HIGH episode trap-b/high/1 closed: 2 alerts from 2025-07-31T00:00:00Z to 2025-08-07T00:00:00Z, then 3 records with no high alert" \
  "$tmp/text.txt" || { cat "$tmp/text.txt"; fail "no readable closing line"; }
grep -qF "3 alerts (3 high, 0 low)" "$tmp/err.txt" || { cat "$tmp/err.txt"; fail "summary counts closings as alerts"; }

# --- 2. The demo feed: two replays byte-identical, episode keys consistent, some closed.
"$tallyd" replay "$src/demo_feeds/moth_traps.csv" --config "$src/config/moth_traps.toml" --alerts "$tmp/m1.jsonl" -q
"$tallyd" replay "$src/demo_feeds/moth_traps.csv" --config "$src/config/moth_traps.toml" --alerts "$tmp/m2.jsonl" -q
cmp -s "$tmp/m1.jsonl" "$tmp/m2.jsonl" || fail "two replays of the demo feed differ"
out=$(python3 "$here/episode_check.py" "$tmp/m1.jsonl" 3) || fail "episode check of the demo feed"
python3 - "$tmp/m1.jsonl" <<'PY' || fail "the demo feed closes no episode: the check would prove little"
import sys
assert sum('"episode_closed"' in l for l in open(sys.argv[1])) > 0
PY
echo "demo feed: $out"

# --- 3. A bad episode_close_records is refused with file, line and key.
printf '[alert]\nepisode_close_records = 0\n' > "$tmp/bad.toml"
set +e
"$tallyd" replay "$feed" --config "$tmp/bad.toml" -q 2>"$tmp/bad.txt"
rc=$?
set -e
[[ $rc -eq 1 ]] || fail "bad config exited $rc"
grep -qF "bad.toml:2: alert.episode_close_records: must be between 1 and 10000" "$tmp/bad.txt" || { cat "$tmp/bad.txt"; fail "message"; }
echo "episodes e2e: ok"
