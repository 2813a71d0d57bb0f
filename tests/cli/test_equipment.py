"""fxledger setting, machine and detector: good paths, JSON listings, role
refusals, and bad input leaving the database unchanged. Data is invented."""
import sqlite3

from fxlcli import FxlTestCase, main


def add_people(fx):
    fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
    fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
    fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")


class SettingTest(FxlTestCase):
    def test_list_and_set(self):
        add_people(self.fx)
        rows = {s["key"]: s for s in self.fx.json("setting", "list")}
        self.assertEqual(rows["department"]["value"], "Invented Test Department")
        self.assertEqual(rows["skin_temp_c"]["value"], "32")
        self.assertTrue(rows["calibration_interval_days"]["default"])
        self.assertEqual(rows["calibration_interval_days"]["value"], "90")
        self.fx.ok("setting", "set", "skin_temp_c", "33.5", user="phil")
        self.fx.ok("setting", "set", "alert_timeout_s", "300")
        self.fx.ok("setting", "set", "calibration_interval_days", "30", user="phil")
        rows = {s["key"]: s for s in self.fx.json("setting", "list")}
        self.assertEqual(rows["skin_temp_c"]["value"], "33.5")
        self.assertEqual(rows["alert_timeout_s"]["value"], "300")
        self.assertFalse(rows["calibration_interval_days"]["default"])
        self.assertIn("skin_temp_c", self.fx.ok("setting", "list").stdout)

    def test_refusals_write_nothing(self):
        add_people(self.fx)
        self.assertFailsUnchanged("setting", "set", "skin_temp_c", "46", expect_in="10 to 45 degC")
        self.assertFailsUnchanged("setting", "set", "skin_temp_c", "9.9")
        self.assertFailsUnchanged("setting", "set", "implausible_pct", "4", expect_in="5 to 100 %")
        self.assertFailsUnchanged("setting", "set", "implausible_pct", "101")
        self.assertFailsUnchanged("setting", "set", "alert_timeout_s", "0", expect_in="1 to 300 s")
        self.assertFailsUnchanged("setting", "set", "alert_timeout_s", "1.5", expect_in="whole number")
        self.assertFailsUnchanged("setting", "set", "department", "")
        self.assertFailsUnchanged("setting", "set", "timezone", "Mars/Olympus_Mons")
        self.assertFailsUnchanged("setting", "set", "colour", "blue", expect_in="unknown setting 'colour'")
        self.assertFailsUnchanged("setting", "set", "skin_temp_c", "30", user="tina", expect_code=4)
        self.assertFailsUnchanged("setting", "set", "skin_temp_c", "30", user="otto", expect_code=4)
        self.assertFailsUnchanged("setting", "set", "skin_temp_c")

    def test_help(self):
        r = self.fx.ok("setting", "set", "--help")
        self.assertIn("implausible_pct", r.stdout)
        self.fx.ok("setting", "list", "--help")


class MachineTest(FxlTestCase):
    def test_machine_and_beams(self):
        add_people(self.fx)
        self.fx.ok("machine", "add", "LINAC-A", user="phil")
        self.fx.ok("machine", "add", "LINAC-B", "--sad", "80")
        self.fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon",
                   "--energy", "6", "--dmax", "1.5", "--dose-per-mu", "1.0", "--norm-distance", "101.5",
                   user="phil")
        self.fx.ok("machine", "beam", "9E", "--machine", "LINAC-A", "--modality", "electron",
                   "--energy", "9")
        machines = self.fx.json("machine", "list")
        self.assertEqual([m["name"] for m in machines], ["LINAC-A", "LINAC-B"])
        self.assertEqual(machines[1]["sad_cm"], 80)
        beams = {b["name"]: b for b in machines[0]["beams"]}
        self.assertEqual(beams["6X"]["dmax_cm"], 1.5)
        self.assertEqual(beams["6X"]["norm_distance_cm"], 101.5)
        self.assertEqual(beams["6X"]["energy_unit"], "MV")
        self.assertEqual(beams["9E"]["modality"], "electron")
        self.assertEqual(beams["9E"]["energy_unit"], "MeV")
        self.assertIsNone(beams["9E"]["dmax_cm"])
        self.assertEqual(machines[1]["beams"], [])
        text = self.fx.ok("machine", "list").stdout
        self.assertIn("6 MV", text)
        self.assertIn("9 MeV", text)

    def test_refusals_write_nothing(self):
        add_people(self.fx)
        self.fx.ok("machine", "add", "LINAC-A")
        beam = ["machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon", "--energy", "6"]
        self.assertFailsUnchanged("machine", "add", "LINAC-A", expect_in="already exists")
        self.assertFailsUnchanged("machine", "add", "LINAC-B", "--sad", "0", expect_in="50 to 200 cm")
        self.assertFailsUnchanged("machine", "add", "LINAC-B", user="tina", expect_code=4)
        self.assertFailsUnchanged("machine", "add", "LINAC-B", user="otto", expect_code=4)
        self.assertFailsUnchanged(*beam, user="otto", expect_code=4)
        self.assertFailsUnchanged("machine", "beam", "6X", "--machine", "LINAC-Z", "--modality",
                                  "photon", "--energy", "6", expect_in="unknown machine 'LINAC-Z'")
        self.assertFailsUnchanged("machine", "beam", "6X", "--machine", "LINAC-A", "--modality",
                                  "proton", "--energy", "6", expect_in="photon or electron")
        self.assertFailsUnchanged("machine", "beam", "6X", "--machine", "LINAC-A", "--modality",
                                  "photon", "--energy", "60", expect_in="0.1 to 50 MV")
        self.assertFailsUnchanged(*beam, "--dmax", "abc", expect_in="not a number")
        self.assertFailsUnchanged(*beam, "--norm-distance", "20")
        self.fx.ok(*beam)
        self.assertFailsUnchanged(*beam, expect_in="already has a beam '6X'")

    def test_help(self):
        for sub in ("add", "beam", "list"):
            self.assertIn("usage: fxledger machine " + sub, self.fx.ok("machine", sub, "--help").stdout)


class DetectorTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        add_people(self.fx)

    def add(self, serial="D-1001", *extra, user="phil"):
        # The default coefficient only when the test gives none: a repeated
        # option is refused.
        default = [] if "--temp-coeff" in extra else ["--temp-coeff", "0"]
        return self.fx.ok("detector", "add", serial, "--label", "Red 1", "--kind", "photon_diode", *default,
                          *extra, user=user)

    def test_add_list_show(self):
        self.add("D-1001", "--temp-coeff", "0.003", "--sensitivity", "0.09", "--buildup",
                 "brass cap 6-12 MV", "--dose-limit", "50000")
        self.fx.ok("detector", "add", "E-2001", "--label", "Blue 1", "--kind", "electron_diode", "--temp-coeff", "0",
                   "--unit", "pC")
        dets = {d["serial"]: d for d in self.fx.json("detector", "list")}
        d = dets["D-1001"]
        self.assertEqual(d["status"], "in_service")
        self.assertEqual(d["temp_coeff_per_c"], 0.003)
        self.assertEqual(d["sensitivity"], 0.09)
        self.assertEqual(d["dose_limit_cgy"], 50000)
        self.assertEqual(d["accumulated_dose_cgy"], 0)
        self.assertIsNone(d["last_calibrated_at"])
        self.assertEqual(dets["E-2001"]["reading_unit"], "pC")
        self.assertEqual(dets["E-2001"]["temp_coeff_per_c"], 0)
        show = self.fx.json("detector", "show", "D-1001")
        self.assertEqual(show["buildup"], "brass cap 6-12 MV")
        self.assertEqual(len(show["status_history"]), 1)
        self.assertEqual(show["calibrations"], [])
        self.assertEqual(show["correction_tables"], [])
        text = self.fx.ok("detector", "show", "D-1001").stdout
        self.assertIn("0.3 %/degC", text)
        self.assertIn("status history", text)
        self.assertIn("D-1001", self.fx.ok("detector", "list").stdout)

    def test_status_history_and_retire(self):
        self.add()
        self.fx.ok("detector", "status", "D-1001", "out_for_service", "--reason", "cable repair",
                   now="2026-11-03T09:00:00Z")
        d = self.fx.json("detector", "show", "D-1001", now="2026-11-03T10:00:00Z")
        self.assertEqual(d["status"], "out_for_service")
        self.fx.ok("detector", "status", "D-1001", "in_service", "--reason", "repaired",
                   now="2026-11-04T09:00:00Z")
        self.fx.ok("detector", "retire", "D-1001", "--reason", "worn out", now="2026-11-05T09:00:00Z")
        d = self.fx.json("detector", "show", "D-1001", now="2026-11-05T10:00:00Z")
        self.assertEqual(d["status"], "retired")
        self.assertEqual(d["status_reason"], "worn out")
        self.assertEqual([h["status"] for h in d["status_history"]],
                         ["in_service", "out_for_service", "in_service", "retired"])
        self.assertFailsUnchanged("detector", "status", "D-1001", "in_service", "--reason", "oops",
                                  now="2026-11-06T09:00:00Z", expect_in="retirement is final")

    def test_status_dated_before_last_change(self):
        self.add()
        self.assertFailsUnchanged("detector", "status", "D-1001", "out_for_service", "--reason",
                                  "x", "--at", "2026-10-01", expect_in="before its latest status change")

    def test_diode_needs_a_temperature_coefficient(self):
        self.add()
        # A diode's response changes with temperature (of order 0.1 to 0.5 %/degC,
        # AAPM Report 87, from memory): without a coefficient none would be applied.
        for kind in ("photon_diode", "electron_diode", "small_field_diode"):
            self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", kind,
                                      expect_in="temperature coefficient is required")
        # an explicit 0 is accepted for a diode that has none
        self.fx.ok("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode",
                   "--temp-coeff", "0")
        # other kinds default to 0
        self.fx.ok("detector", "add", "M-3003", "--label", "Y", "--kind", "mosfet")
        rows = {d["serial"]: d for d in self.fx.json("detector", "list")}
        self.assertEqual(rows["D-2002"]["temp_coeff_per_c"], 0)
        self.assertEqual(rows["M-3003"]["temp_coeff_per_c"], 0)

    def test_refusals_write_nothing(self):
        self.add()
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode", "--temp-coeff", "0",
                                  user="tina", expect_code=4, expect_in="permission denied")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode", "--temp-coeff", "0",
                                  user="otto", expect_code=4)
        self.assertFailsUnchanged("detector", "retire", "D-1001", "--reason", "x", user="tina",
                                  expect_code=4)
        self.assertFailsUnchanged("detector", "add", "D-1001", "--label", "X", "--kind", "photon_diode", "--temp-coeff", "0",
                                  expect_in="already exists")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "ion_chamber",
                                  expect_in="kind 'ion_chamber'")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode",
                                  "--temp-coeff", "0.3", expect_in="0.003 = 0.3 %/degC")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode", "--temp-coeff", "0",
                                  "--unit", "Gy", expect_in="reading unit 'Gy'")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--label", "X", "--kind", "photon_diode", "--temp-coeff", "0",
                                  "--dose-limit", "-5")
        self.assertFailsUnchanged("detector", "add", "D-2002", "--kind", "photon_diode", "--temp-coeff", "0",
                                  expect_in="--label")
        self.assertFailsUnchanged("detector", "status", "D-1001", "broken", "--reason", "x",
                                  expect_in="status 'broken'")
        self.assertFailsUnchanged("detector", "status", "D-1001", "in_service", "--reason", "x",
                                  expect_in="already in_service")
        self.assertFailsUnchanged("detector", "status", "D-1001", "out_for_service",
                                  expect_in="--reason")
        self.assertFailsUnchanged("detector", "retire", "D-9999", "--reason", "x",
                                  expect_in="unknown detector 'D-9999'")
        self.assertFailsUnchanged("detector", "status", "D-1001", "retired", "--reason", "x",
                                  "--at", "2026-13-01", expect_in="date '2026-13-01'")
        self.assertFailsUnchanged("detector", "show", "D-9999", expect_in="unknown detector")

    def test_accumulated_dose_in_listing(self):
        """Sum of corrected doses after the latest calibration; invented rows
        inserted by SQL stand in for logged fractions."""
        self.add()
        self.fx.ok("machine", "add", "LINAC-A")
        self.fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon",
                   "--energy", "6")
        self.fx.ok("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point",
                   "entrance", "--chamber-dose", "100", "--readings", "10", "--at", "2026-10-10")
        con = sqlite3.connect(self.fx.db)
        con.executescript("""
            INSERT INTO patients (id, mrn, family_name, created_at) VALUES (1, 'P-1', 'Example', '2026-10-01T08:00:00Z');
            INSERT INTO plans (id, patient_id, label, site, technique, fractions, user_id, created_at)
              VALUES (1, 1, 'v1', 'pelvis', '3D', 25, 1, '2026-10-01T08:00:00Z');
            INSERT INTO fields (id, plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, y_cm)
              VALUES (1, 1, 'AP', 1, 'entrance', 'ssd', 200, 100, 10, 10);
            INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) VALUES
              (1, 1, 1, '2026-10-05T08:00:00Z', 1, '2026-10-05T08:00:00Z'),
              (2, 1, 2, '2026-10-12T08:00:00Z', 1, '2026-10-12T08:00:00Z');
            INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c,
              temp_entered, corrected_dose_cgy, verdict, user_id, created_at) VALUES
              (1, 1, 1, 20, 'nC', 32, 1, 200.0, 'within_tolerance', 1, '2026-10-05T08:00:00Z'),
              (2, 1, 1, 20, 'nC', 32, 1, 201.5, 'within_tolerance', 1, '2026-10-12T08:00:00Z'),
              (2, 1, 1, 20, 'nC', 32, 1, 198.0, 'within_tolerance', 1, '2026-10-12T08:01:00Z');
        """)
        con.commit()
        con.close()
        d = self.fx.json("detector", "list")[0]
        self.assertAlmostEqual(d["accumulated_dose_cgy"], 399.5, places=9)  # arithmetic: 201.5 + 198.0
        self.assertEqual(d["accumulated_measurements"], 2)
        self.assertIn("399.5 cGy", self.fx.ok("detector", "list").stdout)

    def test_help(self):
        for sub in ("add", "list", "show", "status", "retire"):
            self.assertIn("usage: fxledger detector " + sub, self.fx.ok("detector", sub, "--help").stdout)
        self.assertIn("FRACTION per degC", self.fx.ok("detector", "add", "--help").stdout)


if __name__ == "__main__":
    main()
