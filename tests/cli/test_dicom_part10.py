"""plan import-dicom with DICOM Part 10 files (PS3.10), as planning systems
export them. The files are written at test time by two independent DICOM
encoders: pydicom's Dataset.save_as with file meta (Debian's python3-pydicom,
in explicit and implicit VR little endian and deflated) and dcmtk's dump2dcm
(Debian's dcmtk), from the invented plans of tests/data/dicom/make_rtplan.py.
The same plan imported from the DICOM JSON Model must give the same plan,
field for field. Patient names are compared after Unicode NFC, case folding
and collapsing of spaces (the Unicode Standard; the ISO 8859-1 code chart for
the ISO_IR 100 bytes); beams that several machine beams match need
--beam-map. Test data is invented."""
import json
import os
import shutil
import sys

import model_fixture as mf
from fxlcli import DATA, Fxl, FxlTestCase, main

sys.path.insert(0, os.path.join(DATA, "dicom"))
import make_rtplan as mk  # noqa: E402  (pydicom, Debian's python3-pydicom)

PART10 = os.path.join(DATA, "dicom", "part10")
HAVE_DUMP2DCM = shutil.which("dump2dcm") is not None


def prepare(fx):
    """The department of test_dicom_import.py: LINAC1 with 6X, 10X and 9E,
    6 MV beam data (model_fixture.py), patient TEST-0002."""
    fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
    fx.ok("machine", "add", "LINAC1")
    fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon", "--energy", "6",
          "--dmax", "1.5")
    fx.ok("machine", "beam", "10X", "--machine", "LINAC1", "--modality", "photon", "--energy", "10",
          "--dmax", "2.4")
    fx.ok("machine", "beam", "9E", "--machine", "LINAC1", "--modality", "electron", "--energy", "9")
    fx.ok("patient", "add", "TEST-0002", "--family", "Testperson", "--given", "Ada")
    fx.ok("machine", "beamdata", mf.BEAM_DATA, "--effective", "2026-10-01", user="phil")


def write(fx, name, plan, writer, syntax="explicit"):
    """The plan as a file: 'json' (to_json_dict), 'pydicom' or 'dump2dcm'
    (Part 10 in `syntax`). Returns the path."""
    ds = mk.dataset(plan, name)
    if writer == "json":
        return fx.write(name + ".json", json.dumps(ds.to_json_dict()))
    path = fx.path("%s.%s.%s.dcm" % (name, writer, syntax))
    if writer == "pydicom":
        return mk.save_part10(ds, path, syntax)
    enc = "latin-1" if plan.get("charset") == "ISO_IR 100" else "ascii"
    return mk.dump2dcm_part10(ds, path, syntax, enc)


class Part10TestCase(FxlTestCase):
    def setUp(self):
        super().setUp()
        prepare(self.fx)

    def import_dicom(self, path, *extra, fx=None):
        return (fx or self.fx).run("plan", "import-dicom", path, "--machine", "LINAC1", "--site", "Pelvis",
                                   "--technique", "3D", *extra, user="phil")

    def refused(self, path, words, *extra, code=2):
        return self.assertFailsUnchanged("plan", "import-dicom", path, "--machine", "LINAC1", "--site",
                                         "Pelvis", "--technique", "3D", *extra, user="phil",
                                         expect_code=code, expect_in=words)


class SamePlanTest(Part10TestCase):
    def test_part10_both_vrs_and_json_give_identical_plans(self):
        """One invented plan, six files, six fresh databases: 'plan show
        --json' is the same for every one (the clock is fixed)."""
        variants = [("json", "explicit"), ("pydicom", "explicit"), ("pydicom", "implicit"),
                    ("pydicom", "deflated")]
        if HAVE_DUMP2DCM:
            variants += [("dump2dcm", "explicit"), ("dump2dcm", "implicit")]
        shown = {}
        for writer, syntax in variants:
            fx = Fxl().init()
            try:
                prepare(fx)
                path = write(fx, "three_field", mk.three_field(), writer, syntax)
                r = self.import_dicom(path, "--exit", "LLAT=22", fx=fx)
                self.assertEqual(r.returncode, 0, "%s %s: %s" % (writer, syntax, r.stderr))
                self.assertIn("imported DICOM plan PEL-3F for patient TEST-0002 (Testperson, Ada)", r.stdout)
                shown[(writer, syntax)] = fx.json("plan", "show", "TEST-0002", "PEL-3F")
            finally:
                fx.close()
        ref = shown[("json", "explicit")]
        for key, plan in shown.items():
            with self.subTest(file=key):
                self.assertEqual(plan, ref)
        # and those are the values written (make_rtplan.py three_field())
        written = {b["name"]: b for b in mk.three_field()["beams"]}
        self.assertEqual([(f["name"], f["point"]) for f in ref["fields"]],
                         [("AP", "entrance"), ("RLAT", "entrance"), ("LLAT", "entrance"), ("LLAT", "exit")])
        for f in ref["fields"]:
            b = written[f["name"]]
            jx, jy, _, _ = mk.expected_field(b)
            self.assertAlmostEqual(f["mu"], mk.ds_value(b["mu"]), places=9)
            self.assertAlmostEqual(f["ssd_cm"], mk.ds_value(b["ssd_mm"]) / 10, places=9)
            self.assertAlmostEqual(f["gantry_deg"], mk.ds_value(b["gantry"]), places=9)
            self.assertEqual((f["x_cm"], f["y_cm"]), (jx, jy))
            self.assertEqual(f["beam"], "%dX" % b["energy"])
        self.assertEqual(ref["fractions"], 25)
        self.assertEqual(ref["dose_per_fraction_cgy"], 200)     # 50 Gy / 25
        self.assertEqual(ref["source"], "dicom")

    def test_committed_part10_files_are_what_the_generator_makes(self):
        out = self.fx.path("regen")
        os.makedirs(out)
        mk.write_part10(out, writers=("pydicom", "dump2dcm") if HAVE_DUMP2DCM else ("pydicom",))
        for name in sorted(os.listdir(out)):
            if "dump2dcm" in name:
                continue   # dump2dcm writes its own version into the file meta
            with self.subTest(file=name):
                with open(os.path.join(out, name), "rb") as a, open(os.path.join(PART10, name), "rb") as b:
                    self.assertEqual(a.read(), b.read(), "regenerate: make_rtplan.py tests/data/dicom/part10 --part10")


class CharacterSetTest(Part10TestCase):
    """ISO_IR 100 is ISO 8859-1 (PS3.3 C.12.1.1.2): u-umlaut is byte 0xFC,
    e-diaeresis 0xEB, e-acute 0xE9 (the ISO 8859-1 code chart)."""

    def latin1_files(self):
        files = [write(self.fx, "latin1", mk.latin1_plan(), "pydicom", "explicit"),
                 write(self.fx, "latin1", mk.latin1_plan(), "pydicom", "implicit")]
        if HAVE_DUMP2DCM:
            files.append(write(self.fx, "latin1", mk.latin1_plan(), "dump2dcm", "explicit"))
        for path in files:
            with open(path, "rb") as f:
                self.assertIn("Müller-Lüdenscheidt^Zoë Renée".encode("latin-1"), f.read())
        return files

    def test_iso_ir_100_name_matches_its_patient(self):
        # entered in another form of the same name: decomposed u + U+0308
        # (NFD), other case, doubled and no-break spaces
        family = "MU\u0308LLER-LU\u0308DENSCHEIDT"
        given = "zoe\u0308\u00a0 rene\u0301e"
        self.fx.ok("patient", "add", "TEST-0100", "--family", family, "--given", given)
        for i, path in enumerate(self.latin1_files()):
            plan = mk.latin1_plan()
            with self.subTest(file=os.path.basename(path)):
                # one label per import: the same plan may be imported once
                r = self.import_dicom(path)
                if i == 0:
                    self.assertEqual(r.returncode, 0, r.stderr)
                    self.assertIn("for patient TEST-0100 (%s, %s)" % (family, given), r.stdout)
                    shown = self.fx.json("plan", "show", "TEST-0100", plan["label"])
                    self.assertEqual(len(shown["fields"]), 3)
                else:
                    self.assertEqual(r.returncode, 2, r.stderr)
                    self.assertIn("already exists", r.stderr)     # the name matched: the label is taken

    def test_other_name_refused_with_both_forms(self):
        self.fx.ok("patient", "add", "TEST-0100", "--family", "Mueller-Luedenscheidt", "--given", "Zoe Renee")
        for path in self.latin1_files():
            with self.subTest(file=os.path.basename(path)):
                r = self.refused(path, "does not match patient 'TEST-0100'")
                self.assertIn("'Müller-Lüdenscheidt^Zoë Renée'", r.stderr)
                self.assertIn("(Mueller-Luedenscheidt, Zoe Renee)", r.stderr)
                self.assertIn("'müller-lüdenscheidt' / 'zoë renée' and 'mueller-luedenscheidt' / 'zoe renee'",
                              r.stderr)

    def test_mrn_must_match_exactly(self):
        plan = mk.three_field()
        plan["patient_id"] = "test-0002"
        self.refused(write(self.fx, "lower", plan, "pydicom"), "patient 'test-0002' (the plan's Patient ID) is not known")

    def test_plan_without_family_name_refused(self):
        plan = mk.three_field()
        plan["patient_name"] = "^Ada"
        self.refused(write(self.fx, "nofamily", plan, "pydicom"), "has no family name")


class RefusalTest(Part10TestCase):
    def test_absent_beam_meterset_refused_never_zero(self):
        plan = mk.three_field()
        plan["drop_in_fraction_group"] = [(1, "BeamMeterset")]
        cases = [("pydicom", "explicit"), ("pydicom", "implicit"), ("pydicom", "deflated")]
        if HAVE_DUMP2DCM:
            cases.append(("dump2dcm", "explicit"))
        for writer, syntax in cases:
            with self.subTest(writer=writer, syntax=syntax):
                self.refused(write(self.fx, "nomu", plan, writer, syntax),
                             "beam 'RLAT' (number 2): Beam Meterset (300A,0086) missing")

    def test_broken_and_foreign_files_refused(self):
        good = write(self.fx, "good", mk.three_field(), "pydicom", "implicit")
        with open(good, "rb") as f:
            data = f.read()
        cut = self.fx.path("cut.dcm")
        with open(cut, "wb") as f:
            f.write(data[: len(data) // 2])
        garbage = self.fx.path("garbage.dcm")
        with open(garbage, "wb") as f:
            f.write(bytes(128) + b"DICM" + bytes(range(256)) * 4)
        binary = self.fx.path("binary.dcm")
        with open(binary, "wb") as f:
            f.write(bytes(range(256)) * 4)
        bare = self.fx.path("bare.dcm")            # a data set without preamble or file meta
        ds = mk.dataset(mk.three_field(), "bare")
        ds.is_little_endian, ds.is_implicit_VR = True, True
        ds.save_as(bare, write_like_original=True)
        big = write(self.fx, "big", mk.three_field(), "pydicom", "bigendian")
        ct = self.fx.path("ct.dcm")
        mk.save_part10(mk.ct_image(), ct)
        nolabel = mk.three_field()
        nolabel["drop"] = ["RTPlanLabel"]
        nolabel = write(self.fx, "nolabel", nolabel, "pydicom", "implicit")
        nossd = mk.three_field()
        del nossd["beams"][1]["ssd_mm"]
        nossd = write(self.fx, "nossd", nossd, "pydicom", "explicit")
        arc = mk.three_field()
        mk.with_beam(arc, 2, beam_type="DYNAMIC", rotation="CC", gantry=90, end_gantry=30, control_points=3)
        arc = write(self.fx, "arc", arc, "pydicom", "implicit")
        cases = [
            (cut, "is cut short or damaged"),
            (garbage, "cannot read its DICOM file meta information"),
            (binary, "neither a DICOM Part 10 file"),
            (bare, "neither a DICOM Part 10 file"),
            (big, "transfer syntax '1.2.840.10008.1.2.2' (BigEndianExplicit)"),
            (ct, "SOP class '1.2.840.10008.5.1.4.1.1.2' is not an RT Plan"),
            (nolabel, "RT Plan Label (300A,0002) is missing"),
            (nossd, "beam 'RLAT' (number 2): Source to Surface Distance (300A,0130) is missing"),
            (arc, "beam 'LLAT' (number 3) is an arc"),
        ]
        for path, words in cases:
            with self.subTest(file=os.path.basename(path)):
                r = self.refused(path, words)
                self.assertEqual(r.stderr.count("\n"), 1, r.stderr)     # one line, no DCMTK log

    def test_committed_refusals(self):
        for name in sorted(os.listdir(PART10)):
            if not (name.startswith("refuse_") and name.endswith(".dcm")):
                continue
            with open(os.path.join(PART10, name[:-4] + ".expect.json"), encoding="utf-8") as f:
                words = json.load(f)["refuse"]
            with self.subTest(file=name):
                self.refused(os.path.join(PART10, name), words)


class BeamMapTest(Part10TestCase):
    """A 6 MV flattening-filter-free beam beside the 6 MV flattened one: the
    plan's 6 MV beams match both, and the physicist says which."""

    def setUp(self):
        super().setUp()
        self.fx.ok("machine", "beam", "6FFF", "--machine", "LINAC1", "--modality", "photon", "--energy", "6")
        self.path = write(self.fx, "three", mk.three_field(), "pydicom", "implicit")

    def test_same_energy_beams_need_the_mapping(self):
        r = self.refused(self.path, "beam 'RLAT' (number 2) is photon 6 MV, and machine 'LINAC1' has several "
                                    "such beams (6FFF, 6X)")
        self.assertIn("--beam-map 'RLAT=BEAM'", r.stderr)
        # mapping one of the two is not enough
        self.refused(self.path, "beam 'LLAT' (number 3) is photon 6 MV", "--beam-map", "RLAT=6FFF")

    def test_mapping_chooses_the_beam(self):
        r = self.import_dicom(self.path, "--beam-map", "RLAT=6FFF,LLAT=6X")
        self.assertEqual(r.returncode, 0, r.stderr)
        beams = {f["name"]: f["beam"] for f in self.fx.json("plan", "show", "TEST-0002", "PEL-3F")["fields"]}
        self.assertEqual(beams, {"AP": "10X", "RLAT": "6FFF", "LLAT": "6X"})

    def test_bad_mappings_refused(self):
        self.refused(self.path, "onto '10X', which is photon 10 MV: a plan beam maps only onto a beam of its "
                                "modality and energy (candidates: 6FFF, 6X)", "--beam-map", "RLAT=10X,LLAT=6X")
        self.refused(self.path, "machine 'LINAC1' has no beam '6MV'", "--beam-map", "RLAT=6MV,LLAT=6X")
        self.refused(self.path, "--beam-map names beam 'LAT', which is not a treatment beam of the plan",
                     "--beam-map", "RLAT=6X,LLAT=6X,LAT=6X")
        self.refused(self.path, "must be PLANBEAM=MACHINEBEAM", "--beam-map", "RLAT", code=1)
        self.refused(self.path, "names plan beam 'RLAT' twice", "--beam-map", "RLAT=6X,RLAT=6FFF", code=1)
        # a choice for a beam that only one machine beam matches must be that beam
        self.refused(self.path, "(candidates: 10X)", "--beam-map", "AP=6X,RLAT=6X,LLAT=6X")


if __name__ == "__main__":
    main()
