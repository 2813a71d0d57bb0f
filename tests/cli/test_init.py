"""fxledger init, verify and the refusal of files that are not ours."""
import os
import sqlite3
import subprocess
import unittest

from fxlcli import Fxl, FxlTestCase, main


class InitTest(FxlTestCase):
    def test_init_creates_schema_and_verifies(self):
        out = self.fx.json("verify")
        self.assertTrue(out["ok"])
        self.assertGreaterEqual(out["rows_checked"], 2)
        con = sqlite3.connect(self.fx.db)
        self.assertEqual(con.execute("PRAGMA application_id").fetchone()[0], 0x46584C47)
        self.assertEqual(con.execute("PRAGMA journal_mode").fetchone()[0], "wal")
        con.close()

    def test_init_refuses_existing_file(self):
        self.assertFailsUnchanged("init", "--department", "X", "--admin-name", "Y",
                                  expect_in="already exists")

    def test_not_our_file(self):
        p = self.fx.write("other.db", "this is not a database\n" * 10)
        r = subprocess.run([os.environ.get("FXLEDGER_BIN", "build/fxledger"), "--db", p,
                            "--user", "admin", "verify"], capture_output=True, text=True)
        self.assertEqual(r.returncode, 3)
        self.assertIn("not an fxledger database", r.stderr)

    def test_foreign_sqlite_file_refused(self):
        p = self.fx.path("foreign.db")
        con = sqlite3.connect(p)
        con.execute("CREATE TABLE t (x)")
        con.commit()
        con.close()
        r = subprocess.run([os.environ.get("FXLEDGER_BIN", "build/fxledger"), "--db", p,
                            "--user", "admin", "verify"], capture_output=True, text=True)
        self.assertEqual(r.returncode, 3)
        self.assertIn("not an fxledger database", r.stderr)

    def test_newer_schema_refused_and_unchanged(self):
        con = sqlite3.connect(self.fx.db)
        con.execute("PRAGMA user_version = 999")
        con.commit()
        con.close()
        r = self.assertFailsUnchanged("verify", expect_code=3)
        self.assertIn("newer", r.stderr)

    def test_unknown_user_refused(self):
        # No such account: refused with the same message as a wrong password
        # (no user enumeration), and the attempt is an audit row.
        r = self.fx.run("verify", user="nobody", password="an invented guess")
        self.assertEqual(r.returncode, 4, r.stderr)
        self.assertIn("login failed: unknown login or wrong password", r.stderr)
        con = sqlite3.connect(self.fx.db)
        n = con.execute("SELECT count(*) FROM audit_log WHERE action = 'login_failed' "
                        "AND json_extract(content, '$.login') = 'nobody'").fetchone()[0]
        con.close()
        self.assertEqual(n, 1)
        # With no password at all nothing is tried and nothing written.
        self.assertFailsUnchanged("verify", user="nobody", password=False, expect_code=4)

    def test_unknown_command_is_usage_error(self):
        r = self.fx.run("frobnicate")
        self.assertEqual(r.returncode, 1)

    def test_help_lists_commands(self):
        r = self.fx.ok("--help")
        for name in ("init", "record", "detector", "plan", "levels", "verify"):
            self.assertIn(name, r.stdout)
        self.assertIn("qualified", r.stdout)


if __name__ == "__main__":
    main()
