#!/usr/bin/env bash
# End-to-end: `tallyd tune` on a seeded simulated history with injected
# episodes of known size. Its figures must equal a direct count from the
# alerts file of a plain replay at each alpha, and the recommended setting
# must honour the false-alert budget on the same data.
# Usage: tune_sim_test.sh TALLYD SOURCE_DIR
set -euo pipefail
tallyd=$1
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# --- Simulated history: 6 series, one record a day for 400 days, Poisson
# counts with mean 6 per unit exposure (exposure 1-3); 8 episodes of 6 days
# in which the mean is 4 times higher (even-numbered episodes) or 1.6 times
# higher (odd-numbered ones, hard to catch at small alpha): the known sizes.
python3 - "$tmp" <<'PY'
import math, random, sys
out = sys.argv[1]
rng = random.Random(20261201)
def poisson(mu):  # Knuth's multiplication method (Knuth 1969, TAOCP vol. 2, 3.4.1)
    l, k, p = math.exp(-mu), 0, 1.0
    while True:
        p *= rng.random()
        if p <= l: return k
        k += 1
episodes = [("s1", 120), ("s1", 300), ("s2", 200), ("s3", 90), ("s3", 250), ("s4", 333), ("s5", 150), ("s5", 380)]
def day(d): return "2024-%s" % d
import datetime
t0 = datetime.datetime(2024, 1, 1, 6, 0, 0)
def stamp(d): return (t0 + datetime.timedelta(days=d)).strftime("%Y-%m-%dT%H:%M:%SZ")
with open(out + "/feed.csv", "w") as f:
    f.write("time,series,count,exposure\n")
    for d in range(400):
        for s in ["s0", "s1", "s2", "s3", "s4", "s5"]:
            e = 1 + (d * 7 + int(s[1])) % 3
            mu = 6.0 * e
            for i, (es, ed) in enumerate(episodes):
                if s == es and ed <= d < ed + 6: mu *= 4 if i % 2 == 0 else 1.6
            f.write("%s,%s,%d,%d\n" % (stamp(d), s, poisson(mu), e))
with open(out + "/events.csv", "w") as f:
    f.write("series,start,end\n")
    for s, d in episodes:
        # the episode covers its six daily records exactly
        f.write("%s,%s,%s\n" % (s, stamp(d), stamp(d + 5)))
PY
cat > "$tmp/base.toml" <<'TOML'
[model]
family = "poisson"
min_history = 30
window = "200d"
TOML

"$tallyd" tune "$tmp/feed.csv" --config "$tmp/base.toml" --events "$tmp/events.csv" --alphas 1e-2,1e-3,1e-4,1e-5 \
  --max-false-per-year 1 --rows "$tmp/rows.csv" --snippet "$tmp/snippet.toml" --report "$tmp/tune.html" \
  >"$tmp/out.txt" 2>"$tmp/err.txt" || { cat "$tmp/err.txt"; fail "tune exited non-zero"; }
grep -q "records/s" "$tmp/err.txt" && fail "progress shown although stderr is not a terminal"
grep -q "Recommended (rank 1)" "$tmp/out.txt" || { cat "$tmp/out.txt"; fail "no recommendation printed"; }
[[ -s "$tmp/tune.html" ]] || fail "no tune report"
grep -q "chosen: alpha" "$tmp/tune.html" || fail "the report does not mark the chosen point"

# --- Direct count from the alerts file of a plain replay at each alpha.
for alpha in 1e-2 1e-3 1e-4 1e-5; do
  { cat "$tmp/base.toml"; printf '[alert]\nalpha = %s\n' "$alpha"; } > "$tmp/a.toml"
  "$tallyd" replay "$tmp/feed.csv" --config "$tmp/a.toml" --alerts "$tmp/alerts_$alpha.jsonl" -q
  python3 - "$tmp" "$alpha" <<'PY' || fail "tune figures differ from the direct count at alpha $alpha"
import csv, json, sys, datetime
tmp, alpha = sys.argv[1], float(sys.argv[2])
def t(s): return datetime.datetime.strptime(s, "%Y-%m-%dT%H:%M:%SZ")
eps = [(r["series"], t(r["start"]), t(r["end"])) for r in csv.DictReader(open(tmp + "/events.csv"))]
# Episode closing lines (key "episode_closed") are not alerts.
alerts = [a for a in (json.loads(l) for l in open(tmp + "/alerts_%s.jsonl" % sys.argv[2])) if "episode_closed" not in a]
assert len(alerts) < sum(1 for l in open(tmp + "/alerts_%s.jsonl" % sys.argv[2])), "no closing line: the filter is untested"
def inside(a): return [e for e in eps if e[0] == a["series"] and e[1] <= t(a["time"]) <= e[2]]
false_alerts = sum(1 for a in alerts if not inside(a))
first = {}
for a in alerts:
    for e in inside(a):
        first[e] = min(first.get(e, t(a["time"])), t(a["time"]))
hit = len(first)
in_ep = sum(1 for a in alerts if inside(a))
# Judged span: records 0..29 of each series warm up (min_history 30), so
# judging starts on day 30 and ends on day 399.
series_years = 6 * (399 - 30) / 365.25
rows = [r for r in csv.DictReader(open(tmp + "/rows.csv")) if float(r["alpha"]) == alpha]
assert len(rows) == 1, rows
r = rows[0]
def same(name, want):
    got = float(r[name])
    if abs(got - want) > 1e-9 * max(1.0, abs(want)):
        sys.exit("alpha %g: %s: tune says %s, direct count %s" % (alpha, name, r[name], want))
same("alerts", len(alerts))
same("false_alerts", false_alerts)
same("episodes_hit", hit)
same("episodes_judged", len(eps))
same("episode_records", 6 * len(eps))
same("episode_records_alerted", in_ep)
same("series_years", series_years)
same("false_per_series_year", false_alerts / series_years)
same("detection", hit / len(eps))
delays = sorted((first[e] - e[1]).total_seconds() / 86400 for e in first)
if delays:
    h = (len(delays) - 1) * 0.5  # type-7 median (Hyndman & Fan 1996, definition 7)
    lo = int(h); hi = min(lo + 1, len(delays) - 1)
    same("delay_median_days", delays[lo] + (h - lo) * (delays[hi] - delays[lo]))
print("alpha %g: %d alerts, %d false, %d/%d episodes" % (alpha, len(alerts), false_alerts, hit, len(eps)))
PY
done

# --- The recommended setting honours the budget, by the direct count.
python3 - "$tmp" <<'PY' || fail "recommended setting breaks the budget"
import csv, json, sys, datetime, re
tmp = sys.argv[1]
rows = list(csv.DictReader(open(tmp + "/rows.csv")))
best = rows[0]
assert best["within_budget"] == "yes", best
alpha = float(best["alpha"])
snippet = open(tmp + "/snippet.toml").read()
assert re.search(r"^alpha = %s$" % re.escape("%g" % alpha), snippet, re.M), snippet
assert "licensed practitioners" in snippet
def t(s): return datetime.datetime.strptime(s, "%Y-%m-%dT%H:%M:%SZ")
eps = [(r["series"], t(r["start"]), t(r["end"])) for r in csv.DictReader(open(tmp + "/events.csv"))]
alerts = [a for a in (json.loads(l) for l in open(tmp + "/alerts_%s.jsonl" % ("%.0e" % alpha).replace("e-0", "e-")))
          if "episode_closed" not in a]
false_alerts = sum(1 for a in alerts if not any(e[0] == a["series"] and e[1] <= t(a["time"]) <= e[2] for e in eps))
rate = false_alerts / (6 * (399 - 30) / 365.25)
assert rate <= 1.0, rate
# and it is the most sensitive within budget: every row detecting more breaks the budget
for r in rows:
    if float(r["detection"]) > float(best["detection"]): assert r["within_budget"] == "no", r
print("chosen alpha %g: %.3f false alerts per series-year (budget 1)" % (alpha, rate))
PY

# --- On a terminal (a pseudo-terminal from util-linux's script), progress is drawn on stderr.
if command -v script >/dev/null; then
  script -qec "'$tallyd' tune '$tmp/feed.csv' --config '$tmp/base.toml' --alphas 1e-3 >/dev/null" /dev/null \
    >"$tmp/tty.txt" 2>&1 || fail "tune on a terminal"
  grep -q "records/s" "$tmp/tty.txt" || { cat "$tmp/tty.txt"; fail "no progress line on a terminal"; }
fi

# --- An empty events file: only false-alert figures.
echo "series,start,end" > "$tmp/none.csv"
"$tallyd" tune "$tmp/feed.csv" --config "$tmp/base.toml" --events "$tmp/none.csv" --alphas 1e-3 --rows "$tmp/none_rows.json" \
  >"$tmp/none_out.txt" 2>&1 || fail "tune with an empty events file"
grep -q "No known episodes given" "$tmp/none_out.txt" || fail "no note about the missing episodes"
python3 -c "import json,sys; d=json.load(open(sys.argv[1])); r=d['rows'][0]; assert r['episodes_judged']==0 and r['detection'] is None and r['alerts']>0, r" \
  "$tmp/none_rows.json" || fail "rows of the empty-events run"

# --- A bad events file: refused, naming file and line.
printf 'series,start,end\ns1,2024-02-01T00:00:00Z,2024-02-02T00:00:00Z\ns2,soon,2024-02-02T00:00:00Z\n' > "$tmp/bad.csv"
set +e
"$tallyd" tune "$tmp/feed.csv" --events "$tmp/bad.csv" >/dev/null 2>"$tmp/bad_err.txt"
rc=$?
set -e
[[ $rc -eq 1 ]] || fail "bad events file: exit $rc, expected 1"
grep -q "bad.csv:3: start:" "$tmp/bad_err.txt" || { cat "$tmp/bad_err.txt"; fail "bad events message"; }
echo "tune_sim_test: ok"
