"""kill -9 at random moments while a growing feed is followed; after the last
restart the alert log must equal an uninterrupted replay of the whole feed,
byte for byte (reference: `tallyd replay` on the complete file)."""
import os
import random
import sys
import tempfile
import time

from serve_harness import Server, fail, followed_file_tables, replay, same_file

tallyd, src = sys.argv[1], sys.argv[2]
seed = int(os.environ.get("TALLYD_CRASH_SEED", "20261201"))
rng = random.Random(seed)
work = tempfile.mkdtemp(prefix="tallyd-crash-")
feed_src = os.path.join(src, "demo_feeds", "sensor_counts.csv")
model = os.path.join(src, "config", "sensor_counts.toml")
feed = os.path.join(work, "feed.csv")
alerts = os.path.join(work, "alerts.jsonl")
config = os.path.join(work, "serve.toml")
with open(model) as f:
    base = f.read()
with open(config, "w") as f:
    f.write(base + followed_file_tables(feed, alerts, os.path.join(work, "state.ckpt")))

ref = os.path.join(work, "reference.jsonl")
replay(tallyd, feed_src, model, ref)
if os.path.getsize(ref) == 0:
    fail("the reference replay raised no alert; the test would prove nothing")
with open(ref) as f:
    ref_text = f.read()
if '"episode_state":"ongoing"' not in ref_text or '"episode_closed"' not in ref_text:
    fail("the reference has no continued or closed episode; the test would not cover episode state")

with open(feed_src, "rb") as f:
    data = f.read()
# Cut points at random bytes, not line ends: the follower must wait for the
# rest of a line a writer has not finished.
rounds = 12
cuts = sorted(rng.sample(range(1, len(data)), rounds - 1)) + [len(data)]
open(feed, "wb").close()
written = 0
kills = 0
for i, cut in enumerate(cuts):
    server = Server(tallyd, config, work).start()
    # Append this round's bytes in a few pieces while the server runs.
    pieces = sorted(rng.sample(range(written + 1, cut), 3)) + [cut] if cut - written > 4 else [cut]
    for p in pieces:
        with open(feed, "ab") as f:
            f.write(data[written:p])
        written = p
        time.sleep(rng.uniform(0.0, 0.15))
    if i < len(cuts) - 1:
        time.sleep(rng.uniform(0.2, 1.6))
        server.kill9()
        kills += 1
    else:
        server.wait_followed(feed, timeout=240)
        server.stop()
if kills < 10:
    fail("only %d kills" % kills)
with open(os.path.join(work, "serve.err"), errors="replace") as f:
    log = f.read()
resumed = log.count("resuming at byte")
if resumed < 2:
    fail("only %d restarts resumed from a checkpoint mid-file; the kills came too early to test resuming" % resumed)
same_file(alerts, ref, "alert log after %d kills (seed %d)" % (kills, seed))
print("ok: %d kill -9 restarts (%d resumed mid-file), alert log identical to the replay (%d bytes)"
      % (kills, resumed, os.path.getsize(ref)))
import shutil
shutil.rmtree(work)
