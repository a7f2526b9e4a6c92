"""`tallyd serve` with [fdr]: the open time step of the control across
series is released by the service's rule (docs/service.md), not left waiting;
a graceful stop keeps it in the checkpoint instead of releasing it early; and
the final alert log equals `tallyd replay` of the same complete file (the
reference, which releases the last step at the end of the feed), shift
CUSUM alerts and episode lines included. Episode
figures in /metrics are checked against a direct count from the alert log."""
import json
import os
import shutil
import sys
import tempfile

from serve_harness import Server, fail, followed_file_tables, replay, same_file
import episode_check

tallyd, src = sys.argv[1], sys.argv[2]
work = tempfile.mkdtemp(prefix="tallyd-fdr-")
feed = os.path.join(work, "traps.csv")
alerts = os.path.join(work, "alerts.jsonl")
config = os.path.join(work, "serve.toml")
model = os.path.join(work, "model.toml")

# Weekly counts 2-6 in two traps for 48 weeks; trap-b spikes (40) in weeks 42
# and 47, the last week, whose step only the release rule can close.
pattern = [3, 5, 4, 6, 2, 4, 5, 3, 4, 5]
with open(feed, "w") as f:
    f.write("time,series,count\n")
    for w in range(48):
        t = 1735776000 + w * 604800  # 2025-01-02T00:00:00Z (a step start with 7d steps) plus w weeks
        b = 40 if w in (42, 47) else pattern[(w + 3) % 10]
        f.write("%d,trap-a,%d\n%d,trap-b,%d\n" % (t, pattern[w % 10], t + 60, b))
model_text = """
[model]
family = "poisson"
min_history = 20
[alert]
direction = "high"
[detect]
shift = true
[fdr]
rate = 0.05
step = "7d"
release_delay = "1s"
release_idle = "%s"
"""
with open(model, "w") as f:
    f.write(model_text % "1h")
ref = os.path.join(work, "reference.jsonl")
replay(tallyd, feed, model, ref)
with open(ref) as f:
    ref_lines = f.read().splitlines(True)
last_week = [l for l in ref_lines if '"time":"2025-11-27T00:01:00Z"' in l and '"detector":"bound_fdr"' in l]
if len(last_week) != 1:
    fail("the reference should end with the week-47 spike released at the end of the feed: %s" % ref_lines[-3:])
# The shift CUSUM's alerts come with their record (serve once wrote only bound alerts).
if not any('"detector":"shift"' in l for l in ref_lines):
    fail("the reference has no shift alert: the test would not cover detector alerts in serve")

def write_config(idle):
    with open(config, "w") as f:
        f.write(model_text % idle + followed_file_tables(feed, alerts, os.path.join(work, "state.ckpt"), name="traps"))

# 1. Idle time 1h: the last step waits; a graceful stop keeps it (not released early).
write_config("1h")
server = Server(tallyd, config, work).start()
server.wait_followed(feed)
server.wait_until("the week-47 records waiting in the open step",
                  lambda: server.metrics().get("tallyd_fdr_waiting_records") == 2)
state = json.loads(server.get("/state")[1])
if state["fdr"]["waiting_records"] != 2 or state["fdr"]["steps_released_by_rule"] != 0:
    fail("/state fdr: %s" % state["fdr"])
server.stop()
with open(alerts) as f:
    served = f.read()
if not "".join(ref_lines).startswith(served) or last_week[0] in served:
    fail("before the release the alert log must be the reference without the last step's alerts")

# 2. Restarted with a 1s idle time: the checkpointed step is released, and the log equals the replay.
write_config("1s")
server = Server(tallyd, config, work).start()
server.wait_until("the open step released", lambda: os.path.getsize(alerts) == os.path.getsize(ref), timeout=60)
same_file(alerts, ref, "serve with [fdr] after the step release vs replay")
m = server.metrics()
if m.get("tallyd_fdr_steps_released_total") != 1 or m.get("tallyd_fdr_waiting_records") != 0:
    fail("release metrics: %s" % {k: v for k, v in m.items() if "fdr" in str(k)})
fig = episode_check.check(alerts)
for name, key in (("tallyd_episodes_opened_total", "opened"), ("tallyd_episodes_closed_total", "closed"),
                  ("tallyd_episodes_open", "open")):
    if m.get(name) != fig[key]:
        fail("%s is %s, the alert log says %d" % (name, m.get(name), fig[key]))
if "releasing time step" not in server.log_tail(100):
    fail("the release was not logged")
server.stop()
same_file(alerts, ref, "serve with [fdr] after a second stop")
shutil.rmtree(work)
print("ok: open step kept over a graceful stop, released by the rule after the restart; identical to replay; %s" % fig)
