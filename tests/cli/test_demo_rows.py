"""Records keep everything a dose was computed from: the invented demo is run
into a temporary directory and every stored measurement row's corrected dose
is recomputed from the factors stored in that same row (docs/physics.md
section 1):
    D = (M - M_0) x N x (product of the stored correction factors) x CF_T
    CF_T = 1 / (1 + a (T - T_cal))           (AAPM Report 87, from memory)
    deviation = (D - D_exp) / D_exp x 100, rounded to 0.01 %
A stored factor is NULL where it does not apply to the measured point."""
import math
import os
import sqlite3
import subprocess
import sys
import tempfile
import shutil
import unittest

from fxlcli import BIN, main

HERE = os.path.dirname(os.path.abspath(__file__))
DEMO = os.path.join(HERE, "..", "..", "demo", "run_demo.py")
FACTORS = ("cf_field_size", "cf_ssd", "cf_wedge", "cf_tray", "cf_angle", "cf_thickness", "cf_sdd")


class DemoRowsTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.out = tempfile.mkdtemp(prefix="fxldemo-")
        env = dict(os.environ, FXLEDGER_DEMO_OUT=cls.out)
        r = subprocess.run([sys.executable, DEMO, BIN], capture_output=True, text=True, env=env)
        if r.returncode != 0:
            raise AssertionError("demo failed:\n" + r.stdout[-3000:] + r.stderr[-3000:])
        cls.demo_stdout = r.stdout
        cls.db = os.path.join(cls.out, "demo.db")

    @classmethod
    def tearDownClass(cls):
        shutil.rmtree(cls.out, ignore_errors=True)

    def rows(self, sql):
        con = sqlite3.connect(self.db)
        con.row_factory = sqlite3.Row
        try:
            return con.execute(sql).fetchall()
        finally:
            con.close()

    def test_every_dose_recomputed_from_its_row(self):
        rows = self.rows(
            "SELECT m.*, d.temp_coeff_per_c AS a, c.temp_c AS t_cal, fl.point AS point "
            "FROM measurements m JOIN detectors d ON d.id = m.detector_id "
            "JOIN fields fl ON fl.id = m.field_id "
            "LEFT JOIN calibrations c ON c.id = m.calibration_id")
        with_dose = [r for r in rows if r["corrected_dose_cgy"] is not None]
        self.assertGreater(len(with_dose), 50)
        for r in rows:
            self.assertIsNotNone(r["background"], "row %d has no background column value" % r["id"])
        for r in with_dose:
            product = 1.0
            for k in FACTORS:
                if r[k] is not None:
                    product *= r[k]
            # the factors of the point, and only those, are stored
            self.assertEqual(r["cf_ssd"] is None, r["point"] == "exit", r["id"])
            self.assertEqual(r["cf_thickness"] is None, r["point"] == "entrance", r["id"])
            cf_t = 1.0 / (1.0 + r["a"] * (r["temp_c"] - r["t_cal"]))
            self.assertAlmostEqual(r["cf_temp"], cf_t, places=12, msg=r["id"])
            dose = (r["reading"] - r["background"]) * r["factor_n"] * product * r["cf_temp"]
            self.assertTrue(math.isclose(dose, r["corrected_dose_cgy"], rel_tol=1e-12),
                            "row %d: %r != %r" % (r["id"], dose, r["corrected_dose_cgy"]))
            dev = round((dose - r["expected_dose_cgy"]) / r["expected_dose_cgy"] * 100, 2)
            self.assertAlmostEqual(r["deviation_pct"], dev, places=9, msg=r["id"])

    def test_exit_rows_use_exit_tables(self):
        rows = self.rows("SELECT m.cf_thickness, m.cf_sdd FROM measurements m "
                         "JOIN fields fl ON fl.id = m.field_id WHERE fl.point = 'exit' "
                         "AND m.corrected_dose_cgy IS NOT NULL")
        self.assertGreater(len(rows), 0)
        self.assertTrue(all(r["cf_thickness"] is not None and r["cf_sdd"] is not None for r in rows))

    def test_drift_item_still_fires(self):
        items = self.rows("SELECT summary FROM review_items WHERE rule = 'detector_drift'")
        self.assertEqual(len(items), 1)
        self.assertIn("detector PD-0101", items[0]["summary"])
        self.assertIn("upward", items[0]["summary"])


if __name__ == "__main__":
    main()
