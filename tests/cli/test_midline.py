"""Midline dose from an entrance-exit pair: when a field has both an entrance
and an exit reading in one fraction, the verdict table and the history show
the midline estimate with the two corrected doses it came from, and --json
carries it.

Method (named beside the check values, docs/expected-dose.md section 5):
geometric mean sqrt(D_E x D_X), with the arithmetic mean (D_E + D_X)/2 beside
it, as described in ESTRO Booklet 1 (Van Dam and Marinello, 2nd ed. 2006,
from memory). Check values arithmetic of the published formula: D_E 120, D_X 60 cGy give
arithmetic 90.000 and geometric 84.853 cGy. Test data is invented."""
import json
import math

import os

from fxlcli import DATA, main
from record_fixture import MRN, RecordTestCase, dose

EXIT_TABLES = os.path.join(DATA, "corrections", "diode_6x_exit.json")

GEOMETRIC_120_60 = 84.853   # sqrt(120 x 60), arithmetic of the published formula
ARITHMETIC_120_60 = 90.000  # (120 + 60)/2, arithmetic of the published formula


def reading_for(target_cgy):
    """The reading of D-1001 on field LAT (10 x 10 cm, SSD 90, wedge 30,
    incidence 30 deg, 32 degC) that the reading-to-dose formula
    (record_fixture.dose) turns into target_cgy."""
    return target_cgy / dose(1.0, 10, 90, wedge=30, angle=30, temp=32)


class MidlineTest(RecordTestCase):
    def setUp(self):
        super().setUp()
        # an exit cross-calibration for D-1001 (same N: 100 cGy / 10 nC) behind a
        # 20 cm phantom, and its exit tables (invented): field size, wedge, tray
        # and angle as at entrance, the SDD table the entrance SSD table moved by
        # the 20 cm reference (SDD 120 at SSD 100), so LAT exit (SSD 90 + 20 cm =
        # SDD 110) gets the product of factors of LAT entrance (SSD 90)
        self.fx.ok("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point", "exit",
                   "--chamber-dose", "100", "--readings", "10.0", "--temp", "20", "--at", "2026-10-01",
                   "--thickness", "20")
        self.fx.ok("table", "load", EXIT_TABLES)

    def pair(self, entrance_cgy, exit_cgy, exit_detector="D-1001", expect_code=None, **kw):
        args = ["--field", "LAT:entrance", "--detector", "D-1001", "--reading", repr(reading_for(entrance_cgy)),
                "--temp", "32", "--field", "LAT:exit", "--detector", exit_detector, "--reading",
                repr(reading_for(exit_cgy)), "--temp", "32"]
        r = self.fx.run("--json", "record", "--patient", MRN, *args, user="tina", **kw)
        if expect_code is not None:
            self.assertEqual(r.returncode, expect_code, r.stdout + r.stderr)
        return json.loads(r.stdout)

    def test_check_values_in_the_verdict_json_and_table(self):
        out = self.pair(120.0, 60.0)
        doses = {m["point"]: m["corrected_dose_cgy"] for m in out["results"]}
        self.assertAlmostEqual(doses["entrance"], 120.0, places=9)
        self.assertAlmostEqual(doses["exit"], 60.0, places=9)
        (m,) = out["midline"]
        self.assertEqual(m["field"], "LAT")
        self.assertTrue(m["computed"])
        self.assertAlmostEqual(m["midline_dose_cgy"], GEOMETRIC_120_60, places=3)
        self.assertAlmostEqual(m["geometric_mean_cgy"], GEOMETRIC_120_60, places=3)
        self.assertAlmostEqual(m["arithmetic_mean_cgy"], ARITHMETIC_120_60, places=3)
        self.assertAlmostEqual(m["transmission"], 0.5, places=9)
        self.assertAlmostEqual(m["entrance_dose_cgy"], 120.0, places=9)
        self.assertAlmostEqual(m["exit_dose_cgy"], 60.0, places=9)
        self.assertIn("geometric mean", m["method"])
        self.assertIn("ESTRO Booklet 1", m["method"])
        ids = {r["point"]: r["measurement_id"] for r in out["results"]}
        self.assertEqual((m["entrance_measurement_id"], m["exit_measurement_id"]), (ids["entrance"], ids["exit"]))

        text = self.fx.ok("history", "--patient", MRN).stdout
        self.assertIn("Midline dose from entrance and exit (geometric mean", text)
        # 80 columns: the arithmetic mean on the line under the estimate
        self.assertRegex(text, r"entrance 120\.0 cGy, exit 60\.0 cGy -> midline 84\.9 cGy\n +"
                               r"\(arithmetic mean 90\.0 cGy")

    def test_table_text(self):
        r = self.fx.run("record", "--patient", MRN, "--field", "LAT:entrance", "--detector", "D-1001",
                        "--reading", repr(reading_for(120.0)), "--temp", "32", "--field", "LAT:exit",
                        "--detector", "D-1001", "--reading", repr(reading_for(60.0)), "--temp", "32",
                        user="tina")
        self.assertIn("Midline dose from entrance and exit", r.stdout)
        self.assertIn("LAT", r.stdout.split("Midline dose")[1])
        self.assertIn("midline 84.9 cGy", r.stdout)

    def test_no_pair_no_midline(self):
        out = self.fx.json("record", "--patient", MRN, "--field", "LAT:entrance", "--detector", "D-1001",
                           "--reading", repr(reading_for(150.0)), "--temp", "32", user="tina")
        self.assertEqual(out["midline"], [])
        self.assertNotIn("Midline", self.fx.ok("history", "--patient", MRN).stdout)

    def test_history_uses_the_current_readings(self):
        out = self.pair(120.0, 60.0)
        exit_id = [r for r in out["results"] if r["point"] == "exit"][0]["measurement_id"]
        # the exit reading is amended to a reading that gives 40 cGy:
        # sqrt(120 x 40) = 69.282, (120 + 40)/2 = 80.000 (formulas above)
        r = self.fx.run("amend", str(exit_id), "--reading", repr(reading_for(40.0)), "--reason",
                        "wrong electrometer range", user="tina")
        self.assertEqual(r.returncode, 12, r.stderr)                   # -33 %: outside the action level
        rows = self.fx.json("history", "--patient", MRN, "--field", "LAT")
        current = [r for r in rows if r["current"]]
        self.assertEqual(len(current), 2)
        for r in current:
            self.assertAlmostEqual(r["midline"]["midline_dose_cgy"], 69.282, places=3)
            self.assertAlmostEqual(r["midline"]["arithmetic_mean_cgy"], 80.0, places=3)
        superseded = [r for r in rows if not r["current"]]
        self.assertEqual(len(superseded), 1)
        self.assertIsNone(superseded[0]["midline"])

    def test_not_physical_or_not_evaluable_gives_no_estimate(self):
        out = self.pair(80.0, 85.0)                                    # exit above entrance
        (m,) = out["midline"]
        self.assertFalse(m["computed"])
        self.assertIsNone(m["midline_dose_cgy"])
        self.assertIn("transmission above 1", m["reasons"][0])
        out = self.pair(120.0, 60.0, exit_detector="D-2002", now="2026-11-03T09:00:00Z")  # no exit calibration
        (m,) = out["midline"]
        self.assertFalse(m["computed"])
        self.assertIn("exit reading gave no dose result", m["reasons"][0])
        self.assertTrue(math.isclose(m["entrance_dose_cgy"], 120.0, rel_tol=1e-12))
        self.assertIsNone(m["exit_dose_cgy"])


if __name__ == "__main__":
    main()
