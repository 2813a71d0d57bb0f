"""fxledger calib: cross-calibration factor, mean and SD, validity, the
listing, and refusals that write nothing. Readings are invented; reference
values come from Python 3's statistics module (mean, stdev)."""
from fxlcli import FxlTestCase, main


class CalibTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        fx.ok("machine", "add", "LINAC-A")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon", "--energy", "6",
              "--dmax", "1.5", "--dose-per-mu", "1.0", "--norm-distance", "101.5")
        fx.ok("detector", "add", "D-1001", "--label", "Red 1", "--kind", "photon_diode",
              "--temp-coeff", "0.003")

    def calib(self, *extra, readings="10.01,10.03,9.98", dose="100", point="entrance", **kw):
        return ["calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point", point,
                "--chamber-dose", dose, "--readings", readings] + list(extra)

    def test_factor_mean_sd(self):
        out = self.fx.json(*self.calib("--temp", "21.5", "--chamber", "invented chamber 0.6 cc"),
                           user="phil")
        self.assertEqual(out["n"], 3)
        # Python 3 statistics.mean([10.01, 10.03, 9.98])
        self.assertAlmostEqual(out["reading_mean"], 10.006666666666666, places=12)
        # Python 3 statistics.stdev([10.01, 10.03, 9.98])
        self.assertAlmostEqual(out["reading_sd"], 0.025166114784235295, places=12)
        # SD as % of the mean: stdev / mean * 100, same source
        self.assertAlmostEqual(out["reading_sd_pct"], 0.25149348551867384, places=10)
        # N = 100 / statistics.mean(...) (TG-62 cross-calibration arithmetic)
        self.assertAlmostEqual(out["factor_cgy_per_unit"], 9.993337774816789, places=10)
        self.assertEqual(out["temp_c"], 21.5)
        self.assertFalse(out["temp_assumed"])
        self.assertEqual(out["ssd_cm"], 100)
        self.assertEqual(out["field_size_cm"], 10)
        self.assertEqual(out["readings"], [10.01, 10.03, 9.98])
        self.assertEqual(out["calibrated_at"], "2026-11-02T09:00:00Z")
        self.assertEqual(out["valid_until"], "2027-01-31T09:00:00Z")  # 90 days, the default
        self.assertEqual(out["state"], "current")

    def test_text_output_names_every_number_with_its_unit(self):
        text = self.fx.ok(*self.calib()).stdout
        self.assertIn("N              9.99334 cGy/nC", text)
        self.assertIn("mean           10.0067 nC", text)
        self.assertIn("SD             0.0252 nC (0.25 % of mean)", text)
        self.assertIn("n              3", text)
        self.assertIn("assumed", text)  # no --temp given

    def test_five_readings_and_previous_factor(self):
        self.fx.ok(*self.calib("--at", "2026-10-01"))
        out = self.fx.json(*self.calib(readings="20.12,20.05,20.09,20.15,20.07", dose="200"))
        # Python 3 statistics.mean / stdev of the five readings; N = 200 / mean
        self.assertAlmostEqual(out["reading_mean"], 20.096, places=12)
        self.assertAlmostEqual(out["reading_sd"], 0.039749213828703, places=12)
        self.assertAlmostEqual(out["factor_cgy_per_unit"], 9.952229299363058, places=10)
        self.assertAlmostEqual(out["previous_factor_cgy_per_unit"], 9.993337774816789, places=10)
        # (9.952229299363058 - 9.993337774816789) / 9.993337774816789 * 100, arithmetic
        self.assertAlmostEqual(out["change_pct"], -0.4113588110403, places=9)
        states = [c["state"] for c in self.fx.json("calib", "list", "D-1001")]
        self.assertEqual(states, ["current", "superseded"])

    def test_validity_options_and_setting(self):
        out = self.fx.json(*self.calib("--valid-days", "30"))
        self.assertEqual(out["valid_until"], "2026-12-02T09:00:00Z")
        out = self.fx.json(*self.calib("--valid-until", "2027-03-31", point="exit"))
        self.assertEqual(out["valid_until"], "2027-03-31T23:59:59Z")
        self.fx.ok("setting", "set", "calibration_interval_days", "60")
        out = self.fx.json(*self.calib("--at", "2026-10-01T08:00"))
        self.assertEqual(out["valid_until"], "2026-11-30T08:00:00Z")
        listing = self.fx.json("calib", "list")
        self.assertEqual(len(listing), 3)
        self.assertIn("entrance", self.fx.ok("calib", "list").stdout)

    def test_readings_with_blanks(self):
        out = self.fx.json(*self.calib(readings="10.01, 10.03 ,9.98"))
        self.assertEqual(out["readings"], [10.01, 10.03, 9.98])

    def test_expired_calibration_listed_as_expired(self):
        self.fx.ok(*self.calib("--at", "2026-08-01", "--valid-days", "30"))
        self.assertEqual(self.fx.json("calib", "list")[0]["state"], "expired")

    def test_detector_show_and_list_see_the_calibration(self):
        self.fx.ok(*self.calib())
        d = self.fx.json("detector", "show", "D-1001")
        self.assertEqual(len(d["calibrations"]), 1)
        self.assertEqual(d["last_calibrated_at"], "2026-11-02T09:00:00Z")

    def test_refusals_write_nothing(self):
        f = self.assertFailsUnchanged
        f(*self.calib(), user="tina", expect_code=4, expect_in="permission denied")
        f(*self.calib(), user="otto", expect_code=4)
        f(*self.calib(readings="10.01,-3.2,9.98"), expect_in="reading 2 '-3.2' must be > 0")
        f(*self.calib(readings="10.01,abc"), expect_in="reading 2 'abc' is not a number")
        f(*self.calib(readings="10.01,,9.98"), expect_in="reading 2")
        f(*self.calib(readings="10.01,"), expect_in="trailing comma")
        f(*self.calib(dose="0"), expect_in="chamber dose")
        f(*self.calib(point="midline"), expect_in="entrance or exit")
        f(*self.calib("--temp", "50"), expect_in="10 to 45 degC")
        f(*self.calib("--valid-days", "30", "--valid-until", "2027-01-01"), expect_in="not both")
        f(*self.calib("--valid-until", "2026-10-01"), expect_in="must be after")
        f(*self.calib("--at", "2026-12-01"), expect_in="in the future")
        f(*self.calib("--at", "yesterday"), expect_in="calibration date 'yesterday'")
        f("calib", "add", "D-9999", "--machine", "LINAC-A", "--beam", "6X", "--point", "entrance",
          "--chamber-dose", "100", "--readings", "10", expect_in="unknown detector 'D-9999'")
        f("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "18X", "--point", "entrance",
          "--chamber-dose", "100", "--readings", "10", expect_in="no beam '18X'")
        self.fx.ok(*self.calib())
        f(*self.calib(), expect_in="already has an entrance calibration")
        self.fx.ok("detector", "retire", "D-1001", "--reason", "worn out")
        f(*self.calib(readings="10.0", dose="100"), now="2026-11-03T09:00:00Z", expect_in="retired")

    def test_help(self):
        r = self.fx.ok("calib", "add", "--help")
        self.assertIn("usage: fxledger calib add", r.stdout)
        self.assertIn("--readings", r.stdout)
        self.fx.ok("calib", "list", "--help")


if __name__ == "__main__":
    main()
