"""The program users run (build/fxledger, FXLEDGER_SHIPPED_BIN) has no test
clock: FXLEDGER_NOW, which fixes the clock of the test build
(fxledger-testclock) that every other command-line test drives, has no
effect on it, so nobody can backdate an audit row or a review event by
setting it (docs/audit.md). Test data is invented."""
import datetime as dt
import json
import os
import sqlite3
import subprocess
import tempfile
import unittest

from fxlcli import BIN, SHIPPED_BIN, Fxl, main

FIXED = "2001-02-03T04:05:06Z"   # invented: a time far from the real clock


def utc(text):
    return dt.datetime.strptime(text, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=dt.timezone.utc)


class ShippedClockTest(unittest.TestCase):

    def stamps(self, fx):
        con = sqlite3.connect(fx.db)
        try:
            audit = [at for (at,) in con.execute("SELECT at FROM audit_log ORDER BY id")]
            patients = [c for (c,) in con.execute("SELECT created_at FROM patients")]
        finally:
            con.close()
        return audit, patients

    def session(self, binary):
        """init and one patient with FXLEDGER_NOW set; returns the times
        printed and stored."""
        fx = Fxl(now=FIXED, bin=binary)
        self.addCleanup(fx.close)
        fx.init()
        before = dt.datetime.now(dt.timezone.utc).replace(microsecond=0)
        created = json.loads(fx.ok("--json", "patient", "add", "CLK-1", "--family", "Clock").stdout)
        after = dt.datetime.now(dt.timezone.utc)
        return created["created_at"], self.stamps(fx), before, after

    def test_shipped_binary_ignores_fixed_clock(self):
        self.assertNotEqual(os.path.realpath(SHIPPED_BIN), os.path.realpath(BIN))
        created, (audit, patients), before, after = self.session(SHIPPED_BIN)
        # The real clock: between the moments before and after the command.
        self.assertTrue(before <= utc(created) <= after, (created, before, after))
        self.assertNotIn(FIXED, audit + patients)
        self.assertTrue(all(utc(a) >= before - dt.timedelta(minutes=5) for a in audit), audit)

    def test_shipped_binary_holds_no_reader_of_the_variable(self):
        """The variable's name is not even in the shipped program (the test
        clock is a separate object file linked only into the test build)."""
        with open(SHIPPED_BIN, "rb") as f:
            shipped = f.read()
        with open(BIN, "rb") as f:
            test_build = f.read()
        self.assertNotIn(b"FXLEDGER_NOW", shipped)
        self.assertIn(b"FXLEDGER_NOW", test_build)   # the check above can fail

    def test_installed_binary_ignores_fixed_clock(self):
        """What `make install` puts on the PATH is the shipped program, and
        the test build is not installed."""
        build = os.path.dirname(os.path.abspath(SHIPPED_BIN))
        with tempfile.TemporaryDirectory() as d:
            r = subprocess.run(["cmake", "--install", build, "--prefix", d], capture_output=True,
                               text=True, timeout=120)
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            installed = os.path.join(d, "bin", "fxledger")
            self.assertEqual(sorted(os.listdir(os.path.join(d, "bin"))), ["fxledger"])
            created, (audit, patients), before, after = self.session(installed)
            self.assertTrue(before <= utc(created) <= after, (created, before, after))
            self.assertNotIn(FIXED, audit + patients)

    def test_test_build_takes_the_fixed_clock(self):
        """The counterpart: the test build does stamp the fixed time, so the
        first test is not passing by accident."""
        created, (audit, patients), _, _ = self.session(BIN)
        self.assertEqual(created, FIXED)
        self.assertEqual(set(audit), {FIXED})
        self.assertEqual(patients, [FIXED])


if __name__ == "__main__":
    main()
