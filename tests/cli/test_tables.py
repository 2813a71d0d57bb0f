"""fxledger table: load correction tables from our JSON format, list, show;
every kind of bad file is refused with a one-line error and nothing is
written (the whole file is one transaction). Factors are invented."""
import copy
import json
import os

from fxlcli import DATA, FxlTestCase, main

GOOD = os.path.join(DATA, "corrections", "diode_6x.json")


def good_doc():
    with open(GOOD, encoding="utf-8") as f:
        return json.load(f)


class TableTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        fx.ok("machine", "add", "LINAC-A")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon", "--energy", "6")
        fx.ok("detector", "add", "D-1001", "--label", "Red 1", "--kind", "photon_diode", "--temp-coeff", "0")

    def variant(self, change):
        doc = good_doc()
        change(doc)
        return self.fx.write("variant.json", json.dumps(doc, indent=1))

    def test_load_list_show(self):
        out = self.fx.json("table", "load", GOOD, user="phil")
        self.assertEqual(out["serial"], "D-1001")
        self.assertEqual([t["parameter"] for t in out["tables"]],
                         ["field_size", "ssd", "wedge", "tray", "angle"])
        tables = self.fx.json("table", "list", "D-1001")
        self.assertEqual(len(tables), 5)
        self.assertTrue(all(t["in_force"] for t in tables))
        fs = [t for t in tables if t["parameter"] == "field_size"][0]
        self.assertEqual((fs["x_min"], fs["x_max"], fs["n_points"]), (5, 30, 4))
        self.assertEqual(fs["x_unit"], "cm")
        self.assertEqual(fs["source"], "invented test data, not measured")
        shown = self.fx.json("table", "show", str(fs["id"]))
        self.assertEqual(shown["points"], [{"x": 5, "factor": 1.012}, {"x": 10, "factor": 1.0},
                                           {"x": 20, "factor": 0.991}, {"x": 30, "factor": 0.986}])
        text = self.fx.ok("table", "show", str(fs["id"])).stdout
        self.assertIn("1.0120", text)
        self.assertIn("not evaluable", text)
        self.assertIn("field_size", self.fx.ok("table", "list").stdout)
        self.assertEqual(len(self.fx.json("detector", "show", "D-1001")["correction_tables"]), 5)

    def test_new_version_supersedes(self):
        self.fx.ok("table", "load", GOOD)
        def newer(doc):
            doc["tables"] = doc["tables"][:1]
            doc["tables"][0]["effective_from"] = "2026-11-01"
            doc["tables"][0]["points"][0]["factor"] = 1.015
        self.fx.ok("table", "load", self.variant(newer))
        fs = [t for t in self.fx.json("table", "list") if t["parameter"] == "field_size"]
        self.assertEqual([t["in_force"] for t in fs], [False, True])

    def test_role_refusals(self):
        self.assertFailsUnchanged("table", "load", GOOD, user="tina", expect_code=4)
        self.assertFailsUnchanged("table", "load", GOOD, user="otto", expect_code=4)

    def test_bad_files_write_nothing(self):
        f = self.assertFailsUnchanged
        cases = [
            (lambda d: d["tables"][0]["points"].__setitem__(1, {"x": 5.0, "factor": 1.0}),
             "x must increase strictly"),
            (lambda d: d["tables"][0]["points"][0].__setitem__("factor", 2.0), "factor '2'"),
            (lambda d: d["tables"][0]["points"][0].__setitem__("factor", 0.5), "> 0.5 and < 2"),
            (lambda d: d["tables"][0].__setitem__("parameter", "collimator"), "parameter 'collimator'"),
            (lambda d: d["tables"][0].__setitem__("effective_from", "2026-02-30"),
             "effective_from '2026-02-30'"),
            (lambda d: d.__setitem__("detector", "D-9999"), "unknown detector 'D-9999'"),
            (lambda d: d["tables"][4].__setitem__("beam", "18X"), "no beam '18X'"),
            (lambda d: d["tables"][2].__setitem__("machine", "LINAC-Z"), "unknown machine 'LINAC-Z'"),
            (lambda d: d["tables"][3]["points"][1].__setitem__("x", 2), "tray x '2'"),
            (lambda d: d["tables"][1]["points"][0].__setitem__("x", 20), "ssd x '20' is out of range"),
            (lambda d: d["tables"][0].__setitem__("pionts", []), "unknown key 'pionts'"),
            (lambda d: d["tables"][0].pop("points"), "'points'"),
            (lambda d: d.__setitem__("tables", []), "1 to 100 tables"),
            (lambda d: d.__setitem__("format", "something-else"), "'format'"),
            (lambda d: d["tables"].append(copy.deepcopy(d["tables"][0])), "repeats tables[0]"),
            (lambda d: d["tables"][0]["points"][0].__setitem__("x", "5"), "'x' must be a number"),
        ]
        for change, message in cases:
            with self.subTest(message=message):
                f("table", "load", self.variant(change), expect_in=message)

    def test_later_table_bad_means_nothing_written(self):
        """The last table names an unknown beam: the four good ones before it
        are not written either."""
        path = self.variant(lambda d: d["tables"][4].__setitem__("beam", "18X"))
        self.assertFailsUnchanged("table", "load", path)
        self.assertEqual(self.fx.json("table", "list"), [])

    def test_duplicate_load_refused(self):
        self.fx.ok("table", "load", GOOD)
        self.assertFailsUnchanged("table", "load", GOOD, expect_code=2, expect_in="already has a")

    def test_malformed_and_truncated_json(self):
        with open(GOOD, encoding="utf-8") as fh:
            text = fh.read()
        truncated = self.fx.write("truncated.json", text[:len(text) // 2])
        r = self.assertFailsUnchanged("table", "load", truncated, expect_in="ends too early")
        self.assertEqual(len(r.stderr.strip().splitlines()), 1)
        broken = self.fx.write("broken.json", text.replace('"beam": "6X",', '"beam": "6X"', 1))
        r = self.assertFailsUnchanged("table", "load", broken, expect_in="malformed JSON at line 10, column 7")  # the key after the missing comma
        self.assertEqual(len(r.stderr.strip().splitlines()), 1)
        trailing = self.fx.write("trailing.json", text + "\n}")
        self.assertFailsUnchanged("table", "load", trailing, expect_in="after the document")
        empty = self.fx.write("empty.json", "")
        self.assertFailsUnchanged("table", "load", empty, expect_in="empty")
        self.assertFailsUnchanged("table", "load", self.fx.path("missing.json"), expect_in="cannot read")

    def test_show_unknown(self):
        self.assertFailsUnchanged("table", "show", "99", expect_in="unknown correction table 99")
        self.assertFailsUnchanged("table", "show", "abc", expect_in="not a whole number")
        self.assertFailsUnchanged("table", "list", "D-9999", expect_in="unknown detector")

    def test_help(self):
        for sub in ("load", "list", "show"):
            self.assertIn("usage: fxledger table " + sub, self.fx.ok("table", sub, "--help").stdout)


if __name__ == "__main__":
    main()
