"""fxledger backup: an online copy through SQLite's backup API, made in steps
while another process keeps logging fractions; every copy opens and
verifies. Refuses to overwrite a file, and is for physicists, admins and
auditors (the scheduled backup logs in as an auditor: docs/deployment.md).
Data are invented (review_scenario.py)."""
import json
import os
import signal
import sqlite3
import subprocess
import threading
import time

from fxlcli import main, without_leak_check
from review_scenario import ReviewCase, reading_for


def pad_with_free_pages(db, blobs):
    """Makes the file larger without adding anything to the record: a
    table of random blobs, dropped again, leaves its pages on SQLite's
    freelist (fxledger never vacuums), and a backup copies every page of
    the file. The schema and every row stay those of fxledger, so the
    backup's own verify (chain, record, signatures) must pass."""
    con = sqlite3.connect(db)
    con.execute("CREATE TABLE test_padding (b BLOB)")
    con.executemany("INSERT INTO test_padding VALUES (?)", [(os.urandom(4000),) for _ in range(blobs)])
    con.commit()
    con.execute("DROP TABLE test_padding")
    con.commit()
    free = con.execute("PRAGMA freelist_count").fetchone()[0]
    con.close()
    assert free >= blobs, free


class BackupTest(ReviewCase):
    def count(self, db, table):
        con = sqlite3.connect(db)
        n = con.execute("SELECT count(*) FROM %s" % table).fetchone()[0]
        con.close()
        return n

    def test_backup_copy_verifies(self):
        self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 6.0), ("PA", 0.0))
        copy = self.fx.path("copy.db")
        # Logged in before the copy: their logins are audit rows, and the copy
        # holds their own passwords, not the one-time ones (fxlcli.py).
        self.fx.ensure_session("phys")
        self.fx.ensure_session("aud")
        audit_before = self.count(self.fx.db, "audit_log")
        out = self.fx.json("backup", copy, user="phys")
        self.assertEqual(out["file"], copy)
        self.assertTrue(out["quick_check_ok"])
        self.assertEqual(out["audit_rows"], audit_before)
        self.assertEqual(oct(os.stat(copy).st_mode & 0o777), "0o600")
        copied_audit_rows = self.count(copy, "audit_log")
        # No session on the copy: the password authenticates (an audit row in the copy).
        v = self.fx.run("--db", copy, "--json", "verify", user="aud")
        self.assertEqual(v.returncode, 0, v.stderr)
        self.assertTrue(json.loads(v.stdout)["ok"])
        self.assertEqual(self.count(copy, "measurements"), 2)
        # The backup itself is recorded in the source's audit log (after the copy).
        con = sqlite3.connect(self.fx.db)
        row = con.execute("SELECT user, action, entity, content FROM audit_log ORDER BY id DESC "
                          "LIMIT 1").fetchone()
        con.close()
        self.assertEqual(row[:3], ("phys", "backup", "database"))
        self.assertEqual(json.loads(row[3])["file"], copy)
        self.assertEqual(copied_audit_rows, audit_before)
        self.assertTrue(self.fx.json("verify")["ok"])

    def test_copy_that_fails_verify_is_not_kept(self):
        """The backup checks its copy as 'verify' does (chain, record proof,
        signatures; docs/deployment.md), not the audit chain alone: a table
        added outside fxledger passes the chain but not the record proof,
        so the copy is not kept and the backup exits 3."""
        con = sqlite3.connect(self.fx.db)
        con.execute("CREATE TABLE test_outsider (x)")
        con.commit()
        con.close()
        target = self.fx.path("outsider.db")
        r = self.fx.run("backup", target, user="phys")
        self.assertEqual(r.returncode, 3, r.stdout + r.stderr)
        self.assertIn("failed verification, not kept: schema: table 'test_outsider' is not part of "
                      "the fxledger schema", r.stderr)
        self.assertFalse(os.path.exists(target))
        self.assertEqual([n for n in os.listdir(self.fx.dir) if ".part-" in n], [])

    def test_refuses_existing_file_and_other_roles(self):
        existing = self.fx.write("existing.db", "keep me\n")
        self.assertFailsUnchanged("backup", existing, user="phys", expect_code=2,
                                  expect_in="already exists")
        with open(existing) as f:
            self.assertEqual(f.read(), "keep me\n")
        target = self.fx.path("new.db")
        self.assertFailsUnchanged("backup", target, user="ther", expect_code=4,
                                  expect_in="backing up the database needs the role physicist or auditor or admin")
        self.assertFalse(os.path.exists(target))
        self.assertFailsUnchanged("backup", self.fx.path("no/such/dir/x.db"), user="phys", expect_code=3,
                                  expect_in="directory '%s' does not exist" % self.fx.path("no/such/dir"))
        r = self.fx.run("backup", user="phys")
        self.assertEqual(r.returncode, 1)

    def test_killed_backup_leaves_no_file(self):
        """A backup killed with SIGKILL (no chance to clean up) while it
        copies or checks leaves no file under the name asked for - the copy
        is made under a temporary name and renamed only once verified - and
        the next backup to that name removes the dead one's temporary file."""
        pad_with_free_pages(self.fx.db, 1500)   # a longer copy
        self.fx.ensure_session("phys")
        self.fx.ensure_session("aud")   # the copy then holds aud's own password (fxlcli.py)
        target = self.fx.path("killed.db")
        killed = False
        for _attempt in range(20):
            rfd, wfd = os.pipe()
            os.write(wfd, (self.fx.passwords["phys"] + "\n").encode())
            os.close(wfd)
            p = subprocess.Popen(self.fx.argv("backup", target, user="phys", password_fd=rfd),
                                 stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                 env=without_leak_check(self.fx.env("phys")), pass_fds=(rfd,))
            os.close(rfd)
            deadline = time.monotonic() + 30
            while p.poll() is None and time.monotonic() < deadline:
                if any(n.startswith(".killed.db.part-") for n in os.listdir(self.fx.dir)):
                    p.send_signal(signal.SIGKILL)
                    break
            p.communicate()
            if p.returncode == -signal.SIGKILL:
                killed = True
                break
            if os.path.exists(target):
                os.remove(target)   # finished before the kill landed: try again
        self.assertTrue(killed, "the backup was never caught in the middle")
        self.assertFalse(os.path.exists(target), "a killed backup left a file under the name asked for")
        self.assertTrue(any(n.startswith(".killed.db.part-") for n in os.listdir(self.fx.dir)))
        # The next backup to the name: complete, verified, and the dead one's temporary file gone.
        out = self.fx.json("backup", target, user="phys")
        self.assertTrue(out["verified"])
        self.assertEqual([n for n in os.listdir(self.fx.dir) if ".part-" in n], [])
        v = self.fx.run("--db", target, "--json", "verify", user="aud")
        self.assertEqual(v.returncode, 0, v.stderr)

    def test_backup_while_another_process_logs(self):
        pad_with_free_pages(self.fx.db, 800)   # so that each copy takes many steps

        results = []
        errors = []

        def writer():
            # 20 fractions, one process each, as a therapist would log them.
            for n in range(1, 21):
                mrn = "P-1" if n % 2 else "P-2"
                at = "2026-11-%02dT08:00:00Z" % (n // 2 + 2)
                r = self.fx.run("record", "--patient", mrn, "--at", at, "--field", "AP",
                                "--detector", "D-1", "--reading", reading_for(1.0),
                                user="ther", now="2026-12-01T09:00:00Z")
                results.append(r.returncode)
                if r.returncode not in (0, 10, 11, 12):
                    errors.append(r.stderr)

        self.fx.ensure_session("phys", "2026-12-01T09:00:00Z")
        self.fx.ensure_session("aud")
        t = threading.Thread(target=writer)
        t.start()
        copies = []
        i = 0
        while t.is_alive() or i < 2:
            copy = self.fx.path("copy-%d.db" % i)
            r = self.fx.run("--json", "backup", copy, user="phys", now="2026-12-01T09:00:00Z")
            self.assertEqual(r.returncode, 0, r.stderr)
            out = json.loads(r.stdout)
            self.assertGreater(out["steps"], 1)      # copied in steps, not in one go
            copies.append(copy)
            i += 1
        t.join()
        self.assertEqual(errors, [])
        self.assertEqual(len(results), 20)
        for copy in copies:
            v = self.fx.run("--db", copy, "--json", "verify", user="aud")
            self.assertEqual(v.returncode, 0, copy + v.stdout + v.stderr)
            n = self.count(copy, "fractions")
            self.assertTrue(0 <= n <= 20, n)
            # Each copy is one snapshot: every fraction in it has its measurement.
            self.assertEqual(self.count(copy, "measurements"), n)
        self.assertEqual(self.count(self.fx.db, "fractions"), 20)
        self.assertTrue(self.fx.json("verify")["ok"])


if __name__ == "__main__":
    main()
