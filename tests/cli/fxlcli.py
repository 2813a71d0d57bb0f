"""Shared harness for the command-line tests: runs the test build of fxledger
(build/fxledger-testclock, the same sources with a clock that FXLEDGER_NOW
fixes) against a temporary database with a fixed clock, and checks that
failed commands leave the database file byte-for-byte unchanged. SHIPPED_BIN
is the program users run, which ignores FXLEDGER_NOW; only tests about that
binary itself use it. Test data here is invented."""
import hashlib
import json
import os
import shutil
import subprocess
import tempfile
import unittest

BIN = os.environ.get("FXLEDGER_BIN") or os.path.join(
    os.path.dirname(__file__), "..", "..", "build", "fxledger-testclock")
SHIPPED_BIN = os.environ.get("FXLEDGER_SHIPPED_BIN") or os.path.join(
    os.path.dirname(__file__), "..", "..", "build", "fxledger")
SRC = os.environ.get("FXLEDGER_SRC") or os.path.join(os.path.dirname(__file__), "..", "..")
DATA = os.path.join(SRC, "tests", "data")


class Fxl:
    """One temporary database and the ways to drive fxledger on it."""

    def __init__(self, now="2026-11-02T09:00:00Z", user="admin", bin=None):
        self.bin = bin or BIN   # SHIPPED_BIN only for tests about the program users run
        self.dir = tempfile.mkdtemp(prefix="fxltest-")
        self.db = os.path.join(self.dir, "test.db")
        self.now = now
        self.user = user

    def close(self):
        shutil.rmtree(self.dir, ignore_errors=True)

    def path(self, name):
        return os.path.join(self.dir, name)

    def write(self, name, text):
        """Writes a file in the test directory and returns its path."""
        p = self.path(name)
        with open(p, "w", encoding="utf-8") as f:
            f.write(text if isinstance(text, str) else json.dumps(text))
        return p

    def run(self, *args, user=None, stdin=None, now=None, env=None):
        """Runs fxledger; returns the CompletedProcess (text mode)."""
        e = dict(os.environ)
        e.pop("FXLEDGER_DB", None)
        e["FXLEDGER_NOW"] = now or self.now
        e["FXLEDGER_USER"] = user or self.user
        e["NO_COLOR"] = "1"
        if env:
            e.update(env)
        args = [str(a) for a in args]
        # A test that names another database ("--db", COPY) runs on that one:
        # fxledger refuses a global option given twice.
        lead = [] if "--db" in args or any(a.startswith("--db=") for a in args) else ["--db", self.db]
        return subprocess.run([self.bin] + lead + args,
                              input=stdin, capture_output=True, text=True, env=e, timeout=60)

    def ok(self, *args, **kw):
        """Runs fxledger and fails the test unless it exits 0."""
        r = self.run(*args, **kw)
        if r.returncode != 0:
            raise AssertionError("fxledger %s failed (%d):\n%s%s" % (
                " ".join(map(str, args)), r.returncode, r.stdout, r.stderr))
        return r

    def json(self, *args, **kw):
        """Runs fxledger --json and returns the parsed output."""
        return json.loads(self.ok("--json", *args, **kw).stdout)

    def digest(self):
        """SHA-256 of the database file and its WAL, to prove nothing changed."""
        h = hashlib.sha256()
        for suffix in ("", "-wal"):
            p = self.db + suffix
            if os.path.exists(p):
                with open(p, "rb") as f:
                    h.update(f.read())
        return h.hexdigest()

    def init(self, department="Invented Test Department"):
        self.ok("init", "--department", department, "--admin", "admin",
                "--admin-name", "Test Admin", user="admin")
        return self


class FxlTestCase(unittest.TestCase):
    """Gives each test a fresh initialised database as self.fx."""

    def setUp(self):
        self.fx = Fxl().init()

    def tearDown(self):
        self.fx.close()

    def assertFailsUnchanged(self, *args, expect_code=None, expect_in=None, **kw):
        """The command fails, prints a one-line error, and writes nothing."""
        before = self.fx.digest()
        r = self.fx.run(*args, **kw)
        self.assertNotEqual(r.returncode, 0, "expected failure: %s\n%s" % (args, r.stdout))
        if expect_code is not None:
            self.assertEqual(r.returncode, expect_code, r.stderr)
        self.assertTrue(r.stderr.startswith("fxledger: error: "), r.stderr)
        if expect_in:
            self.assertIn(expect_in, r.stderr)
        self.assertEqual(self.fx.digest(), before, "database changed by a failed command")
        return r


def main():
    unittest.main(verbosity=2)
