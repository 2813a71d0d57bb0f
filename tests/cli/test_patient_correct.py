"""Correcting a mistyped patient identity: a physicist or admin corrects the
name, birth date or MRN with a reason; the old value stays in the patient's
history and in the audit trail (the correction rows are append-only and the
patients row changes only together with one); the plans and measurements
stay with the patient; a DICOM RT Plan carrying the corrected name is then
accepted. The patient and plan are invented (tests/data/dicom: Patient ID
TEST-0002, name Testperson^Ada)."""
import json
import os
import sqlite3

from fxlcli import DATA, main
from test_dicom_import import DicomTestCase

DICOM = os.path.join(DATA, "dicom", "three_field.json")


class PatientCorrectTest(DicomTestCase):
    def setUp(self):
        super().setUp()
        # The same patient as in the plan, added with a typo in the family name.
        self.fx.ok("patient", "add", "TEST-9002", "--family", "Testpreson", "--given", "Ada",
                   "--birth-date", "1960-05-04")

    def sql(self, q, *args):
        con = sqlite3.connect(self.fx.db)
        try:
            return con.execute(q, args).fetchall()
        finally:
            con.close()

    def test_name_correction_kept_with_its_history(self):
        self.fx.ok("patient", "correct", "TEST-9002", "--family", "Testperson", "--reason",
                   "typed from the referral letter; checked against the ID band", user="phil")
        p = self.fx.json("patient", "show", "TEST-9002")
        self.assertEqual(p["family_name"] if "family_name" in p else p["patient"]["family_name"],
                         "Testperson")
        hist = self.fx.json("patient", "history", "TEST-9002")
        self.assertEqual([(h["item"], h["old_value"], h["new_value"], h["user"]) for h in hist],
                         [("family_name", "Testpreson", "Testperson", "phil")])
        self.assertIn("checked against the ID band", hist[0]["reason"])
        text = self.fx.ok("patient", "history", "TEST-9002").stdout
        self.assertIn("'Testpreson' -> 'Testperson'", text)
        audit = self.sql("SELECT content FROM audit_log WHERE action = 'correct' AND entity = 'patients'")
        self.assertEqual(len(audit), 1)
        self.assertIn("Testpreson", audit[0][0])
        self.fx.ok("verify")

    def test_history_is_append_only_and_the_row_changes_only_with_it(self):
        self.fx.ok("patient", "correct", "TEST-9002", "--family", "Testperson", "--reason", "typo",
                   user="phil")
        con = sqlite3.connect(self.fx.db)
        for q in ("UPDATE patient_corrections SET old_value = 'X'",
                  "DELETE FROM patient_corrections",
                  "UPDATE patients SET family_name = 'Other' WHERE mrn = 'TEST-9002'",
                  "DELETE FROM patients WHERE mrn = 'TEST-9002'"):
            with self.subTest(q=q):
                with self.assertRaises(sqlite3.DatabaseError):
                    con.execute(q)
        con.close()

    def test_mrn_and_birth_date_corrections_keep_the_records(self):
        self.fx.ok("plan", "import", self.fx.write("p.json", json.dumps({
            "format": "fxledger-plan/1", "comment": "Invented test data.", "patient_mrn": "TEST-9002",
            "label": "P1", "site": "Pelvis", "technique": "3D", "fractions": 5,
            "fields": [{"name": "AP", "machine": "LINAC1", "beam": "6X", "setup": "ssd", "mu": 100,
                        "ssd_cm": 100, "x_cm": 10, "y_cm": 10, "wedge_deg": 0, "tray": False,
                        "gantry_deg": 0, "incidence_deg": 0,
                        "points": [{"point": "entrance", "expected_dose_cgy": 100,
                                    "expected_source": "tps"}]}]})))
        self.fx.ok("patient", "correct", "TEST-9002", "--mrn", "TEST-0902", "--birth-date",
                   "1960-04-05", "--reason", "digits swapped", user="admin")
        self.fx.json("plan", "show", "TEST-0902", "P1")
        hist = self.fx.json("patient", "history", "TEST-9002")    # the old MRN finds it
        self.assertEqual(sorted(h["item"] for h in hist), ["birth_date", "mrn"])
        # The old MRN is free only as history: another patient may not take the new one.
        r = self.fx.run("patient", "correct", "TEST-0002", "--mrn", "TEST-0902", "--reason", "x",
                        user="phil")
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn("belongs to another patient", r.stderr)

    def test_therapist_may_not_correct(self):
        r = self.fx.run("patient", "correct", "TEST-9002", "--family", "Testperson", "--reason", "typo",
                        user="tina")
        self.assertEqual(r.returncode, 4, r.stderr)

    def test_dicom_import_matches_after_the_correction(self):
        # The plan file's Patient ID is TEST-0002: correct the stored name first.
        self.fx.ok("patient", "correct", "TEST-0002", "--family", "Testpersn", "--reason",
                   "set up wrongly for the test", user="phil")
        r = self.import_dicom(DICOM)
        self.assertEqual(r.returncode, 2, r.stdout + r.stderr)
        self.assertIn("does not match", r.stderr)
        self.fx.ok("patient", "correct", "TEST-0002", "--family", "Testperson", "--reason",
                   "as on the ID band", user="phil")
        r = self.import_dicom(DICOM)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)


if __name__ == "__main__":
    main()
