"""The audit trail: every write appends a hash-chained row; 'verify' passes on
an untouched database and, after one audit row is edited behind the
program's back with the sqlite3 shell, fails naming that row. Triggers
refuse UPDATE and DELETE on measurements, calibrations, review events and
the audit log. Data are invented (review_scenario.py)."""
import hashlib
import json
import shutil
import sqlite3
import subprocess

from fxlcli import main
from review_scenario import ReviewCase

SQLITE3 = shutil.which("sqlite3") or "/usr/bin/sqlite3"


class AuditTest(ReviewCase):
    def setUp(self):
        super().setUp()
        self.res = self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 6.0), ("PA", 1.0))
        self.item = self.res["results"][0]["review_item_id"]
        self.fx.ok("queue", "ack", str(self.item), "--comment", "seen", user="ther")
        self.fx.ok("queue", "close", str(self.item), "--disposition", "set-up error", user="phys")
        self.fx.ok("queue", "comment", str(self.item), "therapists briefed", user="phys")

    def shell(self, sql):
        """Runs SQL in the sqlite3 shell on the test database (one session)."""
        return subprocess.run([SQLITE3, "-bail", self.fx.db], input=sql, capture_output=True,
                              text=True, timeout=30)

    def audit_rows(self):
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT id, action, entity FROM audit_log ORDER BY id").fetchall()
        con.close()
        return rows

    def test_untouched_database_verifies(self):
        out = self.fx.json("verify", user="aud")
        self.assertTrue(out["ok"])
        self.assertEqual(out["rows_checked"], len(self.audit_rows()))
        self.assertTrue(out["integrity_ok"])
        self.assertTrue(out["foreign_keys_ok"])
        self.assertNotIn("first_bad_row", out)
        self.assertIn("audit chain intact", self.fx.ok("verify", user="aud").stdout)

    def test_every_write_is_audited(self):
        actions = [(a, e) for _, a, e in self.audit_rows()]
        # The fraction's record, its review item, the acknowledgement and the close.
        self.assertIn(("open", "review_items"), actions)
        self.assertIn(("acknowledge", "review_events"), actions)
        self.assertIn(("close", "review_events"), actions)
        self.assertTrue(any(e == "fractions" or e == "measurements" for _, e in actions), actions)

    def test_edited_audit_row_is_named(self):
        rows = self.audit_rows()
        target = [r for r in rows if r[1] == "close"][0][0]
        self.assertLess(target, rows[-1][0])   # not the last row: the chain goes on after it
        # The trigger refuses the edit as such ...
        r = self.shell("UPDATE audit_log SET content = replace(content, 'set-up error', 'other') "
                       "WHERE id = %d;" % target)
        self.assertNotEqual(r.returncode, 0)
        self.assertIn("append-only", r.stderr)
        self.assertTrue(self.fx.json("verify")["ok"])
        # ... so the editor drops it first, in the same shell session.
        r = self.shell("DROP TRIGGER audit_log_no_update;"
                       "UPDATE audit_log SET content = replace(content, 'set-up error', 'other') "
                       "WHERE id = %d;" % target)
        self.assertEqual(r.returncode, 0, r.stderr)
        v = self.fx.run("--json", "verify", user="aud")
        self.assertEqual(v.returncode, 2)
        out = json.loads(v.stdout)
        self.assertFalse(out["ok"])
        self.assertEqual(out["first_bad_row"], target)
        self.assertEqual(out["rows_checked"], target - 1)
        self.assertIn("row %d" % target, out["error"])
        v = self.fx.run("verify", user="aud")
        self.assertEqual(v.returncode, 2)
        self.assertTrue(v.stderr.startswith("fxledger: error: verification failed: "
                                            "audit chain broken at row %d" % target), v.stderr)

    def test_recomputed_hash_still_breaks_the_next_row(self):
        # An editor who also recomputes the edited row's own hash with the
        # documented canonical form still breaks the chain at the next row.
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT id, at, user, action, entity, entity_id, content, prev_hash "
                           "FROM audit_log ORDER BY id").fetchall()
        con.close()
        target = rows[1]    # the first admin's creation
        content = target[6].replace("Test Admin", "Someone Else")
        self.assertNotEqual(content, target[6])
        text = "\n".join([target[7], str(target[0]), target[1], target[2], target[3], target[4],
                          "" if target[5] is None else str(target[5]), content])
        new_hash = hashlib.sha256(text.encode()).hexdigest()
        r = self.shell("DROP TRIGGER audit_log_no_update;"
                       "UPDATE audit_log SET content = '%s', hash = '%s' WHERE id = %d;"
                       % (content.replace("'", "''"), new_hash, target[0]))
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(self.fx.run("--json", "verify").stdout)
        self.assertEqual(out["first_bad_row"], target[0] + 1)

    def test_deleted_audit_row_is_named(self):
        rows = self.audit_rows()
        target = rows[len(rows) // 2][0]
        r = self.shell("DELETE FROM audit_log WHERE id = %d;" % target)
        self.assertNotEqual(r.returncode, 0)
        self.assertIn("append-only", r.stderr)
        r = self.shell("DROP TRIGGER audit_log_no_delete; DELETE FROM audit_log WHERE id = %d;" % target)
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(self.fx.run("--json", "verify").stdout)
        self.assertFalse(out["ok"])
        self.assertEqual(out["first_bad_row"], target)
        self.assertIn("missing", out["error"])

    def test_triggers_refuse_update_and_delete(self):
        m = self.res["results"][0]["measurement_id"]
        cases = [
            ("measurements", "UPDATE measurements SET reading = 1 WHERE id = %d" % m),
            ("measurements", "DELETE FROM measurements WHERE id = %d" % m),
            ("calibrations", "UPDATE calibrations SET factor_cgy_per_unit = 11"),
            ("calibrations", "DELETE FROM calibrations"),
            ("review events", "UPDATE review_events SET comment = 'x'"),
            ("review events", "DELETE FROM review_events"),
            ("the audit log", "UPDATE audit_log SET user = 'x' WHERE id = 1"),
            ("the audit log", "DELETE FROM audit_log WHERE id = 1"),
        ]
        for what, sql in cases:
            before = self.fx.digest()
            r = self.shell(sql + ";")
            self.assertNotEqual(r.returncode, 0, sql)
            self.assertIn("append-only", r.stderr, sql)
            self.assertIn(what, r.stderr, sql)
            self.assertEqual(self.fx.digest(), before, sql)
        self.assertTrue(self.fx.json("verify")["ok"])

    def test_foreign_key_damage_is_reported(self):
        # A review event pointing at an item that does not exist, slipped in
        # with foreign keys off (the sqlite3 shell's default).
        r = self.shell("INSERT INTO review_events (item_id, kind, user_id, created_at) "
                       "VALUES (9999, 'comment', 1, '2026-11-02T10:00:00Z');")
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(self.fx.run("--json", "verify").stdout)
        self.assertFalse(out["ok"])
        self.assertFalse(out["foreign_keys_ok"])
        self.assertIn("review_events", out["error"])


if __name__ == "__main__":
    main()
