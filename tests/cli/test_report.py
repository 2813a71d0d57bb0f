"""fxledger report: per-patient and monthly PDF reports. Fixture databases are
made with 'fxledger init' and then filled directly with sqlite3 (invented
patients, detectors and results), so these tests do not depend on the other
commands. Every PDF is checked with qpdf --check and read back with pdftotext
(poppler-utils)."""
import hashlib
import json
import os
import re
import shutil
import sqlite3
import subprocess
import tempfile
import unittest

import record_fixture
from fxlcli import BIN, FxlTestCase, main

CAVEAT = "Results support, and do not replace, the judgement of a qualified medical physicist."
CAVEAT2 = "Action levels are local settings; follow local policy and regulations."
TOL, ACT = 3.0, 5.0   # invented local levels, percent
EXPECTED = 200.0      # cGy, invented expected dose of every field
FACTOR = 1.05         # cGy per nC, invented calibration factor


def verdict_for(dev):
    """Rule of docs/physics.md with the levels above (a deviation exactly at a
    level counts as inside it)."""
    a = abs(dev)
    if a > 50:
        return "implausible"
    if a <= TOL:
        return "within_tolerance"
    if a <= ACT:
        return "outside_tolerance"
    return "outside_action"


class Clinic:
    """Writes invented clinical rows straight into an initialised database."""

    def __init__(self, db):
        self.con = sqlite3.connect(db)
        self.con.execute("PRAGMA foreign_keys = ON")
        c = self.con
        self.admin = c.execute("SELECT id FROM users WHERE login = 'admin'").fetchone()[0]
        self.phys = self.insert("users", login="phys", full_name="Dr Invented Physicist",
                                role="physicist", created_at="2026-01-01T00:00:00Z")
        self.machine = self.insert("machines", name="Linac A", created_at="2026-01-01T00:00:00Z")
        self.beam6 = self.insert("beams", machine_id=self.machine, name="6X", modality="photon",
                                 energy=6, created_at="2026-01-01T00:00:00Z")
        self.beam9e = self.insert("beams", machine_id=self.machine, name="9E", modality="electron",
                                  energy=9, created_at="2026-01-01T00:00:00Z")
        self.diode = self.insert("detectors", serial="PD-001", label="Diode P1", kind="photon_diode",
                                 dose_limit_cgy=20000, created_at="2026-01-01T00:00:00Z")
        self.ediode = self.insert("detectors", serial="ED-002", label="Diode E2",
                                  kind="electron_diode", created_at="2026-01-01T00:00:00Z")
        self.cal = self.insert(
            "calibrations", detector_id=self.diode, beam_id=self.beam6, point="entrance",
            calibrated_at="2026-09-20T08:00:00Z", valid_until="2026-10-20T23:59:59Z",
            chamber_dose_cgy=100, readings="[95.2, 95.3, 95.1]", reading_n=3, reading_mean=95.2,
            reading_sd=0.1, factor_cgy_per_unit=FACTOR, temp_c=21, ssd_cm=100, field_size_cm=10,
            user_id=self.phys, created_at="2026-09-20T08:00:00Z")
        t = self.insert("correction_tables", detector_id=self.diode, beam_id=self.beam6,
                        parameter="field_size", effective_from="2026-01-01T00:00:00Z",
                        user_id=self.phys, created_at="2026-01-01T00:00:00Z")
        for x, f in ((4, 0.98), (10, 1.0), (30, 1.02)):
            self.insert("correction_points", table_id=t, x=x, factor=f)
        self.levels = self.insert("threshold_sets", name="default", version=1,
                                  effective_from="2026-01-01T00:00:00Z", tolerance_pct=TOL,
                                  action_pct=ACT, user_id=self.phys,
                                  created_at="2026-01-01T00:00:00Z")
        self.fractions = {}

    def insert(self, table, **cols):
        names = ", ".join(cols)
        marks = ", ".join(":" + k for k in cols)
        cur = self.con.execute("INSERT INTO %s (%s) VALUES (%s)" % (table, names, marks), cols)
        return cur.lastrowid

    def patient(self, mrn, family, given=""):
        return self.insert("patients", mrn=mrn, family_name=family, given_name=given,
                           birth_date="1961-04-12", created_at="2026-09-01T00:00:00Z")

    def plan(self, patient, label, site="Pelvis", technique="3D conformal", fractions=25,
             dose=200.0, created_at="2026-09-25T10:00:00Z"):
        return self.insert("plans", patient_id=patient, label=label, site=site,
                           technique=technique, fractions=fractions, dose_per_fraction_cgy=dose,
                           user_id=self.phys, created_at=created_at)

    def field(self, plan, name, point="entrance", beam=None):
        return self.insert("fields", plan_id=plan, name=name, beam_id=beam or self.beam6,
                           point=point, setup="ssd", mu=200, ssd_cm=100, x_cm=10, y_cm=10,
                           expected_dose_cgy=EXPECTED, expected_source="model")

    def measure(self, plan, field, number, treated_at, dev, verdict=None, supersedes=None,
                reason=None, detector=None):
        key = (plan, number)
        if key not in self.fractions:
            self.fractions[key] = self.insert("fractions", plan_id=plan, number=number,
                                              treated_at=treated_at, user_id=self.admin,
                                              created_at=treated_at)
        verdict = verdict or verdict_for(dev)
        evaluable = verdict not in ("not_evaluable",)
        dose = EXPECTED * (1 + dev / 100.0) if evaluable else None
        return self.insert(
            "measurements", fraction_id=self.fractions[key], field_id=field,
            detector_id=detector or self.diode, reading=EXPECTED * (1 + dev / 100.0) / FACTOR,
            reading_unit="nC", temp_c=32, temp_entered=0, calibration_id=self.cal,
            factor_n=FACTOR, corrected_dose_cgy=dose, expected_dose_cgy=EXPECTED,
            deviation_pct=round(dev, 2) if evaluable else None, threshold_set_id=self.levels,
            tolerance_pct=TOL, action_pct=ACT, floor_cgy=0, verdict=verdict,
            supersedes_id=supersedes, amend_reason=reason, user_id=self.admin,
            created_at=treated_at)

    def review(self, measurement, opened_at, closed_at=None, disposition=None, patient=None):
        item = self.insert("review_items", rule="single_result", severity=3,
                           status="closed" if closed_at else "open", measurement_id=measurement,
                           patient_id=patient, summary="result outside the levels",
                           opened_at=opened_at)
        self.insert("review_events", item_id=item, kind="open", user_id=self.admin,
                    created_at=opened_at)
        if closed_at:
            self.insert("review_events", item_id=item, kind="close", disposition=disposition,
                        comment="checked", user_id=self.phys, created_at=closed_at)
        return item

    def commit(self):
        self.con.commit()
        self.con.close()


def pdftext(path, first=None, last=None, layout=True):
    args = ["pdftotext"] + (["-layout"] if layout else [])
    if first:
        args += ["-f", str(first), "-l", str(last or first)]
    r = subprocess.run(args + [path, "-"], capture_output=True, text=True, check=True)
    return r.stdout


def assertPopplerClean(test, path):
    """No warning or error from poppler-utils on the file (stderr empty), and
    text extraction gives text."""
    t = subprocess.run(["pdftotext", path, "-"], capture_output=True, text=True)
    test.assertEqual(t.returncode, 0, t.stderr)
    test.assertEqual(t.stderr, "", "pdftotext warns on %s" % path)
    test.assertIn("Page 1 of", t.stdout)
    with tempfile.TemporaryDirectory() as d:
        r = subprocess.run(["pdftoppm", "-r", "20", "-png", path, os.path.join(d, "p")],
                           capture_output=True, text=True)
        test.assertEqual(r.returncode, 0, r.stderr)
        test.assertEqual(r.stderr, "", "pdftoppm warns on %s" % path)


def pdfpages(path):
    out = subprocess.run(["pdfinfo", path], capture_output=True, text=True, check=True).stdout
    return int(re.search(r"^Pages:\s+(\d+)", out, re.M).group(1))


def sha(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


class ReportTestCase(FxlTestCase):
    GEN = "2026-11-02T09:00:00Z"

    def report(self, *args, expect_ok=True):
        self.fx.ensure_session()         # a login is an audit row: before the digest
        before = self.fx.digest()
        r = self.fx.run("report", *args, "--generated-at", self.GEN)
        if expect_ok:
            self.assertEqual(r.returncode, 0, r.stderr)
        self.assertEqual(self.fx.digest(), before, "a report changed the database")
        if r.returncode == 0:
            out = args[list(args).index("--out") + 1]
            self.assertQpdfOk(out)      # every report the tests produce
            self.assertPopplerClean(out)
        keep = os.environ.get("FXL_TEST_KEEP_PDF")  # a directory to look at the files in
        if keep and r.returncode == 0:
            shutil.copy(out, os.path.join(keep, "%s-%s" % (self.id().split(".")[-1],
                                                           os.path.basename(out))))
        return r

    def assertPopplerClean(self, path):
        """poppler (pdftotext, pdftoppm) reads the file without a warning: no
        "Invalid 'begincidrange' operator in ToUnicode CMap" or any other."""
        assertPopplerClean(self, path)

    def assertQpdfOk(self, path):
        r = subprocess.run(["qpdf", "--check", path], capture_output=True, text=True)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("No syntax or stream encoding errors", r.stdout)

    def assertEveryPageFramed(self, path, department="Invented Test Department"):
        """Department, page x of y and the caveat on every page."""
        n = pdfpages(path)
        for p in range(1, n + 1):
            t = pdftext(path, p)
            self.assertIn(department, t, "page %d" % p)
            self.assertIn("Page %d of %d" % (p, n), t)
            self.assertIn(CAVEAT, t, "page %d" % p)
            self.assertIn(CAVEAT2, t, "page %d" % p)
            self.assertIn("Generated 2026-11-02", t)
        return n

    def assertNothingOffPage(self, path):
        """Every word lies inside the page (pdftotext -bbox gives its box)."""
        html = subprocess.run(["pdftotext", "-bbox", path, "-"], capture_output=True, text=True,
                              check=True).stdout
        for page in re.finditer(r'<page width="([\d.]+)" height="([\d.]+)">(.*?)</page>', html, re.S):
            w, h = float(page.group(1)), float(page.group(2))
            for m in re.finditer(r'xMin="([\d.-]+)" yMin="([\d.-]+)" xMax="([\d.-]+)" '
                                 r'yMax="([\d.-]+)">([^<]*)<', page.group(3)):
                x0, y0, x1, y1 = map(float, m.groups()[:4])
                self.assertTrue(x0 >= 20 and x1 <= w - 20 and y0 >= 10 and y1 <= h - 10,
                                "word %r at %s runs off the page" % (m.group(5), m.groups()[:4]))


class PatientReportTest(ReportTestCase):
    def setUp(self):
        super().setUp()
        c = Clinic(self.fx.db)
        pid = c.patient("MRN-1001", "Ångström-Núñez", "Zoë")
        plan = c.plan(pid, "PEL-1")
        ap = c.field(plan, "AP")
        pa = c.field(plan, "PA")
        self.rows = []
        devs = [1.2, -0.8, 2.1, 3.9, -1.4, 6.3, 0.4, -2.2]
        for i, dev in enumerate(devs):
            day = "2026-10-%02dT08:%02d:00Z" % (1 + i, 10 + i)
            f = ap if i % 2 == 0 else pa
            self.rows.append((c.measure(plan, f, i + 1, day, dev), day[:10], dev))
        # a mistyped reading and its correction (fraction 9)
        bad = c.measure(plan, ap, 9, "2026-10-09T08:30:00Z", 31.0)
        good = c.measure(plan, ap, 9, "2026-10-09T08:30:00Z", 0.9, supersedes=bad,
                         reason="reading typed in the wrong unit")
        self.bad, self.good = bad, good
        # review: the outside-action result closed, the outside-tolerance pending
        c.review(self.rows[5][0], "2026-10-06T08:20:00Z", "2026-10-07T10:00:00Z", "set-up error",
                 patient=pid)
        c.review(self.rows[3][0], "2026-10-04T08:20:00Z", patient=pid)
        c.measure(plan, pa, 10, "2026-10-10T08:00:00Z", 0, verdict="not_evaluable")
        c.commit()
        self.out = self.fx.path("patient.pdf")

    def test_patient_report_lists_patient_rows_counts_and_caveat(self):
        r = self.report("patient", "MRN-1001", "--out", self.out)
        self.assertIn("wrote", r.stdout)
        self.assertQpdfOk(self.out)
        self.assertEveryPageFramed(self.out)
        t = pdftext(self.out)
        self.assertIn("Ångström-Núñez, Zoë", t)
        self.assertIn("MRN-1001", t)
        self.assertIn("PEL-1", t)
        for mid, day, dev in self.rows:
            line = [l for l in t.splitlines() if re.match(r"\s*%d\s+%s\s" % (mid, day), l)]
            self.assertEqual(len(line), 1, "row of measurement %d missing" % mid)
            self.assertIn("%+.2f %%" % dev, line[0])
            self.assertIn("%.1f cGy" % (EXPECTED * (1 + dev / 100)), line[0])
        self.assertRegex(t, r"%d\s.*superseded by %d" % (self.bad, self.good))
        self.assertRegex(t, r"replaces %d \(reason" % self.bad)
        flat = " ".join(pdftext(self.out, layout=False).split())
        # the amendment reason in full, and who closed the review with the comment
        self.assertIn("No. %d replaces No. %d (fraction 9, field AP, entrance;" % (self.good, self.bad), flat)
        self.assertIn("Reason: reading typed in the wrong unit", flat)
        self.assertIn("Dr Invented Physicist (phys, physicist)", flat)
        self.assertIn("closed with disposition 'set-up error' checked", flat)
        self.assertRegex(t, r"outside action level\s+set-up error")
        self.assertRegex(t, r"outside tolerance\s+review pending")
        # counts: 8 rows + the correction + the not-evaluable one; the superseded
        # row is not counted (arithmetic of the fixture)
        self.assertRegex(t, r"within tolerance\s+7\s+70\.0 %")
        self.assertRegex(t, r"outside tolerance\s+1\s+10\.0 %")
        self.assertRegex(t, r"outside action level\s+1\s+10\.0 %")
        self.assertRegex(t, r"not evaluable\s+1\s+10\.0 %")
        self.assertRegex(t, r"implausible entry\s+0\s+0\.0 %")
        self.assertRegex(t, r"all counted results\s+10\b")
        # mean of 1.2 -0.8 2.1 3.9 -1.4 6.3 0.4 -2.2 0.9 = 10.4/9 (arithmetic)
        self.assertIn("mean +1.16 %", t)
        self.assertIn("Limits of the method", pdftext(self.out, 1))
        self.assertIn("cross-calibrated against a calibrated ion chamber", pdftext(self.out, 1, layout=False).replace("\n", " "))
        self.assertIn("field size", t)
        self.assertIn("4.0 to 30.0 cm", t)
        self.assertIn("Deviation by fraction, per field", t)
        self.assertIn("Field AP, entrance", t)
        self.assertIn("Name of the reviewing medical physicist", t)
        self.assertNothingOffPage(self.out)

    def test_same_time_gives_identical_bytes(self):
        self.report("patient", "MRN-1001", "--out", self.out)
        first = sha(self.out)
        other = self.fx.path("again.pdf")
        self.report("patient", "MRN-1001", "--out", other)
        self.assertEqual(sha(other), first)
        # FXLEDGER_NOW fixes the clock the same way (--force: the file exists)
        r = self.fx.run("report", "patient", "MRN-1001", "--out", other, "--force", now=self.GEN)
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertQpdfOk(other)
        self.assertEqual(sha(other), first)
        self.report("month", "2026-10", "--out", self.out, "--force")
        first = sha(self.out)
        self.report("month", "2026-10", "--out", other, "--force")
        self.assertEqual(sha(other), first)

    def test_plan_option_and_unknown_subjects(self):
        self.report("patient", "MRN-1001", "--plan", "PEL-1", "--out", self.out)
        self.assertIn("PEL-1", pdftext(self.out))
        missing = self.fx.path("missing.pdf")
        r = self.report("patient", "MRN-1001", "--plan", "NOPE", "--out", missing, expect_ok=False)
        self.assertEqual(r.returncode, 2)
        self.assertTrue(r.stderr.startswith("fxledger: error: plan 'NOPE' not found"), r.stderr)
        self.assertFalse(os.path.exists(missing))
        r = self.report("patient", "NO-SUCH", "--out", missing, expect_ok=False)
        self.assertEqual(r.returncode, 2)
        self.assertTrue(r.stderr.startswith("fxledger: error: patient 'NO-SUCH' not found"))
        self.assertFalse(os.path.exists(missing))
        r = self.report("month", "2026-13", "--out", missing, expect_ok=False)
        self.assertNotEqual(r.returncode, 0)
        self.assertIn("must be YYYY-MM", r.stderr)
        r = self.fx.run("report", "patient", "MRN-1001", "--out", missing, "--generated-at", "soon")
        self.assertEqual(r.returncode, 1)
        self.assertIn("generation time 'soon'", r.stderr)
        self.assertFalse(os.path.exists(missing))

    def test_any_role_may_report(self):
        self.fx.ok("user", "add", "aud", "--name", "Invented Auditor", "--role", "auditor")
        self.fx.ensure_session("aud")
        before = self.fx.digest()
        r = self.fx.run("report", "patient", "MRN-1001", "--out", self.out, user="aud")
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertQpdfOk(self.out)
        self.assertEqual(self.fx.digest(), before)


class PaginationTest(ReportTestCase):
    def test_500_measurements_repeat_headers_on_every_page(self):
        c = Clinic(self.fx.db)
        pid = c.patient("MRN-500", "Longcourse", "Invented")
        plan = c.plan(pid, "BIG", fractions=100)
        fields = [c.field(plan, n) for n in ("AP", "PA", "LAO", "RAO", "VERY-LONG-FIELD-NAME-"
                                             "THAT-DOES-NOT-FIT-IN-ITS-COLUMN-AT-ALL-XYZ")]
        ids = []
        for n in range(1, 101):
            day = "2026-%02d-%02dT08:00:00Z" % (7 + (n - 1) // 28, 1 + (n - 1) % 28)
            for k, f in enumerate(fields):
                ids.append(c.measure(plan, f, n, day, ((n * 7 + k * 3) % 90) / 10.0 - 4.5))
        c.commit()
        self.assertEqual(len(ids), 500)
        out = self.fx.path("big.pdf")
        self.report("patient", "MRN-500", "--out", out)
        self.assertQpdfOk(out)
        pages = self.assertEveryPageFramed(out)
        self.assertGreaterEqual(pages, 8)
        seen = set()
        table_pages = 0
        for p in range(1, pages + 1):
            t = pdftext(out, p)
            found = {int(m.group(1)) for m in re.finditer(r"^\s*(\d+)\s+2026-\d\d-\d\d\s", t, re.M)}
            if not found:
                continue
            table_pages += 1
            seen |= found
            for head in ("No.", "Date", "Field", "Detector", "Reading", "Corrected", "Expected",
                         "Deviation", "Verdict", "Review", "Amendment"):
                self.assertIn(head, t, "column header %r missing on page %d" % (head, p))
            if table_pages > 1:
                self.assertIn("Measurements, plan BIG (continued)", t)
        self.assertEqual(seen, set(ids))
        self.assertGreaterEqual(table_pages, 8)
        # the long field name is cut with a mark, not run into the next column
        self.assertIn("\u2026", pdftext(out, 2))
        self.assertNothingOffPage(out)


class NamesTest(ReportTestCase):
    NAMES = [("MRN-Z", "Ångström-Núñez", "Zoë"), ("MRN-L", "Żółć", "Łukasz"),
             ("MRN-D", "Παπαδόπουλος", "Δημήτρης"), ("MRN-O", "Смирнова", "Ольга")]

    def test_accented_and_non_latin_names_round_trip(self):
        c = Clinic(self.fx.db)
        for mrn, fam, giv in self.NAMES:
            pid = c.patient(mrn, fam, giv)
            plan = c.plan(pid, "P1", site="Tête et cou", technique="Ζ-technique")
            f = c.field(plan, "Поле-1")
            c.measure(plan, f, 1, "2026-10-05T09:00:00Z", 1.0)
        c.commit()
        for mrn, fam, giv in self.NAMES:
            out = self.fx.path(mrn + ".pdf")
            self.report("patient", mrn, "--out", out)
            self.assertQpdfOk(out)
            t = pdftext(out)
            self.assertIn("%s, %s" % (fam, giv), t)
            self.assertIn("Tête et cou", t)
            self.assertIn("Поле-1", t)
            self.assertNothingOffPage(out)
        out = self.fx.path("month.pdf")
        self.report("month", "2026-10", "--out", out)
        t = pdftext(out)
        self.assertIn("Tête et cou / Ζ-technique", t)


class EmptyTest(ReportTestCase):
    def test_patient_without_measurements_gets_no_data_page(self):
        c = Clinic(self.fx.db)
        pid = c.patient("MRN-EMPTY", "Nobody", "Invented")
        c.plan(pid, "P0")
        c.patient("MRN-NOPLAN", "Planless", "Invented")
        c.commit()
        for mrn in ("MRN-EMPTY", "MRN-NOPLAN"):
            out = self.fx.path(mrn + ".pdf")
            r = self.report("patient", mrn, "--out", out)
            self.assertIn("no data", r.stdout)
            self.assertQpdfOk(out)
            self.assertEqual(self.assertEveryPageFramed(out), 1)
            t = pdftext(out)
            self.assertIn("No measurements recorded", t)
            self.assertIn(mrn, t)
            self.assertIn("Limits of the method", t)

    def test_month_without_measurements_gets_no_data_page(self):
        out = self.fx.path("empty-month.pdf")
        r = self.report("--json", "month", "2026-02", "--out", out)
        self.assertTrue(json.loads(r.stdout)["empty"])
        self.assertQpdfOk(out)
        self.assertEveryPageFramed(out)
        t = pdftext(out)
        self.assertIn("No measurements this month", t)
        self.assertIn("February 2026", t)
        self.assertIn("No queue item was open", t)


class MonthlyReportTest(ReportTestCase):
    def setUp(self):
        super().setUp()
        # Settings change only through their audited command (sql/011 guards).
        self.fx.ok("setting", "set", "timezone", "Europe/Paris")
        self.fx.ok("setting", "set", "department", "Service de radiothérapie (invented)")
        c = Clinic(self.fx.db)
        p1 = c.patient("MRN-A", "Alpha", "Ann")
        p2 = c.patient("MRN-B", "Beta", "Bob")
        pl1 = c.plan(p1, "PEL", site="Pelvis", technique="3D conformal")
        pl2 = c.plan(p2, "BRE", site="Breast", technique="tangents")
        f1 = c.field(pl1, "AP")
        f2 = c.field(pl2, "MED")
        f3 = c.field(pl2, "BOOST", beam=c.beam9e)
        # Europe/Paris is UTC+2 until 2026-10-25 and UTC+1 after (EU summer-time rule):
        # 2026-09-30T22:30Z is 1 October 00:30 local -> counted in October;
        # 2026-10-31T23:30Z is 1 November 00:30 local -> not counted.
        c.measure(pl1, f1, 1, "2026-09-30T22:30:00Z", 1.0)
        c.measure(pl1, f1, 2, "2026-10-02T08:00:00Z", 2.0)
        c.measure(pl1, f1, 3, "2026-10-03T08:00:00Z", -4.0)
        act = c.measure(pl1, f1, 4, "2026-10-04T08:00:00Z", 7.5)
        c.review(act, "2026-10-04T08:05:00Z", "2026-10-06T20:05:00Z", "detector placement",
                 patient=p1)
        act2 = c.measure(pl2, f2, 1, "2026-10-05T08:00:00Z", -8.0)
        c.review(act2, "2026-10-05T08:05:00Z", patient=p2)
        c.measure(pl2, f3, 1, "2026-10-05T08:00:00Z", 0.2, detector=c.ediode)
        c.measure(pl2, f2, 2, "2026-10-31T23:30:00Z", 0.1)
        c.measure(pl2, f2, 3, "2026-09-30T21:30:00Z", 0.3)  # 23:30 local on 30 September
        # a calibration done in October for the electron diode
        c.insert("calibrations", detector_id=c.ediode, beam_id=c.beam9e, point="entrance",
                 calibrated_at="2026-10-15T08:00:00Z", valid_until="2026-12-15T23:59:59Z",
                 chamber_dose_cgy=100, readings="[50.0]", reading_n=1, reading_mean=50.0,
                 reading_sd=0, factor_cgy_per_unit=2.0, temp_c=21, ssd_cm=100,
                 field_size_cm=10, user_id=c.phys, created_at="2026-10-15T08:00:00Z")
        # a detector past its dose limit: 3 x 200 cGy in September against 500 cGy
        worn = c.insert("detectors", serial="PD-003", label="Diode P3", kind="photon_diode",
                        dose_limit_cgy=500, created_at="2026-01-01T00:00:00Z")
        c.insert("calibrations", detector_id=worn, beam_id=c.beam6, point="entrance",
                 calibrated_at="2026-09-01T08:00:00Z", valid_until="2026-12-01T23:59:59Z",
                 chamber_dose_cgy=100, readings="[95.0]", reading_n=1, reading_mean=95.0,
                 reading_sd=0, factor_cgy_per_unit=FACTOR, temp_c=21, ssd_cm=100,
                 field_size_cm=10, user_id=c.phys, created_at="2026-09-01T08:00:00Z")
        for n in (4, 5, 6):
            c.measure(pl2, f2, n, "2026-09-1%dT08:00:00Z" % n, 0.0, detector=worn)
        # the calibration of PD-001 ran out on 20 October and was not renewed
        c.commit()
        self.out = self.fx.path("month.pdf")

    def test_monthly_order_sections_bins_and_signoff(self):
        out = self.fx.path("oct.pdf")
        self.report("month", "2026-10", "--out", out)
        flat = " ".join(pdftext(out, layout=False).split())
        heads = re.findall(r"(\d+)\. ([A-Z][a-z][^.]*?)(?= [A-Z0-9]|$)", flat)
        numbered = [int(n) for n, _ in heads]
        # results first, the inventory of correction tables last
        self.assertLess(flat.index("1. Results by verdict"), flat.index("Correction tables in force"))
        self.assertLess(flat.index("Review and sign-off by the medical physicist"),
                        flat.index("Limits of the method and correction tables in force"))
        self.assertIn("Statistics of deviations by site", flat)
        self.assertIn("Name of the reviewing medical physicist", flat)
        # histogram bins: tolerance 3 %, action 5 % fall on bin edges (1 % bins)
        self.assertIn("Bins of 1 %, with bin edges at the tolerance and action levels", flat)
        # the site statistics: Pelvis has deviations 1, 2, -4, 7.5 in October
        import statistics
        pel = [1.0, 2.0, -4.0, 7.5]
        site = flat[flat.index("5. Statistics of deviations by site"):]
        for v in ("%+.2f" % statistics.mean(pel), "%.2f" % statistics.stdev(pel),
                  "%+.2f" % statistics.median(pel)):
            self.assertIn(v, site[:700])      # Python statistics module
        # an empty month has the same numbered sections
        empty = self.fx.path("feb.pdf")
        self.report("month", "2026-02", "--out", empty)
        eflat = " ".join(pdftext(empty, layout=False).split())
        for title in ("1. Results by verdict", "5. Statistics of deviations by site",
                      "6. Distribution of deviations", "7. Results outside the action level",
                      "11. Review and sign-off by the medical physicist",
                      "12. Limits of the method and correction tables in force"):
            self.assertIn(title, flat)
            self.assertIn(title, eflat)
        self.assertTrue(numbered)

    def test_monthly_counts_rates_tz_and_sections(self):
        res = json.loads(self.report("--json", "month", "2026-10", "--out", self.out).stdout)
        self.assertEqual(res["from_utc"], "2026-09-30T22:00:00Z")  # tz rule above
        self.assertEqual(res["to_utc"], "2026-10-31T23:00:00Z")
        self.assertEqual(res["measurements"], 6)
        self.assertQpdfOk(self.out)
        self.assertEveryPageFramed(self.out, "Service de radiothérapie (invented)")
        t = pdftext(self.out)
        self.assertIn("October 2026", t)
        # 6 results: 3 within, 1 outside tolerance, 2 outside action (fixture arithmetic)
        self.assertRegex(t, r"within tolerance\s+3\s+50\.0 %")
        self.assertRegex(t, r"outside tolerance\s+1\s+16\.7 %")
        self.assertRegex(t, r"outside action level\s+2\s+33\.3 %")
        self.assertRegex(t, r"Pelvis / 3D conformal\s+4\s+2 \(50\.0 %\)\s+1 \(25\.0 %\)\s+1 \(25\.0 %\)")
        self.assertRegex(t, r"Breast / tangents\s+2\s+1 \(50\.0 %\)")
        self.assertRegex(t, r"photon 6 MV\s+5\b")
        self.assertRegex(t, r"electron 9 MeV\s+1\b")
        self.assertRegex(t, r"Diode P1 \(serial PD-001\)\s+5\b")
        self.assertIn("Distribution of deviations", t)
        self.assertRegex(t, r"MRN-A\s+Alpha, Ann.*\+7\.50 %\s+detector placement\s+Dr Invented.*2\.5 d")
        self.assertRegex(t, r"MRN-B\s+Beta, Bob.*-8\.00 %\s+open in the queue")
        # queue as of the end of October: the item of MRN-B, opened 5 October
        self.assertRegex(t, r"\d+\s+2026-10-05\s+26 d\s+3 of 4\s+MRN-B")
        # the calibration valid until 20 October is overdue at the end of the month
        self.assertRegex(t, r"Diode P1\s+PD-001\s+Linac A 6X\s+entrance.*overdue by 11 d")
        self.assertRegex(t, r"2026-10-15\s+Diode E2\s+ED-002\s+Linac A 9E\s+entrance\s+2 cGy/nC\s+2026-12-15")
        # 600 cGy of 500 cGy (fixture arithmetic)
        self.assertRegex(t, r"Diode P3\s+PD-003\s+photon diode\s+in service\s+2026-09-01\s+600 cGy\s+500 cGy\s+120 %")
        self.assertNotRegex(t, r"Diode P1\s+PD-001\s+photon diode")
        self.assertNothingOffPage(self.out)

    def test_bad_timezone_is_refused(self):
        # A value that 'setting set' refuses, written around the guard trigger
        # as damage or an older program might leave it: the report refuses.
        con = sqlite3.connect(self.fx.db)
        con.execute("DROP TRIGGER settings_set_by_command")
        con.execute("UPDATE settings SET value = 'Mars/Olympus_Mons' WHERE key = 'timezone'")
        con.commit()
        con.close()
        r = self.report("month", "2026-10", "--out", self.out, expect_ok=False)
        self.assertEqual(r.returncode, 2)
        self.assertIn("'Mars/Olympus_Mons'", r.stderr)
        self.assertFalse(os.path.exists(self.out))


class EndToEndTest(record_fixture.RecordTestCase, ReportTestCase):
    """The same reports on a department built with fxledger's own commands
    (record_fixture.py): the rows that record, amend and queue write are the
    rows the reports read."""

    def test_reports_of_a_logged_course(self):
        fx = self.fx
        mrn = record_fixture.MRN

        def rec(fraction, at, reading, user="tina"):
            r = fx.run("--json", "record", "--patient", mrn, "--fraction", fraction, "--at", at,
                       "--field", "REF:entrance", "--detector", "D-1001", "--reading", reading,
                       "--temp", "20", user=user)
            self.assertIn(r.returncode, (0, 11, 12), r.stderr)
            return json.loads(r.stdout)

        # N = 10 cGy/nC, CF_T = 1 at 20 degC, reference field (record_fixture):
        # 20.2 nC -> 202 cGy (+1 %), 21.8 nC -> 218 cGy (+9 %, outside action 8 %)
        rec(1, "2026-10-05T08:00:00Z", "20.2")
        out = rec(2, "2026-10-06T08:00:00Z", "21.8")
        self.assertIn("outside_action", json.dumps(out))
        items = fx.json("queue", "list", user="phil")
        item_ids = [i["id"] for i in (items if isinstance(items, list) else items.get("items", []))]
        self.assertTrue(item_ids, items)
        fx.ok("queue", "close", item_ids[0], "--disposition", "detector placement",
              "--comment", "diode off axis", user="phil", now="2026-10-07T09:00:00Z")
        pdf = fx.path("course.pdf")
        self.report("patient", mrn, "--out", pdf)
        t = pdftext(pdf)
        self.assertIn("Example, Invented", t)
        self.assertRegex(t, r"2026-10-05\s+1\s+REF\s+entrance\s+D-1001\s+20\.2 nC\s+202\.0 cGy\s+200\.0 cGy\s+\+1\.00 %\s+within tolerance")
        self.assertRegex(t, r"2026-10-06\s+2\s+REF.*\+9\.00 %\s+outside action level\s+detector placement")
        flat = " ".join(pdftext(pdf, layout=False).split())
        self.assertIn("Phil Physicist (phil, physicist)", flat)
        self.assertIn("diode off axis", flat)
        month = fx.path("month.pdf")
        self.report("month", "2026-10", "--out", month)
        t = pdftext(month)
        self.assertRegex(t, r"within tolerance\s+1\s+50\.0 %")
        self.assertRegex(t, r"outside action level\s+1\s+50\.0 %")
        self.assertRegex(t, r"TEST-0101\s+Example,\s+Invented.*\+9\.00 %\s+detector placement\s+Phil Physicist")

        # The queue as it stood at the end of the month: an item closed in
        # November was still open then and is listed (closed now, with an
        # event after the month); the item closed on 7 October is not.
        before = {i["id"] for i in fx.json("queue", "list", user="phil")}
        r = fx.run("--json", "record", "--patient", mrn, "--fraction", 3, "--at", "2026-10-20T08:00:00Z",
                   "--field", "REF:entrance", "--detector", "D-1001", "--reading", "21.8",
                   "--temp", "20", user="tina", now="2026-10-20T09:00:00Z")
        self.assertEqual(r.returncode, 12, r.stderr)
        [late] = [i["id"] for i in fx.json("queue", "list", user="phil") if i["id"] not in before]
        fx.ok("queue", "close", late, "--disposition", "detector placement", user="phil",
              now="2026-11-03T09:00:00Z")
        october = fx.path("month-oct.pdf")
        self.report("month", "2026-10", "--out", october)
        t = pdftext(october)
        self.assertRegex(t, r"\n\s*%d\s+2026-10-20\s+11 d\s" % late)
        self.assertNotRegex(t, r"\n\s*%d\s+20\d\d-\d\d-\d\d\s+\d+ d\s" % item_ids[0])
        # The November report as of its printing time (2 November, GEN):
        # the item was closed on the 3rd, so it is still listed, 13 days old.
        november = fx.path("month-nov.pdf")
        self.report("month", "2026-11", "--out", november)
        self.assertRegex(pdftext(november), r"\n\s*%d\s+2026-10-20\s+13 d\s" % late)


class MemoryTest(ReportTestCase):
    def peak_kib(self, *args):
        self.fx.ensure_session("admin")
        e = self.fx.env("admin")
        p = subprocess.Popen(self.fx.argv(*args, user="admin"), env=e,
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        _, status, usage = os.wait4(p.pid, 0)
        p.returncode = os.waitstatus_to_exitcode(status)
        self.assertEqual(p.returncode, 0, p.stderr.read())
        p.stderr.close()
        return usage.ru_maxrss

    @unittest.skipIf(os.environ.get("FXL_SANITIZE") == "1",
                     "peak RSS under AddressSanitizer counts its shadow memory and quarantine")
    def test_month_memory_stays_flat(self):
        c = Clinic(self.fx.db)
        pid = c.patient("MRN-M", "Many", "Invented")
        plans = [c.plan(pid, "P%d" % i, fractions=100) for i in range(60)]
        fields = [[c.field(p, "F%d" % k) for k in range(5)] for p in plans]
        c.con.commit()

        def fill(first, last):
            for i in range(first, last):
                p = plans[i]
                for n in range(1, 101):
                    day = "2026-10-%02dT%02d:00:00Z" % (1 + n % 28, 6 + i % 12)
                    for k, f in enumerate(fields[i]):
                        c.measure(p, f, n, day, ((n + k + i) % 60) / 10.0 - 3.0)
            c.con.commit()

        fill(0, 30)     # 15,000 results: SQLite's page cache (2 MiB by default) is full
        half = self.peak_kib("report", "month", "2026-10", "--out", self.fx.path("h.pdf"),
                             "--generated-at", self.GEN)
        fill(30, 60)    # 30,000 results
        c.commit()
        full = self.peak_kib("report", "month", "2026-10", "--out", self.fx.path("f.pdf"),
                             "--generated-at", self.GEN)
        self.assertQpdfOk(self.fx.path("h.pdf"))
        self.assertQpdfOk(self.fx.path("f.pdf"))
        self.assertIn("30000", subprocess.run(["pdftotext", self.fx.path("f.pdf"), "-"],
                                              capture_output=True, text=True).stdout)
        # 15,000 more rows kept in memory would take several MiB (a few hundred
        # bytes each); streaming keeps the peak where it was, give or take
        # allocator noise.
        self.assertLess(full - half, 1536, "peak memory grew %d KiB" % (full - half))


if __name__ == "__main__":
    main()
