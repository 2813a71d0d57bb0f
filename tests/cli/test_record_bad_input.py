"""fxledger record refuses bad input with a one-line error naming the field
and the accepted range, and leaves the database byte-for-byte unchanged:
unknown patient, plan, field or detector; readings negative, zero or not a
number; temperatures outside 10 to 45 degC; fraction numbers already logged
or beyond the plan; malformed or truncated readings files; a file that is not
an fxledger database; a newer schema version."""
import json
import os
import sqlite3

from fxlcli import main
from record_fixture import MRN, READINGS, RecordTestCase


class RecordBadInputTest(RecordTestCase):
    def refuse(self, *args, code=2, expect_in=None, **kw):
        r = self.assertFailsUnchanged("record", "--patient", MRN, *args, user=kw.pop("user", "tina"),
                                      expect_code=code, expect_in=expect_in, **kw)
        self.assertEqual(r.stderr.count("\n"), 1, "one line: " + r.stderr)
        self.assertEqual(r.stdout, "")
        return r

    def good(self, *extra):
        return ["--field", "REF", "--detector", "D-1001", "--reading", "20.0"] + list(extra)

    def test_unknown_names(self):
        self.assertFailsUnchanged("record", "--patient", "TEST-9999", *self.good(), user="tina",
                                  expect_code=2, expect_in="unknown patient 'TEST-9999'")
        self.refuse("--plan", "NOPE", *self.good(), expect_in="unknown plan 'NOPE'")
        self.refuse("--field", "XX", "--detector", "D-1001", "--reading", "20",
                    expect_in="unknown field 'XX' in plan 'REC-1' (fields: REF:entrance, AP:entrance")
        self.refuse("--field", "REF:exit", "--detector", "D-1001", "--reading", "20",
                    expect_in="unknown field 'REF:exit'")
        self.refuse("--field", "REF", "--detector", "D-0000", "--reading", "20",
                    expect_in="unknown detector 'D-0000'")
        # LAT is measured at entrance and exit: the point must be given.
        self.refuse("--field", "LAT", "--detector", "D-1001", "--reading", "20",
                    expect_in="give 'LAT:entrance' or 'LAT:exit'")

    def test_bad_readings(self):
        self.refuse("--field", "REF", "--detector", "D-1001", "--reading", "-3.2",
                    expect_in="reading '-3.2' for field 'REF' must be > 0 nC")
        self.refuse("--field", "REF", "--detector", "D-1001", "--reading", "0",
                    expect_in="reading '0' for field 'REF' must be > 0 nC")
        self.refuse("--field", "REF", "--detector", "D-1001", "--reading", "12,3",
                    expect_in="reading '12,3' for field 'REF' is not a number")
        self.refuse("--field", "REF", "--detector", "D-1001", "--reading", "abc",
                    expect_in="is not a number")
        self.refuse("--field", "REF", "--detector", "D-1001", "--reading", "nan",
                    expect_in="is not a number")
        # The first reading is fine, the second is not: nothing is written.
        self.refuse(*self.good(), "--field", "AP", "--detector", "D-1001", "--reading", "-1",
                    expect_in="reading '-1' for field 'AP'")
        self.refuse(*self.good("--background", "25"),
                    expect_in="background '25' for field 'REF' must be 0 or more and below the reading")

    def test_bad_temperatures(self):
        self.refuse(*self.good("--temp", "9.9"),
                    expect_in="temperature '9.9' for field 'REF' is out of range: must be 10 to 45 degC")
        self.refuse(*self.good("--temp", "45.1"), expect_in="must be 10 to 45 degC")
        self.refuse(*self.good("--temp", "warm"),
                    expect_in="temperature 'warm' for field 'REF' is not a number: must be 10 to 45 degC")

    def test_bad_fraction_numbers(self):
        self.fx.ok("record", "--patient", MRN, *self.good("--fraction", "2"), user="tina")
        self.refuse(*self.good("--fraction", "2"),
                    expect_in="fraction 2 of plan 'REC-1' is already logged (treated 2026-11-02T09:00:00Z)")
        self.refuse(*self.good("--fraction", "6"),
                    expect_in="fraction 6 is out of range for plan 'REC-1': must be 1 to 5")
        self.refuse(*self.good("--fraction", "0"), expect_in="must be 1 to 100")
        self.refuse(*self.good("--fraction", "two"), expect_in="not a whole number")
        for n in (3, 4, 5):
            self.fx.ok("record", "--patient", MRN, *self.good("--fraction", str(n)), user="tina")
        self.refuse(*self.good(), expect_in="has all 5 fractions logged")

    def test_bad_times_roles_and_duplicates(self):
        self.refuse(*self.good("--at", "2026-11-03"), expect_in="is in the future")
        self.refuse(*self.good("--at", "2026-02-30"), expect_in="treatment time '2026-02-30' is not valid")
        self.refuse(*self.good(), "--field", "REF", "--detector", "D-1001", "--reading", "19",
                    expect_in="field 'REF' (entrance) is given twice")
        self.refuse(*self.good(), user="otto", code=4, expect_in="permission denied")

    def test_usage_errors(self):
        self.refuse("--reading", "20", code=1, expect_in="must follow the '--field NAME'")
        self.refuse("--field", "REF", "--reading", "20", code=1, expect_in="needs '--detector SERIAL'")
        self.refuse("--field", "REF", "--detector", "D-1001", code=1, expect_in="needs '--reading X'")
        self.refuse(*self.good(), "--bogus", code=1, expect_in="unknown option '--bogus'")
        self.refuse(*self.good("--file", "x.json"), code=1, expect_in="cannot be combined")
        self.refuse(code=1, expect_in="no readings given", stdin="")

    # ---- readings files -------------------------------------------------------

    def good_file(self):
        with open(os.path.join(READINGS, "fraction_two_fields.json"), encoding="utf-8") as f:
            return f.read()

    def refuse_file(self, text, expect_in):
        path = self.fx.write("bad.json", text)
        return self.assertFailsUnchanged("record", "--file", path, user="tina", expect_code=2,
                                         expect_in=expect_in)

    def test_malformed_and_truncated_files(self):
        text = self.good_file()
        # A missing comma after "version": 1 (line 3 of the file).
        self.refuse_file(text.replace('"version": 1,', '"version": 1'),
                         "malformed JSON at line 4, column 3")
        # Cut in the middle of the second reading.
        cut = text.index('"LAT"') + 3
        lines = text[:cut].count("\n") + 1
        r = self.refuse_file(text[:cut], "ends too early at line %d" % lines)
        self.assertIn("truncated", r.stderr)
        self.refuse_file("", "ends too early at line 1, column 1")
        self.refuse_file(text + "}", "unexpected text after the document")
        with open(os.path.join(READINGS, "truncated.json"), encoding="utf-8") as f:
            self.refuse_file(f.read(), "truncated")
        self.assertFailsUnchanged("record", "--file", self.fx.path("none.json"), user="tina",
                                  expect_code=2, expect_in="cannot read readings file")

    def test_files_with_wrong_content(self):
        doc = json.loads(self.good_file())

        def variant(change):
            d = json.loads(json.dumps(doc))
            change(d)
            return json.dumps(d, indent=2)

        self.refuse_file(variant(lambda d: d.update(format="other")), "'format' is 'other'")
        self.refuse_file(variant(lambda d: d["readings"][0].update(temp=31)), "unknown key 'temp'")
        self.refuse_file(variant(lambda d: d["readings"][0].update(reading="20.1")),
                         "readings[0]: 'reading' must be a number")
        self.refuse_file(variant(lambda d: d["readings"][1].update(reading=-2)),
                         "reading '-2' for field 'LAT' must be > 0 nC")
        self.refuse_file(variant(lambda d: d["readings"][1].update(temp_c=50)),
                         "temperature '50' for field 'LAT' is out of range: must be 10 to 45 degC")
        self.refuse_file(variant(lambda d: d.update(readings=[])), "must hold 1 to 64 readings")
        self.refuse_file(variant(lambda d: d.update(patient="TEST-9999")), "unknown patient 'TEST-9999'")
        self.refuse_file(variant(lambda d: d.update(fraction=9)), "must be 1 to 5")
        self.refuse_file(variant(lambda d: d["readings"][1].update(point="side")),
                         "'point' must be \"entrance\" or \"exit\"")

    # ---- databases that are not ours ------------------------------------------

    def test_file_that_is_not_ours(self):
        self.fx.db = self.fx.write("other.db", "this is not a database\n" * 40)
        self.refuse(*self.good(), code=3, expect_in="not an fxledger database")
        other = self.fx.path("foreign.db")
        con = sqlite3.connect(other)
        con.execute("CREATE TABLE t (x)")
        con.commit()
        con.close()
        self.fx.db = other
        self.refuse(*self.good(), code=3, expect_in="not an fxledger database")

    def test_newer_schema_version(self):
        con = sqlite3.connect(self.fx.db)
        con.execute("PRAGMA user_version = 999")
        con.commit()
        con.close()
        self.refuse(*self.good(), code=3, expect_in="newer than this fxledger")


if __name__ == "__main__":
    main()
