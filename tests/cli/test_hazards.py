"""Tests of mitigations listed in docs/hazards.md that no other test covers:
each one fails if its mitigation is taken out. The department is the one of
record_fixture.py (invented data): N = 10 cGy/nC for D-1001 and D-2002,
calibrated on LINAC-A 6X entrance at 20 degC, levels 5 % / 8 %.

Check values: on the reference field REF (10 x 10 cm, SSD 100 cm, open, normal
incidence) at --temp 20 every correction factor is 1, so D = reading x N
(AAPM Report 87 / TG-62 formula in record_fixture.py): 20.0 nC -> 200 cGy
(0 %), 21.2 nC -> 212 cGy (+6 %, outside the 5 % tolerance), 22.0 nC ->
220 cGy (+10 %, outside the 8 % action level); expected 200 cGy."""
import json
import os
import re
import select
import sqlite3
import subprocess
import time

from fxlcli import BIN, main
from record_fixture import MRN, PLAN, RecordTestCase, plan_document

TIME_RE = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}Z$")


class HazardTest(RecordTestCase):
    def ref(self, reading, *extra, **kw):
        return ["--field", "REF", "--detector", "D-1001", "--reading", str(reading), "--temp", "20"] + \
            list(extra)

    def replacement(self, now="2026-11-02T10:00:00Z"):
        """REC-2 replaces REC-1 (a plan change), imported at `now`; REF now
        expects 100 cGy."""
        doc = plan_document()
        doc.update(label="REC-2", replaces=PLAN)
        doc["fields"][0]["points"][0]["expected_dose_cgy"] = 100.0
        self.fx.ok("plan", "import", self.fx.write("rec2.json", json.dumps(doc)), user="phil", now=now)

    def sql(self, query, *args):
        con = sqlite3.connect(self.fx.db)
        try:
            return con.execute(query, args).fetchall()
        finally:
            con.close()

    # ---- wrong patient, wrong plan ---------------------------------------------------

    def test_identity_shown_with_every_result(self):
        """The verdict names the patient (MRN and full name) and the plan, so
        a reading logged on the wrong record is seen at once."""
        r = self.record(*self.ref(20.0))
        self.assertEqual(r.returncode, 0, r.stderr)
        first = r.stdout.splitlines()[0]
        self.assertIn("patient %s (Example, Invented)" % MRN, first)
        self.assertIn("plan '%s'" % PLAN, first)
        out = self.record_json(*self.ref(20.0))
        self.assertEqual(out["patient"], {"mrn": MRN, "name": "Example, Invented"})
        self.assertEqual(out["plan"]["label"], PLAN)

    def test_fraction_on_a_replaced_plan_refused(self):
        """After a plan change the old plan takes no fraction treated after
        the change: it would be judged against the old expected doses."""
        self.replacement(now="2026-11-02T10:00:00Z")
        self.fx.now = "2026-11-02T11:00:00Z"
        r = self.assertFailsUnchanged("record", "--patient", MRN, "--plan", PLAN, *self.ref(20.0),
                                      user="tina", expect_code=2,
                                      expect_in="plan 'REC-1' of patient 'TEST-0101' was replaced by "
                                                "plan 'REC-2' (imported 2026-11-02T10:00:00Z)")
        self.assertIn("log the fraction against plan 'REC-2'", r.stderr)
        # A fraction treated before the change may still be entered late.
        out = self.record_json("--plan", PLAN, "--at", "2026-11-02T09:30", *self.ref(20.0))
        self.assertEqual((out["plan"]["label"], out["results"][0]["verdict"]), (PLAN, "within_tolerance"))
        # Without --plan the current plan is taken: 200 cGy against REC-2's 100 cGy.
        # +100 %: a gross deviation, outside the action level (docs/physics.md).
        out = self.record_json(*self.ref(20.0), expect_code=12)
        self.assertEqual(out["plan"]["label"], "REC-2")
        self.assertEqual(out["results"][0]["verdict"], "outside_action")
        self.assertTrue(out["results"][0]["gross"])

    def test_plan_replaced_while_logging_interactively(self):
        """The interactive session shows plan REC-1; a plan change imported
        while the therapist types is not silently logged on the old plan."""
        self.fx.ensure_session("tina", "2026-11-02T11:00:00Z")
        env = self.fx.env("tina", "2026-11-02T11:00:00Z")
        p = subprocess.Popen(self.fx.argv("record", "--patient", MRN, "--interactive", user="tina"),
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
        seen = b""
        deadline = time.monotonic() + 20
        while b"detector serial" not in seen and time.monotonic() < deadline:
            ready, _, _ = select.select([p.stdout], [], [], 0.5)
            if ready:
                chunk = os.read(p.stdout.fileno(), 4096)
                if not chunk:
                    break
                seen += chunk
        self.assertIn(b"plan 'REC-1'", seen)
        self.replacement(now="2026-11-02T10:00:00Z")   # imported while the prompt waits
        # The session's open connection checkpoints the WAL when it ends, so
        # the file's bytes move; what is recorded must not.
        count = "SELECT (SELECT count(*) FROM fractions), (SELECT count(*) FROM audit_log)"
        before = self.sql(count)
        # REF: detector, reading, temperature; the reading is refused when it
        # is saved, and the session ends there.
        answers = ["D-1001", "20.0", "20", "", "", "", "", "", "", "", "", ""]
        out, err = p.communicate("\n".join(answers).encode() + b"\n", timeout=30)
        self.assertEqual(p.returncode, 2, (out + err).decode())
        self.assertIn(b"was replaced by plan 'REC-2'", err)
        self.assertEqual(self.sql(count), before)
        self.assertEqual(self.fx.json("history", "--patient", MRN), [])

    def test_fractions_logged_in_treatment_order(self):
        """Fraction numbers follow treatment times: a mistyped date (a year
        or a month off) is refused instead of filed among other fractions."""
        self.record_json(*self.ref(20.0))                               # fraction 1, 2026-11-02 09:00
        self.assertFailsUnchanged("record", "--patient", MRN, *self.ref(20.0, "--at", "2025-11-02"),
                                  user="tina", expect_code=2,
                                  expect_in="treatment time 2025-11-02T00:00:00Z of fraction 2 is out "
                                            "of order: fraction 1 of plan 'REC-1' was treated "
                                            "2026-11-02T09:00:00Z")
        self.fx.now = "2026-11-04T09:00:00Z"
        self.record_json(*self.ref(20.0, "--fraction", "3"))
        self.assertFailsUnchanged("record", "--patient", MRN, *self.ref(20.0, "--fraction", "2", "--at",
                                                                        "2026-11-05"),
                                  user="tina", expect_in="out of order", now="2026-11-06T09:00:00Z")
        # Between its neighbours, or at the same moment as one, is in order.
        out = self.record_json(*self.ref(20.0, "--fraction", "2", "--at", "2026-11-03T09:00"))
        self.assertEqual(out["fraction"], 2)

    def test_assumed_temperature_is_shown(self):
        """A temperature nobody entered is the skin-temperature setting (32
        degC by default, docs/settings.md): the verdict says it was assumed."""
        r = self.record("--detector", "D-1001", "--field", "REF", "--reading", "20.0",
                        "--field", "AP", "--reading", "20.0", "--temp", "30")
        self.assertEqual(r.returncode, 0, r.stderr)
        # The note is wrapped at 80 columns: read it as one paragraph.
        text = r.stdout[r.stdout.index("Temperature assumed"):]
        note = " ".join(text[:text.index("value.") + 6].split())
        self.assertEqual(note, "Temperature assumed (none entered) for REF entrance: 32.0 degC "
                               "assumed (setting skin_temp_c); give --temp with the measured value.")
        # history marks it too
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([h["temperature_assumed"] for h in hist], [True, False])
        self.assertIn("temperature assumed", self.fx.run("history", "--patient", MRN).stdout)
        r = self.record(*self.ref(20.0), now="2026-11-03T09:00:00Z")
        self.assertNotIn("Temperature assumed", r.stdout)

    # ---- calibration, detector, levels ------------------------------------------------

    def test_detector_without_calibration_for_the_beam(self):
        """D-1001 is calibrated on 6X only: on a 10X field it gives no dose,
        whatever its correction tables say."""
        fx = self.fx
        fx.ok("machine", "beam", "10X", "--machine", "LINAC-A", "--modality", "photon", "--energy", "10",
              "--dmax", "2.4", user="phil")
        fx.ok("patient", "add", "TEST-0202", "--family", "Other", "--given", "Invented")
        doc = plan_document()
        doc.update(patient_mrn="TEST-0202", label="X10-1")
        doc["fields"] = [dict(doc["fields"][0], beam="10X")]
        fx.ok("plan", "import", fx.write("x10.json", json.dumps(doc)), user="phil")
        r = fx.run("--json", "record", "--patient", "TEST-0202", *self.ref(20.0), user="tina")
        self.assertEqual(r.returncode, 10, r.stderr)
        res = json.loads(r.stdout)["results"][0]
        self.assertEqual(res["verdict"], "not_evaluable")
        self.assertIn("no calibration for this beam", " ".join(res["reasons"]))
        self.assertIsNone(res["corrected_dose_cgy"])

    def test_calibration_in_force_at_the_treatment_time(self):
        """A fraction treated before the detector's first calibration (1 Oct)
        is not judged with it."""
        out = self.record_json(*self.ref(20.0, "--at", "2026-09-30T09:00"), expect_code=10)
        res = out["results"][0]
        self.assertEqual(res["verdict"], "not_evaluable")
        self.assertIn("no calibration", " ".join(res["reasons"]))
        self.assertIsNone(res["corrected_dose_cgy"])

    def test_new_levels_never_rejudge_logged_results(self):
        """A result keeps the levels it was judged by; a later version of the
        levels applies to later fractions only."""
        first = self.record_json(*self.ref(21.2), expect_code=11)["results"][0]  # +6 % > 5 %
        self.assertEqual(first["verdict"], "outside_tolerance")
        self.fx.ok("levels", "set", "general", "--tolerance", "7", "--action", "9", user="phil",
                   now="2026-11-02T12:00:00Z")
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual((hist[0]["verdict"], hist[0]["tolerance_pct"]), ("outside_tolerance", 5))
        self.fx.now = "2026-11-03T09:00:00Z"
        second = self.record_json(*self.ref(21.2))["results"][0]
        self.assertEqual((second["verdict"], second["levels"]["tolerance_pct"]), ("within_tolerance", 7))

    # ---- alerts and output --------------------------------------------------------------

    def test_alert_on_escalated_and_amended_results(self):
        """The alert command runs for every outside-action result, also one
        reached by escalation or by an amendment."""
        dest = self.fx.path("alerts.txt")
        self.fx.ok("setting", "set", "alert_command", "cat >> '%s'; echo >> '%s'" % (dest, dest))
        self.record_json(*self.ref(21.2), expect_code=11)             # fraction 1: +6 %, no alert
        self.assertFalse(os.path.exists(dest))
        self.fx.now = "2026-11-03T09:00:00Z"
        esc = self.record_json(*self.ref(21.2), expect_code=12)       # fraction 2: escalated
        self.assertEqual(esc["results"][0]["verdict"], "outside_action")
        r = self.fx.run("--json", "amend", str(esc["results"][0]["measurement_id"] - 1), "--reading", "22.0",
                        "--reason", "typed 21.2 for 22.0", "--temp", "20", user="tina")
        self.assertEqual(r.returncode, 12, r.stderr)                  # +10 % > 8 %
        with open(dest, encoding="utf-8") as f:
            text = f.read()
        self.assertEqual(len(re.findall(r'"event":\s*"outside_action_level"', text)), 2, text[:500])
        outcomes = [json.loads(c)["outcome"] for (c,) in self.sql(
            "SELECT content FROM audit_log WHERE action = 'alert' ORDER BY id")]
        self.assertEqual(outcomes, ["ok", "ok"])

    def test_output_that_cannot_be_written_is_an_error(self):
        """A listing whose output is lost (a full disk) does not end with
        success."""
        with open("/dev/full", "w") as full:
            self.fx.ensure_session("admin")
            r = subprocess.run(self.fx.argv("patient", "list", user="admin"), stdout=full,
                               stderr=subprocess.PIPE, text=True, timeout=30,
                               env=self.fx.env("admin"))
        self.assertNotEqual(r.returncode, 0)
        self.assertIn("could not write the output", r.stderr)

    # ---- who did what, and when ----------------------------------------------------------

    def test_who_logged_and_amended_is_recorded(self):
        """Every row names the user who wrote it: fraction, measurements, the
        amendment, the queue events and the audit rows."""
        out = self.record_json(*self.ref(21.2), expect_code=11)
        mid = out["results"][0]["measurement_id"]
        self.assertEqual(out["recorded_by"], "tina")
        self.fx.ok("amend", str(mid), "--reading", "20.1", "--reason", "typed 21.2 for 20.1", user="phil",
                   now="2026-11-02T09:30:00Z")
        rows = self.sql("SELECT m.id, u.login, m.created_at FROM measurements m JOIN users u "
                        "ON u.id = m.user_id ORDER BY m.id")
        self.assertEqual([r[1] for r in rows], ["tina", "phil"])
        self.assertEqual(rows[1][2], "2026-11-02T09:30:00Z")
        self.assertEqual(self.sql("SELECT u.login FROM fractions f JOIN users u ON u.id = f.user_id"),
                         [("tina",)])
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([h["recorded_by"] for h in hist], ["tina", "phil"])
        audit = self.sql("SELECT user, action FROM audit_log WHERE action IN ('record', 'amend')")
        self.assertIn(("tina", "record"), audit)
        self.assertIn(("phil", "amend"), audit)
        events = self.fx.json("queue", "show", str(out["results"][0]["review_item_id"]))["events"]
        self.assertEqual(events[0]["user"], "tina")

    def test_fixed_clock_must_be_a_real_time(self):
        """FXLEDGER_NOW (the tests' fixed clock) is used only when it is a
        real UTC time; anything else is never stamped on the record."""
        for i, bad in enumerate(("2026-99-99T99:99:99Z", "DROP TABLE xxxxxxxxx", "2026-02-30T09:00:00Z")):
            with self.subTest(now=bad):
                r = self.fx.run("--json", "patient", "add", "CLK-%d" % i, "--family", "Clock", now=bad)
                self.assertEqual(r.returncode, 0, r.stderr)
                created = json.loads(r.stdout)["created_at"]
                self.assertRegex(created, TIME_RE)
                self.assertNotEqual(created, bad)
        rows = self.sql("SELECT at FROM audit_log")
        self.assertTrue(all(TIME_RE.match(at) for (at,) in rows), rows)
        self.assertTrue(self.fx.json("verify")["ok"])


if __name__ == "__main__":
    main()
