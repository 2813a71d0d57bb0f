"""Every listing a therapist or physicist reads fits an 80-column console
(docs/record.md, "80 columns"): the invented demo department (demo/, two
weeks of work, five patients, holds, a drifting detector, amendments) is
played into a temporary directory, then each listing is rendered with
COLUMNS=80 and, where tmux is installed, in a real 80-column tmux pane
(capture-pane -J joins what the terminal wrapped, so a line that passed the
width shows longer than 80). No line may pass 80 characters (code points),
and what was cut to fit is wrapped at spaces, never inside a word: every
word of a wrapped value is found whole on some line. Times are shown in the
department's zone with its offset (Europe/London in the demo)."""
import contextlib
import io
import json
import os
import shlex
import shutil
import sys
import tempfile
import unittest

from fxlcli import BIN, main
from tmux_terminal import TMUX, TmuxTerminal

HERE = os.path.dirname(os.path.abspath(__file__))
DEMO_DIR = os.path.join(HERE, "..", "..", "demo")
WIDTH = 80
NOW = "2026-11-16T09:00:00Z"    # the Monday after the demo's two weeks


class Screens80Test(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.out = tempfile.mkdtemp(prefix="fxl80-")
        os.environ["FXLEDGER_DEMO_OUT"] = cls.out
        saved_argv = sys.argv
        sys.argv = [saved_argv[0], BIN]
        sys.path.insert(0, DEMO_DIR)
        try:
            import run_demo          # the demo's own helpers log its users in
            cls.demo = run_demo
            with contextlib.redirect_stdout(io.StringIO()):
                run_demo.main()
        finally:
            sys.argv = saved_argv
            sys.path.remove(DEMO_DIR)
            del os.environ["FXLEDGER_DEMO_OUT"]

    @classmethod
    def tearDownClass(cls):
        shutil.rmtree(cls.out, ignore_errors=True)

    def run_as(self, user, *args):
        d = self.demo
        d.ensure_session(user, NOW)
        r = d.call(list(args), user, NOW, [d.PASSWORDS[user]])
        self.assertIn(r.returncode, (0, 10, 11, 12), "%s: %s" % (" ".join(args), r.stderr))
        return r.stdout

    def screens(self):
        """(user, args) of every listing, with every item, detector, plan
        and patient of the demo."""
        j = lambda *a: json.loads(self.run_as("mkeller", "--json", *a))
        items = j("queue", "list", "--status", "all")
        items = items["items"] if isinstance(items, dict) else items
        plans = j("plan", "list")
        out = [("lsands", ["today"]), ("mkeller", ["queue", "list"]),
               ("mkeller", ["queue", "list", "--status", "all"]),
               ("mkeller", ["detector", "list"]), ("mkeller", ["calib", "list"]),
               ("mkeller", ["plan", "list"]), ("mkeller", ["levels", "list"]),
               ("mkeller", ["levels", "list", "--all-versions"]), ("mkeller", ["setting", "list"]),
               ("mkeller", ["table", "list"]), ("mkeller", ["stats", "--month", "2026-11"]),
               ("mkeller", ["stats", "--month", "2026-11", "--by", "site,technique,energy,point,detector"]),
               ("mkeller", ["patient", "list"]), ("mkeller", ["machine", "list"]),
               ("mkeller", ["user", "list"])]
        out += [("mkeller", ["queue", "show", str(it["id"])]) for it in items]
        out += [("mkeller", ["detector", "show", d["serial"]]) for d in j("detector", "list")]
        out += [("mkeller", ["table", "show", str(t["id"])]) for t in j("table", "list")[:3]]
        for p in plans:
            out.append(("mkeller", ["plan", "show", p["patient_mrn"], p["label"]]))
        for mrn in sorted({p["patient_mrn"] for p in plans}):
            out.append(("mkeller", ["patient", "show", mrn]))
            out.append(("lsands", ["history", "--patient", mrn]))
        return out

    def assertFits(self, text, what):
        long_lines = [l for l in text.splitlines() if len(l.rstrip()) > WIDTH]
        self.assertEqual(long_lines, [], "%s: lines over %d columns" % (what, WIDTH))

    def test_every_listing_fits_80_columns(self):
        screens = self.screens()
        self.assertGreater(len(screens), 30)
        for user, args in screens:
            with self.subTest(screen=" ".join(args)):
                text = self.run_as(user, *args)
                self.assertGreater(len(text.splitlines()), 1)
                self.assertFits(text, " ".join(args))

    def test_wrapped_values_keep_their_words(self):
        """A label, scope or summary that was wrapped is cut at spaces: each
        of its words is on one line, whole."""
        detectors = json.loads(self.run_as("mkeller", "--json", "detector", "list"))
        text = self.run_as("mkeller", "detector", "list")
        words = set(text.split())
        for d in detectors:
            for w in d["label"].split():
                self.assertIn(w, words, d["label"])
        levels = json.loads(self.run_as("mkeller", "--json", "levels", "list"))
        text = self.run_as("mkeller", "levels", "list")
        self.assertIn("scope:", text)
        for s in levels:
            self.assertIn(s["name"], text)
        drift = [it for it in json.loads(self.run_as("mkeller", "--json", "queue", "list"))
                 if it["rule"] == "detector_drift"]
        self.assertTrue(drift)
        text = self.run_as("mkeller", "queue", "show", str(drift[0]["id"]))
        self.assertIn(" ".join(drift[0]["summary"].split()), " ".join(text.split()))
        # A factor's name stays beside its value (plan show, model factors).
        plan = self.run_as("mkeller", "plan", "show", "DEMO-1002", "BR-R-1")
        self.assertRegex(plan, r"S_c \d\.\d{4}")
        self.assertRegex(plan, r"TMR \d\.\d{4}")

    def test_times_in_the_department_zone_with_offset(self):
        # Europe/London is on GMT in November: +00:00 (IANA tz database).
        text = self.run_as("mkeller", "detector", "show", "PD-0101")
        self.assertRegex(text, r"status +in_service since 2026-10-26 \d\d:\d\d \+00:00")
        self.assertNotRegex(text, r"\d\dT\d\d:\d\d:\d\dZ")
        text = self.run_as("mkeller", "levels", "list")
        self.assertIn("level sets in force at 2026-11-16 09:00 +00:00", text)
        # --at takes a local time and an ISO 8601 offset: 10:00+01:00 is 09:00 in London.
        a = self.run_as("mkeller", "levels", "list", "--at", "2026-11-16T10:00+01:00")
        self.assertIn("in force at 2026-11-16 09:00 +00:00", a)
        b = self.run_as("mkeller", "levels", "list", "--at", "2026-11-16 09:00")
        self.assertIn("in force at 2026-11-16 09:00 +00:00", b)

    @unittest.skipIf(TMUX is None, "tmux is not installed")
    def test_in_a_real_80_column_terminal(self):
        term = TmuxTerminal(WIDTH, 50)
        self.addCleanup(term.kill_server)
        d = self.demo
        for user, args in [("lsands", ["today"]), ("mkeller", ["detector", "list"]),
                           ("mkeller", ["levels", "list"]), ("mkeller", ["table", "list"]),
                           ("mkeller", ["plan", "show", "DEMO-1002", "BR-R-1"]),
                           ("mkeller", ["stats", "--month", "2026-11"])]:
            with self.subTest(screen=" ".join(args)):
                d.ensure_session(user, NOW)
                state = os.path.join(self.out, "state", user)
                cmd = "env -u FXLEDGER_USER FXLEDGER_NOW=%s XDG_STATE_HOME=%s NO_COLOR=1 " \
                      "FXLEDGER_DB=%s %s --user %s %s; echo EXIT=$?; sleep 600" % (
                          NOW, shlex.quote(state), shlex.quote(d.DB), shlex.quote(BIN), user,
                          " ".join(shlex.quote(a) for a in args))
                term.start(cmd)
                screen = term.wait_for("EXIT=") or term.screen()
                self.assertRegex(screen, r"EXIT=0\b")
                self.assertFits(screen, " ".join(args))


if __name__ == "__main__":
    main()
