"""Checks the episode keys of a tallyd alert log against the rule of issue 3
(an alert opens an episode for its series and direction, further alerts
continue it, a configured number of records without an alert in that
direction closes it) and the line shapes of docs/service.md. Usable as a
module (check(path) -> figures) or as a script: episode_check.py ALERTS [CLOSE_AFTER]."""
import json
import sys

ALERT_KEYS = ["time", "series", "count", "expected", "lower", "upper", "p_value", "direction", "exposure",
              "alpha", "detector", "statistic", "episode", "episode_state"]
CLOSE_KEYS = ["episode_closed", "series", "direction", "opened", "last_alert", "closed", "alerts", "quiet_records"]


def check(path, close_after=None):
    """Returns {"alerts", "opened", "closed", "open"}; raises AssertionError naming the line."""
    open_eps = {}   # (series, direction) -> {"id", "opened", "last", "alerts"}
    numbers = {}    # (series, direction) -> episodes so far
    figures = {"alerts": 0, "opened": 0, "closed": 0}
    with open(path, encoding="utf-8") as f:
        for n, raw in enumerate(f, 1):
            where = "%s:%d" % (path, n)
            obj = json.loads(raw)  # keeps key order
            keys = list(obj)
            if keys[0] == "episode_closed":
                assert keys == CLOSE_KEYS, "%s: closing keys %s" % (where, keys)
                k = (obj["series"], obj["direction"])
                ep = open_eps.pop(k, None)
                assert ep, "%s: closes %s, which is not open" % (where, obj["episode_closed"])
                assert obj["episode_closed"] == ep["id"], where
                assert obj["opened"] == ep["opened"], "%s: opened %s, first alert %s" % (where, obj["opened"], ep["opened"])
                assert obj["last_alert"] == ep["last"], where
                assert obj["alerts"] == ep["alerts"], "%s: %d alerts, counted %d" % (where, obj["alerts"], ep["alerts"])
                assert obj["closed"] > ep["last"], where  # RFC 3339 UTC strings sort as times
                if close_after is not None:
                    assert obj["quiet_records"] == close_after, where
                figures["closed"] += 1
                continue
            assert keys == ALERT_KEYS, "%s: alert keys %s" % (where, keys)
            figures["alerts"] += 1
            k = (obj["series"], obj["direction"])
            if obj["episode_state"] == "new":
                assert k not in open_eps, "%s: a new episode while %s is open" % (where, open_eps.get(k, {}).get("id"))
                numbers[k] = numbers.get(k, 0) + 1
                want = "%s/%s/%d" % (k[0], k[1], numbers[k])
                assert obj["episode"] == want, "%s: id %s, expected %s" % (where, obj["episode"], want)
                open_eps[k] = {"id": want, "opened": obj["time"], "last": obj["time"], "alerts": 1}
                figures["opened"] += 1
            else:
                assert obj["episode_state"] == "ongoing", "%s: state %r" % (where, obj["episode_state"])
                ep = open_eps.get(k)
                assert ep and ep["id"] == obj["episode"], "%s: continues %s, open is %s" % (where, obj["episode"], ep)
                ep["alerts"] += 1
                ep["last"] = max(ep["last"], obj["time"])
    figures["open"] = len(open_eps)
    return figures


if __name__ == "__main__":
    try:
        fig = check(sys.argv[1], int(sys.argv[2]) if len(sys.argv) > 2 else None)
    except AssertionError as e:
        print("FAIL: episode check: %s" % e, file=sys.stderr)
        sys.exit(1)
    print("%(alerts)d alerts, %(opened)d episodes opened, %(closed)d closed, %(open)d open" % fig)
