"""fxledger record and history: every verdict on an invented department, the
factors against the reading to dose formula (record_fixture.py, AAPM TG-62),
the boundary exactly at a level, inputs that make a result not evaluable, the
escalation rule, the readings file, JSON output and the alert hook."""
import json
import os
import sqlite3
import subprocess
import time

from fxlcli import main
from record_fixture import (MRN, PLAN, READINGS, SKIN_DEFAULT_C, RecordTestCase, deviation,
                            dose, equiv_square)


class RecordVerdictTest(RecordTestCase):
    def test_within_tolerance_factors_and_snapshot(self):
        out = self.record_json("--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual(out["fraction"], 1)
        self.assertEqual(out["plan"]["label"], PLAN)
        r = out["results"][0]
        fs = equiv_square(10, 20)  # 13.333 cm, Sterling rule
        self.assertAlmostEqual(r["parameters"]["field_size_cm"], 13.333333333, places=8)
        want = dose(20.0, fs, 100, temp=SKIN_DEFAULT_C)  # formula, record_fixture.py
        self.assertAlmostEqual(r["corrected_dose_cgy"], want, places=9)
        self.assertEqual(r["deviation_pct"], deviation(want, 200.0))
        self.assertEqual(r["verdict"], "within_tolerance")
        self.assertFalse(r["temp_entered"])
        self.assertEqual(r["temp_c"], SKIN_DEFAULT_C)
        self.assertEqual(r["calibration"]["factor_n_cgy_per_unit"], 10.0)
        self.assertEqual(r["levels"]["tolerance_pct"], 5)
        self.assertEqual(r["levels"]["action_pct"], 8)
        self.assertIsNone(r["review_item_id"])
        # The stored row carries the same snapshot.
        con = sqlite3.connect(self.fx.db)
        row = con.execute("SELECT factor_n, cf_field_size, cf_ssd, cf_temp, corrected_dose_cgy, "
                          "expected_dose_cgy, threshold_set_id, tolerance_pct, action_pct, verdict, "
                          "temp_entered FROM measurements").fetchone()
        con.close()
        self.assertEqual(row[0], 10.0)
        self.assertAlmostEqual(row[1], r["factors"]["field_size"], places=12)
        self.assertAlmostEqual(row[4], want, places=9)
        self.assertEqual(row[5], 200.0)
        self.assertIsNotNone(row[6])
        self.assertEqual(row[7:11], (5.0, 8.0, "within_tolerance", 0))
        self.fx.ok("verify")

    def test_due_fields_left_out_are_named_at_once(self):
        """Options form: the plan's first fraction makes every field due
        (policy 'first', docs/format-plan.md); fraction 1 logged with AP
        alone names the others at the end of the fraction, each with the
        missing-measurement item opened then, not at the next fraction."""
        r = self.record("--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual(r.returncode, 0, r.stderr)
        items = self.fx.json("queue", "list", user="phil")
        missing = sorted((i["field"], i["point"], i["id"]) for i in items
                         if i["rule"] == "missing_measurement")
        self.assertEqual([m[:2] for m in missing],
                         [("LAT", "entrance"), ("LAT", "exit"), ("OBL", "entrance"), ("REF", "entrance")])
        for field, point, item in missing:
            self.assertIn("Not measured: %s %s was due (first fraction) and was not measured: "
                          "review item #%d" % (field, point, item), " ".join(r.stdout.split()))
        self.assertTrue(all(len(line) <= 80 for line in r.stdout.splitlines()))
        # Fraction 2 without them: still due (the first measurement is still
        # owed, as the worklist shows) and named again with the same items,
        # none opened twice.
        out = self.record_json("--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual(sorted((m["field"], m["point"], m["review_item_id"]) for m in out["missing"]),
                         missing)
        again = [i for i in self.fx.json("queue", "list", user="phil")
                 if i["rule"] == "missing_measurement"]
        self.assertEqual(sorted(i["id"] for i in again), sorted(m[2] for m in missing))

    def test_due_fields_left_out_in_json(self):
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "20.0",
                               "--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual([(m["field"], m["point"], m["due_reason"]) for m in out["missing"]],
                         [("LAT", "entrance", "first fraction"), ("LAT", "exit", "first fraction"),
                          ("OBL", "entrance", "first fraction")])
        self.assertTrue(all(m["review_item_id"] > 0 for m in out["missing"]))

    def test_every_factor_of_a_wedged_oblique_field(self):
        # LAT entrance: 10 x 10 cm, SSD 90, wedge 30, incidence 30 deg, 28 degC.
        out = self.record_json("--field", "LAT:entrance", "--detector", "D-1001", "--reading", "15.3",
                               "--temp", "28")
        r = out["results"][0]
        want = dose(15.3, 10, 90, wedge=30, angle=30, temp=28)  # formula, record_fixture.py
        self.assertAlmostEqual(r["corrected_dose_cgy"], want, places=9)
        self.assertAlmostEqual(r["factors"]["ssd"], (0.985 + 1.000) / 2, places=12)  # midpoint 80..100
        self.assertEqual(r["factors"]["wedge"], 1.013)
        self.assertEqual(r["factors"]["angle"], 0.995)
        self.assertTrue(r["temp_entered"])
        self.assertEqual(r["deviation_pct"], deviation(want, 150.0))

    def test_outside_tolerance_text_and_exit_code(self):
        # REF is at every reference condition: D = M x 10 cGy/nC at T_cal.
        want = dose(21.2, 10, 100, temp=20)
        self.assertGreater(deviation(want, 200), 5)
        self.assertLess(deviation(want, 200), 8)
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "21.2", "--temp", "20")
        self.assertEqual(r.returncode, 11, r.stderr)
        self.assertIn("outside tolerance", r.stdout)
        self.assertIn("Check detector placement", r.stdout)  # fxl_verdict_guidance
        # The table gives doses in the cGy column (80 columns: the unit is in the heading).
        row = next(line for line in r.stdout.splitlines() if line.startswith("#1 "))
        self.assertIn(" %.1f " % want, row)
        self.assertIn("21.200 nC", row)
        self.assertIn("qualified", r.stdout)  # the caveat
        con = sqlite3.connect(self.fx.db)
        items = con.execute("SELECT severity, status FROM review_items WHERE rule = 'result'").fetchall()
        events = con.execute("SELECT count(*) FROM review_events WHERE kind = 'open'").fetchone()[0]
        con.close()
        self.assertEqual(items, [(2, "open")])
        self.assertGreaterEqual(events, 1)

    def test_outside_action(self):
        want = dose(22.0, 10, 100, temp=20)
        self.assertGreater(deviation(want, 200), 8)
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "22.0",
                               "--temp", "20", expect_code=12)
        self.assertEqual(out["results"][0]["verdict"], "outside_action")
        self.assertEqual(out["worst_verdict"], "outside_action")
        self.assertIn("physicist", out["results"][0]["guidance"])

    def test_boundary_exactly_at_the_tolerance_level_is_inside(self):
        # 21.0 nC x 10 cGy/nC = 210 cGy: exactly +5.00 % (arithmetic), and the
        # tolerance level is 5 %: a deviation at a level counts as inside it.
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "21.0",
                               "--temp", "20")
        self.assertEqual(out["results"][0]["deviation_pct"], 5.0)
        self.assertEqual(out["results"][0]["verdict"], "within_tolerance")

    def test_boundary_exactly_at_the_action_level(self):
        # 21.6 nC: 216 cGy, +8.00 % exactly at the action level (arithmetic):
        # outside tolerance, not outside action.
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "21.6",
                               "--temp", "20", expect_code=11)
        self.assertEqual(out["results"][0]["deviation_pct"], 8.0)
        self.assertEqual(out["results"][0]["verdict"], "outside_tolerance")

    def test_just_above_the_tolerance_level(self):
        # 21.002 nC: 210.02 cGy, +5.01 % (arithmetic): outside tolerance.
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "21.002",
                               "--temp", "20", expect_code=11)
        self.assertEqual(out["results"][0]["deviation_pct"], 5.01)
        self.assertEqual(out["results"][0]["verdict"], "outside_tolerance")

    def test_unit_slip_is_a_gross_deviation(self):
        # Ten times the expected reading: probably a unit slip, but a gross
        # deviation is an action-level result until a re-read clears it
        # (docs/physics.md section 3.3; tests/cli/test_gross.py).
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "200",
                               "--temp", "20", expect_code=12)
        r = out["results"][0]
        self.assertEqual(r["verdict"], "outside_action")
        self.assertTrue(r["gross"])
        self.assertIn("unit slip", " ".join(r["reasons"]))
        con = sqlite3.connect(self.fx.db)
        self.assertEqual(con.execute("SELECT severity FROM review_items WHERE rule = 'result'").fetchone()[0], 4)
        self.assertEqual(con.execute("SELECT gross FROM measurements").fetchone()[0], 1)
        con.close()

    def test_gross_deviation_shows_its_dose(self):
        # 200 nC x 10 cGy/nC = 2000 cGy, ten times the expected 200 cGy: shown as
        # measured, so the physicist sees what the detector read.
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "200", "--temp", "20")
        self.assertEqual(r.returncode, 12, r.stderr)
        # the verdict table (laid out in rows or, when too wide, one block per
        # result) before the first explanation
        table = r.stdout[:r.stdout.index("REF entrance: outside action level")]
        self.assertIn("gross", table)
        self.assertIn("2000.0", table)
        self.assertIn("+900.00 %", table)
        self.assertIn("200.000 nC", table)

    def test_amendment_keeps_the_background(self):
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "2.01",
                               "--background", "0.01", "--temp", "20", expect_code=12)
        first = out["results"][0]["measurement_id"]
        out = self.fx.json("amend", str(first), "--reading", "20.01", "--reason", "typed 2.01",
                           user="tina")
        # (20.01 - 0.01) x 10 = 200 cGy (formula): M_0 of the original kept
        self.assertAlmostEqual(out["results"][0]["corrected_dose_cgy"], 200.0, places=9)
        con = sqlite3.connect(self.fx.db)
        self.assertEqual([r[0] for r in con.execute("SELECT background FROM measurements ORDER BY id")],
                         [0.01, 0.01])
        con.close()

    def test_several_fields_worst_result_wins(self):
        r = self.record("--detector", "D-1001", "--temp", "20",
                        "--field", "REF", "--reading", "20.0",
                        "--field", "AP", "--reading", "22.5")
        self.assertEqual(r.returncode, 12, r.stderr)
        self.assertIn("within tol.", r.stdout)
        self.assertIn("outside action level", r.stdout)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([h["field"] for h in hist], ["REF", "AP"])
        self.assertTrue(all(h["temp_c"] == 20 and h["detector"] == "D-1001" for h in hist))

    def test_background_is_subtracted(self):
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "20.1",
                               "--background", "0.1", "--temp", "20")
        # (M - M_0) x N at the reference: (20.1 - 0.1) x 10 = 200 cGy (formula).
        self.assertAlmostEqual(out["results"][0]["corrected_dose_cgy"],
                               dose(20.1, 10, 100, temp=20, background=0.1), places=9)
        self.assertEqual(out["results"][0]["verdict"], "within_tolerance")


class RecordNotEvaluableTest(RecordTestCase):
    def assertNotEvaluable(self, out, needle):
        r = out["results"][0]
        self.assertEqual(r["verdict"], "not_evaluable")
        self.assertIsNone(r["corrected_dose_cgy"])
        self.assertIsNone(r["deviation_pct"])
        self.assertTrue(any(needle in x for x in r["reasons"]), r["reasons"])
        self.assertEqual(out["worst_verdict"], "not_evaluable")

    def test_no_levels_is_never_a_pass(self):
        self.fx.ok("levels", "set", "general", "--deactivate", "--effective", "2026-11-01")
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "20.0",
                               "--temp", "20", expect_code=10)
        r = out["results"][0]
        self.assertEqual(r["verdict"], "not_evaluable")
        self.assertIsNone(r["levels"])
        self.assertTrue(any("levels" in x for x in r["reasons"]), r["reasons"])
        text = self.record("--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual(text.returncode, 10)
        self.assertNotIn("within tolerance", text.stdout)
        self.assertIn("not evaluable", text.stdout)

    def test_retired_detector(self):
        self.fx.ok("detector", "retire", "D-2002", "--reason", "worn out", "--at", "2026-11-01",
                   user="phil")
        # Before its retirement the same detector was fine (fractions are
        # logged in the order they were treated).
        out = self.record_json("--field", "REF", "--detector", "D-2002", "--reading", "20.0",
                               "--temp", "20", "--at", "2026-10-30T09:00", "--fraction", "1")
        self.assertEqual(out["results"][0]["verdict"], "within_tolerance")
        out = self.record_json("--field", "REF", "--detector", "D-2002", "--reading", "20.0",
                               expect_code=10)
        self.assertNotEvaluable(out, "retired")

    def test_expired_calibration(self):
        out = self.record_json("--field", "REF", "--detector", "D-3003", "--reading", "20.0",
                               expect_code=10)
        self.assertNotEvaluable(out, "calibration expired on 2026-08-31")

    def test_no_calibration_for_exit(self):
        out = self.record_json("--field", "LAT:exit", "--detector", "D-1001", "--reading", "6.0",
                               expect_code=10)
        self.assertNotEvaluable(out, "no calibration")

    def test_parameter_outside_table(self):
        out = self.record_json("--field", "OBL", "--detector", "D-1001", "--reading", "18.0",
                               expect_code=10)
        self.assertNotEvaluable(out, "SSD 130.0 cm is outside the commissioned table 80.0-120.0 cm")

    def test_no_table_and_not_at_reference(self):
        # D-2002 has no correction tables: AP's 13.3 cm field differs from the
        # 10 cm reference, so no factor can be given.
        out = self.record_json("--field", "AP", "--detector", "D-2002", "--reading", "20.0",
                               expect_code=10)
        self.assertNotEvaluable(out, "field size")


class RecordHistoryRuleTest(RecordTestCase):
    def test_two_consecutive_outside_same_sign_escalate(self):
        self.assertEqual(self.record("--field", "REF", "--detector", "D-1001", "--reading", "21.2",
                                     "--temp", "20", now="2026-11-02T09:00:00Z").returncode, 11)
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "21.3", "--temp", "20",
                        now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 12, r.stdout + r.stderr)
        self.assertIn("escalated", r.stdout)
        self.assertIn("two consecutive measured fractions", r.stdout)
        hist = self.fx.json("history", "--patient", MRN, "--field", "REF")
        self.assertEqual([h["verdict"] for h in hist], ["outside_tolerance", "outside_action"])
        self.assertEqual([h["deviation_pct"] for h in hist], [6.0, 6.5])  # 213 cGy vs 200, arithmetic

    def test_opposite_signs_do_not_escalate(self):
        self.record("--field", "REF", "--detector", "D-1001", "--reading", "21.2", "--temp", "20")
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "18.8", "--temp", "20",
                        now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 11, r.stdout)
        self.assertNotIn("escalated", r.stdout)


class RecordFileTest(RecordTestCase):
    def test_readings_file_example(self):
        out = self.fx.json("record", "--file", os.path.join(READINGS, "fraction_two_fields.json"),
                           user="tina")
        self.assertEqual(out["fraction"], 2)
        self.assertEqual(out["treated_at"], "2026-11-02T08:30:00Z")
        self.assertEqual([r["field"] for r in out["results"]], ["REF", "LAT"])
        lat = out["results"][1]
        self.assertEqual(lat["point"], "entrance")
        want = dose(15.5, 10, 90, wedge=30, angle=30, temp=30.5)  # formula, record_fixture.py
        self.assertAlmostEqual(lat["corrected_dose_cgy"], want, places=9)
        self.assertEqual(out["results"][0]["background"], 0.02)

    def test_readings_file_on_stdin_and_patient_must_agree(self):
        with open(os.path.join(READINGS, "fraction_two_fields.json"), encoding="utf-8") as f:
            text = f.read()
        self.assertFailsUnchanged("record", "--patient", "TEST-0999", "--file", "-", stdin=text,
                                  user="tina", expect_code=2, expect_in="differs")
        self.fx.ok("record", "--file", "-", stdin=text, user="tina")


class OutputFailsAfterCommitTest(RecordTestCase):
    def run_to_dev_full(self, *args, stdin=None, now=None):
        """fxledger with standard output on /dev/full (every write fails
        with ENOSPC, as on a full disk: Linux null(4))."""
        self.fx.ensure_session("tina", now)
        rfd, wfd = os.pipe()
        os.write(wfd, (self.fx.passwords["tina"] + "\n").encode())
        os.close(wfd)
        try:
            with open("/dev/full", "w") as full:
                return subprocess.run(self.fx.argv(*args, user="tina", password_fd=rfd), stdout=full,
                                      stderr=subprocess.PIPE, input=stdin, text=True,
                                      env=self.fx.env("tina", now), timeout=60, pass_fds=(rfd,))
        finally:
            os.close(rfd)

    def test_saved_fraction_named_when_stdout_is_full(self):
        """The fraction is committed before its verdicts are printed; when
        printing fails the error says it was saved, with its ids, so nobody
        logs it twice."""
        r = self.run_to_dev_full("record", "--patient", MRN, "--detector", "D-1001", "--temp", "20",
                                 "--field", "REF", "--reading", "20.0", "--field", "AP", "--reading", "21.0")
        self.assertEqual(r.returncode, 3, r.stderr)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual(len(hist), 2)
        ids = sorted(h["measurement_id"] for h in hist)
        # errno is known only when the last write failed (else "write error")
        self.assertRegex(r.stderr, r"could not write the output \((No space left on device|write error)\), "
                         r"but fraction 1 of patient '%s' was saved \(fraction id " % MRN)
        self.assertIn("measurement ids %d to %d" % (ids[0], ids[1]), r.stderr)
        self.assertIn("do not enter it again", r.stderr)
        self.assertNotIn("unsaved", r.stderr)
        # Field by field: each field is saved when entered; the message names them.
        r = self.run_to_dev_full("record", "--patient", MRN, "--interactive",
                                 stdin="20.0\n20\n\n\n\n\n\n\n\n\n\n", now="2026-11-03T09:00:00Z")
        hist = self.fx.json("history", "--patient", MRN, now="2026-11-03T09:00:00Z")
        new = [h["measurement_id"] for h in hist if h["fraction"] == 2]
        self.assertEqual(len(new), 1, r.stderr)
        self.assertIn("but fraction 2 of patient '%s' was saved (fraction id " % MRN, r.stderr)
        self.assertIn("measurement id %d;" % new[0], r.stderr)
        # A command that saved nothing says only that the output failed.
        r = self.run_to_dev_full("history", "--patient", MRN)
        self.assertRegex(r.stderr.strip(), r"^fxledger: error: could not write the output "
                         r"\((No space left on device|write error)\)$")
        # Any other command that saved something says so (no fraction to name).
        r = self.run_to_dev_full("patient", "add", "P-FULL", "--family", "Invented")
        self.assertIn("but the command completed and what it changed is saved", r.stderr)
        self.assertEqual(self.fx.run("patient", "show", "P-FULL").returncode, 0)


class HistoryTest(RecordTestCase):
    def test_history_lists_and_marks_superseded(self):
        self.record("--field", "REF", "--detector", "D-1001", "--reading", "2.0", "--temp", "20")
        # A superseding row as 'fxledger amend' writes it (append-only: INSERT).
        con = sqlite3.connect(self.fx.db)
        con.execute("INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, "
                    "temp_c, temp_entered, verdict, supersedes_id, amend_reason, user_id, created_at) "
                    "SELECT fraction_id, field_id, detector_id, 20.0, reading_unit, temp_c, temp_entered, "
                    "'within_tolerance', id, 'decimal point', user_id, created_at FROM measurements")
        con.commit()
        con.close()
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual(len(hist), 2)
        self.assertEqual(hist[0]["superseded_by"], hist[1]["measurement_id"])
        self.assertFalse(hist[0]["current"])
        self.assertEqual(hist[1]["supersedes_id"], hist[0]["measurement_id"])
        text = self.fx.ok("history", "--patient", MRN, "--plan", PLAN).stdout
        self.assertIn("superseded by #%d" % hist[1]["measurement_id"], text)
        self.assertIn("amends #%d" % hist[0]["measurement_id"], text)
        self.assertIn("2.000 nC", text)

    def test_history_filters_and_unknowns(self):
        self.record("--field", "REF", "--detector", "D-1001", "--reading", "20.0")
        self.assertEqual(self.fx.json("history", "--patient", MRN, "--field", "AP"), [])
        self.assertEqual(len(self.fx.json("history", "--patient", MRN, "--field", "REF")), 1)
        self.assertFailsUnchanged("history", "--patient", "NOPE", expect_code=2, expect_in="unknown patient")
        self.assertFailsUnchanged("history", "--patient", MRN, "--field", "XX", expect_code=2,
                                  expect_in="unknown field 'XX'")
        self.assertFailsUnchanged("history", "--patient", MRN, "--plan", "X", expect_code=2,
                                  expect_in="unknown plan 'X'")
        self.assertIn("usage: fxledger history", self.fx.ok("history", "--help").stdout)
        self.assertIn("usage: fxledger record", self.fx.ok("record", "--help").stdout)


class AlertHookTest(RecordTestCase):
    def action(self, now="2026-11-02T09:00:00Z"):
        return self.record("--field", "REF", "--detector", "D-1001", "--reading", "22.0", "--temp",
                           "20", now=now)

    def alert_audit(self):
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT content FROM audit_log WHERE action = 'alert'").fetchall()
        con.close()
        return [json.loads(r[0]) for r in rows]

    def test_hook_gets_the_results_on_stdin(self):
        dest = self.fx.path("alert.json")
        self.fx.ok("setting", "set", "alert_command", "cat > '%s'" % dest)
        # A result within tolerance does not call the hook.
        self.record("--field", "AP", "--detector", "D-1001", "--reading", "20.0")
        self.assertFalse(os.path.exists(dest))
        r = self.action(now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 12)
        self.assertNotIn("warning", r.stderr)
        with open(dest, encoding="utf-8") as f:
            sent = json.load(f)
        self.assertEqual(sent["event"], "outside_action_level")
        self.assertEqual(sent["patient"]["mrn"], MRN)
        self.assertEqual(sent["fraction"], 2)
        self.assertEqual(sent["results"][0]["verdict"], "outside_action")
        self.assertEqual(self.alert_audit()[0]["outcome"], "ok")
        self.fx.ok("verify")

    def test_hook_output_never_reaches_the_terminal_raw(self):
        """What the hook writes (stdout and stderr) is shown on our stderr
        line by line, escape sequences and bidi controls as '?', so a hook
        cannot clear the screen or recolour the verdict; --json output stays
        valid JSON; more than 10 lines are cut with a note."""
        self.fx.ok("setting", "set", "alert_command",
                   "cat > /dev/null; printf '\\033[2J\\033[31mpaged\\n'; "
                   "printf 'e\\342\\200\\256rr\\033]0;title\\007\\n' >&2; "
                   "i=0; while [ $i -lt 20 ]; do echo line$i; i=$((i+1)); done")
        r = self.fx.run("--json", "record", "--patient", MRN, "--field", "REF", "--detector", "D-1001",
                        "--reading", "22.0", "--temp", "20", user="tina")
        self.assertEqual(r.returncode, 12, r.stderr)
        json.loads(r.stdout)
        self.assertNotIn("\x1b", r.stdout + r.stderr)
        self.assertNotIn("\u202e", r.stdout + r.stderr)
        self.assertNotIn("\x07", r.stdout + r.stderr)
        self.assertIn("fxledger: alert command: ?[2J?[31mpaged\n", r.stderr)
        self.assertIn("fxledger: alert command: e???rr?]0;title?\n", r.stderr)
        self.assertIn("fxledger: alert command: line7\n", r.stderr)
        self.assertNotIn("line8", r.stderr)      # 2 lines above + 8 = the 10 shown
        self.assertIn("fxledger: alert command: (more output not shown)", r.stderr)
        self.assertEqual(self.alert_audit()[0]["outcome"], "ok")

    def test_failing_hook_keeps_the_record(self):
        self.fx.ok("setting", "set", "alert_command", "exit 3")
        r = self.action()
        self.assertEqual(r.returncode, 12)
        self.assertIn("warning: the alert command failed (exit 3)", r.stderr)
        self.assertEqual(len(self.fx.json("history", "--patient", MRN)), 1)
        audit = self.alert_audit()
        self.assertEqual((audit[0]["outcome"], audit[0]["exit_code"]), ("failed", 3))

    def test_hanging_hook_is_stopped(self):
        self.fx.ok("setting", "set", "alert_command", "sleep 30")
        self.fx.ok("setting", "set", "alert_timeout_s", "1")
        start = time.monotonic()
        r = self.action()
        self.assertLess(time.monotonic() - start, 10)
        self.assertEqual(r.returncode, 12)
        self.assertIn("did not finish within 1 s", r.stderr)
        self.assertEqual(len(self.fx.json("history", "--patient", MRN)), 1)
        self.assertEqual(self.alert_audit()[0]["outcome"], "timed_out")
        self.fx.ok("verify")


if __name__ == "__main__":
    main()
