"""fxledger queue: listing sorted by severity then age with its filters,
showing an item (factors, trend, events), the signed events and their role
checks, dispositions, and rule hits opened while fractions are logged.
The department and its data are invented (review_scenario.py)."""
import json
import sqlite3

from fxlcli import main
from review_scenario import ReviewCase


class QueueTest(ReviewCase):
    def setUp(self):
        super().setUp()
        # Fraction 1 of P-1: AP +6 % (outside tolerance); PA, due at the first
        # fraction, not measured: its missing-measurement item opens now.
        self.f1 = self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 6.0))
        # Fraction 2 of P-1: AP +2 %, PA -10 % (outside action).
        self.f2 = self.record("P-1", "2026-11-03T08:00:00Z", ("AP", 2.0), ("PA", -10.0))
        self.tol_item = self.f1["results"][0]["review_item_id"]
        self.action_item = self.f2["results"][1]["review_item_id"]

    def items(self, *args, user="aud"):
        return self.queue("list", *args, user=user)

    # ---- listing ---------------------------------------------------------------

    def test_list_sorted_by_severity_then_age(self):
        items = self.items()
        rules = [(i["severity"], i["rule"], i["opened_at"]) for i in items]
        self.assertEqual([i["id"] for i in items][0], self.action_item)
        self.assertEqual(rules[0][:2], (4, "result"))
        # Both severity-2 items follow, opened by fraction 1: the result first
        # (written before the fields left unmeasured are named).
        self.assertEqual([r[0] for r in rules], sorted([r[0] for r in rules], reverse=True))
        sev2 = [i for i in items if i["severity"] == 2]
        self.assertEqual([i["rule"] for i in sev2], ["result", "missing_measurement"])
        self.assertEqual(sev2[0]["id"], self.tol_item)
        self.assertEqual(sev2[0]["opened_at"], sev2[1]["opened_at"])
        self.assertLess(sev2[0]["id"], sev2[1]["id"])
        self.assertEqual(sev2[1]["id"], self.f1["missing"][0]["review_item_id"])
        self.assertEqual(self.f1["missing"][0]["field"], "PA")
        missing = sev2[1]
        self.assertEqual(missing["rule_key"].split(":")[2:], ["fraction", "1"])
        self.assertEqual((missing["mrn"], missing["field"]), ("P-1", "PA"))
        self.assertIn("required measurement missing at fraction 1", missing["summary"])
        self.assertIn("found when fraction 1 was logged", missing["summary"])
        # Text listing: one block per item, most severe first.
        text = self.fx.ok("queue", "list", user="aud").stdout
        self.assertLess(text.index("#%d " % self.action_item), text.index("#%d " % self.tol_item))
        self.assertIn("critical", text)

    def test_list_filters(self):
        self.assertEqual([i["id"] for i in self.items("--severity", "4")], [self.action_item])
        self.assertEqual([i["id"] for i in self.items("--severity", "critical")], [self.action_item])
        self.assertEqual(len(self.items("--severity", "2")), 3)
        self.assertEqual(len(self.items("--patient", "P-1")), 3)
        self.assertEqual(self.items("--patient", "P-2"), [])
        self.assertEqual(len(self.items("--detector", "D-1")), 2)   # the two results
        self.assertEqual([i["id"] for i in self.items("--since", "2026-11-03")],
                         [self.action_item])
        self.assertEqual(self.items("--status", "closed"), [])
        self.assertEqual(len(self.items("--status", "all")), 3)
        r = self.fx.run("queue", "list", "--patient", "NOPE", user="aud")
        self.assertEqual(r.returncode, 2)
        self.assertIn("unknown patient 'NOPE'", r.stderr)
        r = self.fx.run("queue", "list", "--severity", "9", user="aud")
        self.assertEqual(r.returncode, 1)
        self.assertIn("must be 1 to 4", r.stderr)
        r = self.fx.run("queue", "list", "--status", "pending", user="aud")
        self.assertEqual(r.returncode, 1)
        r = self.fx.run("queue", "list", "--since", "last week", user="aud")
        self.assertEqual(r.returncode, 2)
        self.assertTrue(r.stderr.startswith("fxledger: error: date 'last week'"), r.stderr)

    # ---- show ------------------------------------------------------------------

    def test_show_measurement_trend_events(self):
        d = self.queue("show", str(self.tol_item))
        m = d["measurement"]
        self.assertEqual((m["field"], m["fraction"], m["detector"]), ("AP", 1, "D-1"))
        self.assertAlmostEqual(m["deviation_pct"], 6.0, places=2)
        self.assertAlmostEqual(m["corrected_dose_cgy"], 212.0, places=2)   # 21.2 nC x 10 cGy/nC
        self.assertEqual(m["factor_n_cgy_per_unit"], 10)
        for cf in ("cf_field_size", "cf_ssd", "cf_wedge", "cf_tray", "cf_angle", "cf_temp"):
            self.assertEqual(m[cf], 1, cf)
        self.assertEqual((m["tolerance_pct"], m["action_pct"]), (5, 8))
        self.assertEqual(m["verdict"], "outside_tolerance")
        self.assertEqual([(t["fraction"], round(t["deviation_pct"], 2), t["this_item"]) for t in d["trend"]],
                         [(1, 6.0, True), (2, 2.0, False)])
        self.assertEqual(d["events"][0]["kind"], "open")
        self.assertEqual(d["events"][0]["user"], "ther")
        text = self.fx.ok("queue", "show", str(self.tol_item), user="aud").stdout
        for words in ("Measurement #", "N = 10 cGy/nC", "CF temperature", "corrected dose   212.00 cGy",
                      "expected dose    200.00 cGy", "deviation        +6.00 %",
                      "tolerance 5.00 %, action 8.00 %", "History of field AP entrance",
                      "Events:", "open", "ther (Invented Therapist, therapist)", "qualified"):
            self.assertIn(words, text)
        # The trend lane: '*' for this item at +6 %, 'o' for fraction 2, action bars.
        lane1 = [l for l in text.splitlines() if l.strip().startswith("fx   1")][0]
        lane2 = [l for l in text.splitlines() if l.strip().startswith("fx   2")][0]
        self.assertIn("*", lane1)
        self.assertIn("o", lane2.split("%", 1)[1])
        self.assertEqual(lane1.count("|"), 2)
        self.assertGreater(lane1.index("*"), lane2.index("o"))   # +6 % to the right of +2 %

    def test_show_unknown_and_bad_id(self):
        self.assertFailsUnchanged("queue", "show", "999", user="aud", expect_code=2,
                                  expect_in="review item #999 does not exist")
        r = self.fx.run("queue", "show", "abc", user="aud")
        self.assertEqual(r.returncode, 1)

    # ---- events and roles ---------------------------------------------------------

    def test_therapist_cannot_close_or_reopen(self):
        self.assertFailsUnchanged("queue", "close", str(self.action_item), "--disposition", "set-up error",
                                  user="ther", expect_code=4,
                                  expect_in="closing a review item needs the role physicist or admin")
        self.fx.ok("queue", "close", str(self.tol_item), "--disposition", "other", user="phys")
        self.assertFailsUnchanged("queue", "reopen", str(self.tol_item), "--comment", "why not",
                                  user="ther", expect_code=4, expect_in="physicist or admin")

    def test_auditor_only_reads(self):
        self.assertFailsUnchanged("queue", "ack", str(self.action_item), user="aud", expect_code=4)
        self.assertFailsUnchanged("queue", "comment", str(self.action_item), "fine", user="aud",
                                  expect_code=4)
        self.assertFailsUnchanged("queue", "close", str(self.action_item), "--disposition", "other",
                                  user="aud", expect_code=4)
        self.assertTrue(self.items(user="aud"))

    def test_ack_comment_close_reopen_signed(self):
        fx = self.fx
        fx.now = "2026-11-03T09:10:00Z"
        out = fx.json("queue", "ack", str(self.action_item), "--comment", "SSD re-checked", user="ther")
        self.assertEqual((out["status"], out["user"]), ("acknowledged", "ther"))
        self.assertFailsUnchanged("queue", "ack", str(self.action_item), user="ther", expect_code=2,
                                  expect_in="only an open item can be acknowledged")
        fx.now = "2026-11-03T09:20:00Z"
        fx.ok("queue", "comment", str(self.action_item), "physician informed", user="ther")
        self.assertFailsUnchanged("queue", "close", str(self.action_item), "--disposition", "bad luck",
                                  user="phys", expect_code=2, expect_in="is not in the list: set-up error")
        r = fx.run("queue", "close", str(self.action_item), user="phys")
        self.assertEqual(r.returncode, 1)
        fx.now = "2026-11-03T10:00:00Z"
        out = fx.json("queue", "close", str(self.action_item), "--disposition", "Detector Placement",
                      "--comment", "diode half off the field edge", user="phys")
        self.assertEqual((out["status"], out["disposition"]), ("closed", "detector placement"))
        self.assertFailsUnchanged("queue", "close", str(self.action_item), "--disposition", "other",
                                  user="phys", expect_code=2, expect_in="already closed")
        self.assertEqual(fx.run("queue", "reopen", str(self.action_item), user="phys").returncode, 1)
        self.assertFailsUnchanged("queue", "reopen", str(self.tol_item), "--comment", "x", user="phys",
                                  expect_code=2, expect_in="only a closed item can be reopened")
        closed = self.items("--status", "closed")
        self.assertEqual([(i["id"], i["disposition"]) for i in closed],
                         [(self.action_item, "detector placement")])
        self.assertNotIn(self.action_item, [i["id"] for i in self.items()])
        fx.now = "2026-11-04T08:00:00Z"
        fx.ok("queue", "reopen", str(self.action_item), "--comment", "physician asks for a phantom check",
              user="admin")
        events = self.queue("show", str(self.action_item))["events"]
        self.assertEqual([(e["kind"], e["user"], e["at"]) for e in events],
                         [("open", "ther", "2026-11-03T08:00:00Z"),
                          ("acknowledge", "ther", "2026-11-03T09:10:00Z"),
                          ("comment", "ther", "2026-11-03T09:20:00Z"),
                          ("close", "phys", "2026-11-03T10:00:00Z"),
                          ("reopen", "admin", "2026-11-04T08:00:00Z")])
        self.assertEqual(events[3]["disposition"], "detector placement")
        self.assertEqual(events[1]["comment"], "SSD re-checked")
        # status is kept in step with the events in the same transaction
        con = sqlite3.connect(fx.db)
        self.assertEqual(con.execute("SELECT status FROM review_items WHERE id = ?",
                                     (self.action_item,)).fetchone()[0], "open")
        n_events = con.execute("SELECT count(*) FROM review_events WHERE item_id = ?",
                               (self.action_item,)).fetchone()[0]
        n_audit = con.execute("SELECT count(*) FROM audit_log WHERE entity = 'review_events' AND "
                              "json_extract(content, '$.item_id') = ?", (self.action_item,)).fetchone()[0]
        con.close()
        self.assertEqual((n_events, n_audit), (5, 4))   # the 'open' is audited with the item
        self.assertTrue(fx.json("verify")["ok"])

    def test_configured_dispositions(self):
        self.fx.ok("setting", "set", "dispositions", "entry error, machine output, other", user="phys")
        self.assertFailsUnchanged("queue", "close", str(self.tol_item), "--disposition", "set-up error",
                                  user="phys", expect_code=2,
                                  expect_in="is not in the list: entry error, machine output, other")
        out = self.fx.json("queue", "close", str(self.tol_item), "--disposition", "machine output",
                           user="phys")
        self.assertEqual(out["disposition"], "machine output")

    def test_help_describes_every_sub_command(self):
        out = self.fx.ok("queue", "--help").stdout
        for sub in ("list", "show", "ack", "comment", "close", "reopen"):
            self.assertIn(sub, out)
            self.assertIn("usage: fxledger queue " + sub, self.fx.ok("queue", sub, "--help").stdout)


class RuleHitsTest(ReviewCase):
    @staticmethod
    def standardised_cusum(x, k=0.5, h=5.5, startup=10):
        """C+ per result and the first signalling index of the drift chart of
        docs/rules.md, written out again: spread = mean moving range / 1.128
        (d2, SPC constant) with a 0.2 % floor, z limited to +/- h/2."""
        hi, lo, mr, out, first = 0.0, 0.0, 0.0, [], None
        for i, v in enumerate(x):
            if i:
                mr += abs(v - x[i - 1])
            if i < startup:
                out.append(0.0)
                continue
            z = max(-h / 2, min(h / 2, v / max(mr / i / 1.128, 0.2)))
            hi, lo = max(0.0, hi + z - k), max(0.0, lo - z - k)
            out.append(hi)
            if first is None and (hi > h or lo > h):
                first = i
        return out, first

    def test_detector_drift_item_across_patients(self):
        # Ten start-up results alternating +1/-1 % (the spread comes from their
        # moving ranges), then +3 % on every reading, alternating patients:
        # within tolerance each time, but a drift of the detector.
        devs = [1.0 if i % 2 == 0 else -1.0 for i in range(10)] + [3.0] * 20
        want, first = self.standardised_cusum(devs)
        self.assertIsNotNone(first)
        for i in range(first + 1):
            at = "2026-11-%02dT%02d:00:00Z" % (2 + i // 8, 8 + i % 8)
            res = self.record("P-1" if i % 2 == 0 else "P-2", at, ("AP", devs[i]))
            self.assertEqual(res["results"][0]["verdict"], "within_tolerance")
            drift = [x for x in self.queue("list", "--detector", "D-1") if x["rule"] == "detector_drift"]
            self.assertEqual(len(drift), 1 if i == first else 0, "after reading %d" % (i + 1))
        item = drift[0]
        self.assertEqual((item["detector"], item["mrn"], item["severity"]), ("D-1", None, 3))
        self.assertIn("upward", item["summary"])
        self.assertIn("entrance", item["summary"])
        d = self.queue("show", str(item["id"]))
        self.assertEqual(d["trend_kind"], "detector")
        self.assertEqual(d["cusum_h_sd"], 5.5)
        self.assertEqual([t["mrn"] for t in d["trend"]][:4], ["P-1", "P-2", "P-1", "P-2"])
        for got, exp in zip([t["cusum_high_sd"] for t in d["trend"]], want[:first + 1]):
            self.assertAlmostEqual(got, exp, delta=0.02)  # deviations are stored to 0.01 %
        text = self.fx.ok("queue", "show", str(item["id"]), user="aud").stdout
        self.assertIn("standardised CUSUM", text)
        # Listing filtered by patient does not show the detector's item.
        self.assertEqual([x for x in self.queue("list", "--patient", "P-1")
                          if x["rule"] == "detector_drift"], [])

    def test_weekly_measurement_missing(self):
        self.record("P-2", "2026-11-02T08:00:00Z", ("AP", 0.0), ("PA", 0.0))
        # 7 days: PA is due today (docs/rules.md) and is left out: named now,
        # at the end of this fraction, not at the next.
        f = self.record("P-2", "2026-11-09T08:00:00Z", ("AP", 0.0))
        items = self.queue("list")
        self.assertEqual([(i["rule"], i["rule_key"].split(":", 2)[2]) for i in items],
                         [("missing_measurement", "due:2026-11-09")])
        self.assertEqual([(m["field"], m["due_reason"], m["review_item_id"]) for m in f["missing"]],
                         [("PA", "weekly interval reached", items[0]["id"])])
        self.record("P-2", "2026-11-10T08:00:00Z", ("AP", 0.0))      # 8 days: the same item
        self.assertEqual(len(self.queue("list")), 1)
        self.record("P-2", "2026-11-11T08:00:00Z", ("AP", 0.0))      # still missing: no duplicate
        self.assertEqual(len(self.queue("list")), 1)


if __name__ == "__main__":
    main()
