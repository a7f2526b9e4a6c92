"""A million random and malformed lines over TCP (and 200 000 in a followed
file), with valid lines interleaved: the process stays up, its memory stays
bounded, every refusal is counted under its reason, and every valid line is
processed. Expected counts come from the generator itself."""
import json
import os
import random
import shutil
import socket
import sys
import tempfile

from serve_harness import Server, fail

tallyd, src = sys.argv[1], sys.argv[2]
rng = random.Random(424242)
work = tempfile.mkdtemp(prefix="tallyd-garbage-")
followed = os.path.join(work, "junk.csv")
config = os.path.join(work, "serve.toml")
MAX_SERIES = 500
VALID_SERIES = 5
with open(config, "w") as f:
    f.write("""
[model]
family = "poisson"
min_history = 20
refit_every = 25

[limits]
max_series = %d

[[source]]
kind = "tcp"
name = "push"

[[source]]
kind = "follow"
name = "junk"
path = "%s"

[output]
alerts = "%s"

[checkpoint]
path = "%s"
every = "2s"

[intake]
max_line_bytes = 4096
poll_ms = 50
""" % (MAX_SERIES, followed, os.path.join(work, "alerts.jsonl"), os.path.join(work, "state.ckpt")))

BASE = 1600000000


class Feed:
    """Generates interleaved good and bad lines and counts what it made."""

    def __init__(self, prefix, n):
        self.prefix, self.n = prefix, n
        self.counts = {k: 0 for k in ("valid", "bad_format", "line_too_long", "bad_count", "new_id")}
        self.step = [0] * VALID_SERIES

    def valid(self):
        s = rng.randrange(VALID_SERIES)
        self.step[s] += 1
        self.counts["valid"] += 1
        return "%d,%s-ok-%d,%d,1" % (BASE + self.step[s] * 600, self.prefix, s, rng.randrange(3, 9))

    def lines(self):
        yield "time,series,count,exposure"
        for i in range(self.n):
            r = rng.random()
            if r < 0.10:
                yield self.valid()
            elif r < 0.40:  # binary junk without separators or line ends
                self.counts["bad_format"] += 1
                yield "\x01" + "".join(chr(rng.choice(list(range(1, 9)) + list(range(14, 44)) + list(range(45, 255))))
                                       for _ in range(rng.randrange(1, 60)))
            elif r < 0.55:  # wrong column count
                self.counts["bad_format"] += 1
                yield ",".join("7" for _ in range(rng.choice([1, 2, 3, 5, 9])))
            elif r < 0.70:
                self.counts["bad_count"] += 1
                yield "%d,%s-ok-0,%s,1" % (BASE, self.prefix, rng.choice(["NaN", "-4", "nan", "-1", "inf", "1e400"]))
            elif r < 0.701:
                self.counts["line_too_long"] += 1
                yield "%d,%s-ok-1,5,%s" % (BASE, self.prefix, "9" * rng.randrange(5000, 200000))
            else:  # a new series id each, some far in the future: the series limit must hold
                self.counts["new_id"] += 1
                t = rng.choice([BASE, 253402300000, 32503680000])  # 2020, year 9999, year 3000
                yield "%d,%s-flood-%d,1,1" % (t, self.prefix, i)


def rss_kib(pid):
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    return 0


server = Server(tallyd, config, work).start()
tcp = Feed("t", 1_000_000)
sock = socket.create_connection(("127.0.0.1", server.ports["push"]), timeout=120)
buf = []
# The followed file's valid series are created first, so that the flood of new
# ids (which fills the series limit) cannot starve them.
lines = tcp.lines()
buf.append(next(lines))
buf += ["%d,f-ok-%d,5,1" % (BASE - 600, s) for s in range(VALID_SERIES)]
tcp.counts["valid"] += VALID_SERIES
for line in lines:
    buf.append(line)
    if len(buf) >= 5000:
        sock.sendall(("\n".join(buf) + "\n").encode("latin-1"))
        buf = []
sock.sendall(("\n".join(buf) + "\n").encode("latin-1"))
sock.close()

file_feed = Feed("f", 200_000)
with open(followed, "wb") as f:
    for line in file_feed.lines():
        f.write((line + "\n").encode("latin-1"))


def state():
    return json.loads(server.get("/state")[1])


total_lines = tcp.n + file_feed.n


def all_seen():
    s = state()
    return s["records"] + sum(v for k, v in s["rejected"].items()
                              if k not in ("missing_covariate", "out_of_order", "too_many_series", "zero_exposure",
                                           "bad_series")) >= total_lines
server.wait_until("all %d lines counted" % total_lines, all_seen, timeout=240)
s = state()
rej = s["rejected"]
exp_format = tcp.counts["bad_format"] + file_feed.counts["bad_format"]
exp_long = tcp.counts["line_too_long"] + file_feed.counts["line_too_long"]
exp_count = tcp.counts["bad_count"] + file_feed.counts["bad_count"]
new_ids = tcp.counts["new_id"] + file_feed.counts["new_id"]
valid = tcp.counts["valid"] + file_feed.counts["valid"]
accepted_new = MAX_SERIES - 2 * VALID_SERIES
checks = [
    ("bad_format", rej["bad_format"], exp_format),
    ("line_too_long", rej["line_too_long"], exp_long),
    ("bad_count", rej["bad_count"], exp_count),
    ("series limit", s["series"], MAX_SERIES),
    # New ids beyond the limit are too_many_series; a time the parser refuses is bad_time.
    ("too_many_series + bad_time", rej["too_many_series"] + rej["bad_time"], new_ids - accepted_new),
    ("accepted = valid + new series admitted", s["judged"] + s["warming_up"], valid + accepted_new),
]
for what, got, want in checks:
    if got != want:
        fail("%s: got %d, expected %d; state: %s" % (what, got, want, json.dumps(s)[:800]))
rss = rss_kib(server.proc.pid)
if rss > 300 * 1024:
    fail("resident memory %d KiB after the garbage (bound 300 MiB)" % rss)
server.stop()
shutil.rmtree(work)
print("ok: %d lines, %d valid, all refusals counted by reason, RSS %d KiB" % (total_lines, valid, rss))
