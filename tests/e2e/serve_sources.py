"""`tallyd serve` with real files and sockets: identity with replay on a
complete file, TCP (CSV and JSON Lines) and UDP pushes, rotation by rename and
by truncation, a file that appears later, metrics parsed, SIGHUP with a good
and a bad config, SIGUSR1 reopening the alert log, and a damaged checkpoint
refused until --fresh is given."""
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time

from serve_harness import Server, fail, replay, same_file
import episode_check

tallyd, src = sys.argv[1], sys.argv[2]
work = tempfile.mkdtemp(prefix="tallyd-sources-")
model = os.path.join(src, "config", "moth_traps.toml")
feed_src = os.path.join(src, "demo_feeds", "moth_traps.csv")
feed = os.path.join(work, "moth.csv")
rot = os.path.join(work, "rot.csv")
late = os.path.join(work, "late.jsonl")
alerts = os.path.join(work, "alerts.jsonl")
ckpt = os.path.join(work, "state.ckpt")
config = os.path.join(work, "serve.toml")
with open(model) as f:
    base = f.read()
service = """
[[series]]
match = "net-*"
[series.model]
covariates = []

[[source]]
kind = "follow"
name = "moth"
path = "%s"

[[source]]
kind = "follow"
name = "rot"
path = "%s"

[[source]]
kind = "follow"
name = "late"
path = "%s"

[[source]]
kind = "tcp"
name = "push"

[[source]]
kind = "udp"
name = "dgram"

[output]
alerts = "%s"
text = "%s"

[checkpoint]
path = "%s"
every = "1s"

[intake]
poll_ms = 50
max_line_bytes = 4096
""" % (feed, rot, late, alerts, os.path.join(work, "alerts.txt"), ckpt)
with open(config, "w") as f:
    f.write(base + service)

shutil.copy(feed_src, feed)
ref = os.path.join(work, "reference.jsonl")
replay(tallyd, feed_src, model, ref)

server = Server(tallyd, config, work).start()
m0 = None


def records(source):
    return server.metrics().get(("tallyd_source_records_total", ("source", source)), 0)


def rejections(reason):
    return server.metrics().get(("tallyd_rejections_total", ("reason", reason)), 0)


# 1. A complete file gives the replay's alerts, byte for byte (reference: `tallyd replay`).
server.wait_followed(feed)
same_file(alerts, ref, "serve vs replay on a complete file")
# Episode figures in /metrics against a direct count from the alert log.
fig = episode_check.check(alerts)
m = server.metrics()
for name, key in (("tallyd_episodes_opened_total", "opened"), ("tallyd_episodes_closed_total", "closed"),
                  ("tallyd_episodes_open", "open")):
    if m.get(name) != fig[key]:
        fail("%s is %s, the alert log says %d" % (name, m.get(name), fig[key]))
if fig["closed"] == 0:
    fail("the demo feed closes no episode; the metric check proves little")
with open(os.path.join(work, "alerts.txt")) as f:
    text_lines = f.read().splitlines()
if len(text_lines) != fig["alerts"] + fig["closed"] or not all(
        "[episode " in l or " closed: " in l for l in text_lines):
    fail("the readable alert log should hold one line per alert and per closing, each naming its episode")

# 2. TCP: CSV with its header first, then JSON Lines on another connection; one bad line each.
def push(lines):
    s = socket.create_connection(("127.0.0.1", server.ports["push"]), timeout=10)
    s.sendall("".join(l + "\n" for l in lines).encode())
    s.close()

csv_lines = ["time,series,count,exposure"] + \
    ["%d,net-tcp-a,%d,1" % (1735700000 + d * 86400, 3 + d % 4) for d in range(1, 61)] + \
    ["%d,net-tcp-a,-1,1" % (1735700000 + 61 * 86400)]
push(csv_lines)
push(['{"time":"2025-02-%02dT06:00:00Z","series":"net-tcp-b","count":%d,"exposure":2}' % (d, d % 5) for d in range(1, 11)]
     + ['{"time":"2025-02-11T06:00:00Z","series":"net-tcp-b","count":"x"}'])
server.wait_until("71 TCP records", lambda: records("push") == 70 and rejections("bad_count") >= 2)

# 3. UDP: one JSON object per datagram.
u = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
for d in range(1, 6):
    u.sendto(('{"time":"2025-03-%02dT06:00:00Z","series":"net-udp-a","count":%d}' % (d, d)).encode(),
             ("127.0.0.1", server.ports["dgram"]))
u.sendto(b"x" * 9000, ("127.0.0.1", server.ports["dgram"]))  # over max_datagram_bytes (8192)
server.wait_until("5 UDP records", lambda: records("dgram") == 5)
server.wait_until("the long datagram counted", lambda: rejections("line_too_long") >= 1)

# 4. Rotation by rename, then by truncation, of a followed file.
def rot_line(day):
    return "2024-05-%02dT06:00:00Z,net-rot-a,%d,1\n" % (day, day % 3)

with open(rot, "w") as f:
    f.write("time,series,count,exposure\n" + "".join(rot_line(d) for d in range(1, 11)))
server.wait_until("10 records from rot.csv", lambda: records("rot") == 10)
os.rename(rot, rot + ".1")
with open(rot, "w") as f:
    f.write("time,series,count,exposure\n" + "".join(rot_line(d) for d in range(11, 21)))
server.wait_until("10 more after the rename", lambda: records("rot") == 20)
with open(rot, "w") as f:  # truncated and rewritten shorter than what was read
    f.write("time,series,count,exposure\n" + rot_line(21) + rot_line(22))
server.wait_until("2 more after the truncation", lambda: records("rot") == 22)

# 5. A file that appears after the start.
with open(late, "w") as f:
    for d in range(1, 4):
        f.write('{"time":"2024-06-%02dT06:00:00Z","series":"net-late-a","count":1}\n' % d)
server.wait_until("3 records from a file created later", lambda: records("late") == 3)

# 6. Status JSON, health check, unknown path.
code, body = server.get("/alive")
if code != 200:
    fail("/alive answered %d" % code)
code, body = server.get("/state")
state = json.loads(body)
if state["series"] < 24 + 4 or len(state["sources"]) != 5:
    fail("/state: unexpected series or sources: %s" % body[:400])
if server.get("/nothing-here")[0] != 404:
    fail("an unknown path must get 404")
m = server.metrics()
for name in ("tallyd_records_total", "tallyd_series", "tallyd_checkpoint_age_seconds",
             "tallyd_processing_latency_seconds_count"):
    if name not in m:
        fail("metric %s missing" % name)
if m[("tallyd_processing_latency_seconds_bucket", ("le", "+Inf"))] != m["tallyd_processing_latency_seconds_count"]:
    fail("latency histogram: +Inf bucket differs from the count")

# 7. SIGHUP: a good config is applied, a bad one refused while the service goes on.
with open(config, "w") as f:
    f.write(base.replace("[alert]", "[alert]\n# reloaded") + service)
server.signal(signal.SIGHUP)
server.wait_until("reload applied", lambda: json.loads(server.get("/state")[1])["reloads"]["applied"] == 1)
with open(config, "w") as f:
    f.write(base + service + "\n[model]\nfamily = 'poison'\n")
server.signal(signal.SIGHUP)
server.wait_until("reload refused", lambda: json.loads(server.get("/state")[1])["reloads"]["refused"] == 1)
with open(config, "w") as f:
    f.write(base + service)
if "reload refused" not in server.log_tail(200):
    fail("the refused reload was not reported")

# 8. SIGUSR1 after logrotate moved the alert log: a new file at the path.
os.rename(alerts, alerts + ".1")
server.signal(signal.SIGUSR1)
server.wait_until("alert log reopened", lambda: os.path.exists(alerts))
push(["time,series,count,exposure"] + ["%d,net-tcp-a,4,1" % (1735700000 + d * 86400) for d in range(62, 68)]
     + ["%d,net-tcp-a,400,1" % (1735700000 + 68 * 86400)])
server.wait_until("the spike's alert in the new log", lambda: os.path.getsize(alerts) > 0)
with open(alerts) as f:
    if '"series":"net-tcp-a"' not in f.read():
        fail("the alert after reopening is not in the new alert log")
server.stop()

# 9. A damaged checkpoint is refused with a clear message; --fresh sets it aside.
with open(ckpt, "rb") as f:
    good = f.read()
def start_fails(expect):
    r = subprocess.run([tallyd, "serve", "--config", config], capture_output=True, timeout=60)
    if r.returncode != 1 or expect not in r.stderr.decode():
        fail("expected exit 1 with '%s', got %d: %s" % (expect, r.returncode, r.stderr.decode()[-500:]))
with open(ckpt, "wb") as f:
    f.write(good[: len(good) // 2])
start_fails("truncated")
damaged = bytearray(good)
damaged[len(good) // 2] ^= 0x01
with open(ckpt, "wb") as f:
    f.write(bytes(damaged))
start_fails("corrupt")
with open(ckpt, "wb") as f:
    f.write(b"some other program's state\n")
start_fails("not a tallyd checkpoint")
server = Server(tallyd, config, work, extra=["--fresh"]).start()
if not os.path.exists(ckpt + ".set-aside"):
    fail("--fresh did not set the damaged checkpoint aside")
server.stop()

# 10. Standard input: JSON Lines piped in; the bad line counted, the rest processed.
stdin_conf = os.path.join(work, "stdin.toml")
with open(stdin_conf, "w") as f:
    f.write("""
[[source]]
kind = "stdin"
name = "pipe"

[output]
alerts = "%s"

[checkpoint]
path = "%s"
""" % (os.path.join(work, "stdin-alerts.jsonl"), os.path.join(work, "stdin.ckpt")))
server = Server(tallyd, stdin_conf, work).start(stdin=subprocess.PIPE)
server.proc.stdin.write("".join('{"time":%d,"series":"p","count":%d}\n' % (1700000000 + d * 3600, d % 4)
                                for d in range(1, 41)).encode() + b'{"time":1,"series":"p"\n')
server.proc.stdin.close()
server.wait_until("40 records from stdin", lambda: records("pipe") == 40 and rejections("bad_format") == 1)
server.stop()
shutil.rmtree(work)
print("ok: identity with replay, TCP, UDP, rotation, late file, status, SIGHUP, SIGUSR1, damaged checkpoints, stdin")
