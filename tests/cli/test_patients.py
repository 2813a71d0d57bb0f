"""fxledger patient add / list / show. Patients and names are invented."""
import sqlite3

from fxlcli import FxlTestCase, main


class PatientTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        self.fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
        self.fx.ok("user", "add", "aud", "--name", "Invented Auditor", "--role", "auditor")

    def test_add_list_show(self):
        self.fx.ok("patient", "add", "TEST-0001", "--family", "Testperson", "--given", "Invented",
                   "--birth-date", "1961-04-30")
        out = self.fx.json("patient", "list")
        self.assertEqual(len(out), 1)
        p = out[0]
        self.assertEqual(p["mrn"], "TEST-0001")
        self.assertEqual(p["family_name"], "Testperson")
        self.assertEqual(p["given_name"], "Invented")
        self.assertEqual(p["birth_date"], "1961-04-30")
        self.assertEqual(p["plan_count"], 0)
        self.assertEqual(p["fractions_logged"], 0)
        show = self.fx.json("patient", "show", "TEST-0001")
        self.assertEqual(show["mrn"], "TEST-0001")
        self.assertEqual(show["plans"], [])
        text = self.fx.ok("patient", "show", "TEST-0001").stdout
        self.assertIn("Testperson, Invented", text)
        self.assertIn("0 fractions logged", text)
        self.assertIn("TEST-0001", self.fx.ok("patient", "list").stdout)

    def test_add_json_and_utf8_name(self):
        out = self.fx.json("patient", "add", "TEST-0002", "--family", "Müller-Łukasiewicz")
        self.assertEqual(out["family_name"], "Müller-Łukasiewicz")
        self.assertIsNone(out["birth_date"])
        self.assertEqual(out["given_name"], "")

    def test_therapist_may_add_auditor_may_not(self):
        self.fx.ok("patient", "add", "TEST-0003", "--family", "Testperson", user="ther")
        self.assertFailsUnchanged("patient", "add", "TEST-0004", "--family", "Testperson",
                                  user="aud", expect_code=4, expect_in="permission denied")
        # the auditor can read
        self.assertEqual(len(self.fx.json("patient", "list", user="aud")), 1)

    def test_add_audited(self):
        self.fx.ok("patient", "add", "TEST-0005", "--family", "Testperson")
        con = sqlite3.connect(self.fx.db)
        row = con.execute("SELECT action, entity, content FROM audit_log ORDER BY id DESC LIMIT 1").fetchone()
        con.close()
        self.assertEqual(row[:2], ("create", "patients"))
        self.assertIn("TEST-0005", row[2])
        self.assertTrue(self.fx.json("verify")["ok"])

    def test_bad_inputs_write_nothing(self):
        self.fx.ok("patient", "add", "TEST-0001", "--family", "Testperson")
        self.assertFailsUnchanged("patient", "add", "TEST-0001", "--family", "Other",
                                  expect_code=2, expect_in="already exists")
        self.assertFailsUnchanged("patient", "add", "TEST-0006", expect_code=1, expect_in="--family")
        self.assertFailsUnchanged("patient", "add", "TEST-0006", "--family", "X",
                                  "--birth-date", "1961-02-30", expect_code=2, expect_in="birth date")
        # the test clock is 2026-11-02: a birth date after today is refused
        self.assertFailsUnchanged("patient", "add", "TEST-0006", "--family", "X",
                                  "--birth-date", "2026-11-03", expect_code=2, expect_in="to today")
        self.assertFailsUnchanged("patient", "add", "", "--family", "X", expect_code=2,
                                  expect_in="MRN")
        self.assertFailsUnchanged("patient", "add", "TEST-0006", "--family", "",
                                  expect_code=2, expect_in="family name")
        self.assertFailsUnchanged("patient", "add", "TEST-0006", "--family", "X", "--nickname", "Y",
                                  expect_code=1, expect_in="unknown option")
        self.assertFailsUnchanged("patient", "show", "NOBODY", expect_code=2, expect_in="unknown patient")

    def test_help(self):
        for sub in ("add", "list", "show"):
            r = self.fx.ok("patient", sub, "--help")
            self.assertIn("usage: fxledger patient " + sub, r.stdout)
        self.assertIn("add", self.fx.ok("patient", "--help").stdout)


if __name__ == "__main__":
    main()
