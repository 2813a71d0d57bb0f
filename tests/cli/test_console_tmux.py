"""The console as a therapist uses it, driven through tmux (a real terminal
of 80 columns): logging a 3-field fraction from the worklist costs at most
10 keystrokes beyond the readings and temperatures (counted here: 8, see
docs/record.md), and the screens a therapist or physicist reads - the
worklist, the interactive session, the verdict table, the history and the
review queue - have no line over 80 columns. Skipped only when tmux is not
installed. The department, patients and plans are invented."""
import json
import shlex
import unittest

from fxlcli import main
from record_fixture import RecordTestCase
from tmux_terminal import TMUX, TmuxTerminal

WIDTH = 80
MRN2 = "TEST-0202"


def three_field_plan():
    """Invented: three entrance fields measured every fraction."""
    def field(name, gantry):
        return {"name": name, "machine": "LINAC-A", "beam": "6X", "setup": "ssd", "mu": 200,
                "ssd_cm": 100, "x_cm": 10, "y_cm": 10, "wedge_deg": 0, "tray": False,
                "gantry_deg": gantry, "incidence_deg": 0, "policy": "every",
                "points": [{"point": "entrance", "expected_dose_cgy": 200.0, "expected_source": "tps"}]}
    return {"format": "fxledger-plan/1", "comment": "Invented test data.", "patient_mrn": MRN2,
            "label": "THREE", "site": "Pelvis", "technique": "3D", "fractions": 10,
            "fields": [field("F1", 0), field("F2", 90), field("F3", 270)]}


@unittest.skipIf(TMUX is None, "tmux is not installed")
class ConsoleTmuxTest(RecordTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("patient", "add", MRN2, "--family", "Threefield", "--given", "Invented")
        fx.ok("plan", "import", fx.write("three.json", json.dumps(three_field_plan())))
        # Fraction 1 from options: each field's detector is known from now on.
        fx.ok("record", "--patient", MRN2, "--detector", "D-1001", "--temp", "31",
              "--field", "F1", "--reading", "20.0", "--field", "F2", "--reading", "20.1",
              "--field", "F3", "--reading", "19.9", user="tina")
        self.term = TmuxTerminal(WIDTH, 60)
        self.addCleanup(self.term.kill_server)

    def start(self, args, now):
        """Runs fxledger in a detached tmux session of WIDTH columns."""
        self.fx.ensure_session("tina", now)       # tina's session (fxlcli.py)
        env = "FXLEDGER_NOW=%s XDG_STATE_HOME=%s NO_COLOR=1" % (
            now, shlex.quote(self.fx.state_dir("tina")))
        cmd = "env -u FXLEDGER_DB -u FXLEDGER_USER %s %s --db %s --user tina %s; echo EXIT=$?; sleep 600" % (
            env, shlex.quote(self.fx.bin), shlex.quote(self.fx.db), " ".join(shlex.quote(a) for a in args))
        self.term.start(cmd)

    def wait_for(self, text, count=1):
        s = self.term.wait_for(text, count)
        if s is None:
            self.fail("timed out waiting for %r; screen:\n%s" % (text, self.term.screen()))
        return s

    def keys(self, *k):
        self.term.keys(*k)

    def assertFits(self, text):
        long_lines = [l for l in text.splitlines() if len(l.rstrip()) > WIDTH]
        self.assertEqual(long_lines, [], "lines over %d columns" % WIDTH)

    def test_three_fields_from_the_worklist_in_eight_keystrokes(self):
        self.start(["record"], "2026-11-03T09:00:00Z")
        counted = 0

        def key(k):              # a keystroke that is not part of a reading or temperature
            nonlocal counted
            counted += 1
            self.keys(k)

        self.wait_for("Patient: line 1-2 or MRN:")
        key("2")                 # TEST-0202 is line 2 (by MRN)
        key("Enter")
        for i, reading in enumerate(("20.2", "20.0", "19.8"), start=1):
            self.wait_for("reading nC (Enter skips, d: other detector):", i)
            self.keys("-l", reading)          # the reading itself is not counted
            key("Enter")
            self.wait_for("temperature degC [32]:", i)
            key("Enter")                      # the default temperature
            self.wait_for("-> deviation", i)  # the field's verdict, before the next field
        s = self.wait_for("EXIT=")
        self.assertIn("EXIT=0", s)
        self.assertLessEqual(counted, 10)
        self.assertEqual(counted, 8)          # the count documented in docs/record.md
        self.assertIn("Fraction 2 closed: 3 fields measured.", s)
        self.assertIn("place D-1001 at the entrance", s)
        hist = self.fx.json("history", "--patient", MRN2)
        self.assertEqual([(h["fraction"], h["field"], h["reading"]) for h in hist[3:]],
                         [(2, "F1", 20.2), (2, "F2", 20.0), (2, "F3", 19.8)])
        self.assertFits(s)

    def test_screens_fit_80_columns(self):
        # A hold, an amendment with a long reason and a queue to list.
        r = self.fx.run("record", "--patient", MRN2, "--detector", "D-1001", "--temp", "31",
                        "--field", "F1", "--reading", "22.5", "--field", "F2", "--reading", "20.0",
                        "--field", "F3", "--reading", "20.0", user="tina", now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 12, r.stderr)     # outside the action level: a hold
        m = self.fx.json("history", "--patient", MRN2)[-1]["measurement_id"]
        self.fx.ok("amend", str(m), "--reading", "20.1", "--reason",
                   "the electrometer was read before the beam had ended; read again after the "
                   "beam-off signal with the cable checked end to end", user="tina",
                   now="2026-11-03T09:10:00Z")
        screens = [
            ["today"],
            ["record", "--patient", MRN2, "--detector", "D-2002", "--field", "F1", "--reading",
             "20.0", "--field", "F2", "--reading", "20.0", "--field", "F3", "--reading", "20.0"],
            ["history", "--patient", MRN2],
            ["queue", "list"],
            ["today", "--at", "2026-11-05T08:00"],
        ]
        for args in screens:
            with self.subTest(screen=" ".join(args)):
                self.start(args, "2026-11-04T09:00:00Z")
                s = self.wait_for("EXIT=")
                self.assertRegex(s, r"EXIT=(0|1[0-2])\b")
                self.assertGreater(len(s.splitlines()), 3)
                self.assertFits(s)


if __name__ == "__main__":
    main()
