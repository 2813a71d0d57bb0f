"""Tampering with the record behind the program's back (issue 10): each
attack is made on a fresh copy of one scenario database with Python's
sqlite3 module (the same SQLite library as the sqlite3 shell), dropping and
re-creating the guard triggers where the attack needs it, and `verify` must
fail naming the row or object, while it passes on the untouched copy. The
guards themselves refuse each change on the live database. The external
anchor (`verify --anchor`) detects a consistent rewrite of the whole chain
and a truncation, which nothing inside the file can (docs/audit.md).

The scenario is review_scenario.py's invented department (set up once for
the whole file, each user logged in once) plus an invented correction table,
a changed setting, a closed review item and a last fraction. The canonical
forms recomputed here (row hash, seals) are those of docs/audit.md; SHA-256
is Python's hashlib (FIPS 180-4)."""
import hashlib
import json
import os
import re
import shutil
import sqlite3
import unittest

from fxlcli import Fxl
import review_scenario as rs

ANCHOR = re.compile(r"^fxledger-anchor rows=(\d+) at=(\S+) head=([0-9a-f]{64})$")

# Invented correction table for D-1 in 6X: 1.000 at the reference 10 cm, so
# the scenario's results stay those of review_scenario.py.
TABLE = {
    "format": "fxledger-corrections", "version": 1, "detector": "D-1",
    "source": "invented test data, not measured",
    "tables": [{"machine": "LINAC1", "beam": "6X", "parameter": "field_size",
                "effective_from": "2026-09-01",
                "points": [{"x": 5.0, "factor": 1.012}, {"x": 10.0, "factor": 1.000},
                           {"x": 20.0, "factor": 0.991}]}],
}


class Scenario:
    """Builds the scenario once; copies of its database are the victims."""
    fx = None
    pristine = None
    anchor = None
    last_fraction_audit = None

    @classmethod
    def build(cls):
        if cls.fx:
            return cls
        case = rs.ReviewCase("run")
        case.run = lambda *a: None
        case.setUp()
        fx = cls.fx = case.fx
        res = case.record("P-1", "2026-11-02T08:00:00Z", ("AP", 9.0), ("PA", 1.0))
        item = [r for r in res["results"] if r.get("review_item_id")][0]["review_item_id"]
        cls.item = item
        fx.ok("queue", "ack", str(item), "--comment", "seen", user="ther")
        fx.ok("queue", "close", str(item), "--disposition", "set-up error", user="phys")
        fx.ok("setting", "set", "skin_temp_c", "33", user="phys")
        fx.ok("table", "load", fx.write("table.json", json.dumps(TABLE)), user="phys")
        fx.ok("patient", "correct", "P-2", "--family", "Sampel", "--reason", "typo at admission")
        fx.ok("detector", "add", "D-2", "--label", "Diode 2", "--kind", "photon_diode",
              "--temp-coeff", "0.003")
        # The anchor a physicist keeps before the last fraction.
        r = fx.run("verify", "--anchor", user="aud")
        assert r.returncode == 0, r.stderr
        cls.anchor_before_last = r.stdout.strip()
        cls.last_fraction_audit = cls.max_audit() + 1
        # outside tolerance: its review item stays open
        case.record("P-2", "2026-11-03T08:00:00Z", ("AP", 6.0), ("PA", -1.0))
        fx.now = "2026-11-03T09:00:00Z"
        for login in ("admin", "ther", "phys", "aud"):
            fx.ensure_session(login)
        r = fx.run("verify", "--anchor", user="aud")
        assert r.returncode == 0, r.stderr
        cls.anchor = r.stdout.strip()
        cls.pristine = fx.path("pristine.db")
        src = sqlite3.connect(fx.db)
        dst = sqlite3.connect(cls.pristine)
        src.backup(dst)
        dst.close()
        src.close()
        return cls

    @classmethod
    def max_audit(cls):
        con = sqlite3.connect(cls.fx.db)
        n = con.execute("SELECT max(id) FROM audit_log").fetchone()[0]
        con.close()
        return n


def trigger_sql(con, name):
    return con.execute("SELECT sql FROM sqlite_master WHERE type = 'trigger' AND name = ?",
                       (name,)).fetchone()[0]


def row_hash(prev, row):
    """docs/audit.md: the fields joined by newlines, "\\nseal:" and the seal
    digest appended when the row seals rows."""
    rid, at, user, action, entity, eid, content, seal = row
    text = "%s\n%d\n%s\n%s\n%s\n%s\n%s\n%s" % (prev, rid, at, user, action, entity,
                                               "" if eid is None else eid, content)
    if seal:
        text += "\nseal:" + seal
    return hashlib.sha256(text.encode()).hexdigest()


def seal_digest(con, audit_id):
    rows = con.execute("SELECT tbl, row_id, sha256 FROM row_seals WHERE audit_id = ? "
                       "ORDER BY tbl, row_id", (audit_id,)).fetchall()
    if not rows:
        return None
    return hashlib.sha256("".join("%s %d %s\n" % r for r in rows).encode()).hexdigest()


def canonical(con, tbl, rowid):
    """The row's canonical content, computed by SQLite as fxledger does."""
    cols = [r[1] for r in con.execute("SELECT cid, name FROM pragma_table_info(?) ORDER BY cid", (tbl,))]
    expr = "json_patch('{}', json_object(%s))" % ", ".join("'%s', t.\"%s\"" % (c, c) for c in cols)
    text = con.execute("SELECT %s FROM \"%s\" t WHERE t.rowid = ?" % (expr, tbl), (rowid,)).fetchone()[0]
    return hashlib.sha256(("%s\n%d\n%s" % (tbl, rowid, text)).encode()).hexdigest()


def rehash_from(con, first_id):
    """Recomputes every seal digest and hash from audit row first_id to the
    end, as an attacker who knows docs/audit.md would."""
    con.execute("DROP TRIGGER audit_log_no_update")
    prev = con.execute("SELECT hash FROM audit_log WHERE id = ?", (first_id - 1,)).fetchone()[0]
    for row in con.execute("SELECT id, at, user, action, entity, entity_id, content, seal "
                           "FROM audit_log WHERE id >= ? ORDER BY id", (first_id,)).fetchall():
        row = list(row)
        if row[7] is not None:
            row[7] = seal_digest(con, row[0])
        h = row_hash(prev, row)
        con.execute("UPDATE audit_log SET prev_hash = ?, hash = ?, seal = ? WHERE id = ?",
                    (prev, h, row[7], row[0]))
        prev = h
    con.execute("CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log\n"
                "BEGIN SELECT RAISE(ABORT, 'the audit log is append-only'); END")


class TamperTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.s = Scenario.build()
        cls.fx = cls.s.fx

    @classmethod
    def tearDownClass(cls):
        if Scenario.fx:
            Scenario.fx.close()
            Scenario.fx = None

    def setUp(self):
        # A fresh copy of the scenario at the path its sessions name.
        for ext in ("", "-wal", "-shm"):
            if os.path.exists(self.fx.db + ext):
                os.remove(self.fx.db + ext)
        shutil.copyfile(self.s.pristine, self.fx.db)

    def attack(self, *sql, drop=(), script=None):
        """Runs the attack: drops the named triggers, runs sql (or the
        script function), and re-creates the triggers as they were."""
        con = sqlite3.connect(self.fx.db, isolation_level=None)
        saved = [trigger_sql(con, t) for t in drop]
        con.execute("BEGIN")
        for t in drop:
            con.execute("DROP TRIGGER %s" % t)
        for q in sql:
            con.execute(q)
        if script:
            script(con)
        for q in saved:
            con.execute(q)
        con.execute("COMMIT")
        con.close()

    def verify(self, *args):
        r = self.fx.run("--json", "verify", *args, user="aud")
        return r.returncode, json.loads(r.stdout), r

    def assertFailsNaming(self, *needles, args=()):
        code, out, r = self.verify(*args)
        self.assertEqual(code, 2, r.stdout)
        self.assertFalse(out["ok"])
        text = json.dumps(out)
        for n in needles:
            self.assertIn(n, text)
        plain = self.fx.run("verify", *args, user="aud")
        self.assertEqual(plain.returncode, 2)
        self.assertIn("verification failed", plain.stderr)
        return out

    # ---- the untouched record -------------------------------------------

    def test_untouched_copy_verifies(self):
        code, out, r = self.verify()
        self.assertEqual(code, 0, r.stdout)
        self.assertTrue(out["ok"])
        self.assertEqual(out["record_problems"], [])
        self.assertGreater(out["record_rows_checked"], 30)
        self.assertGreater(out["seals_checked"], 30)
        # every table, index and trigger of sql/001..011
        self.assertGreater(out["schema_objects_checked"], 100)
        # every command sealed its rows under its own audit rows: none was
        # left for the extra 'seal' row a commit adds (store/seal.c)
        con = sqlite3.connect(self.fx.db)
        self.assertEqual(con.execute("SELECT count(*) FROM audit_log WHERE action = 'seal'").fetchone()[0], 0)
        unsealed = con.execute("SELECT count(*) FROM audit_log WHERE seal IS NULL AND entity IN "
                               "('measurements', 'fractions', 'plans', 'fields', 'calibrations') "
                               "AND action IN ('record', 'import', 'create')").fetchone()[0]
        con.close()
        self.assertEqual(unsealed, 0)
        for anchor in (self.s.anchor, self.s.anchor_before_last):
            code, out, r = self.verify("--anchor", anchor)
            self.assertEqual(code, 0, r.stdout)
            self.assertEqual(out["anchor_rows"], int(ANCHOR.match(anchor).group(1)))

    def test_anchor_line_format(self):
        m = ANCHOR.match(self.s.anchor)
        self.assertTrue(m, self.s.anchor)
        con = sqlite3.connect(self.fx.db)
        n, at, head = con.execute("SELECT id, at, hash FROM audit_log ORDER BY id DESC LIMIT 1").fetchone()
        con.close()
        self.assertEqual((int(m.group(1)), m.group(2), m.group(3)), (n, at, head))
        r = self.fx.run("verify", "--anchor", user="aud")
        self.assertEqual(r.stdout.strip(), self.s.anchor)   # one line, the same format
        bad = self.fx.run("verify", "--anchor", "fxledger-anchor rows=x", user="aud")
        self.assertEqual(bad.returncode, 1)
        self.assertIn("not an anchor line", bad.stderr)

    # ---- the guards refuse on the live database --------------------------

    def test_guards_refuse_every_change(self):
        con = sqlite3.connect(self.fx.db)
        attempts = [
            ("UPDATE measurements SET reading = 1 WHERE id = 1", "append-only"),
            ("DELETE FROM fractions", "append-only"),
            ("UPDATE users SET role = 'admin' WHERE login = 'ther'", "user deactivate"),
            ("UPDATE users SET active = 0 WHERE login = 'ther'", "user deactivate"),
            ("DELETE FROM users WHERE login = 'aud'", "never deleted"),
            ("UPDATE patients SET family_name = 'Renamed' WHERE mrn = 'P-1'", "recorded correction"),
            ("DELETE FROM patients WHERE mrn = 'P-1'", "never deleted"),
            ("UPDATE review_items SET status = 'open' WHERE id = %d" % self.s.item, "review event"),
            ("UPDATE review_items SET summary = 'x'", "review event"),
            ("DELETE FROM review_items", "never deleted"),
            ("UPDATE settings SET value = '40' WHERE key = 'skin_temp_c'", "setting set"),
            ("DELETE FROM settings WHERE key = 'skin_temp_c'", "never deleted"),
            ("UPDATE detectors SET temp_coeff_per_c = 0.01", "never edited"),
            ("DELETE FROM detectors WHERE serial = 'D-2'", "never deleted"),
            ("DELETE FROM detector_status", "append-only"),
            ("UPDATE machines SET sad_cm = 80", "never edited"),
            ("DELETE FROM machines", "never deleted"),
            ("UPDATE beams SET energy = 10", "never edited"),
            ("DELETE FROM beams", "never deleted"),
            ("UPDATE correction_tables SET source = 'x'", "versioned"),
            ("DELETE FROM correction_tables", "versioned"),
            ("DELETE FROM correction_points", "versioned"),
            ("UPDATE correction_points SET factor = 1.1", "versioned"),
            ("DELETE FROM plans", "immutable"),
            ("DELETE FROM fields", "immutable"),
            ("DELETE FROM threshold_sets", "versioned"),
            ("UPDATE row_seals SET sha256 = sha256", "append-only"),
            ("DELETE FROM row_seals", "append-only"),
            ("DELETE FROM audit_log", "append-only"),
        ]
        for sql, why in attempts:
            with self.subTest(sql=sql):
                with self.assertRaises(sqlite3.DatabaseError) as cm:
                    con.execute(sql)
                self.assertIn(why, str(cm.exception))
        # An audit row naming the change is not enough by itself: the
        # settings guard wants the newest audit row, with this key and value.
        con.close()
        code, out, r = self.verify()
        self.assertEqual(code, 0, r.stdout)

    # ---- attacks, each on its own copy ------------------------------------

    def test_measurement_rewritten_after_dropping_its_trigger(self):
        self.attack("UPDATE measurements SET reading = 21.0, deviation_pct = 5.0 WHERE id = 1",
                    drop=["measurements_no_update"])
        self.assertFailsNaming("measurements row 1 does not match its seal")

    def test_trigger_left_dropped(self):
        con = sqlite3.connect(self.fx.db)
        con.execute("DROP TRIGGER measurements_no_update")
        con.execute("DROP TRIGGER review_items_status_by_event")
        con.commit()
        con.close()
        self.assertFailsNaming("trigger 'measurements_no_update'", "missing")

    def test_trigger_replaced_by_a_harmless_one(self):
        def swap(con):
            con.execute("DROP TRIGGER users_deactivate_only")
            con.execute("CREATE TRIGGER users_deactivate_only BEFORE UPDATE ON users "
                        "WHEN 0 BEGIN SELECT 1; END")
        self.attack(script=swap)
        self.assertFailsNaming("trigger 'users_deactivate_only' differs")

    def test_table_added(self):
        self.attack("CREATE TABLE notes (x TEXT)")
        self.assertFailsNaming("table 'notes' is not part of the fxledger schema")

    def test_last_fraction_deleted_with_its_audit_rows(self):
        first = self.s.last_fraction_audit

        def cut(con):
            fr = con.execute("SELECT max(id) FROM fractions").fetchone()[0]
            items = [r[0] for r in con.execute(
                "SELECT id FROM review_items WHERE measurement_id IN "
                "(SELECT id FROM measurements WHERE fraction_id = ?)", (fr,))]
            for i in items:
                con.execute("DELETE FROM review_events WHERE item_id = ?", (i,))
                con.execute("DELETE FROM review_items WHERE id = ?", (i,))
            con.execute("DELETE FROM measurements WHERE fraction_id = ?", (fr,))
            con.execute("DELETE FROM fraction_marks WHERE fraction_id = ?", (fr,))
            con.execute("DELETE FROM fractions WHERE id = ?", (fr,))
            con.execute("DELETE FROM audit_log WHERE id >= ?", (first,))
        self.attack(script=cut, drop=["fractions_no_delete", "measurements_no_delete",
                                      "audit_log_no_delete", "review_events_no_delete",
                                      "review_items_no_delete", "fraction_marks_no_delete"])
        out = self.assertFailsNaming("which does not exist: audit rows were removed", "fractions row 2")
        m = re.search(r"names audit row (\d+), which", json.dumps(out))
        self.assertGreaterEqual(int(m.group(1)), first)

    def test_truncation_with_its_seals_needs_the_anchor(self):
        """The attacker removes the seals too: the file is consistent again,
        and only the anchor taken after the last fraction tells."""
        first = self.s.last_fraction_audit

        def cut(con):
            fr = con.execute("SELECT max(id) FROM fractions").fetchone()[0]
            for (i,) in con.execute("SELECT id FROM review_items WHERE measurement_id IN "
                                    "(SELECT id FROM measurements WHERE fraction_id = ?)", (fr,)).fetchall():
                con.execute("DELETE FROM review_events WHERE item_id = ?", (i,))
                con.execute("DELETE FROM review_items WHERE id = ?", (i,))
            con.execute("DELETE FROM measurements WHERE fraction_id = ?", (fr,))
            con.execute("DELETE FROM fraction_marks WHERE fraction_id = ?", (fr,))
            con.execute("DELETE FROM fractions WHERE id = ?", (fr,))
            con.execute("DELETE FROM row_seals WHERE audit_id >= ?", (first,))
            con.execute("DELETE FROM audit_log WHERE id >= ?", (first,))
            # the rules' kept state counts the removed results (verify would
            # tell); derived rows the rules rebuild when they are missing
            con.execute("DELETE FROM drift_charts")
            con.execute("DELETE FROM dose_since_calibration")
        self.attack(script=cut, drop=["fractions_no_delete", "measurements_no_delete",
                                      "audit_log_no_delete", "row_seals_no_delete",
                                      "fraction_marks_no_delete", "review_events_no_delete",
                                      "review_items_no_delete"])
        # the limit docs/audit.md states: without an anchor this passes
        code, out, r = self.verify()
        self.assertEqual(code, 0, out)
        out = self.assertFailsNaming("ends at row %d" % (first - 1), "truncated",
                                     args=("--anchor", self.s.anchor))
        # the earlier anchor still holds: nothing before it was touched
        code, out, r = self.verify("--anchor", self.s.anchor_before_last)
        self.assertEqual(code, 0, out)

    def test_chain_rehashed_from_an_edited_row(self):
        """The measurement and its audit row edited, the chain re-hashed
        from there to the end; the seal still names the measurement."""
        con = sqlite3.connect(self.fx.db)
        aid = con.execute("SELECT id FROM audit_log WHERE action = 'record' AND entity = 'measurements' "
                          "AND entity_id = 1").fetchone()[0]
        con.close()

        def edit(con):
            con.execute("UPDATE measurements SET reading = 21.0 WHERE id = 1")
            con.execute("DROP TRIGGER audit_log_no_update")
            con.execute("UPDATE audit_log SET content = replace(content, '\"reading\":21.8', "
                        "'\"reading\":21') WHERE id = ?", (aid,))
            con.execute("CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log\n"
                        "BEGIN SELECT RAISE(ABORT, 'the audit log is append-only'); END")
            rehash_from(con, aid)
        self.attack(script=edit, drop=["measurements_no_update"])
        self.assertFailsNaming("measurements row 1 does not match its seal in audit row %d" % aid)

    def test_whole_chain_rewritten_needs_the_anchor(self):
        """The measurement, its seal, the seal digests and every hash after
        it rewritten consistently: only the anchor tells."""
        con = sqlite3.connect(self.fx.db)
        aid = con.execute("SELECT audit_id FROM row_seals WHERE tbl = 'measurements' AND row_id = 1 "
                          "ORDER BY audit_id DESC LIMIT 1").fetchone()[0]
        con.close()

        def rewrite(con):
            con.execute("UPDATE measurements SET reading = 21.0 WHERE id = 1")
            con.execute("UPDATE row_seals SET sha256 = ? WHERE tbl = 'measurements' AND row_id = 1 "
                        "AND audit_id = ?", (canonical(con, "measurements", 1), aid))
            rehash_from(con, aid)
        self.attack(script=rewrite, drop=["measurements_no_update", "row_seals_no_update"])
        code, out, r = self.verify()
        self.assertEqual(code, 0, out)    # the limit docs/audit.md states
        self.assertFailsNaming("audit row %s is not the row the anchor" % ANCHOR.match(self.s.anchor).group(1),
                               "rewritten", args=("--anchor", self.s.anchor))
        self.assertFailsNaming("rewritten", args=("--anchor", self.s.anchor_before_last))

    def test_forged_audit_rows_appended(self):
        def forge(con):
            last = con.execute("SELECT id, hash FROM audit_log ORDER BY id DESC LIMIT 1").fetchone()
            rows = [
                (last[0] + 1, "2026-11-03T10:00:00Z", "phys", "set", "settings", None,
                 '{"key":"implausible_pct","value":"90"}', None),
                (last[0] + 2, "2026-11-03T10:01:00Z", "phys", "close", "review_events", 99,
                 '{"item_id":1,"kind":"close"}', None),
            ]
            prev = last[1]
            for row in rows:
                h = row_hash(prev, row)
                con.execute("INSERT INTO audit_log (id, at, user, action, entity, entity_id, content, "
                            "prev_hash, hash, seal) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                            row[:7] + (prev, h, row[7]))
                prev = h
        self.attack(script=forge)
        self.assertFailsNaming("setting 'implausible_pct'", "review_events row 99, which does not exist")

    def test_whole_audit_log_deleted(self):
        self.attack("DELETE FROM audit_log", drop=["audit_log_no_delete"])
        self.assertFailsNaming("signing_keys row 1 names audit row 3, which does not exist",
                               "users row 1 ('admin') was not created by any audit row",
                               "setting 'alert_command' was never set")

    def test_user_promoted(self):
        self.attack("UPDATE users SET role = 'admin' WHERE login = 'ther'", drop=["users_deactivate_only"])
        self.assertFailsNaming("('ther') has the role 'admin'")

    def test_user_forged(self):
        self.attack("INSERT INTO users (login, full_name, role, created_at) VALUES "
                    "('mallory', 'Invented Intruder', 'admin', '2026-11-03T10:00:00Z')")
        self.assertFailsNaming("('mallory') was not created by any audit row")

    def test_patient_renamed(self):
        self.attack("UPDATE patients SET family_name = 'Renamed' WHERE mrn = 'P-1'",
                    drop=["patients_update_needs_correction"])
        self.assertFailsNaming("patients row 1 does not match its seal")

    def test_item_closed_with_no_event(self):
        con = sqlite3.connect(self.fx.db)
        item = con.execute("SELECT id FROM review_items WHERE status = 'open' ORDER BY id LIMIT 1").fetchone()[0]
        con.close()
        self.attack("UPDATE review_items SET status = 'closed' WHERE id = %d" % item,
                    drop=["review_items_status_by_event"])
        self.assertFailsNaming("review_items row %d does not match its seal" % item,
                               "review item #%d is 'closed' but its latest event" % item)

    def test_setting_changed(self):
        self.attack("UPDATE settings SET value = '40' WHERE key = 'skin_temp_c'",
                    drop=["settings_set_by_command"])
        self.assertFailsNaming("setting 'skin_temp_c' is '40'")

    def test_detector_coefficient_changed(self):
        self.attack("UPDATE detectors SET temp_coeff_per_c = 0.01 WHERE serial = 'D-2'",
                    drop=["detectors_no_update"])
        con = sqlite3.connect(self.fx.db)
        did = con.execute("SELECT id FROM detectors WHERE serial = 'D-2'").fetchone()[0]
        con.close()
        self.assertFailsNaming("detectors row %d does not match its seal" % did)

    def test_correction_point_deleted(self):
        self.attack("DELETE FROM correction_points WHERE x = 20.0", drop=["correction_points_no_delete"])
        self.assertFailsNaming("correction_tables row 1 does not match its seal")

    def test_review_item_deleted(self):
        item = self.s.item

        def delete(con):
            con.execute("DELETE FROM signatures WHERE entity = 'review_events' AND entity_id IN "
                        "(SELECT id FROM review_events WHERE item_id = ?)", (item,))
            con.execute("DELETE FROM review_events WHERE item_id = ?", (item,))
            con.execute("DELETE FROM review_items WHERE id = ?", (item,))
        self.attack(script=delete, drop=["review_items_no_delete", "review_events_no_delete",
                                         "signatures_no_delete"])
        self.assertFailsNaming("review_items row %d, sealed by audit row" % item, "is missing")


if __name__ == "__main__":
    unittest.main(verbosity=2)
