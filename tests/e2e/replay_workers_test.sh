#!/usr/bin/env bash
# End-to-end: `replay --workers` and `[alert] screen` are speed switches only:
# the alert files must be byte-identical to a plain one-thread replay.
# Usage: replay_workers_test.sh TALLYD SOURCE_DIR
set -euo pipefail
tallyd=$1
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# 16 invented trap series, 150 days, counts from a fixed linear congruential
# generator around a weekly cycle, with spikes every 29 days on some series.
feed=$tmp/traps.csv
awk 'BEGIN {
  print "time,series,count,exposure";
  seed = 12345;
  for (d = 0; d < 150; d++) {
    day = strftime("%Y-%m-%dT06:00:00Z", 1735711200 + d * 86400, 1);
    for (s = 0; s < 16; s++) {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      u = seed / 2147483648;
      mean = (3 + s) * (1 + 0.3 * sin(2 * 3.14159265 * d / 7));
      c = int(mean + (u - 0.5) * 2 * sqrt(mean) + 0.5);
      if (c < 0) c = 0;
      if (d % 29 == 17 && s % 3 == 0) c = 4 * c + 12;
      printf "%s,trap-%02d,%d,1\n", day, s, c;
    }
  }
}' > "$feed"

cat > "$tmp/plain.toml" <<'TOML'
[model]
family = "quasipoisson"
min_history = 20
[alert]
alpha = 0.005
TOML
cat > "$tmp/screen.toml" <<'TOML'
[model]
family = "quasipoisson"
min_history = 20
[alert]
alpha = 0.005
screen = true
TOML

"$tallyd" replay "$feed" --config "$tmp/plain.toml" --alerts "$tmp/one.jsonl" --quiet
"$tallyd" replay "$feed" --config "$tmp/plain.toml" --alerts "$tmp/two.jsonl" --quiet --workers 2
"$tallyd" replay "$feed" --config "$tmp/screen.toml" --alerts "$tmp/screen.jsonl" --quiet
"$tallyd" replay "$feed" --config "$tmp/screen.toml" --alerts "$tmp/screen_two.jsonl" --quiet --workers 3
n=$(wc -l < "$tmp/one.jsonl")
[[ $n -ge 5 ]] || fail "expected at least 5 alerts on the spiky feed, got $n"
cmp -s "$tmp/one.jsonl" "$tmp/two.jsonl" || fail "--workers 2 changed the alerts"
cmp -s "$tmp/one.jsonl" "$tmp/screen.jsonl" || fail "[alert] screen changed the alerts"
cmp -s "$tmp/one.jsonl" "$tmp/screen_two.jsonl" || fail "screen with --workers 3 changed the alerts"

# The control across series decides per time step over all series: refused with a clear message.
printf '[fdr]\nrate = 0.05\n' > "$tmp/fdr.toml"
set +e
"$tallyd" replay "$feed" --config "$tmp/fdr.toml" --quiet --workers 2 >/dev/null 2>"$tmp/err.txt"
rc=$?
set -e
[[ $rc -eq 1 ]] || fail "--workers 2 with [fdr] exited $rc, expected 1"
grep -q "does not support" "$tmp/err.txt" || { cat "$tmp/err.txt"; fail "no message for --workers with [fdr]"; }
echo "ok"
