"""fxledger export measurements: the record as RFC 4180 CSV and as JSON, read
back with Python's csv and json modules and compared value by value with the
database (read with Python's sqlite3). Fixture rows are invented and written
with sqlite3 (the Clinic helper of test_report)."""
import csv
import io
import json
import os
import sqlite3
import stat

from fxlcli import FxlTestCase, main
from test_report import Clinic

CONTEXT = ["patient_mrn", "patient_family_name", "patient_given_name", "plan_label", "plan_site",
           "plan_technique", "fraction_number", "treated_at", "field_name", "field_point",
           "detector_serial", "detector_label", "recorded_by_login", "recorded_by_name",
           "superseded_by", "current", "review_events"]


class ExportTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        self.fx.ok("user", "add", "qa", "--name", "Invented Auditor", "--role", "auditor")
        c = Clinic(self.fx.db)
        # a name that needs quoting in CSV: comma, double quote, line break, accents
        p = c.patient("EX-1", 'Invented, "Quoted"', "Zoë\nSecond line")
        plan = c.plan(p, "P1")
        f = c.field(plan, "AP")
        self.m1 = c.measure(plan, f, 1, "2026-10-05T09:00:00Z", 1.2)
        self.bad = c.measure(plan, f, 2, "2026-10-06T09:00:00Z", 6.5)
        self.fix = c.measure(plan, f, 2, "2026-10-06T09:00:00Z", 0.4, supersedes=self.bad,
                             reason="reading typed as 21.37, the electrometer showed 20.17; "
                                    "checked with the therapist, \"second\" reading")
        c.review(self.bad, "2026-10-06T09:01:00Z", "2026-10-07T10:00:00Z", "typing error", patient=p)
        p2 = c.patient("EX-2", "Other")
        plan2 = c.plan(p2, "Q1")
        f2 = c.field(plan2, "E1", beam=c.beam9e)
        self.m4 = c.measure(plan2, f2, 1, "2026-11-03T09:00:00Z", -2.0, detector=c.ediode)
        # a reading with many digits: exported as stored, not rounded
        self.digits = c.insert(
            "measurements", fraction_id=c.fractions[(plan2, 1)], field_id=f2,
            detector_id=c.ediode, reading=12.774, reading_unit="nC", temp_c=31.25,
            temp_entered=1, verdict="not_evaluable", reasons='["no valid calibration"]',
            user_id=c.admin, created_at="2026-11-03T09:00:00Z")
        c.commit()

    def db_rows(self):
        con = sqlite3.connect(self.fx.db)
        con.row_factory = sqlite3.Row
        rows = {r["id"]: dict(r) for r in con.execute("SELECT * FROM measurements")}
        cols = [r[1] for r in con.execute("PRAGMA table_info(measurements)")]
        con.close()
        return cols, rows

    def export(self, *args, fmt="csv"):
        self.fx.ensure_session("qa")     # a login is an audit row: before the digest
        before = self.fx.digest()
        r = self.fx.ok("export", "measurements", "--format", fmt, *args, user="qa")
        self.assertEqual(self.fx.digest(), before, "export changed the database")
        return r.stdout

    def test_csv_round_trip(self):
        raw = self.fx.run("export", "measurements", user="qa")
        self.assertEqual(raw.returncode, 0, raw.stderr)
        cols, rows = self.db_rows()
        # Python's csv module (RFC 4180 dialect 'excel': comma, double quote, CRLF)
        records = list(csv.reader(io.StringIO(raw.stdout, newline="")))
        header, body = records[0], records[1:]
        self.assertEqual(header, cols + CONTEXT)   # every column of the record, then context
        self.assertEqual(len(body), len(rows))     # superseded rows included
        for rec in body:
            got = dict(zip(header, rec))
            want = rows[int(got["id"])]
            for c in cols:
                w = want[c]
                if w is None:
                    self.assertEqual(got[c], "", c)
                elif isinstance(w, float):
                    self.assertEqual(float(got[c]), w, c)     # exactly the stored double
                else:
                    self.assertEqual(got[c], str(w), c)
        by_id = {int(r[0]): dict(zip(header, r)) for r in body}
        self.assertEqual(by_id[self.digits]["reading"], "12.774")
        self.assertEqual(by_id[self.digits]["temp_c"], "31.25")
        self.assertEqual(by_id[self.bad]["superseded_by"], str(self.fix))
        self.assertEqual(by_id[self.bad]["current"], "0")
        self.assertIn('"second" reading', by_id[self.fix]["amend_reason"])
        self.assertEqual(by_id[self.m1]["patient_family_name"], 'Invented, "Quoted"')
        self.assertEqual(by_id[self.m1]["patient_given_name"], "Zoë\nSecond line")
        events = json.loads(by_id[self.bad]["review_events"])
        close = [e for e in events if e["kind"] == "close"][0]
        self.assertEqual(close["printed_name"], "Dr Invented Physicist")
        self.assertEqual(close["disposition"], "typing error")
        self.assertEqual(close["at"], "2026-10-07T10:00:00Z")

    def test_csv_is_rfc4180_bytes(self):
        out = self.fx.path("all.csv")
        self.fx.ok("export", "measurements", "--out", out, user="qa")
        with open(out, "rb") as f:
            data = f.read()
        data.decode("utf-8")                       # UTF-8
        self.assertFalse(data.startswith(b"\xef\xbb\xbf"), "no byte order mark")
        self.assertTrue(data.endswith(b"\r\n"))
        # every line break outside a quoted field is CRLF (RFC 4180 section 2)
        inside = False
        for i, b in enumerate(data):
            if b == ord('"'):
                inside = not inside
            elif b == ord("\n") and not inside:
                self.assertEqual(data[i - 1], ord("\r"))
        self.assertIn(b'"Invented, ""Quoted"""', data)
        self.assertEqual(stat.S_IMODE(os.stat(out).st_mode), 0o600)
        # never replaces a file
        r = self.assertFailsUnchanged("export", "measurements", "--out", out, user="qa")
        self.assertIn("already exists", r.stderr)

    def test_json_round_trip(self):
        doc = json.loads(self.export(fmt="json"))
        cols, rows = self.db_rows()
        self.assertEqual(doc["format"], "fxledger-measurements")
        self.assertEqual(doc["columns"], cols + CONTEXT)
        self.assertEqual(doc["rows"], len(rows))
        for m in doc["measurements"]:
            want = rows[m["id"]]
            for c in cols:
                if c == "reasons":
                    self.assertEqual(m[c], json.loads(want[c]))
                else:
                    self.assertEqual(m[c], want[c], c)
        one = next(m for m in doc["measurements"] if m["id"] == self.bad)
        self.assertEqual(one["superseded_by"], self.fix)
        self.assertEqual([e["kind"] for e in one["review_events"]], ["open", "close"])
        self.assertEqual(json.loads(self.fx.run("--json", "export", "measurements",
                                                user="qa").stdout)["rows"], len(rows))

    def test_output_file_refusals(self):
        """The safe output-file rules: never the database, a symlink, a directory
        or a device; an existing file only with --force."""
        fx = self.fx
        link = fx.path("link.csv")
        os.symlink(fx.path("target.csv"), link)
        os.mkdir(fx.path("adir"))
        for target in (fx.db, fx.db + "-wal", link, fx.path("adir"), "/dev/null"):
            self.assertFailsUnchanged("export", "measurements", "--out", target, "--force",
                                      user="qa", expect_code=2)
        self.assertFalse(os.path.exists(fx.path("target.csv")))
        out = fx.path("again.csv")
        fx.ok("export", "measurements", "--out", out, user="qa")
        self.assertFailsUnchanged("export", "measurements", "--out", out, user="qa",
                                  expect_code=2, expect_in="already exists")
        fx.ok("export", "measurements", "--format", "json", "--out", out, "--force", user="qa")
        with open(out, encoding="utf-8") as f:
            self.assertEqual(json.load(f)["format"], "fxledger-measurements")
        self.assertEqual(stat.S_IMODE(os.stat(out).st_mode), 0o600)

    def test_filters(self):
        def ids(*args):
            doc = json.loads(self.export(*args, fmt="json"))
            return sorted(m["id"] for m in doc["measurements"])
        self.assertEqual(ids("--patient", "EX-2"), [self.m4, self.digits])
        self.assertEqual(ids("--detector", "ED-002"), [self.m4, self.digits])
        self.assertEqual(ids("--month", "2026-10"), sorted([self.m1, self.bad, self.fix]))
        self.assertEqual(ids("--from", "2026-10-06", "--to", "2026-10-06"),
                         sorted([self.bad, self.fix]))
        self.assertEqual(ids("--patient", "EX-1", "--month", "2026-11"), [])
        out = self.fx.path("none.csv")
        self.assertFailsUnchanged("export", "measurements", "--patient", "NOPE", "--out", out,
                                  expect_code=2, expect_in="unknown patient 'NOPE'", user="qa")
        self.assertFalse(os.path.exists(out))
        self.assertFailsUnchanged("export", "measurements", "--detector", "NOPE",
                                  expect_code=2, user="qa")
        self.assertFailsUnchanged("export", "measurements", "--format", "xml",
                                  expect_code=1, user="qa")


if __name__ == "__main__":
    main()
