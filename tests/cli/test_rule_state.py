"""The kept state of the rules over history (sql/015, src/store/rule_state.c,
docs/rules.md "Kept state"): the dose a detector counted since its
calibration and its drift chart are continued fraction by fraction, and
stay exactly what reading every row again gives.

The reference for the dose is the rule's definition worked out here in
Python from the measurement rows (docs/rules.md: corrected doses since the
latest calibration, a gross or implausible result at its expected dose,
amended rows left out), added in the rule's order (created_at, then id) with
Python's floats, which are IEEE 754 doubles as C's are: the same additions
in the same order give the same double. The drift chart is checked by
`fxledger verify`, which works every kept chart out again from the rows
with the chart's own code, and by the number of results it counts.
The department is review_scenario.py's (invented), with a second diode that
has a dose limit."""
import sqlite3

from fxlcli import main
from review_scenario import ReviewCase, reading_for


class RuleStateTest(ReviewCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.now = "2026-10-01T09:00:00Z"
        self.add_diode("D-2", "2027-06-30", "--dose-limit", "1000000", user="phys")
        fx.now = "2026-11-02T09:00:00Z"
        self.hour = 0

    def calibrate(self, at):
        self.fx.now = at
        self.calibrate_diode("D-2", "2027-06-30", user="phys")

    def log(self, mrn, at, *devs, expect=(0, 10, 11, 12)):
        """One fraction on D-2, the clock a minute after the treatment."""
        args = ["--json", "record", "--patient", mrn, "--at", at]
        for name, dev in zip(("AP", "PA"), devs):
            args += ["--field", name, "--detector", "D-2", "--reading", reading_for(dev)]
        self.fx.now = at[:-3] + "30Z"
        r = self.fx.run(*args, user="ther")
        self.assertIn(r.returncode, expect, r.stdout + r.stderr)

    def con(self):
        return sqlite3.connect("file:%s?mode=ro" % self.fx.db, uri=True)

    def kept(self):
        c = self.con()
        try:
            dose = c.execute("SELECT k.dose_cgy FROM dose_since_calibration k JOIN detectors d "
                             "ON d.id = k.detector_id WHERE d.serial = 'D-2'").fetchone()
            chart = c.execute("SELECT n, s_high, s_low FROM drift_charts k JOIN detectors d "
                              "ON d.id = k.detector_id WHERE d.serial = 'D-2'").fetchone()
        finally:
            c.close()
        return dose[0], chart

    def reference_dose(self):
        """The rule's sum from the rows (docs/rules.md), in its order."""
        c = self.con()
        try:
            cal = c.execute("SELECT c.calibrated_at FROM calibrations c JOIN detectors d ON "
                            "d.id = c.detector_id WHERE d.serial = 'D-2' "
                            "ORDER BY c.calibrated_at DESC, c.id DESC LIMIT 1").fetchone()[0]
            rows = c.execute(
                "SELECT m.corrected_dose_cgy, m.expected_dose_cgy, m.gross, m.verdict "
                "FROM measurements m JOIN fractions fr ON fr.id = m.fraction_id "
                "JOIN detectors d ON d.id = m.detector_id WHERE d.serial = 'D-2' "
                "AND m.created_at > ? AND fr.treated_at > ? "
                "AND m.id NOT IN (SELECT supersedes_id FROM measurements WHERE supersedes_id IS NOT NULL) "
                "ORDER BY m.created_at, m.id", (cal, cal)).fetchall()
        finally:
            c.close()
        total = 0.0
        for corrected, expected, gross, verdict in rows:
            if corrected is None:
                continue
            total += (expected or 0.0) if (gross or verdict == "implausible") else corrected
        return total, len(rows)

    def assertVerifies(self):
        r = self.fx.json("verify", user="aud")
        self.assertTrue(r["ok"], r)

    def assertVerifyNames(self, change, text):
        """A kept row changed outside fxledger (SQL `change`): verify fails
        naming it."""
        c = sqlite3.connect(self.fx.db)
        c.execute(change)
        c.commit()
        c.close()
        r = self.fx.run("--json", "verify", user="aud")
        self.assertNotEqual(r.returncode, 0)
        self.assertIn(text, r.stdout + r.stderr)

    def fractions(self, n, day, devs=(0.8, -1.3)):
        for i in range(n):
            self.log("P-1" if i % 2 == 0 else "P-2", "2026-11-%02dT%02d:00:00Z" % (day, 8 + i),
                     devs[0] + 0.37 * i, devs[1] - 0.21 * i)

    def test_kept_dose_and_chart_equal_the_rows(self):
        self.fractions(6, 2)
        dose, (n, _, _) = self.kept()
        want, rows = self.reference_dose()
        self.assertEqual(rows, 12)                   # 6 fractions x 2 fields
        self.assertEqual(dose, want)                 # to the bit
        self.assertAlmostEqual(dose, 12 * 200.0, delta=12 * 200 * 0.05)   # about 200 cGy each
        self.assertEqual(n, 12)                      # the chart counted every result
        self.assertVerifies()

    def test_amendment_late_entry_and_calibration_start_again(self):
        self.fractions(4, 2)
        # an amendment of a row already counted: the sum and the chart are
        # read again without it
        c = self.con()
        mid = c.execute("SELECT max(m.id) FROM measurements m JOIN detectors d ON "
                        "d.id = m.detector_id WHERE d.serial = 'D-2'").fetchone()[0]
        c.close()
        self.fx.now = "2026-11-02T20:00:00Z"
        self.fx.ok("amend", str(mid), "--reading", reading_for(2.5), "--reason",
                   "invented: typed the wrong digit", user="ther")
        self.assertEqual(self.kept()[0], self.reference_dose()[0])
        self.assertVerifies()
        # a fraction logged late, treated before the chart's latest result
        self.log("P-2", "2026-11-03T09:00:00Z", 0.4, 0.6)
        self.fx.now = "2026-11-03T21:00:00Z"
        self.log("P-1", "2026-11-03T07:30:00Z", 0.1, -0.2)
        dose, (n, _, _) = self.kept()
        self.assertEqual(dose, self.reference_dose()[0])
        self.assertEqual(n, 12)                      # 6 fractions x 2, the amended row once
        self.assertVerifies()
        # a new calibration: the sum starts again from it
        self.calibrate("2026-11-04T07:00:00Z")
        self.log("P-2", "2026-11-04T09:00:00Z", 0.0, 0.0)
        dose, _ = self.kept()
        want, rows = self.reference_dose()
        self.assertEqual(rows, 2)
        self.assertEqual(dose, want)
        self.assertVerifies()

    def test_continued_not_read_again_and_verify_finds_a_changed_row(self):
        self.fractions(3, 2)
        self.assertVerifyNames("UPDATE dose_since_calibration SET dose_cgy = dose_cgy - 1000",
                               "dose since calibration")
        # the next fraction continues the kept sum (it does not read the
        # rows again): the change carries on until the row is put right
        self.log("P-2", "2026-11-02T12:00:00Z", 0.0, 0.0)
        after, _ = self.kept()
        want, _ = self.reference_dose()
        self.assertAlmostEqual(after, want - 1000, places=6)

    def test_verify_finds_a_changed_chart(self):
        self.fractions(3, 2)
        self.assertVerifyNames("UPDATE drift_charts SET n = n + 1", "drift chart of detector")


if __name__ == "__main__":
    main()
