"""Shared fixture of the web console tests: an invented department set up
through the command-line harness (tests/cli/fxlcli.py: users are created
there and their one-time passwords replaced at a first CLI login), a
running `fxledger serve` of the test build on a free loopback port whose
clock is read from a file (FXLEDGER_NOW_FILE) so a test can move it, and a
small HTTP client (Python standard library) that keeps its cookies and
reads the CSRF token from the forms, as a browser would. Each user logs in
over HTTP once per scenario (Argon2id costs a noticeable fraction of a
second per login). All data here are invented."""
import http.client
import json
import os
import re
import signal
import ssl
import subprocess
import sys
import time
import urllib.parse

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "cli"))

from fxlcli import Fxl  # noqa: E402

ARTEFACTS = os.environ.get("FXLEDGER_ARTEFACTS") or os.path.join(
    HERE, "..", "..", "build", "test-artefacts", "web")

# A patient name built to break a page that does not escape: markup, both
# quote characters and an ampersand. The store refuses bidirectional
# controls in names (docs/patients.md), so the right-to-left override
# (U+202E) reaches the pages in a review comment instead (BIDI_COMMENT).
# Invented.
HOSTILE_FAMILY = "<script>alert('x')</script>\"Q&A"
HOSTILE_GIVEN = "Evil<b>bold</b>"
BIDI_COMMENT = "checked \u202etxet desrever\u202c <img src=x onerror=alert(1)>"

PLAN = {
    "format": "fxledger-plan/1",
    "comment": "Invented example data for tests; not a real patient or plan.",
    "site": "Pelvis",
    "technique": "3D box",
    "fractions": 25,
    "dose_per_fraction_cgy": 200,
}


def field(name, gantry):
    """A field at the diode's reference conditions (every factor 1), expected
    200 cGy at the entrance, measured at every fraction."""
    return {"name": name, "machine": "LINAC1", "beam": "6X", "setup": "ssd", "mu": 200,
            "ssd_cm": 100, "x_cm": 10, "y_cm": 10, "wedge_deg": 0, "tray": False,
            "gantry_deg": gantry, "incidence_deg": 0, "policy": "every",
            "points": [{"point": "entrance", "expected_dose_cgy": 200, "expected_source": "tps"}]}


def reading_for(deviation_pct):
    """The reading in nC that gives this deviation: the diode is calibrated to
    N = 100 cGy / 10 nC = 10 cGy/nC (physics: D = M x N with every factor 1),
    so 20 nC is 200 cGy and 20 x (1 + d/100) nC is d % off."""
    return "%.4f" % (20.0 * (1 + deviation_pct / 100.0))


def department(fx, hostile=True):
    """Users of every role, one beam, one calibrated diode, levels 5 % / 8 %
    and two patients with a three-field plan (the first with the hostile
    name). Clock 2026-11-02 09:00 UTC."""
    fx.now = "2026-10-01T09:00:00Z"
    fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
    fx.ok("user", "add", "phys", "--name", "Invented Physicist", "--role", "physicist")
    fx.ok("user", "add", "aud", "--name", "Invented Auditor", "--role", "auditor")
    fx.ok("machine", "add", "LINAC1")
    fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon",
          "--energy", "6", "--dmax", "1.5")
    fx.ok("detector", "add", "D-1", "--label", "Diode 1", "--kind", "photon_diode", "--temp-coeff", "0")
    fx.ok("calib", "add", "D-1", "--machine", "LINAC1", "--beam", "6X", "--point", "entrance",
          "--chamber-dose", "100", "--readings", "10,10,10", "--temp", "20",
          "--valid-until", "2026-12-31", user="phys")
    fx.ok("levels", "set", "default", "--tolerance", "5", "--action", "8",
          "--effective", "2026-01-01", user="phys")
    patients = [("P-1", HOSTILE_FAMILY if hostile else "Example", HOSTILE_GIVEN if hostile else "Invented"),
                ("P-2", "Sample", "Invented")]
    for mrn, family, given in patients:
        fx.ok("patient", "add", mrn, "--family", family, "--given", given, user="ther")
        plan = dict(PLAN, patient_mrn=mrn, label="PL-" + mrn,
                    fields=[field("AP", 0), field("PA", 180), field("LAT", 90)])
        fx.ok("plan", "import", fx.write("plan-%s.json" % mrn, json.dumps(plan)), user="phys")
    fx.now = "2026-11-02T09:00:00Z"


class Server:
    """fxledger serve on 127.0.0.1 and a free port, clock from a file;
    `threads` worker threads (2 for the tests), `extra` options."""

    def __init__(self, fx, extra=(), threads=2):
        self.fx = fx
        self.clock = fx.path("now.txt")
        self.set_now(fx.now)
        env = fx.env("admin", extra={"FXLEDGER_NOW_FILE": self.clock})
        self.proc = subprocess.Popen([fx.bin, "--db", fx.db, "serve", "--listen", "127.0.0.1:0",
                                      "--threads", str(threads)] + list(extra),
                                     env=env, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True)
        line = self.proc.stderr.readline()
        m = re.search(r"listening on https?://127\.0\.0\.1:(\d+)/", line)
        if not m:
            self.proc.kill()
            raise AssertionError("serve did not start: %r %s" % (line, self.proc.stderr.read()))
        self.port = int(m.group(1))

    def set_now(self, iso):
        with open(self.clock, "w") as f:
            f.write(iso + "\n")

    def stop(self):
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        err = self.proc.stderr.read()
        self.proc.stderr.close()
        self.proc.stdout.close()
        return err


class Response:
    def __init__(self, status, headers, body):
        self.status = status
        self.headers = headers
        self.body = body

    @property
    def text(self):
        return self.body.decode("utf-8")

    def header(self, name):
        for k, v in self.headers:
            if k.lower() == name.lower():
                return v
        return None

    def json(self):
        return json.loads(self.text)

    def csrf(self):
        m = re.search(r'name="csrf" value="([0-9a-f]{64})"', self.text)
        return m.group(1) if m else None


class Client:
    """One browser: its cookies, the last CSRF token seen on a page."""

    def __init__(self, server, tls_ca=None):
        self.server = server
        self.cookies = {}
        self.csrf = None
        self.tls = None
        if tls_ca:
            self.tls = ssl.create_default_context(cafile=tls_ca)

    def request(self, method, path, body=None, headers=None, json_body=None):
        h = dict(headers or {})
        if self.cookies:
            h["Cookie"] = "; ".join("%s=%s" % kv for kv in self.cookies.items())
        data = None
        if json_body is not None:
            data = json.dumps(json_body).encode()
            h["Content-Type"] = "application/json"
        elif body is not None:
            data = urllib.parse.urlencode(body).encode() if isinstance(body, dict) else body
            h.setdefault("Content-Type", "application/x-www-form-urlencoded")
        if self.tls:
            c = http.client.HTTPSConnection("127.0.0.1", self.server.port, timeout=30, context=self.tls)
        else:
            c = http.client.HTTPConnection("127.0.0.1", self.server.port, timeout=30)
        try:
            c.request(method, path, body=data, headers=h)
            r = c.getresponse()
            resp = Response(r.status, r.getheaders(), r.read())
        finally:
            c.close()
        for k, v in resp.headers:
            if k.lower() == "set-cookie":
                name, _, rest = v.partition("=")
                value = rest.split(";", 1)[0]
                if "Max-Age=0" in v or not value:
                    self.cookies.pop(name, None)
                else:
                    self.cookies[name] = value
        if resp.header("Content-Type", ) and resp.header("Content-Type").startswith("text/html"):
            t = resp.csrf()
            if t:
                self.csrf = t
        return resp

    def get(self, path, **kw):
        return self.request("GET", path, **kw)

    def post(self, path, fields=None, csrf=True, **kw):
        f = dict(fields or {})
        if csrf and "csrf" not in f and self.csrf:
            f["csrf"] = self.csrf
        return self.request("POST", path, body=f, **kw)

    def login(self, login, password):
        self.get("/login")
        r = self.post("/login", {"login": login, "password": password})
        if r.status != 303:
            raise AssertionError("login of %s failed: %d %s" % (login, r.status, r.text[:2000]))
        self.get(r.header("Location"))
        return r


def hostile_escaped(test, text):
    """The hostile name appears escaped and never as live markup."""
    test.assertNotIn("<script>alert", text)
    test.assertNotIn("<b>bold</b>", text)
    test.assertNotIn("\u202e", text)
    test.assertNotIn("<img src=x", text)
