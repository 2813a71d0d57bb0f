"""The query changes made for large databases (docs/performance.md) keep
their results: the monthly report's detectors near their dose limit (now
bounded to the rows since the calibration, retired detectors left out) and
the migrations' indexes. Fixture rows are invented and written with sqlite3
(the Clinic helper of test_report.py)."""
import sqlite3

from fxlcli import main
from test_report import Clinic, ReportTestCase, pdftext

CAL_AT = "2026-09-01T08:00:00Z"


class NearLimitTest(ReportTestCase):
    """Two detectors with a 500 cGy limit, each with 3 x 200 cGy after its
    calibration and 1 x 400 cGy before it: 600 cGy counts (arithmetic), the
    reading before the calibration does not."""

    def setUp(self):
        super().setUp()
        c = Clinic(self.fx.db)
        p = c.patient("MRN-N", "Near", "Nina")
        pl = c.plan(p, "PEL", created_at="2026-08-01T10:00:00Z")
        f = c.field(pl, "AP")
        self.worn, self.gone = [
            c.insert("detectors", serial=s, label="Diode " + s, kind="photon_diode",
                     dose_limit_cgy=500, created_at="2026-01-01T00:00:00Z")
            for s in ("PD-010", "PD-011")]
        n = 0
        for det in (self.worn, self.gone):
            c.insert("calibrations", detector_id=det, beam_id=c.beam6, point="entrance",
                     calibrated_at=CAL_AT, valid_until="2026-12-01T23:59:59Z",
                     chamber_dose_cgy=100, readings="[95.0]", reading_n=1, reading_mean=95.0,
                     reading_sd=0, factor_cgy_per_unit=1.05, temp_c=21, ssd_cm=100,
                     field_size_cm=10, user_id=c.phys, created_at=CAL_AT)
            n += 1
            # before the calibration: 400 cGy (+100 % against 200 cGy expected)
            # is outside the levels but would count if the bound were wrong
            c.measure(pl, f, n, "2026-08-2%dT08:00:00Z" % n, 100.0, verdict="outside_action",
                      detector=det)
            for day in (2, 3, 4):
                n += 1
                c.measure(pl, f, n, "2026-09-%02dT08:%02d:00Z" % (day, det), 0.0, detector=det)
        # PD-011 is retired at the end of September
        c.insert("detector_status", detector_id=self.gone, status="retired",
                 effective_at="2026-09-30T12:00:00Z", reason="invented: cable broken",
                 user_id=c.phys, created_at="2026-09-30T12:00:00Z")
        c.commit()
        self.out = self.fx.path("month.pdf")

    def test_in_service_listed_retired_left_out(self):
        self.report("month", "2026-10", "--out", self.out)
        t = pdftext(self.out)
        # 3 x 200 = 600 cGy of 500 cGy = 120 % (arithmetic); the 400 cGy of
        # August, before the calibration, is not in the sum
        self.assertRegex(t, r"Diode PD-010\s+PD-010\s+photon diode\s+in service\s+2026-09-01\s+"
                            r"600 cGy\s+500 cGy\s+120 %")
        self.assertNotRegex(t, r"Diode PD-011\s+PD-011\s+photon diode")

    def test_before_retirement_both_listed(self):
        # A report for August is as of 1 September 00:00 (UTC here): before
        # both calibrations and the retirement, so all time counts and each
        # detector has 400 cGy of 500 cGy = 80 %, the warning threshold
        # (docs/reports.md section 9; arithmetic)
        self.report("month", "2026-08", "--out", self.out)
        t = pdftext(self.out)
        self.assertRegex(t, r"Diode PD-010\s+PD-010\s+photon diode\s+in service\s+never\s+400 cGy")
        self.assertRegex(t, r"Diode PD-011\s+PD-011\s+photon diode\s+in service\s+never\s+400 cGy")


class IndexesTest(ReportTestCase):
    def test_migrations_create_the_indexes(self):
        con = sqlite3.connect(self.fx.db)
        names = {r[0] for r in con.execute("SELECT name FROM sqlite_schema WHERE type = 'index'")}
        con.close()
        for name in ("fractions_by_time", "plans_by_replaces", "measurements_by_detector_history"):
            self.assertIn(name, names)

    def test_monthly_queries_use_the_time_index(self):
        """The month's measurements are found through fractions_by_time, not
        by reading every measurement (SQLite's query plan)."""
        con = sqlite3.connect(self.fx.db)
        plan = " ".join(r[3] for r in con.execute(
            "EXPLAIN QUERY PLAN SELECT m.deviation_pct FROM measurements m "
            "JOIN fractions f ON f.id = m.fraction_id "
            "WHERE f.treated_at >= '2026-10-01' AND f.treated_at < '2026-11-01'"))
        con.close()
        self.assertIn("fractions_by_time", plan)
        self.assertNotIn("SCAN m", plan)


if __name__ == "__main__":
    main()
