"""Exit dosimetry with its own correction tables, and the acceptance checks
on the inputs of every result: a table must be 1 at the calibration's
reference, a calibration whose N changes too much needs a physicist's
confirmation, a floor above 5 cGy is refused, and the escalation rule sees
through a not-evaluable result. Invented department of record_fixture.py;
factors from tests/data/corrections/diode_6x_exit.json (invented)."""
import json
import os
import sqlite3

from fxlcli import DATA, main
from record_fixture import RecordTestCase, interp, plan_document

EXIT_TABLES = os.path.join(DATA, "corrections", "diode_6x_exit.json")
MRN2 = "TEST-0202"


def exit_table(parameter):
    with open(EXIT_TABLES, encoding="utf-8") as f:
        doc = json.load(f)
    return [(p["x"], p["factor"]) for t in doc["tables"] if t["parameter"] == parameter
            for p in t["points"]]


class ExitTablesTest(RecordTestCase):
    def exit_calibration(self, thickness="20"):
        self.fx.ok("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point",
                   "exit", "--chamber-dose", "100", "--readings", "10.0", "--temp", "20", "--at",
                   "2026-10-01", "--thickness", thickness)

    def thick_plan(self):
        """A plan whose LAT exit point lies behind 25 cm (the exit reference is 20 cm)."""
        doc = plan_document()
        doc["patient_mrn"], doc["label"] = MRN2, "EXIT-1"
        for f in doc["fields"]:
            for p in f["points"]:
                if p["point"] == "exit":
                    p["thickness_cm"] = 25
        self.fx.ok("patient", "add", MRN2, "--family", "Example", "--given", "Second")
        self.fx.ok("plan", "import", self.fx.write("plan2.json", json.dumps(doc)))

    def test_exit_reading_uses_exit_tables(self):
        self.exit_calibration()
        self.fx.ok("table", "load", EXIT_TABLES)
        self.thick_plan()
        r = self.fx.run("--json", "record", "--patient", MRN2, "--field", "LAT:exit", "--detector",
                        "D-1001", "--reading", "6.0", "--temp", "20", user="tina")
        res = json.loads(r.stdout)["results"][0]
        f = res["factors"]
        # linear interpolation in the invented exit tables (physics):
        thick = interp(exit_table("thickness"), 25)        # (20,1.000)-(30,0.988): 0.994
        sdd = interp(exit_table("sdd"), 90 + 25)           # SDD = SSD + thickness = 115 cm
        self.assertAlmostEqual(thick, 0.994, places=12)
        self.assertAlmostEqual(f["thickness"], thick, places=12)
        self.assertAlmostEqual(f["sdd"], sdd, places=12)
        self.assertIsNone(f["ssd"])  # an exit reading takes no entrance SSD factor
        want = (6.0 * 10.0 * interp(exit_table("field_size"), 10) * thick * sdd
                * dict(exit_table("wedge"))[30] * dict(exit_table("tray"))[0]
                * interp(exit_table("angle"), 30) * 1.0)   # CF_T = 1 at T_cal
        self.assertAlmostEqual(res["corrected_dose_cgy"], want, places=9)
        self.assertEqual(res["parameters"]["thickness_cm"], 25)
        self.assertEqual(res["parameters"]["sdd_cm"], 115)

    def test_exit_point_without_exit_tables_not_evaluable(self):
        self.exit_calibration()  # entrance tables exist (RecordTestCase), exit ones do not
        out = self.record_json("--field", "LAT:exit", "--detector", "D-1001", "--reading", "6.0",
                               "--temp", "20", expect_code=10)
        res = out["results"][0]
        self.assertEqual(res["verdict"], "not_evaluable")
        text = " ".join(res["reasons"])
        self.assertIn("no exit wedge correction table", text)
        self.assertIsNone(res["corrected_dose_cgy"])
        # the entrance point of the same field still uses the entrance tables
        r = self.fx.run("--json", "record", "--patient", "TEST-0101", "--field", "LAT:entrance",
                        "--detector", "D-1001", "--reading", "15.0", "--temp", "20", "--fraction",
                        "2", user="tina")
        f = json.loads(r.stdout)["results"][0]["factors"]
        self.assertAlmostEqual(f["ssd"], (0.985 + 1.000) / 2, places=12)  # midpoint 80..100
        self.assertIsNone(f["thickness"])

    def test_table_not_one_at_reference_refused(self):
        # the exit calibration behind 15 cm: the invented thickness table gives
        # 1.000 + (15 - 20) / 10 x (1.012 - 1.000) ... = 1.006 there, 0.6 % off 1
        self.exit_calibration(thickness="15")
        self.assertFailsUnchanged("table", "load", EXIT_TABLES, expect_in="gives 1.0060 at the "
                                  "calibration's reference")
        # an entrance table normalised elsewhere: field size 1.010 at 10 cm
        doc = {"format": "fxledger-corrections", "version": 1, "detector": "D-2002",
               "source": "invented", "tables": [
                   {"machine": "LINAC-A", "beam": "6X", "parameter": "field_size",
                    "effective_from": "2026-10-20",
                    "points": [{"x": 5, "factor": 1.02}, {"x": 10, "factor": 1.010},
                               {"x": 20, "factor": 1.0}]}]}
        self.assertFailsUnchanged("table", "load", self.fx.write("bad.json", json.dumps(doc)),
                                  expect_in="gives 1.0100")
        # within 0.5 % is accepted: 1.004
        doc["tables"][0]["points"][1]["factor"] = 1.004
        self.fx.ok("table", "load", self.fx.write("ok.json", json.dumps(doc)))

    def test_exit_ssd_table_refused(self):
        doc = {"format": "fxledger-corrections", "version": 1, "detector": "D-1001",
               "source": "invented", "tables": [
                   {"machine": "LINAC-A", "beam": "6X", "point": "exit", "parameter": "ssd",
                    "effective_from": "2026-10-20",
                    "points": [{"x": 90, "factor": 1.0}, {"x": 110, "factor": 1.0}]}]}
        self.assertFailsUnchanged("table", "load", self.fx.write("bad.json", json.dumps(doc)),
                                  expect_in="use 'sdd'")


class CalibrationAcceptanceTest(RecordTestCase):
    def calib(self, *extra, readings="10.5", user="phil"):
        return self.fx.run("--json", "calib", "add", "D-1001", "--machine", "LINAC-A", "--beam",
                           "6X", "--point", "entrance", "--chamber-dose", "100", "--readings",
                           readings, "--temp", "20", "--at", "2026-10-20", *extra, user=user)

    def test_change_of_n_needs_confirmation(self):
        # previous N 100 / 10.0 = 10.0; new 100 / 10.5 = 9.5238: -4.76 % (arithmetic),
        # beyond the default 3 % limit
        self.assertFailsUnchanged("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "entrance", "--chamber-dose", "100", "--readings",
                                  "10.5", "--temp", "20", "--at", "2026-10-20", user="phil",
                                  expect_in="changes by -4.76 %")
        # a 5 % change: 100 / 10.0 -> 100 / 9.524 is +5.00 % (arithmetic)
        self.assertFailsUnchanged("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "entrance", "--chamber-dose", "100", "--readings",
                                  "9.524", "--temp", "20", "--at", "2026-10-20", user="phil",
                                  expect_in="--confirm-change n-change")
        # the wrong check named does not confirm; an admin cannot confirm
        self.assertFailsUnchanged("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "entrance", "--chamber-dose", "100", "--readings",
                                  "9.524", "--temp", "20", "--at", "2026-10-20", "--confirm-change",
                                  "n-change", user="admin", expect_code=4,
                                  expect_in="only a physicist")
        self.assertFailsUnchanged("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "entrance", "--chamber-dose", "100", "--readings",
                                  "9.524", "--temp", "20", "--at", "2026-10-20", "--confirm-change",
                                  "sd", user="phil", expect_in="n-change")
        r = self.calib("--confirm-change", "n-change", readings="9.524")
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(r.stdout)
        self.assertAlmostEqual(out["change_pct"], (100 / 9.524 - 10.0) / 10.0 * 100, places=9)
        self.assertIn("confirmed", out["confirmed_change"])
        con = sqlite3.connect(self.fx.db)
        row = con.execute("SELECT confirmed_change FROM calibrations ORDER BY id DESC LIMIT 1").fetchone()
        audit = con.execute("SELECT content FROM audit_log WHERE entity = 'calibrations' "
                            "ORDER BY id DESC LIMIT 1").fetchone()
        con.close()
        self.assertIn("+5.00 %", row[0])
        self.assertIn("confirmed_change", json.loads(audit[0]))

    def test_readings_spread_needs_confirmation(self):
        # statistics.stdev([10.0, 10.3, 9.7]) = 0.3 nC, 3 % of the mean > 1 %
        self.assertFailsUnchanged("calib", "add", "D-2002", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "exit", "--chamber-dose", "100", "--readings",
                                  "10.0,10.3,9.7", "--temp", "20", user="phil",
                                  expect_in="SD of its readings is 3.00 %")
        self.fx.ok("calib", "add", "D-2002", "--machine", "LINAC-A", "--beam", "6X", "--point",
                   "exit", "--chamber-dose", "100", "--readings", "10.0,10.3,9.7", "--temp", "20",
                   "--confirm-change", "sd", user="phil")

    def test_first_calibration_against_nominal_sensitivity(self):
        self.fx.ok("detector", "add", "D-4004", "--label", "Nominal", "--kind", "photon_diode",
                   "--temp-coeff", "0.003", "--sensitivity", "0.088")
        # nominal N = 1 / 0.088 = 11.364 cGy/nC; 100 / 10.0 = 10.0 is -12.00 %
        # (arithmetic), beyond the default 10 %; 100 / 8.9 = 11.236 is -1.12 %
        self.assertFailsUnchanged("calib", "add", "D-4004", "--machine", "LINAC-A", "--beam", "6X",
                                  "--point", "entrance", "--chamber-dose", "100", "--readings",
                                  "10.0", "--temp", "20", user="phil",
                                  expect_in="differs by -12.00 % from the nominal")
        self.fx.ok("calib", "add", "D-4004", "--machine", "LINAC-A", "--beam", "6X", "--point",
                   "entrance", "--chamber-dose", "100", "--readings", "8.9", "--temp", "20",
                   user="phil")


class LevelsAndHistoryTest(RecordTestCase):
    def test_floor_above_5_cgy_refused(self):
        self.assertFailsUnchanged("levels", "set", "small", "--tolerance", "5", "--action", "8",
                                  "--floor", "30", user="phil", expect_in="floor")
        self.assertFailsUnchanged("levels", "set", "small", "--tolerance", "5", "--action", "8",
                                  "--floor", "5.01", user="phil", expect_in="floor")
        self.fx.ok("levels", "set", "small", "--tolerance", "5", "--action", "8", "--floor", "5",
                   "--site", "Breast", user="phil")

    def test_escalation_sees_through_a_not_evaluable_result(self):
        # AP: 10 x 20 cm; +6 % twice with a not-evaluable reading between them
        base = ["--field", "AP", "--temp", "20"]
        ap = self.record_json("--field", "AP", "--detector", "D-1001", "--reading", "20.0",
                              "--temp", "20")["results"][0]
        k = 200.0 / ap["corrected_dose_cgy"] * 20.0 * 1.06  # the reading that gives +6 %
        out = self.record_json(*base, "--detector", "D-1001", "--reading", repr(k),
                               "--fraction", "2", expect_code=11)
        self.assertEqual(out["results"][0]["verdict"], "outside_tolerance")
        # fraction 3 with D-3003, whose calibration expired: not evaluable
        out = self.record_json(*base, "--detector", "D-3003", "--reading", "20.0",
                               "--fraction", "3", expect_code=10)
        self.assertEqual(out["results"][0]["verdict"], "not_evaluable")
        out = self.record_json(*base, "--detector", "D-1001", "--reading", repr(k),
                               "--fraction", "4", expect_code=12)
        res = out["results"][0]
        self.assertEqual(res["verdict"], "outside_action")
        self.assertTrue(res["escalated"])
        self.assertIn("at fraction 2", " ".join(res["reasons"]))


if __name__ == "__main__":
    main()
