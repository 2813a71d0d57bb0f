"""Identities: logins, sessions, lockout and electronic signatures, driven
through the command line. Passwords and the department are invented.

Outside references: the password policy is NIST SP 800-63B section 5.1.1.2
(memorised secrets: length, no further composition rules); the signature
components (login and password at each signing; printed name, time and
meaning shown with the signed record) follow 21 CFR Part 11 sections 11.50,
11.200 and 11.300. The Argon2id hash format ('$argon2id$v=19$...') is the PHC
string format of RFC 9106 section 3 / the reference implementation."""
import json
import os
import re
import sqlite3
import hashlib
import stat
import subprocess
import unittest

from fxlcli import epoch, main
from review_scenario import ReviewCase

SQLITE3 = "sqlite3"


class IdentityTest(ReviewCase):
    def setUp(self):
        super().setUp()
        # An outside-action result: fraction 1 of P-1, AP at +10 % (levels 5 / 8 %).
        res = self.record("P-1", "2026-11-02T08:00:00Z", ("AP", 10.0))
        self.item = res["results"][0]["review_item_id"]

    def sql(self, text):
        return subprocess.run([SQLITE3, "-bail", self.fx.db], input=text, capture_output=True,
                              text=True, timeout=30)

    def audit_rows(self, action):
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT user, content FROM audit_log WHERE action = ? ORDER BY id",
                           (action,)).fetchall()
        con.close()
        return [(u, json.loads(c)) for u, c in rows]

    # ---- logging in ----------------------------------------------------------

    def test_no_session_no_password_refused_unchanged(self):
        before = self.fx.digest()
        r = self.fx.run("patient", "list", user="ther", password=False, login=False,
                        env={"XDG_STATE_HOME": self.fx.path("empty-state")})
        self.assertEqual(r.returncode, 4, r.stderr)
        self.assertIn("needs a login", r.stderr)
        self.assertEqual(self.fx.digest(), before)

    def test_wrong_password_refused_and_audited(self):
        r = self.fx.exec(["login"], "phys", self.fx.now, password_lines=["not the password!"])
        self.assertEqual(r.returncode, 4, r.stderr)
        self.assertIn("login failed: unknown login or wrong password", r.stderr)
        # An unknown login gets the very same message (no user enumeration).
        r2 = self.fx.exec(["login"], "nosuchuser", self.fx.now, password_lines=["whatever guess"])
        self.assertEqual(r2.returncode, 4)
        self.assertEqual(r.stderr, r2.stderr)
        rows = self.audit_rows("login_failed")
        self.assertEqual([(c["login"], c["reason"]) for _, c in rows[-2:]],
                         [("phys", "wrong password"), ("nosuchuser", "unknown login")])
        self.assertEqual(rows[-2][1]["client"], "cli")
        self.assertIn("host", rows[-2][1])
        self.assertIn("os_account", rows[-2][1])

    def test_lockout_after_five_failures_and_unlock(self):
        for i in range(5):
            r = self.fx.exec(["login"], "phys", self.fx.now, password_lines=["wrong guess %d!!" % i])
            self.assertEqual(r.returncode, 4)
        self.assertIn("now locked", r.stderr)
        self.assertEqual(len(self.audit_rows("lock")), 1)
        # Locked: even the right password is refused, and the session too.
        r = self.fx.exec(["login"], "phys", self.fx.now, password_lines=[self.fx.passwords["phys"]])
        self.assertEqual(r.returncode, 4)
        self.assertIn("locked", r.stderr)
        st = self.fx.json("user", "status", "phys")
        self.assertTrue(st["locked"])
        self.assertEqual(st["recent_failures"], 5)
        # Only an admin unlocks; then the password works again.
        r = self.fx.run("user", "unlock", "phys", user="ther")
        self.assertEqual(r.returncode, 4)
        self.fx.ok("user", "unlock", "phys")
        self.assertEqual(len(self.audit_rows("unlock")), 1)
        self.fx.forget_session("phys")
        self.fx.ok("queue", "list", user="phys")
        self.assertFalse(self.fx.json("user", "status", "phys")["locked"])

    def test_lock_ends_when_its_time_has_passed(self):
        self.fx.ensure_session("aud")   # their own password, not the one-time one
        for i in range(5):
            self.fx.exec(["login"], "aud", self.fx.now, password_lines=["wrong guess %d!!" % i])
        r = self.fx.exec(["login"], "aud", self.fx.now, password_lines=[self.fx.passwords["aud"]])
        self.assertEqual(r.returncode, 4)
        # auth_lock_minutes defaults to 30: 31 minutes later the login works.
        later = "2026-11-02T09:31:00Z"
        r = self.fx.exec(["login"], "aud", later, password_lines=[self.fx.passwords["aud"]])
        self.assertEqual(r.returncode, 0, r.stderr)

    def test_password_policy(self):
        # NIST SP 800-63B 5.1.1.2: length is what counts; we ask 12 to 128
        # characters and refuse one containing the login.
        for bad, why in (("short-pw", "12 to 128"), ("x" * 129, "12 to 128"),
                         ("my-phys-password", "must not contain the login"),
                         ("aaaaaaaaaaaaaaaa", "repeated")):
            r = self.fx.run("user", "passwd", user="phys",
                            password=[self.fx.passwords["phys"], bad])
            self.assertEqual(r.returncode, 2, (bad, r.stderr))
            self.assertIn(why, r.stderr)
        self.fx.ok("user", "passwd", user="phys",
                   password=[self.fx.passwords["phys"], "another invented passphrase"])
        self.fx.passwords["phys"] = "another invented passphrase"
        # The signing key was sealed again: signing with the new password works.
        self.fx.ok("queue", "close", self.item, "--disposition", "set-up error", user="phys")
        self.assertEqual(self.fx.json("verify")["ok"], True)

    def test_reset_forces_a_new_password_and_a_new_key(self):
        out = self.fx.json("user", "reset", "phys")
        self.assertEqual(len(out["one_time_password"]), 20)
        self.fx.forget_session("phys")
        # The old session ended; the one-time password must be replaced.
        r = self.fx.exec(["queue", "list"], "phys", self.fx.now)
        self.assertEqual(r.returncode, 4)
        r = self.fx.exec(["login"], "phys", self.fx.now, password_lines=[out["one_time_password"]])
        self.assertEqual(r.returncode, 4)
        self.assertIn("one-time password", r.stderr)
        r = self.fx.exec(["login", "--new-password"], "phys", self.fx.now,
                         password_lines=[out["one_time_password"], "a fresh invented secret"])
        self.assertEqual(r.returncode, 0, r.stderr)
        self.fx.passwords["phys"] = "a fresh invented secret"
        self.fx.sessions["phys"] = {"start": epoch(self.fx.now), "seen": epoch(self.fx.now)}
        self.fx.ok("queue", "close", self.item, "--disposition", "other", user="phys")
        con = sqlite3.connect(self.fx.db)
        keys = con.execute("SELECT count(*) FROM signing_keys k JOIN users u ON u.id = k.user_id "
                           "WHERE u.login = 'phys'").fetchone()[0]
        con.close()
        self.assertEqual(keys, 2)
        # Older signatures (the plan imports, under the first key) still verify.
        self.assertTrue(self.fx.json("verify")["ok"])

    # ---- sessions --------------------------------------------------------------

    def session_file(self, login):
        d = os.path.join(self.fx.state_dir(login), "fxledger")
        names = [n for n in os.listdir(d) if n.startswith("session-")]
        self.assertEqual(len(names), 1)
        return os.path.join(d, names[0])

    def test_session_file_is_0600_and_useless_after_logout(self):
        self.fx.ok("queue", "list", user="aud")
        p = self.session_file("aud")
        self.assertEqual(stat.S_IMODE(os.stat(p).st_mode), 0o600)
        with open(p, encoding="utf-8") as f:
            saved = f.read()
        self.assertIn("database " + os.path.realpath(self.fx.db), saved)
        token = re.search(r"^token ([0-9a-f]{64})$", saved, re.M).group(1)
        # Only the token's SHA-256 is in the database.
        con = sqlite3.connect(self.fx.db)
        stored = [r[0] for r in con.execute("SELECT token_sha256 FROM auth_sessions")]
        con.close()
        self.assertIn(hashlib.sha256(token.encode()).hexdigest(), stored)
        for suffix in ("", "-wal"):   # the database is the .db with its -wal
            if os.path.exists(self.fx.db + suffix):
                with open(self.fx.db + suffix, "rb") as f:
                    self.assertNotIn(token, f.read().decode("latin-1"))
        self.fx.ok("logout", user="aud")
        self.assertFalse(os.path.exists(p))
        # The saved file put back: the ended session is refused.
        fd = os.open(p, os.O_WRONLY | os.O_CREAT, 0o600)
        os.write(fd, saved.encode())
        os.close(fd)
        before = self.fx.digest()
        r = self.fx.run("queue", "list", user="aud", password=False, login=False)
        self.assertEqual(r.returncode, 4)
        self.assertIn("ended", r.stderr)
        self.assertEqual(self.fx.digest(), before)
        # A session file others can read is not used.
        os.chmod(p, 0o644)
        r = self.fx.run("queue", "list", user="aud", password=False, login=False)
        self.assertEqual(r.returncode, 4)

    def test_session_ends_after_idle_time_and_absolute_limit(self):
        self.fx.ok("queue", "list", user="aud", now="2026-11-02T10:00:00Z")
        # 14 minutes later it still works (and counts as activity) ...
        r = self.fx.run("queue", "list", user="aud", now="2026-11-02T10:14:00Z", password=False,
                        login=False)
        self.assertEqual(r.returncode, 0, r.stderr)
        # ... 15 minutes after that it has ended (auth_idle_minutes = 15).
        before = self.fx.digest()
        r = self.fx.run("queue", "list", user="aud", now="2026-11-02T10:29:00Z", password=False,
                        login=False)
        self.assertEqual(r.returncode, 4)
        self.assertIn("15 minutes without use", r.stderr)
        self.assertEqual(self.fx.digest(), before)
        # Kept busy, a session still ends 12 hours after login: with the idle
        # limit raised to 4 hours, use at +4 h, +8 h and +11 h 50 keeps it,
        # +12 h ends it (auth_session_hours = 12).
        self.fx.ok("setting", "set", "auth_idle_minutes", "240", now="2026-11-02T10:00:00Z")
        self.fx.forget_session("aud")
        self.fx.login("aud", "2026-11-03T08:00:00Z")
        for now in ("2026-11-03T11:50:00Z", "2026-11-03T15:40:00Z", "2026-11-03T19:30:00Z"):
            r = self.fx.run("queue", "list", user="aud", now=now, password=False, login=False)
            self.assertEqual(r.returncode, 0, (now, r.stderr))
        r = self.fx.run("queue", "list", user="aud", now="2026-11-03T20:00:00Z", password=False,
                        login=False)
        self.assertEqual(r.returncode, 4)
        self.assertIn("12 hours", r.stderr)

    def commits_in_wal(self):
        """Transactions in the -wal file: frames whose header gives the
        database size after commit (non-zero), per the WAL format of
        https://www.sqlite.org/fileformat2.html section 4.1 (32-byte file
        header; each frame a 24-byte header, bytes 4-7 big-endian, then one
        page)."""
        with open(self.fx.db + "-wal", "rb") as f:
            data = f.read()
        page = int.from_bytes(data[8:12], "big")
        n, pos = 0, 32
        while pos + 24 + page <= len(data):
            if int.from_bytes(data[pos + 4:pos + 8], "big"):
                n += 1
            pos += 24 + page
        return n

    def test_writing_command_records_activity_in_its_own_transaction(self):
        # Two minutes after the last use, a fraction logged: the session's
        # activity goes into the same transaction as the fraction, so the
        # -wal gains one commit (not a second one for the session).
        con = sqlite3.connect(self.fx.db)
        con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        seen = con.execute("SELECT max(last_seen_at) FROM auth_sessions").fetchone()[0]
        con.close()
        at = "2026-11-03T08:00:00Z"
        self.fx.ensure_session("ther", at)
        con = sqlite3.connect(self.fx.db)
        con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        con.close()
        # (the last connection's close removes an empty -wal)
        self.assertFalse(os.path.exists(self.fx.db + "-wal") and os.path.getsize(self.fx.db + "-wal"))
        later = "2026-11-03T08:02:00Z"
        r = self.fx.run("record", "--patient", "P-1", "--at", later, "--field", "AP",
                        "--detector", "D-1", "--reading", "20.0", user="ther", now=later,
                        login=False)
        self.assertIn(r.returncode, (0, 10, 11, 12), r.stderr)
        self.assertEqual(self.commits_in_wal(), 1)
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT u.login, s.last_seen_at FROM auth_sessions s "
                           "JOIN users u ON u.id = s.user_id WHERE s.ended_at IS NULL "
                           "ORDER BY s.id").fetchall()
        con.close()
        self.assertIn(("ther", later), rows)
        self.assertNotEqual(seen, later)
        # A read-only command a minute on still records its activity, in a
        # transaction of its own.
        con = sqlite3.connect(self.fx.db)
        con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        con.close()
        again = "2026-11-03T08:03:00Z"
        r = self.fx.run("queue", "list", user="ther", now=again, login=False)
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertEqual(self.commits_in_wal(), 1)
        con = sqlite3.connect(self.fx.db)
        self.assertIn(("ther", again), con.execute(
            "SELECT u.login, s.last_seen_at FROM auth_sessions s JOIN users u ON u.id = s.user_id "
            "WHERE s.ended_at IS NULL").fetchall())
        con.close()

    # ---- signing ------------------------------------------------------------------

    def test_therapist_cannot_close_and_nobody_without_password(self):
        self.assertFailsUnchanged("queue", "close", self.item, "--disposition", "set-up error",
                                  user="ther", expect_code=4, expect_in="permission denied")
        # A live session is not enough: the password is asked again.
        self.assertFailsUnchanged("queue", "close", self.item, "--disposition", "set-up error",
                                  user="phys", password=False, expect_code=4,
                                  expect_in="signing act")
        # Someone else's password does not sign as phys.
        r = self.fx.run("queue", "close", self.item, "--disposition", "set-up error", user="phys",
                        password=self.fx.passwords["admin"])
        self.assertEqual(r.returncode, 4)
        self.assertIn("wrong password", r.stderr)
        self.assertEqual(self.audit_rows("login_failed")[-1][1]["purpose"], "signature")
        self.assertEqual(self.queue("show", str(self.item))["status"], "open")

    def test_closed_item_shows_signature_in_queue_and_report(self):
        self.fx.ok("queue", "close", self.item, "--disposition", "set-up error",
                   "--comment", "re-positioned", user="phys")
        shown = self.queue("show", str(self.item))
        close = [e for e in shown["events"] if e["kind"] == "close"][0]
        self.assertEqual(close["signatures"], [{
            "signer": "phys", "printed_name": "Invented Physicist",
            "signed_at": self.fx.now, "meaning": "review closed: set-up error"}])
        text = self.fx.ok("queue", "show", self.item, user="aud").stdout
        # on screen in the department's zone with its offset (UTC here), wrapped to 80 columns
        shown_at = "%s %s +00:00" % (self.fx.now[:10], self.fx.now[11:16])
        self.assertIn("signed by Invented Physicist (phys) at %s: review closed: set-up error"
                      % shown_at, " ".join(text.split()))
        out = self.fx.path("p1.pdf")
        self.fx.ok("report", "patient", "P-1", "--out", out, user="aud")
        pdf = subprocess.run(["pdftotext", "-layout", out, "-"], capture_output=True, text=True,
                             timeout=60).stdout
        flat = " ".join(pdf.split())
        self.assertIn("review item #%d: review closed: set-up error, signed by Invented Physicist "
                      "(phys) at %s UTC" % (self.item, self.fx.now), flat)
        self.assertIn("plan PL-P-1: plan imported, signed by Invented Physicist (phys)", flat)
        v = self.fx.json("verify")
        self.assertTrue(v["ok"], v)
        # calibration, levels, two plan imports, the close
        self.assertEqual(v["signatures_checked"], 5)

    def test_altered_signed_row_fails_verify(self):
        self.fx.ok("queue", "close", self.item, "--disposition", "set-up error",
                   "--comment", "re-positioned", user="phys")
        r = self.sql("DROP TRIGGER review_events_no_update;"
                     "UPDATE review_events SET disposition = 'clinically accepted' "
                     "WHERE kind = 'close';")
        self.assertEqual(r.returncode, 0, r.stderr)
        v = json.loads(self.fx.run("--json", "verify", user="aud").stdout)
        self.assertFalse(v["ok"])
        self.assertFalse(v["signatures_ok"])
        self.assertRegex(v["signature_error"],
                         r"does not match review_events row \d+: the row was altered after it was signed")

    def test_forged_close_event_fails_verify(self):
        # Someone with write access to the file, but no password, closes the
        # item with the sqlite3 shell.
        r = self.sql("INSERT INTO review_events (item_id, kind, disposition, user_id, created_at) "
                     "SELECT %d, 'close', 'other', id, '2026-11-02T10:00:00Z' FROM users "
                     "WHERE login = 'phys';"
                     "UPDATE review_items SET status = 'closed' WHERE id = %d;" % (self.item, self.item))
        self.assertEqual(r.returncode, 0, r.stderr)
        r = self.fx.run("verify", user="aud")
        self.assertEqual(r.returncode, 2)
        self.assertRegex(r.stderr, r"review_events row \d+ carries no signature")
        # A made-up signature row does not pass either.
        r = self.sql("INSERT INTO signatures (entity, entity_id, user_id, key_id, login, printed_name, "
                     "signed_at, meaning, content_sha256, signature) SELECT 'review_events', "
                     "max(e.id), u.id, k.id, 'phys', 'Invented Physicist', '2026-11-02T10:00:00Z', "
                     "'review closed: other', '%s', '%s' FROM review_events e, users u "
                     "JOIN signing_keys k ON k.user_id = u.id WHERE u.login = 'phys';"
                     % ("0" * 64, "ab" * 64))
        self.assertEqual(r.returncode, 0, r.stderr)
        v = json.loads(self.fx.run("--json", "verify", user="aud").stdout)
        self.assertFalse(v["ok"])
        self.assertRegex(v["signature_error"], r"review_events row \d+")

    def test_every_signing_act_is_signed(self):
        # The set-up signed: a calibration, levels and two plan imports.
        con = sqlite3.connect(self.fx.db)
        meanings = sorted(r[0] for r in con.execute("SELECT meaning FROM signatures"))
        con.close()
        self.assertEqual(meanings, ["calibration confirmed", "levels in force", "plan imported",
                                    "plan imported"])
        self.fx.ok("user", "deactivate", "aud")
        con = sqlite3.connect(self.fx.db)
        self.assertEqual(con.execute("SELECT count(*) FROM signatures WHERE meaning = "
                                     "'user deactivated'").fetchone()[0], 1)
        con.close()

    # ---- where a password may appear --------------------------------------------

    def test_password_never_stored_logged_or_in_process_list(self):
        secret = self.fx.passwords["phys"]
        # While the program waits for the password on its pipe, neither its
        # command line nor its environment holds it.
        rfd, wfd = os.pipe()
        p = subprocess.Popen(self.fx.argv("login", user="phys", password_fd=rfd),
                             env=self.fx.env("phys"), pass_fds=(rfd,), stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
        os.close(rfd)
        try:
            with open("/proc/%d/cmdline" % p.pid, "rb") as f:
                cmdline = f.read()
            with open("/proc/%d/environ" % p.pid, "rb") as f:
                environ = f.read()
            self.assertNotIn(secret.encode(), cmdline)
            self.assertNotIn(secret.encode(), environ)
            os.write(wfd, (secret + "\n").encode())
        finally:
            os.close(wfd)
        out, err = p.communicate(timeout=60)
        self.assertEqual(p.returncode, 0, err)
        self.fx.ok("queue", "close", self.item, "--disposition", "other", user="phys")
        # No file of the test directory (database, WAL, session files) holds
        # any password; the database holds Argon2id hashes.
        for root, _, files in os.walk(self.fx.dir):
            for name in files:
                with open(os.path.join(root, name), "rb") as f:
                    data = f.read()
                for login, pw in self.fx.passwords.items():
                    self.assertNotIn(pw.encode(), data, (name, login))
        con = sqlite3.connect(self.fx.db)
        hashes = [r[0] for r in con.execute("SELECT hash FROM auth_passwords")]
        audit = " ".join(r[0] for r in con.execute("SELECT content FROM audit_log"))
        con.close()
        self.assertTrue(all(h.startswith("$argon2id$v=19$m=65536,t=2,p=1$") for h in hashes), hashes)
        for pw in self.fx.passwords.values():
            self.assertNotIn(pw, audit)


if __name__ == "__main__":
    main()
