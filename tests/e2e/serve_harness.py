"""Shared helpers for the `tallyd serve` end-to-end tests: start the real
binary as a child process on 127.0.0.1, find its ports, scrape its status
endpoint, stop it. Every wait is bounded in time."""
import os
import re
import signal
import socket
import subprocess
import sys
import time


def fail(msg):
    print("FAIL: " + msg, file=sys.stderr)
    sys.exit(1)


class Server:
    def __init__(self, tallyd, config, workdir, extra=()):
        self.tallyd, self.config, self.workdir = tallyd, config, workdir
        self.ports_file = os.path.join(workdir, "ports.txt")
        self.err_path = os.path.join(workdir, "serve.err")
        self.extra = list(extra)
        self.proc = None
        self.ports = {}

    def start(self, timeout=20, stdin=subprocess.DEVNULL):
        if os.path.exists(self.ports_file):
            os.remove(self.ports_file)
        err = open(self.err_path, "ab")
        self.proc = subprocess.Popen([self.tallyd, "serve", "--config", self.config,
                                      "--ports-file", self.ports_file] + self.extra,
                                     stdin=stdin, stdout=err, stderr=err)
        deadline = time.time() + timeout
        while time.time() < deadline:
            if self.proc.poll() is not None:
                fail("tallyd serve exited with %d at start-up:\n%s" % (self.proc.returncode, self.log_tail()))
            if os.path.exists(self.ports_file):
                with open(self.ports_file) as f:
                    self.ports = {k: int(v) for k, v in (l.split() for l in f if l.strip())}
                return self
            time.sleep(0.02)
        fail("tallyd serve did not bind within %ds" % timeout)

    def log_tail(self, n=30):
        with open(self.err_path, "rb") as f:
            return b"\n".join(f.read().splitlines()[-n:]).decode("utf-8", "replace")

    def get(self, path, timeout=10):
        """One HTTP GET on the status port: (status code, body)."""
        s = socket.create_connection(("127.0.0.1", self.ports["status"]), timeout=timeout)
        s.sendall(("GET %s HTTP/1.1\r\nHost: 127.0.0.1\r\n\r\n" % path).encode())
        data = b""
        while True:
            chunk = s.recv(65536)
            if not chunk:
                break
            data += chunk
        s.close()
        head, _, body = data.partition(b"\r\n\r\n")
        return int(head.split()[1]), body.decode()

    def metrics(self):
        code, body = self.get("/metrics")
        if code != 200:
            fail("/metrics answered %d" % code)
        return parse_openmetrics(body)

    def signal(self, signo):
        self.proc.send_signal(signo)

    def kill9(self):
        self.proc.kill()
        self.proc.wait(timeout=10)

    def stop(self, timeout=60):
        self.proc.send_signal(signal.SIGTERM)
        try:
            rc = self.proc.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            fail("tallyd serve did not stop within %ds of SIGTERM" % timeout)
        if rc != 0:
            fail("tallyd serve exited %d after SIGTERM:\n%s" % (rc, self.log_tail()))

    def wait_until(self, what, predicate, timeout=60):
        deadline = time.time() + timeout
        while time.time() < deadline:
            if self.proc.poll() is not None:
                fail("tallyd serve died while waiting for %s:\n%s" % (what, self.log_tail()))
            if predicate():
                return
            time.sleep(0.05)
        fail("timed out waiting for %s:\n%s" % (what, self.log_tail()))

    def wait_followed(self, path, timeout=60):
        """Until the followed file's whole content has been handed to the engine."""
        size = os.path.getsize(path)

        def done():
            m = self.metrics()
            return any(k[0] == "tallyd_follow_offset_bytes" and ("path", path) in k and v == size
                       for k, v in m.items() if isinstance(k, tuple))
        self.wait_until("%s read to byte %d" % (path, size), done, timeout)


LINE = re.compile(r'^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{(.*)\})? (\S+)$')
LABEL = re.compile(r'([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"')


def followed_file_tables(feed, alerts, checkpoint, name=None):
    """The service tables the crash-style tests share: one followed file,
    the alert log, a checkpoint every second and a 50 ms poll."""
    named = 'name = "%s"\n' % name if name else ""
    return """
[[source]]
kind = "follow"
%spath = "%s"

[output]
alerts = "%s"

[checkpoint]
path = "%s"
every = "1s"

[intake]
poll_ms = 50
""" % (named, feed, alerts, checkpoint)


def parse_openmetrics(text):
    """Parses the OpenMetrics text format (1.0.0) strictly enough to catch a
    malformed exposition: every sample line must match the sample grammar,
    the text must end with '# EOF'. Returns {name: value} for samples without
    labels and {(name, (label, value), ...): value} for the others."""
    lines = text.split("\n")
    if lines[-1] != "" or lines[-2] != "# EOF":
        fail("metrics do not end with '# EOF\\n'")
    out = {}
    for line in lines[:-2]:
        if line.startswith("# TYPE ") or line.startswith("# HELP "):
            continue
        m = LINE.match(line)
        if not m:
            fail("malformed metrics line: %r" % line)
        name, labels, value = m.group(1), m.group(3), float(m.group(4))
        pairs = tuple(LABEL.findall(labels)) if labels else ()
        out[(name,) + pairs if pairs else name] = value
    return out


def replay(tallyd, feed, config, alerts):
    r = subprocess.run([tallyd, "replay", feed, "--config", config, "--alerts", alerts, "-q"],
                       capture_output=True, timeout=300)
    if r.returncode != 0:
        fail("replay exited %d: %s" % (r.returncode, r.stderr.decode()))


def same_file(a, b, what):
    with open(a, "rb") as f:
        x = f.read()
    with open(b, "rb") as f:
        y = f.read()
    if x != y:
        fail("%s: %s (%d bytes) differs from %s (%d bytes)" % (what, a, len(x), b, len(y)))
