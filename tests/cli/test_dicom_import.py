"""plan import-dicom: DICOM RT Plans in the DICOM JSON Model (PS3.18 Annex
F) written with pydicom at test time by tests/data/dicom/make_rtplan.py (a
reference implementation of the standard writes them; the values compared
are the ones written), imported and read back with 'plan show --json'.
Unsupported and malformed plans write nothing and say why. The expected
doses come from the independent model: TG-71 formalism recomputed in
model_fixture.py (source named there). Test data is invented."""
import copy
import json
import os
import sqlite3
import sys

import model_fixture as mf
from fxlcli import DATA, FxlTestCase, main

sys.path.insert(0, os.path.join(DATA, "dicom"))
import make_rtplan as mk  # noqa: E402  (pydicom, Debian's python3-pydicom)

DICOM = os.path.join(DATA, "dicom")


def write_plan(fx, name, plan):
    """The plan as pydicom's to_json_dict() writes it; returns the path."""
    return fx.write(name + ".json", json.dumps(mk.dataset(plan, name).to_json_dict()))


def beam_data_10x(fx):
    """Invented 10 MV beam data: the 6 MV fixture's tables with the 10 MV
    geometry (d_max 2.4 cm, calibrated at SSD 100 cm: 102.4 cm)."""
    doc = mf.load()
    doc.update(beam="10X", energy=10, dmax_cm=2.4, source="invented 10 MV test data")
    doc["reference"] = dict(doc["reference"], distance_cm=102.4)
    doc["tmr"]["depth_cm"][0] = 2.4
    return fx.write("linac1_10x.json", json.dumps(doc)), doc


class DicomTestCase(FxlTestCase):
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
        fx.ok("patient", "add", "TEST-0002", "--family", "Testperson", "--given", "Ada")
        fx.ok("machine", "beamdata", mf.BEAM_DATA, "--effective", "2026-10-01", user="phil")

    def import_dicom(self, path, *extra, user="phil"):
        return self.fx.run("plan", "import-dicom", path, "--machine", "LINAC1", "--site", "Pelvis",
                           "--technique", "3D", *extra, user=user)

    def show(self, mrn, label):
        return self.fx.json("plan", "show", mrn, label)


class ThreeFieldTest(DicomTestCase):
    def test_pydicom_three_field_plan_round_trip(self):
        path_10x, bd10 = beam_data_10x(self.fx)
        self.fx.ok("machine", "beamdata", path_10x, "--effective", "2026-10-01", user="phil")
        plan = mk.three_field()
        path = write_plan(self.fx, "three_field", plan)
        r = self.import_dicom(path, "--exit", "LLAT=22")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("imported DICOM plan PEL-3F for patient TEST-0002", r.stdout)

        shown = self.show("TEST-0002", "PEL-3F")
        self.assertEqual(shown["source"], "dicom")
        self.assertEqual(shown["fractions"], plan["fractions"])
        self.assertAlmostEqual(shown["dose_per_fraction_cgy"],
                               mk.ds_value(plan["prescription_gy"]) * 100 / plan["fractions"])
        rows = shown["fields"]
        self.assertEqual([(f["name"], f["point"]) for f in rows],
                         [("AP", "entrance"), ("RLAT", "entrance"), ("LLAT", "entrance"), ("LLAT", "exit")])
        written = {b["name"]: b for b in plan["beams"]}
        for f in rows:
            b = written[f["name"]]
            with self.subTest(field=f["name"], point=f["point"]):
                jx, jy, fx_cm, fy_cm = mk.expected_field(b)
                self.assertEqual(f["machine"], "LINAC1")
                self.assertEqual(f["beam"], "%dX" % b["energy"])
                self.assertEqual(f["energy"], mk.ds_value(b["energy"]))
                self.assertEqual(f["modality"], "photon")
                self.assertAlmostEqual(f["mu"], mk.ds_value(b["mu"]), places=9)
                self.assertAlmostEqual(f["ssd_cm"], mk.ds_value(b["ssd_mm"]) / 10, places=9)
                self.assertAlmostEqual(f["gantry_deg"], mk.ds_value(b["gantry"]), places=9)
                self.assertAlmostEqual(f["x_cm"], jx, places=9)
                self.assertAlmostEqual(f["y_cm"], jy, places=9)
                self.assertEqual(f["wedge_deg"], b["wedges"][0]["angle"] if b.get("wedges") else 0)
                self.assertEqual(f["tray"], bool(b.get("blocks")))
                self.assertEqual(f["setup"], "isocentric")
                self.assertEqual(f["incidence_deg"], 0)
                self.assertEqual(f["policy"], "first")
                # the expected dose is the model's (TG-71, model_fixture.py), with
                # the MLC-shaped field for S_p
                bd = bd10 if b["energy"] == 10 else mf.load()
                want, factors = mf.expected(
                    bd, mk.ds_value(b["mu"]), mk.ds_value(b["ssd_mm"]) / 10, jx, jy,
                    wedge=f["wedge_deg"], tray=f["tray"], point=f["point"],
                    thickness=22 if f["point"] == "exit" else None,
                    shaped_eqsq=mk.eqsq(fx_cm, fy_cm) if b.get("mlc") else None)
                self.assertEqual(f["expected_source"], "model")
                self.assertAlmostEqual(f["expected_dose_cgy"], want, places=6)
                self.assertAlmostEqual(f["model"]["rd_cm"], factors["rd_cm"], places=9)
                self.assertEqual(f["crosscheck"]["outcome"], "not_checked")
        self.assertEqual(rows[3]["thickness_cm"], 22)
        self.assertLess(rows[0]["model"]["rd_cm"], mk.eqsq(14, 16) * (90.5 + 2.4) / 100)  # MLC narrows AP
        self.fx.ok("verify")

    def test_dcmtk_fixture_gives_the_same_values(self):
        """The committed dcm2json fixture and its expectation file (values
        written by the generator)."""
        with open(os.path.join(DICOM, "three_field.dcmtk.expect.json"), encoding="utf-8") as f:
            expect = json.load(f)
        r = self.import_dicom(os.path.join(DICOM, "three_field.dcmtk.json"))
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        rows = {f["name"]: f for f in self.show("TEST-0002", "PEL-3F")["fields"]}
        self.assertEqual(sorted(rows), sorted(b["name"] for b in expect["beams"]))
        for b in expect["beams"]:
            f = rows[b["name"]]
            for key, fkey in (("mu", "mu"), ("ssd_cm", "ssd_cm"), ("energy", "energy"),
                              ("gantry_deg", "gantry_deg"), ("jaw_x_cm", "x_cm"), ("jaw_y_cm", "y_cm"),
                              ("wedge_deg", "wedge_deg")):
                self.assertAlmostEqual(f[fkey], b[key], places=9, msg="%s %s" % (b["name"], key))
            self.assertEqual(f["tray"], bool(b["tray"]))
        # AP is 10 MV and no 10 MV beam data are loaded: imported without an
        # expected dose, and said so
        self.assertIsNone(rows["AP"]["expected_dose_cgy"])
        self.assertIsNone(rows["AP"]["expected_source"])
        self.assertIn("no beam data", rows["AP"]["crosscheck"]["summary"])
        self.assertIn("WARNING: 1 measured point without an expected dose", r.stdout)

    def test_replacement_plan(self):
        path = write_plan(self.fx, "v1", mk.three_field())
        self.assertEqual(self.import_dicom(path).returncode, 0)
        changed = mk.three_field()
        changed["label"] = "PEL-3F-B"
        changed["beams"][1]["mu"] = 125.0
        r = self.import_dicom(write_plan(self.fx, "v2", changed), "--replaces", "PEL-3F", "--policy", "every")
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertIn("replaces plan PEL-3F", r.stdout)
        new = {f["name"]: f for f in self.show("TEST-0002", "PEL-3F-B")["fields"]}
        self.assertEqual(new["RLAT"]["mu"], 125.0)
        self.assertEqual(new["RLAT"]["policy"], "every")
        self.assertEqual(self.show("TEST-0002", "PEL-3F")["replaced_by"], "PEL-3F-B")


class RefusalTest(DicomTestCase):
    """Each refusal: one line naming why, a non-zero exit, nothing written."""

    def test_unsupported_plans(self):
        for name, words in (("refuse_arc", "is an arc"), ("refuse_proton_beam", "PROTON"),
                            ("refuse_ion_plan", "RT Ion Plan"), ("refuse_modulated", "is modulated"),
                            ("refuse_two_fraction_groups", "fraction groups"),
                            ("refuse_missing_ssd", "Source to Surface Distance (300A,0130) is missing")):
            with self.subTest(plan=name):
                self.assertFailsUnchanged("plan", "import-dicom", os.path.join(DICOM, name + ".json"),
                                          "--machine", "LINAC1", "--site", "Pelvis", "--technique", "3D",
                                          user="phil", expect_code=2, expect_in=words)

    def test_unsupported_plan_made_now(self):
        arc = mk.three_field()
        mk.with_beam(arc, 2, beam_type="DYNAMIC", rotation="CC", gantry=90, end_gantry=30, control_points=3)
        path = write_plan(self.fx, "arc", arc)
        self.assertFailsUnchanged("plan", "import-dicom", path, "--machine", "LINAC1", "--site", "Pelvis",
                                  "--technique", "3D", user="phil", expect_in="beam 'LLAT' (number 3) is an arc")

    def test_malformed_files(self):
        with open(os.path.join(DICOM, "three_field.json"), encoding="utf-8") as f:
            good = f.read()
        cases = [
            (self.fx.write("cut.json", good[: len(good) // 2]), "too early"),
            (self.fx.write("notjson.json", "RTPLAN\n"), "malformed"),
            (self.fx.write("object.json", '{"00100020": 5}'), "not an object"),
            (self.fx.path("missing.json"), "cannot"),
        ]
        for path, words in cases:
            with self.subTest(words=words):
                self.assertFailsUnchanged("plan", "import-dicom", path, "--machine", "LINAC1", "--site",
                                          "Pelvis", "--technique", "3D", user="phil", expect_in=words)

    def test_patient_machine_and_beam_must_match(self):
        three = os.path.join(DICOM, "three_field.json")
        other = mk.three_field()
        other["patient_id"] = "TEST-0999"
        self.assertFailsUnchanged("plan", "import-dicom", write_plan(self.fx, "unknown", other), "--machine",
                                  "LINAC1", "--site", "Pelvis", "--technique", "3D", user="phil",
                                  expect_in="add the patient first")
        renamed = mk.three_field()
        renamed["patient_name"] = "Otherperson^Ada"
        self.assertFailsUnchanged("plan", "import-dicom", write_plan(self.fx, "renamed", renamed), "--machine",
                                  "LINAC1", "--site", "Pelvis", "--technique", "3D", user="phil",
                                  expect_in="does not match")
        self.assertFailsUnchanged("plan", "import-dicom", three, "--machine", "LINAC9", "--site", "Pelvis",
                                  "--technique", "3D", user="phil", expect_in="unknown machine 'LINAC9'")
        self.fx.ok("machine", "add", "LINAC2")
        self.fx.ok("machine", "beam", "6X", "--machine", "LINAC2", "--modality", "photon", "--energy", "6")
        self.assertFailsUnchanged("plan", "import-dicom", three, "--machine", "LINAC2", "--site", "Pelvis",
                                  "--technique", "3D", user="phil",
                                  expect_in="beam 'AP' (number 1) is photon 10 MV, but machine 'LINAC2' has no such beam")
        self.fx.ok("machine", "beam", "6FFF", "--machine", "LINAC1", "--modality", "photon", "--energy", "6")
        self.assertFailsUnchanged("plan", "import-dicom", three, "--machine", "LINAC1", "--site", "Pelvis",
                                  "--technique", "3D", user="phil", expect_in="several such beams (6FFF, 6X)")

    def test_options_and_role(self):
        three = os.path.join(DICOM, "three_field.json")
        base = ["plan", "import-dicom", three, "--machine", "LINAC1"]
        self.assertFailsUnchanged(*base, "--technique", "3D", user="phil", expect_code=1, expect_in="--site")
        self.assertFailsUnchanged(*base, "--site", "Pelvis", user="phil", expect_code=1, expect_in="--technique")
        self.assertFailsUnchanged(*base, "--site", "Pelvis", "--technique", "3D", "--exit", "LAT=20",
                                  user="phil", expect_in="'LAT'")
        self.assertFailsUnchanged(*base, "--site", "Pelvis", "--technique", "3D", "--exit", "LLAT=1.0",
                                  user="phil", expect_in="d_max")
        self.assertFailsUnchanged(*base, "--site", "Pelvis", "--technique", "3D", "--exit", "LLAT",
                                  user="phil", expect_code=1, expect_in="BEAM=CM")
        self.assertFailsUnchanged(*base, "--site", "Pelvis", "--technique", "3D", user="tina", expect_code=4)
        self.assertEqual(self.import_dicom(three).returncode, 0)
        self.assertFailsUnchanged(*base, "--site", "Pelvis", "--technique", "3D", user="phil",
                                  expect_in="already exists")

    def test_nothing_partial_when_a_later_beam_is_refused(self):
        """The last beam's model dose (9000 MU) is beyond what a field may
        expect (3000 cGy): refused after the earlier beams were written in
        the transaction; no plan, field, review item or audit row remains."""
        plan = mk.three_field()
        plan["beams"][2]["mu"] = 9000.0
        path = write_plan(self.fx, "huge", plan)
        con = sqlite3.connect(self.fx.db)
        counts = [con.execute("SELECT count(*) FROM %s" % t).fetchone()[0]
                  for t in ("plans", "fields", "review_items", "audit_log")]
        con.close()
        self.assertFailsUnchanged("plan", "import-dicom", path, "--machine", "LINAC1", "--site", "Pelvis",
                                  "--technique", "3D", user="phil", expect_in="plan field 'LLAT' entrance point")
        con = sqlite3.connect(self.fx.db)
        self.assertEqual([con.execute("SELECT count(*) FROM %s" % t).fetchone()[0]
                          for t in ("plans", "fields", "review_items", "audit_log")], counts)
        con.close()

    def test_electron_beam_has_no_exit(self):
        self.fx.ok("patient", "add", "TEST-0003", "--family", "Exempel", "--given", "Bo")
        self.assertFailsUnchanged("plan", "import-dicom", os.path.join(DICOM, "electron_single.json"),
                                  "--machine", "LINAC1", "--site", "Chest", "--technique", "electron",
                                  "--exit", "E-BOOST=10", user="phil", expect_in="photon beams only")
        r = self.fx.run("plan", "import-dicom", os.path.join(DICOM, "electron_single.json"), "--machine",
                        "LINAC1", "--site", "Chest", "--technique", "electron", "--setup", "ssd", user="phil")
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertIn("NO expected dose", r.stdout)
        f = self.show("TEST-0003", "BOOST")["fields"][0]
        self.assertEqual((f["beam"], f["tray"]), ("9E", False))         # an electron cut-out is no tray
        self.assertIsNone(f["expected_dose_cgy"])


class RecordAgainstModelTest(DicomTestCase):
    """A field whose expected dose is the model's is judged against it; a
    field imported without an expected dose is never a pass."""

    def test_model_expected_dose_is_used_and_missing_is_not_evaluable(self):
        fx = self.fx
        fx.ok("patient", "add", "TEST-0302", "--family", "Beispiel", "--given", "Kim")
        fx.ok("detector", "add", "D-1", "--label", "Diode 1", "--kind", "photon_diode", "--temp-coeff", "0",
              now="2026-09-01T08:00:00Z")
        for beam in ("6X", "10X"):
            fx.ok("calib", "add", "D-1", "--machine", "LINAC1", "--beam", beam, "--point", "entrance",
                  "--chamber-dose", "100", "--readings", "10.0", "--temp", "20", "--at", "2026-10-01")
        fx.ok("levels", "set", "general", "--tolerance", "5", "--action", "8", "--effective", "2026-01-01")
        ref = mk.photon(1, "REF", 0, 200.0, 1000.0, 10, 10)
        hi = mk.photon(2, "HI", 180, 180.0, 1000.0, 10, 10, energy=10)
        plan = {"patient_id": "TEST-0302", "patient_name": "Beispiel^Kim", "label": "REF-1",
                "fractions": 5, "prescription_gy": 10, "beams": [ref, hi]}
        r = self.import_dicom(write_plan(fx, "ref", plan), "--setup", "ssd")
        self.assertEqual(r.returncode, 0, r.stderr)
        rows = {f["name"]: f for f in self.show("TEST-0302", "REF-1")["fields"]}
        # TG-71 at the reference conditions: 200 MU x S_c(10) 1.000 x S_p(10.15)
        # x (101.5/101.5)^2 (model_fixture.py)
        want, _ = mf.expected(mf.load(), 200, 100, 10, 10)
        self.assertAlmostEqual(rows["REF"]["expected_dose_cgy"], want, places=6)
        self.assertIsNone(rows["HI"]["expected_dose_cgy"])
        # N = 100 cGy / 10 nC (cross-calibration arithmetic, TG-62); a reading
        # 2 % above the model value
        reading = want * 1.02 / 10.0
        r = fx.run("--json", "record", "--patient", "TEST-0302", "--field", "REF", "--detector", "D-1",
                   "--reading", repr(reading), "--temp", "20", "--field", "HI", "--detector", "D-1",
                   "--reading", "17.0", "--temp", "20", user="tina")
        self.assertEqual(r.returncode, 10, r.stdout + r.stderr)        # not evaluable is the worst
        out = {m["field"]: m for m in json.loads(r.stdout)["results"]}
        self.assertEqual(out["REF"]["verdict"], "within_tolerance")
        self.assertAlmostEqual(out["REF"]["deviation_pct"], 2.0, places=2)
        self.assertEqual(out["REF"]["expected_source"], "model")
        self.assertEqual(out["HI"]["verdict"], "not_evaluable")
        self.assertIn("no expected dose", " ".join(out["HI"]["reasons"]))


if __name__ == "__main__":
    main()
