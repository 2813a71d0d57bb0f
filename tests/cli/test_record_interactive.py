"""fxledger record --interactive with piped standard input: prompts field by
field in plan order (REF, AP, LAT entrance, LAT exit, OBL; record_fixture.py)
with defaults in brackets; Enter accepts a default, a blank reading skips a
field; wrong values are asked again; end of input or 'n' at the confirmation
writes nothing."""
import json
import sqlite3

from fxlcli import main
from record_fixture import MRN, SKIN_DEFAULT_C, RecordTestCase, deviation, dose


class RecordInteractiveTest(RecordTestCase):
    def interactive(self, lines, *args, now=None, **kw):
        self.fx.ensure_session(kw.get("user", "tina"), now)   # logged in before any digest
        return self.record("--interactive", *args, stdin="\n".join(lines) + "\n", now=now, **kw)

    def test_defaults_accepted_with_empty_lines(self):
        # Fraction 1 from options leaves D-1001 as the last detector on REF.
        self.fx.ok("record", "--patient", MRN, "--field", "REF", "--detector", "D-1001", "--reading",
                   "20.0", "--temp", "20", user="tina")
        lines = [
            "",              # fraction number [2]
            "", "20.5", "",  # REF: detector [D-1001], reading, temperature [32]
            "", "",          # AP: detector [D-1001] (the patient's last), blank reading: skip
            "", "",          # LAT entrance: skip
            "", "",          # LAT exit: skip
            "", "",          # OBL: skip
            "",              # confirm [Y/n]
        ]
        r = self.interactive(lines, now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("Fraction number [2]:", r.stdout)
        self.assertIn("detector [D-1001]:", r.stdout)
        self.assertIn("temperature degC [32]:", r.stdout)
        self.assertIn("reading nC (blank skips):", r.stdout)
        self.assertIn("skipped", r.stdout)
        self.assertIn("Fraction 2 of 5", r.stdout)
        self.assertIn("within tolerance", r.stdout)
        self.assertIn("qualified", r.stdout)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual(len(hist), 2)
        h = hist[1]
        self.assertEqual((h["fraction"], h["field"], h["detector"]), (2, "REF", "D-1001"))
        self.assertFalse(h["temp_entered"])
        self.assertEqual(h["temp_c"], SKIN_DEFAULT_C)
        want = dose(20.5, 10, 100, temp=SKIN_DEFAULT_C)  # formula, record_fixture.py
        self.assertAlmostEqual(h["corrected_dose_cgy"], want, places=9)
        self.assertEqual(h["deviation_pct"], deviation(want, 200.0))

    def test_first_fraction_typed_values_and_retries(self):
        lines = [
            "9", "1",                      # fraction 9 is beyond the plan's 5: asked again
            "D-0000", "D-1001",            # REF: unknown detector asked again
            "abc", "-2", "20.2", "55", "21",  # reading and temperature asked again
            "", "21.0",                    # AP: detector [D-1001] (just used), reading
            "22",                          # AP temperature
            "", "",                        # LAT entrance: skip
            "", "",                        # LAT exit: skip
            "", "",                        # OBL: skip
            "y",
        ]
        r = self.interactive(lines)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("detector (blank skips the field):", r.stdout)
        self.assertIn("fraction number '9' is out of range: must be 1 to 5", r.stderr)
        self.assertIn("unknown detector 'D-0000'", r.stderr)
        self.assertIn("reading 'abc' for field 'REF' must be a number > 0 nC", r.stderr)
        self.assertIn("reading '-2' for field 'REF'", r.stderr)
        self.assertIn("temperature '55' is out of range: must be 10 to 45 degC", r.stderr)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([(h["field"], h["temp_c"], h["temp_entered"]) for h in hist],
                         [("REF", 21, True), ("AP", 22, True)])
        self.assertEqual(hist[0]["fraction"], 1)
        # AP: 10 x 20 cm at 22 degC (formula, record_fixture.py).
        self.assertAlmostEqual(hist[1]["corrected_dose_cgy"], dose(21.0, 13.333333333333334, 100, temp=22),
                               places=9)

    def test_json_output_with_prompts_on_stderr(self):
        lines = ["", "D-1001", "20.0", "20", "", "", "", "", "", "", "", "", ""]
        r = self.fx.run("--json", "record", "--patient", MRN, "--interactive", user="tina",
                        stdin="\n".join(lines) + "\n")
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(r.stdout)
        self.assertEqual(out["results"][0]["field"], "REF")
        self.assertIn("Fraction number [1]:", r.stderr)

    def test_end_of_input_writes_nothing(self):
        r = self.assertFailsUnchanged("record", "--patient", MRN, "--interactive", user="tina",
                                      stdin="\nD-1001\n20.0\n", expect_code=1,
                                      expect_in=None)
        self.assertIn("input ended before the readings were complete; nothing recorded", r.stderr)
        con = sqlite3.connect(self.fx.db)
        self.assertEqual(con.execute("SELECT count(*) FROM fractions").fetchone()[0], 0)
        con.close()

    def test_not_confirmed_writes_nothing(self):
        lines = ["", "D-1001", "20.0", "", "", "", "", "", "", "", "", "", "n"]
        before = self.fx.digest()
        r = self.interactive(lines)
        self.assertEqual(r.returncode, 1)
        self.assertIn("not confirmed; nothing recorded", r.stderr)
        self.assertEqual(self.fx.digest(), before)

    def test_everything_skipped_writes_nothing(self):
        before = self.fx.digest()
        r = self.interactive(["", "", "", "", "", ""])
        self.assertEqual(r.returncode, 1)
        self.assertIn("no readings entered", r.stderr)
        self.assertEqual(self.fx.digest(), before)

    def test_interactive_refuses_option_readings(self):
        self.assertFailsUnchanged("record", "--patient", MRN, "--interactive", "--field", "REF",
                                  "--detector", "D-1001", "--reading", "20", user="tina",
                                  expect_code=1, expect_in="give no --field readings")


if __name__ == "__main__":
    main()
