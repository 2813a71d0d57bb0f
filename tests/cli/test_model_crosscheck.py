"""The independent expected-dose model wired into the store and the commands:
beam data loaded onto a machine's beam (versioned, audited, refused whole
when wrong), the model's value stored with each field at plan import, the
cross-check of a planning-system value that opens a review item before any
patient is measured, and "not checked" (never agreement) when the model has
no value. Check values: the AAPM TG-71 formalism computed in model_fixture.py
(source named there) and by hand below. Test data is invented."""
import copy
import json
import os
import sqlite3

import model_fixture as mf
from fxlcli import SRC, Fxl, FxlTestCase, invented_password, main

MRN = "TEST-0201"


def field(name, ssd, x, y, points, wedge=0, tray=False, mu=200, beam="6X", setup="ssd"):
    return {"name": name, "machine": "LINAC1", "beam": beam, "setup": setup, "mu": mu, "ssd_cm": ssd,
            "x_cm": x, "y_cm": y, "wedge_deg": wedge, "tray": tray, "gantry_deg": 0,
            "incidence_deg": 0, "points": points}


def tps(dose):
    return {"point": "entrance", "expected_dose_cgy": dose, "expected_source": "tps"}


def plan(label, fields, mrn=MRN):
    return {"format": "fxledger-plan/1", "comment": "Invented test data; not a real plan.",
            "patient_mrn": mrn, "label": label, "site": "Pelvis", "technique": "3D",
            "fractions": 5, "fields": fields}


class ModelTestCase(FxlTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        fx.ok("machine", "add", "LINAC1")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon", "--energy", "6",
              "--dmax", "1.5")
        fx.ok("machine", "beam", "10X", "--machine", "LINAC1", "--modality", "photon", "--energy", "10",
              "--dmax", "2.4")
        fx.ok("machine", "beam", "9E", "--machine", "LINAC1", "--modality", "electron", "--energy", "9")
        fx.ok("patient", "add", MRN, "--family", "Example", "--given", "Invented")
        self.bd = mf.load()

    def load_beam_data(self, path=mf.BEAM_DATA, effective="2026-10-01", user="phil"):
        return self.fx.ok("machine", "beamdata", path, "--effective", effective, user=user)

    def import_plan(self, doc, user="phil"):
        return self.fx.ok("plan", "import", self.fx.write("plan-%s.json" % doc["label"], json.dumps(doc)),
                          user=user)

    def show(self, label):
        return {(f["name"], f["point"]): f for f in self.fx.json("plan", "show", MRN, label)["fields"]}

    def items(self):
        return [i for i in self.fx.json("queue", "list", "--status", "all") if i["rule"] == "model_crosscheck"]

    def write_beam_data(self, name, **changes):
        doc = copy.deepcopy(self.bd)
        doc.update(changes)
        return self.fx.write(name, json.dumps(doc))


class CrossCheckTest(ModelTestCase):
    def setUp(self):
        super().setUp()
        self.load_beam_data()

    def test_hand_check_value(self):
        # 10 x 10 cm open field at SSD 98.5 cm: r_c = 10 cm (S_c 1.000), r_d =
        # 10 x (98.5 + 1.5)/100 = 10 cm (S_p 1.000), inverse square
        # (101.5/100)^2 = 1.030225; 200 MU x 1.000 cGy/MU x 1.030225 =
        # 206.045 cGy (TG-71 formalism, arithmetic by hand).
        self.import_plan(plan("HAND", [field("REF", 98.5, 10, 10, [tps(206.0)])]))
        f = self.show("HAND")[("REF", "entrance")]
        self.assertAlmostEqual(f["model_dose_cgy"], 206.045, places=3)
        self.assertAlmostEqual(f["model"]["inverse_square"], 1.030225, places=6)
        self.assertEqual(f["crosscheck"]["outcome"], "agrees")

    def test_planning_value_10_percent_off_opens_an_item(self):
        off, off_f = mf.expected(self.bd, 200, 90, 15, 15)                 # TG-71, model_fixture.py
        ok, ok_f = mf.expected(self.bd, 150, 95, 10, 20, wedge=30, tray=True)
        self.assertAlmostEqual(off_f["inverse_square"], 1.230523, places=6)  # arithmetic of the published formula
        tps_off = round(off * 1.10, 1)
        tps_ok = round(ok * 1.02, 1)
        r = self.import_plan(plan("XC-1", [field("OFF", 90, 15, 15, [tps(tps_off)]),
                                           field("OK", 95, 10, 20, [tps(tps_ok)], wedge=30, tray=True, mu=150)]))
        self.assertIn("DISAGREES", r.stdout)
        self.assertIn("1 agree, 1 disagree, 0 not checked", r.stdout)
        self.assertIn("review item #", r.stdout)

        fields = self.show("XC-1")
        f = fields[("OFF", "entrance")]
        self.assertAlmostEqual(f["model_dose_cgy"], off, places=6)
        for key in ("sc", "sp", "inverse_square", "rc_cm", "rd_cm"):
            self.assertAlmostEqual(f["model"][key], off_f[key], places=9, msg=key)
        self.assertEqual(f["crosscheck"]["outcome"], "disagrees")
        self.assertAlmostEqual(f["crosscheck"]["deviation_pct"], mf.crosscheck_deviation(tps_off, off), places=6)
        self.assertEqual(f["crosscheck"]["level_pct"], 5)                   # the documented default
        self.assertEqual(f["expected_dose_cgy"], tps_off)                    # the TPS value stays the expected dose
        self.assertEqual(f["expected_source"], "tps")
        g = fields[("OK", "entrance")]
        self.assertAlmostEqual(g["model_dose_cgy"], ok, places=6)
        self.assertAlmostEqual(g["model"]["wedge_factor"], 0.815)
        self.assertAlmostEqual(g["model"]["tray_factor"], 0.970)
        self.assertEqual(g["crosscheck"]["outcome"], "agrees")
        self.assertIsNone(g["crosscheck"]["review_item_id"])

        items = self.items()
        self.assertEqual(len(items), 1)
        it = items[0]
        self.assertEqual((it["severity"], it["status"], it["mrn"], it["field"], it["point"]),
                         (3, "open", MRN, "OFF", "entrance"))
        self.assertIsNone(it["measurement_id"])
        self.assertEqual(it["id"], f["crosscheck"]["review_item_id"])
        self.assertIn("%.1f cGy" % tps_off, it["summary"])
        self.fx.ok("verify")

    def test_exit_point_checked_with_the_tmr_table(self):
        ex, ex_f = mf.expected(self.bd, 200, 90, 10, 10, point="exit", thickness=20)
        en, _ = mf.expected(self.bd, 200, 90, 10, 10)
        self.import_plan(plan("EXIT", [field("LAT", 90, 10, 10, [
            tps(round(en, 1)),
            {"point": "exit", "expected_dose_cgy": round(ex * 0.90, 1), "expected_source": "tps",
             "thickness_cm": 20}])]))
        f = self.show("EXIT")[("LAT", "exit")]
        self.assertAlmostEqual(f["model"]["tmr"], ex_f["tmr"], places=9)    # bilinear in the TMR table
        self.assertAlmostEqual(f["model_dose_cgy"], ex, places=6)
        self.assertEqual(f["crosscheck"]["outcome"], "disagrees")
        self.assertEqual(self.show("EXIT")[("LAT", "entrance")]["crosscheck"]["outcome"], "agrees")
        self.assertEqual(len(self.items()), 1)

    def test_level_setting(self):
        self.fx.ok("setting", "set", "model_crosscheck_pct", "12", user="phil")
        off, _ = mf.expected(self.bd, 200, 90, 15, 15)
        r = self.import_plan(plan("XC-2", [field("OFF", 90, 15, 15, [tps(round(off * 1.10, 1))])]))
        self.assertIn("level 12.00 %", r.stdout)
        self.assertEqual(self.show("XC-2")[("OFF", "entrance")]["crosscheck"]["outcome"], "agrees")
        self.assertEqual(self.items(), [])
        for bad in ("0", "50.5", "-5", "five"):
            self.assertFailsUnchanged("setting", "set", "model_crosscheck_pct", bad, user="phil",
                                      expect_in="model_crosscheck_pct")
        listed = {s["key"]: s for s in self.fx.json("setting", "list")}
        self.assertEqual(float(listed["model_crosscheck_pct"]["value"]), 12)

    def test_not_checked_is_never_agreement(self):
        r = self.import_plan(plan("NC", [
            field("E1", 100, 10, 10, [tps(300.0)], beam="9E"),                       # electrons
            field("HI", 100, 10, 10, [tps(180.0)], beam="10X"),                      # no beam data
            field("BIG", 100, 40, 40, [tps(230.0)])]))                               # r_d 40.6 cm > 40 cm
        self.assertIn("0 agree, 0 disagree, 3 not checked", r.stdout)
        for line in r.stdout.splitlines():
            if line.startswith("  E1") or line.startswith("  HI") or line.startswith("  BIG"):
                self.assertNotIn("agree", line.replace("not cross-checked", ""))
        fields = self.show("NC")
        self.assertIn("photon beams only", fields[("E1", "entrance")]["crosscheck"]["summary"])
        self.assertIn("no beam data", fields[("HI", "entrance")]["crosscheck"]["summary"])
        self.assertIn("outside", fields[("BIG", "entrance")]["crosscheck"]["summary"])
        self.assertIsNone(fields[("BIG", "entrance")]["model_dose_cgy"])
        self.assertIsNotNone(fields[("BIG", "entrance")]["model"]["sc"])   # computed as far as it went
        for f in fields.values():
            self.assertNotEqual(f["crosscheck"]["outcome"], "agrees")
        self.assertEqual(self.items(), [])
        text = self.fx.ok("plan", "show", MRN, "NC").stdout
        self.assertIn("not checked", text)
        self.assertNotIn("agrees", text)

    def test_hand_entered_expected_dose_cross_checked(self):
        # A hand calculation is checked against the model exactly as a
        # planning-system value: 15 % off opens a review item at import.
        model, _ = mf.expected(self.bd, 200, 100, 10, 10)
        hand = {"point": "entrance", "expected_dose_cgy": round(model * 1.15, 1),
                "expected_source": "manual"}
        near = {"point": "entrance", "expected_dose_cgy": round(model * 1.01, 1),
                "expected_source": "manual"}
        self.import_plan(plan("HAND", [field("H1", 100, 10, 10, [hand]),
                                       field("H2", 100, 10, 10, [near])]))
        fields = self.show("HAND")
        xc = fields[("H1", "entrance")]["crosscheck"]
        self.assertEqual(xc["outcome"], "disagrees")
        self.assertIn("hand-entered expected dose", xc["summary"])
        # (D_hand - D_model) / D_model x 100, rounded to 0.01 % (formula)
        self.assertAlmostEqual(xc["deviation_pct"],
                               round((round(model * 1.15, 1) - model) / model * 100, 2), places=9)
        self.assertEqual(fields[("H2", "entrance")]["crosscheck"]["outcome"], "agrees")
        items = self.items()
        self.assertEqual(len(items), 1)
        self.assertIn("H1", items[0]["summary"])

    def test_show_names_every_factor(self):
        self.import_plan(plan("SHOW", [field("W", 95, 10, 20, [tps(150.0)], wedge=30, mu=150)]))
        text = self.fx.ok("plan", "show", MRN, "SHOW").stdout
        for words in ("model ", "beam data #1", "S_c", "S_p", "WF 0.8150", "ISF", "cross-check"):
            self.assertIn(words, text)


class BeamDataTest(ModelTestCase):
    def test_load_list_show_and_audit(self):
        r = self.load_beam_data()
        self.assertIn("loaded beam data #1 for beam '6X' of machine 'LINAC1'", r.stdout)
        machines = self.fx.json("machine", "list")
        beams = {b["name"]: b for b in machines[0]["beams"]}
        self.assertEqual(beams["6X"]["beam_data"]["id"], 1)
        self.assertEqual(beams["6X"]["beam_data"]["effective_from"], "2026-10-01T00:00:00Z")
        self.assertIsNone(beams["10X"]["beam_data"])
        self.assertIsNone(beams["9E"]["beam_data"])
        self.assertIn("beam data #1 in force since 2026-10-01", self.fx.ok("machine", "list").stdout)
        with open(mf.BEAM_DATA, "rb") as f:
            import hashlib
            self.assertEqual(beams["6X"]["beam_data"]["sha256"], hashlib.sha256(f.read()).hexdigest())
        audit = sqlite3.connect(self.fx.db).execute(
            "SELECT action, content FROM audit_log WHERE entity = 'beam_data'").fetchall()
        self.assertEqual(len(audit), 1)
        self.assertEqual(audit[0][0], "load")
        self.assertIn("linac1_6x.json", audit[0][1])
        self.fx.ok("verify")

    def test_versions_by_effective_date(self):
        self.load_beam_data()
        v2 = self.write_beam_data("v2.json", tray_factor=0.960)
        v3 = self.write_beam_data("v3.json", tray_factor=0.950)
        self.load_beam_data(v2, effective="2026-11-01")
        self.load_beam_data(v3, effective="2026-12-01")                  # after "now" (2026-11-02)
        shown = self.fx.json("machine", "show", "LINAC1")
        versions = {b["name"]: b for b in shown["beams"]}["6X"]["beam_data"]
        self.assertEqual([v["id"] for v in versions], [1, 2, 3])
        self.assertEqual([v["in_force"] for v in versions], [False, True, False])
        self.import_plan(plan("V", [field("T", 100, 10, 10, [tps(190.0)], tray=True)]))
        f = self.show("V")[("T", "entrance")]
        self.assertEqual(f["model_beam_data_id"], 2)
        self.assertAlmostEqual(f["model"]["tray_factor"], 0.960)
        # a version is never replaced: the same date again is refused
        self.assertFailsUnchanged("machine", "beamdata", v3, "--effective", "2026-11-01", user="phil",
                                  expect_code=2, expect_in="already has beam data")

    def test_refusals_write_nothing(self):
        cases = [
            (self.write_beam_data("m.json", machine="LINAC9"), "machine 'LINAC9'"),
            (self.write_beam_data("b.json", beam="15X"), "beam '15X'"),
            (self.write_beam_data("e.json", beam="9E"), "electron beam"),
            (self.write_beam_data("en.json", energy=10), "energy '10' MV"),
            (self.write_beam_data("d.json", dmax_cm=1.7), "dmax_cm '1.7'"),
            (self.write_beam_data("s.json", sad_cm=80), "sad_cm '80'"),
            (self.fx.write("bad.json", '{"format": "fxledger-beam-data/1", '), "bad.json"),
            (self.fx.path("missing.json"), "cannot open"),
        ]
        for path, words in cases:
            with self.subTest(words=words):
                self.assertFailsUnchanged("machine", "beamdata", path, user="phil", expect_in=words)
        self.assertFailsUnchanged("machine", "beamdata", mf.BEAM_DATA, user="tina", expect_code=4)
        self.assertFailsUnchanged("machine", "beamdata", mf.BEAM_DATA, "--effective", "2026-13-01",
                                  user="phil", expect_in="2026-13-01")
        self.assertFailsUnchanged("machine", "show", "LINAC9", expect_in="unknown machine")

    def test_dicom_and_json_imports_without_data_are_not_checked(self):
        # no beam data at all: a TPS value cannot be checked; the import goes on
        r = self.import_plan(plan("ND", [field("AP", 100, 10, 10, [tps(200.0)])]))
        self.assertIn("no beam data in force", r.stdout)
        self.assertEqual(self.show("ND")[("AP", "entrance")]["crosscheck"]["outcome"], "not_checked")


class MigrationTest(FxlTestCase):
    """A version-1 database (made from sql/001_schema.sql as the previous
    release did) migrates on its next opening for writing."""

    def setUp(self):
        self.fx = Fxl()

    def test_version_1_database_migrates(self):
        with open(os.path.join(SRC, "sql", "001_schema.sql"), encoding="utf-8") as f:
            schema = f.read()
        con = sqlite3.connect(self.fx.db)
        con.executescript(schema)
        con.execute("PRAGMA application_id = %d" % 0x46584C47)
        con.execute("PRAGMA user_version = 1")
        con.execute("INSERT INTO users (login, full_name, role, created_at) "
                    "VALUES ('admin', 'Test Admin', 'admin', '2026-01-01T00:00:00Z')")
        con.commit()
        con.close()
        # Its users have no passwords yet: the first admin chooses one at the
        # first login after the upgrade (docs/security.md).
        self.fx.passwords["admin"] = invented_password("admin")
        self.fx.otps["admin"] = "(none: made before identities)"
        self.fx.ok("machine", "add", "LINAC1")
        con = sqlite3.connect(self.fx.db)
        version = con.execute("PRAGMA user_version").fetchone()[0]
        self.assertGreaterEqual(version, 2)
        self.assertIsNotNone(con.execute("SELECT 1 FROM sqlite_schema WHERE name = 'beam_data'").fetchone())
        columns = [r[1] for r in con.execute("PRAGMA table_info(fields)")]
        for c in ("model_dose_cgy", "model_factors", "model_beam_data_id"):
            self.assertIn(c, columns)
        con.close()
        self.fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon", "--energy", "6",
                   "--dmax", "1.5")
        self.fx.ok("machine", "beamdata", mf.BEAM_DATA)
        # The migrated record verifies except for the one row this fixture
        # wrote by hand with no audit row (a version-1 fxledger wrote one for
        # every user): verify must name exactly that row and nothing else.
        r = self.fx.run("verify")
        self.assertEqual(r.returncode, 2, r.stdout + r.stderr)
        problems = [l for l in (r.stdout + r.stderr).splitlines() if "written outside fxledger" in l]
        self.assertEqual(len(problems), 1, r.stdout + r.stderr)
        self.assertIn("users row 1 ('admin') was not created by any audit row", problems[0])


if __name__ == "__main__":
    main()
