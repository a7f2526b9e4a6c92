"""A backlog of 40,000 records in a followed file, judged by `tallyd serve`:
- /metrics answers while lines read are still waiting to be judged
  (tallyd_queued_lines > 0, offset judged below the file size): the status
  endpoint does not wait for the engine;
- SIGTERM in the middle of the backlog: exit 0 after judging what was read
  and checkpointing it; the restart resumes mid-file;
- UDP datagrams sent during the backlog are each either judged or counted as
  dropped (tallyd_udp_dropped_total), never lost silently;
- the alert log, without the UDP probe series, equals `tallyd replay` of the
  file byte for byte (reference: `tallyd replay`)."""
import os
import random
import shutil
import signal
import socket
import sys
import tempfile
import time

from serve_harness import Server, fail, followed_file_tables, replay

tallyd, src = sys.argv[1], sys.argv[2]
work = tempfile.mkdtemp(prefix="tallyd-backlog-")
feed = os.path.join(work, "feed.csv")
alerts = os.path.join(work, "alerts.jsonl")
model_path = os.path.join(work, "model.toml")
config = os.path.join(work, "serve.toml")
model = '[model]\nfamily = "poisson"\nmin_history = 20\nwindow = 500\n[alert]\nalpha = 0.001\n'
with open(model_path, "w") as f:
    f.write(model)
with open(config, "w") as f:
    f.write(model + followed_file_tables(feed, alerts, os.path.join(work, "state.ckpt"))
            + '\n[[source]]\nkind = "udp"\nname = "probe"\n')


def poisson(rng, mean):
    # Knuth's multiplication method (common practice for small means).
    limit, k, p = pow(2.718281828459045, -mean), 0, 1.0
    while True:
        p *= rng.random()
        if p <= limit:
            return k
        k += 1


rng = random.Random(20261202)
SERIES, ROUNDS, T0 = 40, 1000, 1700000000
with open(feed, "w") as f:
    f.write("time,series,count,exposure\n")
    for i in range(ROUNDS):
        for s in range(SERIES):
            count = 60 if (i * SERIES + s) % 997 == 500 else poisson(rng, 5.0)
            f.write("%d,trap-%02d,%d,1\n" % (T0 + i * 600, s, count))
size = os.path.getsize(feed)
ref = os.path.join(work, "reference.jsonl")
replay(tallyd, feed, model_path, ref)
if os.path.getsize(ref) == 0:
    fail("the reference replay raised no alert; the comparison would prove little")

udp = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
sent = 0


def probe(server):
    global sent
    udp.sendto(b'{"time":%d,"series":"udp-probe","count":3}' % (T0 + sent * 60), ("127.0.0.1", server.ports["probe"]))
    sent += 1


def sample(server):
    m = server.metrics()
    offset = next((v for k, v in m.items() if isinstance(k, tuple) and k[0] == "tallyd_follow_offset_bytes"), 0)
    return m, offset


# 1. The status endpoint answers while the backlog is judged; stop in the middle.
server = Server(tallyd, config, work).start()
busy = 0
deadline = time.time() + 240
while time.time() < deadline:
    m, offset = sample(server)
    if offset >= size:
        fail("the backlog was judged before a graceful stop could interrupt it (%d answers with lines queued)" % busy)
    if m.get("tallyd_queued_lines", 0) > 0 and 0 < offset < size:
        busy += 1
        if busy >= 3 and offset < size // 2:
            break
    probe(server)
    time.sleep(0.05)
else:
    fail("timed out before three status answers during the backlog")
server.stop()
log = server.log_tail(50)
if "judging the" not in log or "lines already read" not in log:
    fail("the graceful stop did not say it judges the lines already read:\n" + log)

# 2. The restart resumes mid-file; datagrams during its backlog are all accounted for.
server = Server(tallyd, config, work).start()
first_sent = sent
while True:
    m, offset = sample(server)
    if offset >= size:
        break
    probe(server)
    time.sleep(0.02)
    if sent - first_sent > 20000:
        fail("the restarted backlog did not end")
server.wait_followed(feed, timeout=240)
probes = sent - first_sent


def accounted():
    m = server.metrics()
    return (m.get(("tallyd_source_records_total", ("source", "probe")), 0)
            + m.get(("tallyd_udp_dropped_total", ("source", "probe")), 0)) == probes
server.wait_until("%d datagrams judged or counted as dropped" % probes, accounted, timeout=60)
m = server.metrics()
dropped = int(m.get(("tallyd_udp_dropped_total", ("source", "probe")), 0))
server.stop()
with open(server.err_path, errors="replace") as f:
    if "resuming at byte" not in f.read():
        fail("the restart did not resume the followed file from the graceful stop's checkpoint")

with open(alerts) as f:
    served = "".join(l for l in f if '"udp-probe' not in l)
with open(ref) as f:
    want = f.read()
if served != want:
    fail("alert log after a graceful stop mid-backlog (probe series removed, %d bytes) differs from the replay (%d bytes)"
         % (len(served), len(want)))
shutil.rmtree(work)
print("ok: %d status answers during the backlog, stop and resume mid-file, %d datagrams (%d dropped) accounted for, "
      "alert log identical to the replay (%d bytes)" % (busy, probes, dropped, len(want)))
