"""fxledger user: add, list, deactivate; only admins manage users, and a
failed command writes nothing. Names are invented."""
import sqlite3

from fxlcli import FxlTestCase, main


class UserTest(FxlTestCase):
    def test_add_and_list(self):
        self.fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        self.fx.ok("user", "add", "tina", "--name", "Tina Thérapeute", "--role", "therapist")
        users = self.fx.json("user", "list")
        self.assertEqual([u["login"] for u in users], ["admin", "phil", "tina"])
        tina = users[2]
        self.assertEqual(tina["role"], "therapist")
        self.assertEqual(tina["full_name"], "Tina Thérapeute")
        self.assertTrue(tina["active"])
        text = self.fx.ok("user", "list").stdout
        self.assertIn("phil", text)
        self.assertIn("physicist", text)

    def test_add_json_output(self):
        out = self.fx.json("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        self.assertEqual(out["login"], "otto")
        self.assertEqual(out["role"], "auditor")

    def test_new_user_can_act(self):
        self.fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        self.fx.ok("machine", "add", "LINAC-A", user="phil")

    def test_deactivate_keeps_user_and_blocks_acting(self):
        self.fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        self.fx.ok("user", "deactivate", "tina")
        users = {u["login"]: u for u in self.fx.json("user", "list")}
        self.assertFalse(users["tina"]["active"])
        # Refused (exit 4); the attempt itself is an audit row (docs/security.md).
        r = self.fx.run("user", "list", user="tina")
        self.assertEqual(r.returncode, 4, r.stderr)
        self.assertIn("deactivated", r.stderr)
        self.assertFailsUnchanged("user", "deactivate", "tina", expect_in="already deactivated")
        con = sqlite3.connect(self.fx.db)
        n = con.execute("SELECT count(*) FROM audit_log WHERE action = 'deactivate'").fetchone()[0]
        con.close()
        self.assertEqual(n, 1)

    def test_only_admin_manages_users(self):
        self.fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        self.fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        self.assertFailsUnchanged("user", "add", "x", "--name", "X", "--role", "therapist",
                                  user="phil", expect_code=4, expect_in="permission denied")
        self.assertFailsUnchanged("user", "deactivate", "otto", user="phil", expect_code=4)
        self.assertFailsUnchanged("user", "add", "x", "--name", "X", "--role", "therapist",
                                  user="otto", expect_code=4)

    def test_bad_input_writes_nothing(self):
        self.assertFailsUnchanged("user", "add", "bad login", "--name", "X", "--role", "therapist",
                                  expect_in="login 'bad login'")
        self.assertFailsUnchanged("user", "add", "x", "--name", "X", "--role", "surgeon",
                                  expect_in="role 'surgeon'")
        self.assertFailsUnchanged("user", "add", "x", "--role", "therapist", expect_in="--name")
        self.assertFailsUnchanged("user", "add", "admin", "--name", "Again", "--role", "admin",
                                  expect_code=2, expect_in="already exists")
        self.assertFailsUnchanged("user", "deactivate", "admin", expect_in="themselves")
        self.assertFailsUnchanged("user", "deactivate", "nobody", expect_in="unknown user 'nobody'")
        self.assertFailsUnchanged("user", "add", "x", "--name", "X", "--role", "therapist", "--bogus")

    def test_help(self):
        for sub in ("add", "list", "deactivate"):
            r = self.fx.ok("user", sub, "--help")
            self.assertIn("usage: fxledger user " + sub, r.stdout)
        self.assertIn("deactivate", self.fx.ok("user", "--help").stdout)


if __name__ == "__main__":
    main()
