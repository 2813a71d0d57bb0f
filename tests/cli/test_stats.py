"""fxledger stats: statistics of a period's deviations by site, technique,
energy, point and detector, with I-MR limits and suggested levels. Checked
against Python's statistics module and the I-MR check value of the standard
SPC constants (Pawlicki et al., Med. Phys. 2005). Fixture rows are invented and
written with sqlite3 (the Clinic helper of test_report)."""
import math
import os
import statistics
import subprocess

from fxlcli import FxlTestCase, main
from test_report import ACT, TOL, Clinic, assertPopplerClean, pdftext, verdict_for

# Invented deviations (%) of one pelvis field measured with diode P1, in order
# of treatment (fractions 1..14).
PELVIS = [0.8, -1.2, 2.3, 0.1, -0.4, 1.7, -2.9, 0.6, 1.1, -0.2, 3.4, -1.5, 5.6, 0.9]
# The I-MR check case: deviations 1.0, -0.5, 0.5, 2.0, -1.0 %.
CHECK = [1.0, -0.5, 0.5, 2.0, -1.0]


def imr(values):
    """I-MR limits from the definition (individuals: mean +/- 2.66 average moving
    range; moving range: 3.267 average moving range; standard SPC constants)."""
    mr = [abs(b - a) for a, b in zip(values, values[1:])]
    mrbar = statistics.mean(mr)
    m = statistics.mean(values)
    return m, m - 2.66 * mrbar, m + 2.66 * mrbar, 3.267 * mrbar


class StatsTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        self.fx.ok("user", "add", "qa", "--name", "Invented Auditor", "--role", "auditor")
        c = Clinic(self.fx.db)
        p = c.patient("ST-1", "Invented", "Pelvis")
        plan = c.plan(p, "P1", site="Pelvis", technique="3D box")
        f = c.field(plan, "AP")
        self.first = None
        for i, dev in enumerate(PELVIS):
            mid = c.measure(plan, f, i + 1, "2026-10-%02dT09:00:00Z" % (i + 2), dev)
            self.first = self.first or mid
        # a mistyped reading superseded: only the amending row counts
        c.measure(plan, f, 15, "2026-10-20T09:00:00Z", 30.0, verdict="implausible")
        c.measure(plan, f, 15, "2026-10-20T09:00:00Z", 0.5,
                  supersedes=c.con.execute("SELECT max(id) FROM measurements").fetchone()[0],
                  reason="typed 1 digit too many")
        # a not-evaluable result: counted apart, no deviation
        c.measure(plan, f, 16, "2026-10-21T09:00:00Z", 0, verdict="not_evaluable")
        # a second group: the check case on an electron field (another detector)
        p2 = c.patient("ST-2", "Invented", "Breast")
        plan2 = c.plan(p2, "B1", site="Breast", technique="electron")
        f2 = c.field(plan2, "E1", beam=c.beam9e)
        for i, dev in enumerate(CHECK):
            c.measure(plan2, f2, i + 1, "2026-10-%02dT10:00:00Z" % (i + 2), dev,
                      detector=c.ediode)
        # outside the month: never counted
        c.measure(plan2, f2, 6, "2026-11-03T10:00:00Z", 4.0, detector=c.ediode)
        c.commit()
        self.pelvis = PELVIS + [0.5]

    def stats(self, *args, user="qa"):
        self.fx.ensure_session(user)     # a login is an audit row: before the digest
        before = self.fx.digest()
        out = self.fx.json("stats", *args, user=user)
        self.assertEqual(self.fx.digest(), before, "stats changed the database")
        return out

    def group(self, out, site):
        return next(g for g in out["groups"] if g["group"]["site"] == site)

    def test_summary_matches_python_statistics(self):
        out = self.stats("--month", "2026-10")
        self.assertEqual(len(out["groups"]), 2)
        g = self.group(out, "Pelvis")
        v = self.pelvis
        self.assertEqual(g["n"], len(v))
        self.assertEqual(g["not_judged"], 1)
        d = g["deviation_pct"]
        q = statistics.quantiles(v, n=20, method="inclusive")   # Python statistics module
        self.assertAlmostEqual(d["mean"], statistics.mean(v), places=12)
        self.assertAlmostEqual(d["sd"], statistics.stdev(v), places=12)
        self.assertAlmostEqual(d["median"], statistics.median(v), places=12)
        self.assertAlmostEqual(d["p05"], q[0], places=12)
        self.assertAlmostEqual(d["p95"], q[18], places=12)
        self.assertEqual(d["min"], min(v))
        self.assertEqual(d["max"], max(v))
        beyond_tol = sum(1 for x in v if verdict_for(x) != "within_tolerance")
        beyond_act = sum(1 for x in v if verdict_for(x) == "outside_action")
        self.assertEqual(g["outside_tolerance"], beyond_tol)
        self.assertEqual(g["outside_action"], beyond_act)
        self.assertAlmostEqual(g["share_outside_tolerance"], beyond_tol / len(v))
        self.assertEqual([p["deviation_pct"] for p in g["series"]], v)
        self.assertEqual(g["levels_in_force"]["tolerance_pct"], TOL)
        self.assertEqual(g["levels_in_force"]["action_pct"], ACT)
        self.assertEqual(out["results"], len(v) + len(CHECK))
        self.assertEqual(out["not_judged"], 1)

    def test_imr_limits(self):
        out = self.stats("--month", "2026-10")
        g = self.group(out, "Breast")
        i = g["imr"]
        # check value (SPC constants): mean 0.400, limits 5.055 / -4.255, MR limit 5.717
        self.assertAlmostEqual(i["centre"], 0.400, places=3)
        self.assertAlmostEqual(i["ucl"], 5.055, places=3)
        self.assertAlmostEqual(i["lcl"], -4.255, places=3)
        self.assertAlmostEqual(i["mr_ucl"], 5.717, places=3)
        m, lcl, ucl, mr_ucl = imr(self.pelvis)
        p = self.group(out, "Pelvis")["imr"]
        self.assertAlmostEqual(p["centre"], m, places=12)
        self.assertAlmostEqual(p["lcl"], lcl, places=12)
        self.assertAlmostEqual(p["ucl"], ucl, places=12)
        self.assertAlmostEqual(p["mr_ucl"], mr_ucl, places=12)
        self.assertEqual(p["points_beyond_limits"],
                         sum(1 for x in self.pelvis if x > ucl or x < lcl))

    def test_suggestion_shown_never_applied(self):
        before = self.fx.json("levels", "list", user="admin")
        out = self.stats("--month", "2026-10")
        g = self.group(out, "Pelvis")
        s = g["suggested_levels"]
        sd = statistics.stdev(self.pelvis)
        self.assertTrue(s["offered"])
        self.assertFalse(s["applied"])
        self.assertEqual(s["tolerance_pct"], math.ceil(2 * sd * 2) / 2)   # 2 SD up to 0.5 %
        self.assertEqual(s["action_pct"], math.ceil(3 * sd * 2) / 2)      # 3 SD up to 0.5 %
        self.assertIn("from memory", s["basis"])
        self.assertFalse(self.group(out, "Breast")["suggested_levels"]["offered"])  # n = 5
        self.assertEqual(self.fx.json("levels", "list", user="admin"), before)

    def test_grouping_and_period(self):
        out = self.stats("--month", "2026-10", "--by", "site")
        self.assertEqual(sorted(g["group"]["site"] for g in out["groups"]), ["Breast", "Pelvis"])
        self.assertIsNone(out["groups"][0]["group"]["detector"])
        one = self.stats("--from", "2026-10-01", "--to", "2026-10-31", "--by", "energy")
        self.assertEqual(sorted(g["group"]["energy"] for g in one["groups"]), [6, 9])
        nov = self.stats("--month", "2026-11", "--by", "detector")
        self.assertEqual([g["n"] for g in nov["groups"]], [1])
        first = self.stats("--from", "2026-10-02", "--to", "2026-10-02", "--by", "point")
        self.assertEqual(first["results"], 2)   # one result per group on 2 October

    def test_refuses_bad_options(self):
        self.assertFailsUnchanged("stats", "--month", "2026-10", "--by", "colour",
                                  expect_code=2, expect_in="grouping key 'colour'")
        self.assertFailsUnchanged("stats", "--month", "2026-13", expect_code=2)
        self.assertFailsUnchanged("stats", "--from", "2026-10-05", "--to", "2026-10-01",
                                  expect_code=2, expect_in="must not be before")
        self.assertFailsUnchanged("stats", expect_code=1, expect_in="period is required")

    def test_pdf_output_refusals(self):
        fx = self.fx
        os.mkdir(fx.path("adir"))
        for target in (fx.db, fx.path("adir"), "/dev/null"):
            self.assertFailsUnchanged("stats", "--month", "2026-10", "--out", target, "--force",
                                      user="qa", expect_code=2)
        pdf = fx.path("s.pdf")
        fx.ok("stats", "--month", "2026-10", "--out", pdf, user="qa")
        self.assertFailsUnchanged("stats", "--month", "2026-10", "--out", pdf, user="qa",
                                  expect_code=2, expect_in="already exists")
        fx.ok("stats", "--month", "2026-10", "--out", pdf, "--force", user="qa")
        self.assertEqual(os.stat(pdf).st_mode & 0o777, 0o600)

    def test_text_and_pdf(self):
        r = self.fx.ok("stats", "--month", "2026-10", user="qa")
        self.assertIn("Pelvis / 3D box / 6 MV / entrance / Diode P1 (PD-001)", r.stdout)
        self.assertIn("never applied", r.stdout)
        pdf = self.fx.path("stats.pdf")
        out = self.fx.json("stats", "--month", "2026-10", "--out", pdf,
                           "--generated-at", "2026-11-02T09:00:00Z", user="qa")
        self.assertEqual(out["file"], pdf)
        chk = subprocess.run(["qpdf", "--check", pdf], capture_output=True, text=True)
        self.assertEqual(chk.returncode, 0, chk.stdout)
        assertPopplerClean(self, pdf)
        text = pdftext(pdf, layout=False)
        self.assertIn("Statistics of in vivo deviations", text)
        self.assertIn("Pawlicki", text)
        # the text drawn comes back, symbols included (ToUnicode map of the fonts)
        self.assertIn("individuals limits at mean \u00b1 2.66 \u00d7 the average moving range",
                      pdftext(pdf, layout=False).replace("\n", " "))
        self.assertIn("%+.2f" % statistics.mean(self.pelvis), text)
        self.assertIn("%.2f" % statistics.stdev(self.pelvis), text)
        self.assertIn("UCL +5.055", text)     # check value on the Breast chart
        self.assertIn("LCL -4.255", text)
        self.assertIn("UCL 5.717", text)
        self.assertTrue(os.path.getsize(pdf) > 1000)


if __name__ == "__main__":
    main()
