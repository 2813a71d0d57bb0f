"""fxledger amend: a mistyped reading is superseded by a new measurement that
names the old one and a reason; the old one stays visible in history, marked
superseded; its queue item follows (it shows the amendment and stays for the
physicist). Data are invented (review_scenario.py)."""
import json
import sqlite3

from fxlcli import main
from review_scenario import ReviewCase


class AmendTest(ReviewCase):
    def setUp(self):
        super().setUp()
        # PA typed as 18.0 nC instead of 19.9: -10 % (outside action).
        res = self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 0.0), ("PA", -10.0))
        self.old = res["results"][1]["measurement_id"]
        self.item = res["results"][1]["review_item_id"]
        self.assertTrue(self.item)

    def amend(self, *args, user="ther", expect=0):
        r = self.fx.run("amend", *args, user=user)
        self.assertEqual(r.returncode, expect, r.stdout + r.stderr)
        return r

    def test_amend_supersedes_and_item_follows(self):
        self.fx.now = "2026-11-02T08:30:00Z"
        r = self.amend(str(self.old), "--reading", "19.9", "--reason", "typed 18.0 for 19.9")
        self.assertIn("supersedes #%d" % self.old, r.stdout)
        self.assertIn("within tolerance", r.stdout)
        hist = self.fx.json("history", "--patient", "P-1", "--field", "PA", user="aud")
        self.assertEqual(len(hist), 2)                      # the old one is still there
        old, new = hist
        self.assertEqual(old["measurement_id"], self.old)
        self.assertEqual(old["superseded_by"], new["measurement_id"])
        self.assertEqual(old["verdict"], "outside_action")  # unchanged
        self.assertEqual((new["supersedes_id"], new["amend_reason"]), (self.old, "typed 18.0 for 19.9"))
        self.assertAlmostEqual(new["deviation_pct"], -0.5, places=2)
        self.assertEqual(new["fraction"], old["fraction"])
        # The item stays in the queue for a physicist, now showing the amendment.
        items = self.queue("list")
        it = [i for i in items if i["id"] == self.item][0]
        self.assertEqual((it["status"], it["superseded_by"]), ("open", new["measurement_id"]))
        self.assertIn("superseded by measurement #%d" % new["measurement_id"],
                      self.fx.ok("queue", "list", user="aud").stdout)
        d = self.queue("show", str(self.item))
        self.assertEqual(d["measurement"]["superseded_by"], new["measurement_id"])
        self.assertEqual(d["measurement"]["superseded_reason"], "typed 18.0 for 19.9")
        self.assertEqual(d["measurement"]["superseded_verdict"], "within_tolerance")
        self.assertEqual([t["superseded"] for t in d["trend"]], [True, False])
        # ... and carries a signed event naming the new measurement, written in
        # the amending transaction.
        ev = d["events"][-1]
        self.assertEqual((ev["kind"], ev["user"], ev["at"]), ("comment", "ther", "2026-11-02T08:30:00Z"))
        self.assertEqual(ev["comment"], "superseded by measurement #%d: typed 18.0 for 19.9; new result: "
                         "within tolerance, deviation -0.50 %%" % new["measurement_id"])
        self.assertEqual(d["status"], "open")
        text = self.fx.ok("queue", "show", str(self.item), user="aud").stdout
        self.assertIn("SUPERSEDED by    #%d: typed 18.0 for 19.9" % new["measurement_id"], text)
        self.assertIn("(superseded)", text)
        # A therapist's amendment cannot close the item; the physicist does.
        self.fx.ok("queue", "close", str(self.item), "--disposition", "other",
                   "--comment", "entry error, amended", user="phys")
        self.assertTrue(self.fx.json("verify")["ok"])

    def test_amend_to_a_flagged_result_opens_its_own_item(self):
        r = self.amend(str(self.old), "--reading", "21.3", "--reason", "read the wrong display",
                       expect=11)   # +6.5 %: outside tolerance, exit code as for record
        items = {i["measurement_id"]: i for i in self.queue("list") if i["rule"] == "result"}
        self.assertIn(self.old, items)
        new_ids = [m for m in items if m != self.old]
        self.assertEqual(len(new_ids), 1)
        self.assertEqual(items[new_ids[0]]["severity"], 2)
        self.assertEqual(items[self.old]["superseded_by"], new_ids[0])
        new_events = self.queue("show", str(items[new_ids[0]]["id"]))["events"]
        self.assertEqual([e["kind"] for e in new_events], ["open", "comment"])
        self.assertTrue(new_events[1]["comment"].startswith(
            "supersedes measurement #%d (one item): read the wrong display; its item #%d stays for review"
            % (self.old, self.item)), new_events[1]["comment"])
        old_events = self.queue("show", str(self.item))["events"]
        self.assertEqual([e["kind"] for e in old_events], ["open", "comment"])
        self.assertIn("new result: outside tolerance, deviation +6.50 %", old_events[1]["comment"])

    def test_amend_refusals_write_nothing(self):
        self.assertFailsUnchanged("amend", str(self.old), "--reading", "19.9", user="ther",
                                  expect_code=1, expect_in="--reason is required")
        self.assertFailsUnchanged("amend", str(self.old), "--reason", "x", user="ther",
                                  expect_code=1, expect_in="--reading is required")
        self.assertFailsUnchanged("amend", str(self.old), "--reading", "-2", "--reason", "x",
                                  user="ther", expect_code=2, expect_in="reading '-2'")
        self.assertFailsUnchanged("amend", "999", "--reading", "19.9", "--reason", "x", user="ther",
                                  expect_code=2)
        self.assertFailsUnchanged("amend", str(self.old), "--reading", "19.9", "--reason", "x",
                                  user="aud", expect_code=4)
        self.assertFailsUnchanged("amend", str(self.old), "--reading", "19.9", "--reason", "x",
                                  "--temp", "60", user="ther", expect_code=2, expect_in="10 to 45 degC")
        self.amend(str(self.old), "--reading", "19.9", "--reason", "typo")
        self.assertFailsUnchanged("amend", str(self.old), "--reading", "19.8", "--reason", "again",
                                  user="ther", expect_code=2, expect_in="already superseded")

    def test_amended_rows_are_never_edited(self):
        con = sqlite3.connect(self.fx.db)
        before = con.execute("SELECT * FROM measurements WHERE id = ?", (self.old,)).fetchone()
        con.close()
        self.amend(str(self.old), "--reading", "19.9", "--reason", "typo")
        con = sqlite3.connect(self.fx.db)
        after = con.execute("SELECT * FROM measurements WHERE id = ?", (self.old,)).fetchone()
        audit = con.execute("SELECT count(*) FROM audit_log WHERE content LIKE '%typo%'").fetchone()[0]
        con.close()
        self.assertEqual(before, after)
        self.assertGreaterEqual(audit, 1)

    def test_help(self):
        out = self.fx.ok("amend", "--help").stdout
        self.assertIn("usage: fxledger amend MEASUREMENT_ID", out)
        self.assertIn("--reason", out)


if __name__ == "__main__":
    main()
