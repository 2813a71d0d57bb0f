"""The restore drill (docs/deployment.md): backups taken while another
process keeps logging fractions, each restored into a new file with
'fxledger restore', verified (audit chain, integrity, signatures) and
described; the counts and the anchor line are checked against the backup
file read independently with Python's sqlite3 module (the reference reader,
Debian's python3). The backup file itself must come out byte-for-byte
unchanged, with no -wal or -shm left beside it. A tampered backup fails the
drill and leaves no copy. The scheduled backup script with rotation
(deploy/fxledger-scheduled-backup) logs in as an auditor through a password
file. Data are invented (review_scenario.py)."""
import hashlib
import json
import os
import sqlite3
import subprocess
import threading
import time

from fxlcli import SRC, main
from review_scenario import ReviewCase, reading_for

SCRIPT = os.path.join(SRC, "deploy", "fxledger-scheduled-backup")


def sha256_file(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def read_backup(path):
    """What the backup holds, read with Python's sqlite3 (read-only URI)."""
    con = sqlite3.connect("file:%s?mode=ro&immutable=1" % path, uri=True)
    q = lambda sql: con.execute(sql).fetchone()[0]
    out = {
        "audit_rows": q("SELECT count(*) FROM audit_log"),
        "patients": q("SELECT count(*) FROM patients"),
        "plans": q("SELECT count(*) FROM plans"),
        "fractions": q("SELECT count(*) FROM fractions"),
        "measurements": q("SELECT count(*) FROM measurements"),
        "users": q("SELECT count(*) FROM users"),
        "detectors": q("SELECT count(*) FROM detectors"),
        "review_items": q("SELECT count(*) FROM review_items"),
        "signatures": q("SELECT count(*) FROM signatures"),
        "head": con.execute("SELECT id, at, hash FROM audit_log ORDER BY id DESC LIMIT 1").fetchone(),
    }
    con.close()
    return out


class RestoreDrillTest(ReviewCase):
    def restore(self, backup, dest):
        r = self.fx.run("--json", "restore", backup, dest, login=False, password=False)
        return r, json.loads(r.stdout) if r.stdout.strip() else None

    def test_backup_restore_verify_while_logging(self):
        self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 6.0), ("PA", 0.0))   # opens a review item
        errors, results = [], []

        def writer():
            # 12 fractions, one process each, as a therapist logs them.
            for n in range(1, 13):
                mrn = "P-1" if n % 2 else "P-2"
                at = "2026-11-%02dT08:00:00Z" % (n // 2 + 3)
                r = self.fx.run("record", "--patient", mrn, "--at", at, "--field", "AP",
                                "--detector", "D-1", "--reading", reading_for(1.0),
                                user="ther", now="2026-12-01T09:00:00Z")
                results.append(r.returncode)
                if r.returncode not in (0, 10, 11, 12):
                    errors.append(r.stderr)

        self.fx.ensure_session("phys", "2026-12-01T09:00:00Z")
        self.fx.ensure_session("ther", "2026-12-01T09:00:00Z")
        # The auditor's own password (not the one-time one) is in the copies.
        self.fx.ensure_session("aud", "2026-12-01T09:00:00Z")
        # The anchor the auditor keeps, taken before the logging starts.
        a = self.fx.run("verify", "--anchor", user="aud", now="2026-12-01T09:00:00Z")
        self.assertEqual(a.returncode, 0, a.stderr)
        kept_anchor = a.stdout.strip()
        self.assertTrue(kept_anchor.startswith("fxledger-anchor rows="), kept_anchor)
        t = threading.Thread(target=writer)
        t.start()
        drills = []
        i = 0
        while t.is_alive() or i < 2:
            backup = self.fx.path("backup-%d.db" % i)
            b = self.fx.run("backup", backup, user="phys", now="2026-12-01T09:00:00Z")
            self.assertEqual(b.returncode, 0, b.stderr)
            before = sha256_file(backup)
            dest = self.fx.path("restored-%d.db" % i)
            r, out = self.restore(backup, dest)
            self.assertEqual(r.returncode, 0, r.stderr)
            drills.append((backup, before, dest, out))
            i += 1
        t.join()
        self.assertEqual(errors, [])
        self.assertEqual(len(results), 12)
        # One more after the logging ended: it must hold every fraction.
        backup = self.fx.path("backup-last.db")
        self.assertEqual(self.fx.run("backup", backup, user="phys", now="2026-12-01T09:00:00Z").returncode, 0)
        before = sha256_file(backup)
        r = self.fx.run("--json", "restore", "--anchor", kept_anchor, backup, self.fx.path("restored-last.db"),
                        login=False, password=False)
        self.assertEqual(r.returncode, 0, r.stderr)
        out = json.loads(r.stdout)
        self.assertTrue(out["anchor_given"])
        self.assertEqual(out["anchor_rows"], int(kept_anchor.split("rows=")[1].split()[0]))
        drills.append((backup, before, self.fx.path("restored-last.db"), out))
        # An anchor the copy does not hold (its head changed): the drill fails
        # and leaves no copy.
        head = kept_anchor.rsplit("head=", 1)[1]
        forged = kept_anchor[:-len(head)] + ("0" if head[0] != "0" else "1") + head[1:]
        dest = self.fx.path("restored-forged.db")
        r = self.fx.run("--json", "restore", "--anchor", forged, backup, dest, login=False, password=False)
        self.assertEqual(r.returncode, 2, r.stdout + r.stderr)
        self.assertFalse(json.loads(r.stdout)["ok"])
        self.assertNotEqual(json.loads(r.stdout)["record_problems"], [])
        self.assertFalse(os.path.exists(dest))
        # A line that is no anchor at all: usage error, no copy.
        r = self.fx.run("restore", "--anchor", "not an anchor", backup, dest, login=False, password=False)
        self.assertEqual(r.returncode, 1, r.stderr)
        self.assertFalse(os.path.exists(dest))

        for backup, before, dest, out in drills:
            # The backup is untouched and nothing was created beside it.
            self.assertEqual(sha256_file(backup), before)
            self.assertFalse(os.path.exists(backup + "-wal"))
            self.assertFalse(os.path.exists(backup + "-shm"))
            ref = read_backup(backup)
            self.assertTrue(out["ok"])
            self.assertTrue(out["kept"])
            self.assertTrue(out["chain_ok"] and out["integrity_ok"] and out["foreign_keys_ok"])
            self.assertTrue(out["signatures_ok"])
            self.assertEqual(out["record_problems"], [])
            self.assertGreater(out["seals_checked"], 0)
            self.assertGreater(out["signatures_checked"], 0)     # the plan imports are signed
            self.assertEqual(out["rows_checked"], ref["audit_rows"])
            for k in ("audit_rows", "patients", "plans", "fractions", "measurements", "users",
                      "detectors", "review_items", "signatures"):
                self.assertEqual(out["holds"][k], ref[k], k)
            # One snapshot: every fraction has its measurements (1 AP each, 2 for the first).
            self.assertEqual(out["holds"]["measurements"], out["holds"]["fractions"] + 1)
            self.assertEqual(out["holds"]["department"], "Invented Test Department")
            # The anchor line (fxl/audit.h) names the backup's last audit row.
            rows, at, head = ref["head"]
            self.assertEqual(out["anchor"], "fxledger-anchor rows=%d at=%s head=%s" % (rows, at, head))
            self.assertEqual(oct(os.stat(dest).st_mode & 0o777), "0o600")
            # The restored copy is a working database: an auditor logs in and verifies it.
            v = self.fx.run("--db", dest, "--json", "verify", user="aud")
            self.assertEqual(v.returncode, 0, v.stderr)
            self.assertTrue(json.loads(v.stdout)["ok"])
        # Backups in flight saw some of the fractions; the one after saw all.
        self.assertEqual(drills[-1][3]["holds"]["fractions"], 13)
        self.assertTrue(self.fx.json("verify")["ok"])

        # Text output: the report a person reads.
        r = self.fx.run("restore", drills[0][0], self.fx.path("again.db"), login=False, password=False)
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertIn("audit chain intact", r.stdout)
        self.assertIn("fxledger-anchor rows=", r.stdout)
        self.assertIn("the backup was not changed", r.stdout)

    def test_tampered_backup_fails_and_leaves_no_copy(self):
        self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 0.0))
        backup = self.fx.path("backup.db")
        self.fx.ok("backup", backup, user="phys")
        # Rewrite one audit row by hand, as someone with the file could
        # (dropping the append-only trigger first).
        con = sqlite3.connect(backup)
        con.execute("DROP TRIGGER audit_log_no_update")
        con.execute("UPDATE audit_log SET content = replace(content, 'P-1', 'P-9') WHERE id = "
                    "(SELECT max(id) FROM audit_log WHERE content LIKE '%P-1%')")
        con.commit()
        con.close()
        before = sha256_file(backup)
        dest = self.fx.path("restored.db")
        r, out = self.restore(backup, dest)
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertFalse(out["ok"])
        self.assertFalse(out["chain_ok"])
        self.assertGreater(out["first_bad_row"], 0)
        self.assertFalse(os.path.exists(dest))
        self.assertFalse(any(f.startswith("restored.db") for f in os.listdir(self.fx.dir)))
        self.assertEqual(sha256_file(backup), before)
        r = self.fx.run("restore", backup, dest, login=False, password=False)
        self.assertEqual(r.returncode, 2)
        self.assertIn("failed verification", r.stderr)
        self.assertIn("was removed", r.stderr)

    def test_refusals(self):
        backup = self.fx.path("backup.db")
        self.fx.ok("backup", backup, user="phys")
        existing = self.fx.write("existing.db", "keep me\n")
        r, _ = self.restore(backup, existing)
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn("already exists", r.stderr)
        with open(existing) as f:
            self.assertEqual(f.read(), "keep me\n")
        r, _ = self.restore(existing, self.fx.path("x.db"))
        self.assertEqual(r.returncode, 3, r.stderr)
        self.assertIn("is not an fxledger database", r.stderr)
        # A -wal left beside the new name (its database file moved away
        # without it) would be replayed into the copy: refused, nothing made.
        stale = self.fx.path("gone.db-wal")
        with open(stale, "wb") as f:
            f.write(b"rows of another database\n")
        r, _ = self.restore(backup, self.fx.path("gone.db"))
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn("gone.db-wal' lies beside", r.stderr)
        self.assertFalse(os.path.exists(self.fx.path("gone.db")))
        with open(stale, "rb") as f:
            self.assertEqual(f.read(), b"rows of another database\n")
        self.assertFalse(os.path.exists(self.fx.path("x.db")))
        r, _ = self.restore(self.fx.path("missing.db"), self.fx.path("x.db"))
        self.assertEqual(r.returncode, 2, r.stderr)   # a missing input file is a data error (issue 10)
        self.assertIn("No such file", r.stderr)
        r = self.fx.run("restore", backup, login=False, password=False)
        self.assertEqual(r.returncode, 1)

    def test_scheduled_backup_rotates_and_logs_in_as_auditor(self):
        self.fx.ensure_session("aud")
        bdir = self.fx.path("backups")
        os.mkdir(bdir, 0o700)
        stranger = os.path.join(bdir, "notes.txt")
        with open(stranger, "w") as f:
            f.write("not a backup\n")
        pw = self.fx.path("backup.password")
        with open(pw, "w") as f:
            f.write(self.fx.passwords["aud"] + "\n")
        os.chmod(pw, 0o600)
        env = self.fx.env("aud", extra={
            "FXLEDGER_BIN": self.fx.bin, "FXLEDGER_DB": self.fx.db, "FXLEDGER_BACKUP_DIR": bdir,
            "FXLEDGER_BACKUP_KEEP": "2", "FXLEDGER_BACKUP_USER": "aud",
            "FXLEDGER_BACKUP_PASSWORD_FILE": pw})
        # No session file: the password file alone must authenticate.
        env["XDG_STATE_HOME"] = self.fx.path("no-state")
        names = []
        for n in range(3):
            if n:
                time.sleep(1.05)      # the names carry the UTC second
            r = subprocess.run(["sh", SCRIPT], capture_output=True, text=True, env=env, timeout=60)
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            names.append(sorted(f for f in os.listdir(bdir) if f.endswith(".db"))[-1])
        left = sorted(f for f in os.listdir(bdir) if f != "notes.txt")
        self.assertEqual(left, names[1:])             # the oldest was rotated away
        self.assertIn("removed the old backup " + names[0], r.stdout)
        self.assertTrue(os.path.exists(stranger))      # not a name the script gives
        con = sqlite3.connect(self.fx.db)
        who = con.execute("SELECT user FROM audit_log WHERE action = 'backup'").fetchall()
        con.close()
        self.assertEqual(who, [("aud",)] * 3)
        r, out = self.restore(os.path.join(bdir, names[-1]), self.fx.path("drill.db"))
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertTrue(out["ok"])
        # A wrong password: the script fails and writes no backup.
        with open(pw, "w") as f:
            f.write("Wrong-password-123\n")
        time.sleep(1.05)
        r = subprocess.run(["sh", SCRIPT], capture_output=True, text=True, env=env, timeout=60)
        self.assertEqual(r.returncode, 4, r.stderr)
        self.assertEqual(sorted(f for f in os.listdir(bdir) if f != "notes.txt"), names[1:])
        # An unusable keep count is refused before anything runs.
        env["FXLEDGER_BACKUP_KEEP"] = "0"
        r = subprocess.run(["sh", SCRIPT], capture_output=True, text=True, env=env, timeout=60)
        self.assertEqual(r.returncode, 1)
        self.assertIn("FXLEDGER_BACKUP_KEEP", r.stderr)


if __name__ == "__main__":
    main()
