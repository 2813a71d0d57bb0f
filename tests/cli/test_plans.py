"""fxledger plan import / list / show with fxledger's JSON plan format
(docs/format-plan.md). Plans, patients and machines are invented."""
import copy
import json
import os
import sqlite3

from fxlcli import DATA, FxlTestCase, main

PLANS = os.path.join(DATA, "plans")


def load(name):
    with open(os.path.join(PLANS, name), encoding="utf-8") as f:
        return json.load(f)


class PlanTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
        fx.ok("user", "add", "phys", "--name", "Invented Physicist", "--role", "physicist")
        fx.ok("machine", "add", "LINAC1")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon",
              "--energy", "6", "--dmax", "1.5")
        fx.ok("machine", "beam", "9E", "--machine", "LINAC1", "--modality", "electron",
              "--energy", "9", "--dmax", "2")
        fx.ok("patient", "add", "TEST-0001", "--family", "Testperson", "--given", "Invented")
        self.plan = load("breast_tangents.json")

    def write_plan(self, plan, name="plan.json"):
        return self.fx.write(name, json.dumps(plan, indent=2))

    def bad(self, mutate, expect_in, code=2):
        """Imports a mutated copy of the breast plan and expects a refusal
        that leaves the database unchanged."""
        plan = copy.deepcopy(self.plan)
        mutate(plan)
        return self.assertFailsUnchanged("plan", "import", self.write_plan(plan), user="phys",
                                         expect_code=code, expect_in=expect_in)

    # ---- good paths ----------------------------------------------------------

    def test_import_show_list(self):
        out = self.fx.json("plan", "import", os.path.join(PLANS, "breast_tangents.json"), user="phys")
        self.assertEqual(out["label"], "BR-L-1")
        self.assertEqual(out["field_rows"], 3)   # MED entrance, LAT entrance, LAT exit
        show = self.fx.json("plan", "show", "TEST-0001", "BR-L-1")
        self.assertEqual(show["site"], "Breast")
        self.assertEqual(show["technique"], "3D tangents")
        self.assertEqual(show["fractions"], 25)
        self.assertEqual(show["dose_per_fraction_cgy"], 200)
        self.assertIsNone(show["replaces"])
        lat_exit = [f for f in show["fields"] if f["name"] == "LAT" and f["point"] == "exit"][0]
        self.assertEqual(lat_exit["thickness_cm"], 18.5)
        self.assertEqual(lat_exit["expected_dose_cgy"], 61.3)
        self.assertEqual(lat_exit["expected_source"], "manual")
        self.assertEqual(lat_exit["policy"], "weekly")
        self.assertEqual(lat_exit["modality"], "photon")
        self.assertEqual(lat_exit["energy"], 6)
        med = show["fields"][0]
        for key, want in (("setup", "isocentric"), ("mu", 118), ("ssd_cm", 91.5), ("x_cm", 8.5),
                          ("y_cm", 20), ("wedge_deg", 15), ("tray", False), ("gantry_deg", 300),
                          ("incidence_deg", 0), ("expected_dose_cgy", 112.4), ("policy", "first")):
            self.assertEqual(med[key], want, key)
        self.assertIsNone(med["thickness_cm"])
        text = self.fx.ok("plan", "show", "TEST-0001", "BR-L-1").stdout
        for unit in ("118.0 MU", "SSD 91.5 cm", "8.5 x 20.0 cm", "15 degrees", "18.5 cm",
                     "61.3 cGy", "6 MV"):
            self.assertIn(unit, text)
        lst = self.fx.json("plan", "list")
        self.assertEqual([p["label"] for p in lst], ["BR-L-1"])
        self.assertEqual(self.fx.json("plan", "list", "TEST-0001")[0]["field_rows"], 3)
        pshow = self.fx.json("patient", "show", "TEST-0001")
        self.assertEqual(pshow["plan_count"], 1)
        self.assertEqual(len(pshow["plans"][0]["fields"]), 3)
        self.assertTrue(self.fx.json("verify")["ok"])
        # a level set scoped by this plan's site (any letter case) draws no warning
        r = self.fx.ok("levels", "set", "breast", "--tolerance", "7", "--action", "10",
                       "--site", "BREAST", "--technique", "3d tangents", user="phys")
        self.assertEqual(r.stderr, "")

    def test_import_writes_one_transaction_with_audit_rows(self):
        self.fx.ok("plan", "import", os.path.join(PLANS, "breast_tangents.json"), user="phys")
        con = sqlite3.connect(self.fx.db)
        audit = con.execute("SELECT action, entity FROM audit_log WHERE entity IN ('plans', 'fields') "
                            "ORDER BY id").fetchall()
        fields = con.execute("SELECT count(*) FROM fields").fetchone()[0]
        con.close()
        self.assertEqual(audit, [("import", "plans")] + [("create", "fields")] * 3)
        self.assertEqual(fields, 3)

    def test_replacement_plan(self):
        self.fx.ok("plan", "import", os.path.join(PLANS, "breast_tangents.json"), user="phys")
        plan = copy.deepcopy(self.plan)
        plan["label"] = "BR-L-2"
        plan["fields"][0]["mu"] = 122
        out = self.fx.json("plan", "import", self.write_plan(plan), "--replaces", "BR-L-1", user="phys")
        self.assertEqual(out["replaces"], "BR-L-1")
        old = self.fx.json("plan", "show", "TEST-0001", "BR-L-1")
        self.assertEqual(old["replaced_by"], "BR-L-2")
        self.assertEqual(old["fields"][0]["mu"], 118)   # the old plan is unchanged
        self.assertIn("replaced by BR-L-2", self.fx.ok("plan", "list", "TEST-0001").stdout)
        # "replaces" may also be written in the file; a plan is replaced only once
        plan["label"] = "BR-L-3"
        plan["replaces"] = "BR-L-1"
        self.assertFailsUnchanged("plan", "import", self.write_plan(plan, "p3.json"), user="phys",
                                  expect_code=2, expect_in="already replaced by plan 'BR-L-2'")
        plan["replaces"] = "BR-L-2"
        self.fx.ok("plan", "import", self.write_plan(plan, "p3.json"), user="phys")
        self.assertEqual(self.fx.json("plan", "show", "TEST-0001", "BR-L-3")["replaces"], "BR-L-2")

    def test_replacement_refusals(self):
        self.fx.ok("plan", "import", os.path.join(PLANS, "breast_tangents.json"), user="phys")
        plan = copy.deepcopy(self.plan)
        plan["label"] = "BR-L-2"
        path = self.write_plan(plan)
        self.assertFailsUnchanged("plan", "import", path, "--replaces", "NOPE", user="phys",
                                  expect_code=2, expect_in="'NOPE' to be replaced does not exist")
        plan["replaces"] = "BR-L-1"
        path = self.write_plan(plan)
        self.assertFailsUnchanged("plan", "import", path, "--replaces", "OTHER", user="phys",
                                  expect_code=2, expect_in="contradicts")
        # the same label twice
        self.assertFailsUnchanged("plan", "import", os.path.join(PLANS, "breast_tangents.json"),
                                  user="phys", expect_code=2, expect_in="already exists")

    def test_admin_may_import_therapist_may_not(self):
        path = os.path.join(PLANS, "breast_tangents.json")
        self.assertFailsUnchanged("plan", "import", path, user="ther", expect_code=4,
                                  expect_in="permission denied")
        self.fx.ok("plan", "import", path, user="admin")

    # ---- bad files: one-line error, nothing written ----------------------------------

    def test_malformed_json_names_position(self):
        text = json.dumps(self.plan, indent=2).replace('"tray": false,', '"tray": false', 1)
        r = self.assertFailsUnchanged("plan", "import", self.fx.write("bad.json", text), user="phys",
                                      expect_code=2, expect_in="not valid JSON")
        line = text.split("\n").index('      "tray": false') + 2   # the error is on the next key
        self.assertIn("line %d," % line, r.stderr)

    def test_truncated_json(self):
        text = json.dumps(self.plan, indent=2)
        r = self.assertFailsUnchanged("plan", "import", self.fx.write("cut.json", text[:len(text) // 2]),
                                      user="phys", expect_code=2, expect_in="ends too early")
        self.assertIn("truncated", r.stderr)
        self.assertFailsUnchanged("plan", "import", self.fx.write("empty.json", ""), user="phys",
                                  expect_code=2, expect_in="not valid JSON")

    def test_missing_file(self):
        self.assertFailsUnchanged("plan", "import", self.fx.path("nope.json"), user="phys",
                                  expect_code=2, expect_in="cannot read plan file")

    def test_not_a_plan_file(self):
        self.assertFailsUnchanged("plan", "import", self.fx.write("arr.json", "[1, 2]"), user="phys",
                                  expect_code=2, expect_in="one JSON object")
        self.bad(lambda p: p.pop("format"), "format must be \"fxledger-plan/1\"")
        self.bad(lambda p: p.update(format="fxledger-plan/9"), "another format or version")

    def test_unknown_patient_machine_beam(self):
        self.bad(lambda p: p.update(patient_mrn="NOBODY"), "unknown patient 'NOBODY'")
        self.bad(lambda p: p["fields"][1].update(machine="LINAC9"),
                 "plan field 'LAT' machine 'LINAC9' is not known")
        self.bad(lambda p: p["fields"][0].update(beam="18X"),
                 "plan field 'MED' beam '18X' is not a beam of machine 'LINAC1'")

    def test_negative_mu(self):
        r = self.bad(lambda p: p["fields"][0].update(mu=-5), "plan field 'MED' mu '-5' must be > 0 and <= 10000 MU")
        self.assertIn("fields[0].mu", r.stderr)
        self.assertEqual(r.stderr.count("\n"), 1)   # one line

    def test_exit_point_without_thickness(self):
        r = self.bad(lambda p: p["fields"][1]["points"][1].pop("thickness_cm"),
                     "thickness_cm is required for an exit point")
        self.assertIn("fields[1].points[1].thickness_cm", r.stderr)

    def test_exit_point_physics_against_beam(self):
        # exit thinner than d_max 1.5 cm of the 6X beam
        self.bad(lambda p: p["fields"][1]["points"][1].update(thickness_cm=1.0), "d_max 1.5 cm")

        def electron_exit(p):
            p["fields"][1]["beam"] = "9E"
        self.bad(electron_exit, "exit point on electron beam '9E'")

    def test_each_range_is_checked(self):
        # (path, value, words of the message); ranges from docs/format-plan.md
        cases = [
            (("fields", 0, "ssd_cm"), 45, "ssd_cm '45' must be >= 50 and <= 200 cm"),
            (("fields", 0, "x_cm"), 0, "x_cm '0' must be > 0 and <= 50 cm"),
            (("fields", 0, "y_cm"), 51, "y_cm '51' must be > 0 and <= 50 cm"),
            (("fields", 0, "wedge_deg"), 75, "wedge_deg '75' must be >= 0 and <= 60 degrees"),
            (("fields", 0, "gantry_deg"), 360, "gantry_deg '360' must be >= 0 and < 360 degrees"),
            (("fields", 0, "incidence_deg"), -1, "incidence_deg '-1' must be >= 0 and <= 90 degrees"),
            (("fields", 0, "mu"), 10001, "mu '10001' must be > 0 and <= 10000 MU"),
            (("fields", 0, "mu"), "118", "mu must be a number > 0 and <= 10000 MU"),
            (("fields", 0, "tray"), 0, "tray must be true or false"),
            (("fields", 0, "setup"), "SSD", "setup 'SSD' must be one of ssd or isocentric"),
            (("fields", 0, "policy"), "daily", "policy 'daily' must be one of first, weekly, every or none"),
            (("fields", 0, "points", 0, "expected_dose_cgy"), 0,
             "expected_dose_cgy '0' must be > 0 and <= 3000 cGy"),
            (("fields", 0, "points", 0, "expected_source"), "model",
             "expected_source 'model' must be one of tps or manual"),
            (("fields", 0, "points", 0, "point"), "midline", "point 'midline' must be one of entrance or exit"),
            (("fractions",), 0, "fractions '0' must be >= 1 and <= 100"),
            (("fractions",), 2.5, "fractions '2.5' must be a whole number"),
            (("dose_per_fraction_cgy",), -200, "dose_per_fraction_cgy '-200' must be > 0"),
            (("label",), "", "label '' must be 1 to 64 characters"),
            (("site",), "x" * 65, "must be 1 to 64 characters"),
        ]
        for path, value, words in cases:
            def mutate(p, path=path, value=value):
                target = p
                for key in path[:-1]:
                    target = target[key]
                target[path[-1]] = value
            with self.subTest(path=path, value=value):
                self.bad(mutate, words)

    def test_structure_errors(self):
        self.bad(lambda p: p["fields"][0].update(wegde_deg=15), "unknown key 'wegde_deg'")
        self.bad(lambda p: p["fields"][0].pop("wedge_deg"), "wedge_deg is required")
        self.bad(lambda p: p["fields"][0].pop("incidence_deg"), "incidence_deg is required")
        self.bad(lambda p: p.update(fields=[]), "fields is not valid")
        self.bad(lambda p: p["fields"][0].update(points=[]), "points must be a list of 1 or 2")

        def twice_entrance(p):
            p["fields"][0]["points"].append(dict(p["fields"][0]["points"][0]))
        self.bad(twice_entrance, "lists the entrance point twice")

        def same_name(p):
            p["fields"][1]["name"] = "MED"
        self.bad(same_name, "name is used twice")
        text = json.dumps(self.plan).replace('"label": "BR-L-1"', '"label": "BR-L-1", "label": "X"')
        self.assertFailsUnchanged("plan", "import", self.fx.write("dup.json", text), user="phys",
                                  expect_code=2, expect_in="has the key 'label' twice")

    def test_byte_order_mark_accepted(self):
        path = self.fx.path("bom.json")
        with open(path, "wb") as f:
            f.write(b"\xef\xbb\xbf" + json.dumps(self.plan).encode("utf-8"))
        self.assertEqual(self.fx.json("plan", "import", path, user="phys")["label"], "BR-L-1")

    def test_lists_and_help(self):
        self.assertEqual(self.fx.json("plan", "list"), [])
        self.assertFailsUnchanged("plan", "list", "NOBODY", expect_code=2, expect_in="unknown patient")
        self.assertFailsUnchanged("plan", "show", "TEST-0001", "NOPE", expect_code=2,
                                  expect_in="has no plan 'NOPE'")
        self.assertFailsUnchanged("plan", "show", "TEST-0001", expect_code=1)
        self.assertFailsUnchanged("plan", "import", expect_code=1, user="phys")
        for sub in ("import", "list", "show"):
            self.assertIn("usage: fxledger plan " + sub, self.fx.ok("plan", sub, "--help").stdout)

    def test_second_example_file(self):
        self.fx.ok("patient", "add", "TEST-0002", "--family", "Testperson")
        out = self.fx.json("plan", "import", os.path.join(PLANS, "pelvis_box.json"), user="phys")
        self.assertEqual(out["field_rows"], 2)
        self.assertEqual(out["fields"][1]["tray"], True)
        self.assertEqual(out["fields"][0]["policy"], "first")   # the default when not given
        self.assertEqual(out["fields"][0]["gantry_deg"], 0)


if __name__ == "__main__":
    main()
