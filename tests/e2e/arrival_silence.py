"""Late and duplicate records and silence alerts, through the real binary.

References: a replay of the same records in time order (late records within
the tolerance must give its alerts exactly), and `tallyd replay` of the same
file for `tallyd serve` (byte-identical alert log, also across a kill -9).
The feed is invented here: three daily series, one silent for two weeks."""
import json
import os
import random
import subprocess
import sys
import tempfile
import time

from serve_harness import Server, fail, followed_file_tables, replay, same_file

tallyd, src = sys.argv[1], sys.argv[2]
work = tempfile.mkdtemp(prefix="tallyd-arrival-")
rng = random.Random(20261202)

MODEL = """
[model]
family = "poisson"
min_history = 14

[alert]
alpha = 0.01

[detect]
silence = true
silence_multiple = 3
silence_min_gaps = 5

[arrival]
late_tolerance = "2d"
duplicates = "refuse"
"""


def day(d, hour=6):
    """RFC 3339 time of day d (0 = 2025-04-01) at `hour` UTC."""
    return time.strftime("%Y-%m-%dT%H:00:00Z", time.gmtime(1743465600 + d * 86400 + hour * 3600))


# (day, series, count): gauge-c is silent from day 50 to day 64.
rows = []
for d in range(80):
    for i, s in enumerate(["gauge-a", "gauge-b", "gauge-c"]):
        if s == "gauge-c" and 50 <= d < 65:
            continue
        mean = [8, 20, 5][i]
        # Poisson draws by inversion (Knuth's product method); invented counts.
        k, p, limit = 0, rng.random(), pow(2.718281828459045, -mean)
        while p > limit:
            k += 1
            p *= rng.random()
        if (s, d) in (("gauge-a", 40), ("gauge-b", 70)):
            k = 4 * mean + 20
        rows.append((d, i, s, k))
HEADER = "time,series,count,exposure\n"


def line(r):
    return "%s,%s,%d,1\n" % (day(r[0], 6 + r[1]), r[2], r[3])


ordered = os.path.join(work, "ordered.csv")
with open(ordered, "w") as f:
    f.write(HEADER + "".join(line(r) for r in rows))
# Late within the tolerance: each pair of days arrives newer day first. Then
# a duplicate of a judged record and a record far too late, both refused.
shuffled_lines = []
for d in range(0, 80, 2):
    shuffled_lines += [line(r) for r in rows if r[0] == d + 1] + [line(r) for r in rows if r[0] == d]
    if d == 40:
        # gauge-a's day 39 again: within 2 days of its newest (day 41) but already judged.
        dup_line_no = len(shuffled_lines) + 2  # the header is line 1
        shuffled_lines += [line(r) for r in rows if r[0] == 39 and r[2] == "gauge-a"]
    if d == 44:
        shuffled_lines.append("%s,gauge-b,9,1\n" % day(10))  # 30 days late
shuffled = os.path.join(work, "shuffled.csv")
with open(shuffled, "w") as f:
    f.write(HEADER + "".join(shuffled_lines))
config = os.path.join(work, "arrival.toml")
with open(config, "w") as f:
    f.write(MODEL)


def run_replay(feed, alerts):
    r = subprocess.run([tallyd, "replay", feed, "--config", config, "--alerts", alerts],
                       capture_output=True, timeout=300)
    if r.returncode != 0:
        fail("replay exited %d: %s" % (r.returncode, r.stderr.decode()))
    return r.stderr.decode() + r.stdout.decode()


# 1. Replay: late records within the tolerance give the in-order alerts exactly.
ref = os.path.join(work, "ordered.jsonl")
run_replay(ordered, ref)
got = os.path.join(work, "shuffled.jsonl")
out = run_replay(shuffled, got)
same_file(got, ref, "replay of late-within-tolerance records vs in-order replay")
alerts = [json.loads(l) for l in open(ref)]
silence = [a for a in alerts if a.get("detector") == "silence"]
ends = [a for a in alerts if a.get("detector") == "silence_end"]
if len(silence) != 1 or silence[0]["series"] != "gauge-c" or silence[0]["last_seen"] != day(49, 8):
    fail("expected one silence alert for gauge-c last seen %s, got %s" % (day(49, 8), silence))
if len(ends) != 1 or ends[0]["time"] != day(65, 8):
    fail("expected one recovery line for gauge-c at %s, got %s" % (day(65, 8), ends))
if not any(a.get("detector") == "bound" and a["series"] == "gauge-a" for a in alerts):
    fail("the injected spike raised no bound alert: the comparison would prove little")
# 2. The refusals name the file, line, series and reason.
for want in ["shuffled.csv:%d: duplicate_time: series 'gauge-a'" % dup_line_no,
             "too_late: series 'gauge-b': time %s is older than the series' newest record" % day(10),
             "too_late 1", "duplicate_time 1"]:
    if want not in out:
        fail("replay output lacks %r:\n%s" % (want, out))

# 3. Serve the shuffled file (plus a last record of a new series far later,
# so every held record is released in serve as at the end of replay): the
# same alert log as replaying that file, also after a kill -9 halfway.
feed_lines = shuffled_lines + ["%s,zz-clock,1,1\n" % day(200)]
final_ref = os.path.join(work, "final.jsonl")
complete = os.path.join(work, "complete.csv")
with open(complete, "w") as f:
    f.write(HEADER + "".join(feed_lines))
run_replay(complete, final_ref)
feed = os.path.join(work, "feed.csv")
served = os.path.join(work, "served.jsonl")
with open(os.path.join(work, "serve.toml"), "w") as f:
    f.write(MODEL + followed_file_tables(feed, served, os.path.join(work, "state.ckpt")))
half = len(feed_lines) // 2
with open(feed, "w") as f:
    f.write(HEADER + "".join(feed_lines[:half]))
server = Server(tallyd, os.path.join(work, "serve.toml"), work).start()
server.wait_followed(feed)
held = server.metrics().get("tallyd_held_records", 0)
if held < 1:
    fail("no record is held halfway through with a 2-day tolerance")
time.sleep(1.5)  # a timed checkpoint now includes the held records
server.kill9()
with open(feed, "a") as f:
    f.write("".join(feed_lines[half:]))
server = Server(tallyd, os.path.join(work, "serve.toml"), work).start()
server.wait_followed(feed)
m = server.metrics()
server.stop()
same_file(served, final_ref, "serve (killed halfway) vs replay with held records and silence")
for reason in ("too_late", "duplicate_time"):
    if m.get(("tallyd_rejections_total", ("reason", reason))) != 1:
        fail("metrics count %s %s times, expected once" % (reason, m.get(("tallyd_rejections_total", ("reason", reason)))))
if m.get("tallyd_held_records") != 1:
    fail("expected only the last record held at the end, metrics say %s" % m.get("tallyd_held_records"))
print("ok: late records sorted into place, refusals counted, silence and recovery lines, serve == replay across kill -9")
