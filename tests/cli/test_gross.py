"""Gross deviations are action-level results (docs/physics.md section 3.3):
a 60 degree wedge left out, a unit slip, and the confirmation of such a
reading by an amendment. Invented department of record_fixture.py."""
import json
import os
import sqlite3

from fxlcli import main
from record_fixture import MRN, RecordTestCase, deviation, dose

# The plan expects 200 cGy at REF. With a 60 degree wedge of wedge factor
# 0.625 (invented; published 60 degree wedge factors are about 0.42 to 0.62,
# from memory) left out, the detector sees 200 / 0.625 = 320 cGy, +60 %
# (physics): beyond the 50 % plausibility bound and the 8 % action level.
WEDGE_LEFT_OUT_NC = 32.0


class GrossDeviationTest(RecordTestCase):
    def alert_setup(self):
        dest = self.fx.path("alert.json")
        self.fx.ok("setting", "set", "alert_command", "cat > '%s'" % dest)
        return dest

    def result_items(self):
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT severity, status, measurement_id FROM review_items "
                           "WHERE rule = 'result' ORDER BY id").fetchall()
        con.close()
        return rows

    def test_wedge_left_out_is_outside_the_action_level(self):
        dest = self.alert_setup()
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading",
                        str(WEDGE_LEFT_OUT_NC), "--temp", "20")
        self.assertEqual(r.returncode, 12, r.stdout + r.stderr)
        want = dose(WEDGE_LEFT_OUT_NC, 10, 100, temp=20)  # 320 cGy, formula
        self.assertAlmostEqual(want, 320.0, places=9)
        self.assertIn("REF entrance: outside action level", r.stdout)
        self.assertIn("gross", r.stdout[:r.stdout.index("REF entrance:")])  # marked in the table
        # guidance names both the re-read and the hold (wrapped: read as one paragraph)
        text = r.stdout[r.stdout.index("What to do:"):]
        guidance = " ".join(text[:text.index("Review item")].split())
        self.assertIn("re-read the electrometer", guidance)
        self.assertIn("check the reading's unit", guidance)
        self.assertIn("do not continue this patient's treatment", guidance)
        self.assertIn("Call the physicist now", guidance)
        # critical item, alert hook run
        self.assertEqual(self.result_items()[0][:2], (4, "open"))
        with open(dest, encoding="utf-8") as f:
            sent = json.load(f)
        self.assertEqual(sent["event"], "outside_action_level")
        res = sent["results"][0]
        self.assertEqual(res["verdict"], "outside_action")
        self.assertTrue(res["gross"])
        self.assertEqual(res["deviation_pct"], deviation(want, 200.0))
        self.assertEqual(res["deviation_pct"], 60.0)
        self.fx.ok("verify")

    def test_confirmed_amendment_keeps_it_critical(self):
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading",
                               str(WEDGE_LEFT_OUT_NC), "--temp", "20", expect_code=12)
        first = out["results"][0]["measurement_id"]
        dest = self.alert_setup()
        r = self.fx.run("amend", str(first), "--reading", str(WEDGE_LEFT_OUT_NC), "--reason",
                        "re-read: the electrometer shows 32.0 nC", user="tina")
        self.assertEqual(r.returncode, 12, r.stdout + r.stderr)
        self.assertIn("outside action level", r.stdout)
        items = self.result_items()
        # the first item stays open, the confirmed reading opens its own critical item
        self.assertEqual([(s, st) for s, st, _ in items], [(4, "open"), (4, "open")])
        self.assertTrue(os.path.exists(dest))
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([h["verdict"] for h in hist], ["outside_action", "outside_action"])
        self.assertTrue(all(h["gross"] for h in hist))

    def test_unit_slip_named(self):
        # 200 nC instead of 20.0 nC: 2000 cGy against 200 cGy, a factor 10 (physics).
        out = self.record_json("--field", "REF", "--detector", "D-1001", "--reading", "200",
                               "--temp", "20", expect_code=12)
        res = out["results"][0]
        self.assertEqual(res["verdict"], "outside_action")
        self.assertTrue(res["gross"])
        self.assertIn("close to a factor 10", " ".join(res["reasons"]))
        self.assertIn("re-read the electrometer", res["guidance"])

    def test_unreadable_readings_refused_at_input(self):
        for bad in ("0", "-3.2", "nan", "inf", "-inf", "1e999", "abc", "20,0", ""):
            self.assertFailsUnchanged("record", "--patient", MRN, "--field", "REF", "--detector",
                                      "D-1001", "--reading", bad, user="tina")


if __name__ == "__main__":
    main()
