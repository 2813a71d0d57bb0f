"""fxledger levels set / list: versions, scope, ties, refusals. The levels
used are typical values (5 % entrance, wider for breast and exit; published surveys, from memory) but the rules tested are fxledger's own."""
import sqlite3

from fxlcli import FxlTestCase, main


class LevelsTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        self.fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
        self.fx.ok("user", "add", "phys", "--name", "Invented Physicist", "--role", "physicist")

    def set(self, *args, **kw):
        return self.fx.json("levels", "set", *args, user=kw.pop("user", "phys"), **kw)

    def test_set_and_list(self):
        out = self.set("default", "--tolerance", "5", "--action", "7", "--effective", "2026-01-01")
        self.assertEqual(out["version"], 1)
        self.assertEqual(out["effective_from"], "2026-01-01T00:00:00Z")
        self.assertEqual(out["specificity"], 0)
        self.assertEqual(out["floor_cgy"], 0)
        out = self.set("breast", "--tolerance", "7", "--action", "10", "--site", "Breast",
                       "--floor", "2", "--effective", "2026-01-01")
        self.assertEqual(out["scope"]["site"], "Breast")
        self.assertIsNone(out["scope"]["energy"])
        self.assertEqual(out["specificity"], 1)
        lst = self.fx.json("levels", "list")
        self.assertEqual([(s["name"], s["version"], s["tolerance_pct"], s["action_pct"]) for s in lst],
                         [("breast", 1, 7, 10), ("default", 1, 5, 7)])
        text = self.fx.ok("levels", "list").stdout
        self.assertIn("site 'Breast'", text)
        self.assertIn("any measurement", text)
        self.assertIn("5.0 %", text)
        self.assertIn("2.0 cGy", text)
        self.assertIn("local policy", text)
        # the therapist and the auditor may read
        self.assertEqual(len(self.fx.json("levels", "list", user="ther")), 2)

    def test_new_version_keeps_what_is_not_given(self):
        self.set("exit", "--tolerance", "8", "--action", "10", "--point", "exit", "--energy", "6",
                 "--effective", "2026-01-01")
        out = self.set("exit", "--tolerance", "7", "--effective", "2026-06-01")
        self.assertEqual(out["version"], 2)
        self.assertEqual(out["action_pct"], 10)
        self.assertEqual(out["scope"]["point"], "exit")
        self.assertEqual(out["scope"]["energy"], 6)
        out = self.set("exit", "--energy", "any", "--effective", "2026-07-01")
        self.assertEqual(out["version"], 3)
        self.assertIsNone(out["scope"]["energy"])
        self.assertEqual(out["tolerance_pct"], 7)
        every = self.fx.json("levels", "list", "--all-versions")
        self.assertEqual([s["version"] for s in every], [1, 2, 3])
        self.assertEqual(every[0]["tolerance_pct"], 8)   # version 1 untouched
        at = self.fx.json("levels", "list", "--at", "2026-03-01")
        self.assertEqual([(s["version"], s["tolerance_pct"]) for s in at], [(1, 8)])
        self.assertEqual(self.fx.json("levels", "list", "--at", "2025-12-31"), [])
        con = sqlite3.connect(self.fx.db)
        n = con.execute("SELECT count(*) FROM threshold_sets").fetchone()[0]
        audit = con.execute("SELECT count(*) FROM audit_log WHERE entity = 'threshold_sets'").fetchone()[0]
        con.close()
        self.assertEqual((n, audit), (3, 3))
        self.assertTrue(self.fx.json("verify")["ok"])

    def test_deactivate(self):
        self.set("default", "--tolerance", "5", "--action", "7", "--effective", "2026-01-01")
        self.set("breast", "--tolerance", "7", "--action", "10", "--site", "Breast", "--effective", "2026-01-01")
        out = self.set("breast", "--deactivate", "--effective", "2026-10-01")
        self.assertFalse(out["active"])
        self.assertEqual(out["version"], 2)
        self.assertEqual([s["name"] for s in self.fx.json("levels", "list")], ["default"])
        self.assertEqual([s["name"] for s in self.fx.json("levels", "list", "--at", "2026-09-30")],
                         ["breast", "default"])
        every = self.fx.json("levels", "list", "--all-versions")
        self.assertEqual([(s["name"], s["active"]) for s in every],
                         [("breast", True), ("breast", False), ("default", True)])
        self.assertFailsUnchanged("levels", "set", "nosuch", "--deactivate", user="phys",
                                  expect_code=2, expect_in="does not exist")

    def test_therapist_refused(self):
        self.assertFailsUnchanged("levels", "set", "default", "--tolerance", "5", "--action", "7",
                                  user="ther", expect_code=4, expect_in="permission denied")
        self.set("default", "--tolerance", "5", "--action", "7", user="admin")

    def test_action_below_tolerance_refused(self):
        self.assertFailsUnchanged("levels", "set", "x", "--tolerance", "5", "--action", "4",
                                  user="phys", expect_code=2, expect_in="must be >= the tolerance")
        self.set("x", "--tolerance", "5", "--action", "5")   # equal levels are allowed
        self.assertFailsUnchanged("levels", "set", "x", "--tolerance", "6", user="phys",
                                  expect_code=2, expect_in="must be >= the tolerance")

    def test_tie_identical_scope_refused(self):
        self.set("breast", "--tolerance", "7", "--action", "10", "--site", "Breast")
        r = self.assertFailsUnchanged("levels", "set", "breast-2", "--tolerance", "6", "--action", "9",
                                      "--site", "breast", user="phys", expect_code=2,
                                      expect_in="would tie with set 'breast'")
        self.assertIn("more specific", r.stderr)
        self.set("default", "--tolerance", "5", "--action", "7")
        self.assertFailsUnchanged("levels", "set", "default-2", "--tolerance", "5", "--action", "7",
                                  user="phys", expect_code=2, expect_in="set 'default'")

    def test_tie_across_columns_refused_and_resolved(self):
        self.set("breast", "--tolerance", "7", "--action", "10", "--site", "Breast")
        r = self.assertFailsUnchanged("levels", "set", "six", "--tolerance", "4", "--action", "6",
                                      "--energy", "6", user="phys", expect_code=2,
                                      expect_in="would tie with set 'breast'")
        self.assertIn("site 'Breast', energy 6", r.stderr)
        # narrowing one scope so they cannot both match is accepted
        self.set("six", "--tolerance", "4", "--action", "6", "--energy", "6", "--site", "Pelvis")
        # so is a set of another specificity ...
        self.set("breast-exit", "--tolerance", "8", "--action", "10", "--site", "Breast", "--point", "exit")
        # ... but not one as specific as 'six' that a Pelvis 6 MV exit reading could match
        self.assertFailsUnchanged("levels", "set", "six-exit", "--tolerance", "8", "--action", "10",
                                  "--energy", "6", "--point", "exit", user="phys", expect_code=2,
                                  expect_in="would tie with set")

    def test_bad_values_write_nothing(self):
        cases = [
            (("--tolerance", "5"), 2, "needs a tolerance and an action level"),
            (("--tolerance", "0", "--action", "7"), 2, "tolerance '0' is out of range"),
            (("--tolerance", "abc", "--action", "7"), 2, "not a number"),
            (("--tolerance", "5", "--action", "51"), 2, "action level '51' is out of range"),
            (("--tolerance", "5", "--action", "7", "--floor", "-1"), 2, "floor '-1' is out of range"),
            (("--tolerance", "5", "--action", "7", "--modality", "proton"), 2, "photon or electron"),
            (("--tolerance", "5", "--action", "7", "--point", "midline"), 2, "entrance or exit"),
            (("--tolerance", "5", "--action", "7", "--detector-kind", "chamber"), 2, "detector kind 'chamber'"),
            (("--tolerance", "5", "--action", "7", "--energy", "0"), 2, "energy '0' is out of range"),
            (("--tolerance", "5", "--action", "7", "--effective", "2026-13-01"), 2, "effective date"),
            (("--tolerance", "5", "--action", "7", "--colour", "red"), 1, "unknown option"),
        ]
        for args, code, words in cases:
            with self.subTest(args=args):
                self.assertFailsUnchanged("levels", "set", "x", *args, user="phys",
                                          expect_code=code, expect_in=words)
        self.assertFailsUnchanged("levels", "set", "--tolerance", "5", "--action", "7", user="phys",
                                  expect_code=1, expect_in="needs the set NAME")
        self.assertFailsUnchanged("levels", "list", "--at", "yesterday", expect_code=1, expect_in="--at")

    def test_warns_when_no_plan_has_the_site(self):
        r = self.fx.run("levels", "set", "breast", "--tolerance", "7", "--action", "10",
                        "--site", "Breats", user="phys")
        self.assertEqual(r.returncode, 0, r.stderr)   # saved anyway: plans may follow
        self.assertIn("warning: no plan has site 'Breats' yet", r.stderr)
        r = self.fx.run("levels", "set", "default", "--tolerance", "5", "--action", "7", user="phys")
        self.assertEqual(r.stderr, "")

    def test_help(self):
        for sub in ("set", "list"):
            self.assertIn("usage: fxledger levels " + sub, self.fx.ok("levels", sub, "--help").stdout)
        self.assertIn("set", self.fx.ok("levels", "--help").stdout)


if __name__ == "__main__":
    main()
