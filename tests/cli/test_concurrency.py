"""Concurrency: several fxledger processes on one database at once. Four
therapists log fractions of four patients, a physicist acknowledges and
comments review items, and an auditor lists history, the queue and runs
verify, all at the same time. Every write either lands or fails with the
"database busy" message (and is retried); afterwards the database holds
exactly the writes that reported success, nothing more, nothing less.
A write lock held by another program (the sqlite3 shell's BEGIN EXCLUSIVE)
past the busy timeout gives the one-line "database busy" error, exit 3,
and nothing is written. Design: docs/robustness.md.

Short in `make test`; FXL_LONG=1 logs 100 fractions per patient (400 in all)."""
import json
import os
import subprocess
import sys
import threading
import time
import unittest

import robust_fixture as rb

LONG = os.environ.get("FXL_LONG") == "1"
LOGGERS = 4
FRACTIONS_EACH = 100 if LONG else 12
LOGGED = (0, 10, 11, 12)      # record exit codes of a logged fraction (docs/cli.md)
EXIT_DB = 3                   # database busy, not ours, I/O (docs/cli.md)
BUSY_TIMEOUT_S = 5.0          # BUSY_TIMEOUT_MS in src/store/db.c
RETRIES = 50


def is_busy(r):
    return r.returncode == EXIT_DB and r.stderr.startswith("fxledger: error: database busy")


class Tally:
    """What one worker did, counted from its commands' exit codes."""

    def __init__(self, name):
        self.name = name
        self.ok = {}          # what -> count
        self.busy = 0
        self.errors = []      # unexpected outcomes, as text
        self.logged = set()   # (mrn, fraction) reported logged

    def bump(self, what):
        self.ok[what] = self.ok.get(what, 0) + 1


def run_retrying(fx, args, user, tally, accept=(0,)):
    """Runs one command, again while it answers "database busy"; returns
    the last CompletedProcess, or None after RETRIES busy answers."""
    for _ in range(RETRIES):
        r = fx.run(*args, user=user)
        if is_busy(r):
            tally.busy += 1
            if r.stderr.count("\n") != 1:
                tally.errors.append("busy message not one line: %r" % r.stderr)
            continue
        if r.returncode not in accept:
            tally.errors.append("%s exited %d: %s" % (" ".join(args[:3]), r.returncode,
                                                       r.stderr.strip()))
        return r
    tally.errors.append("%s still busy after %d tries" % (" ".join(args[:3]), RETRIES))
    return None


class ConcurrencyTest(unittest.TestCase):

    def setUp(self):
        self.patients = ["CC-%d" % (i + 1) for i in range(LOGGERS)]
        self.fx = rb.new_fx()
        rb.build_department(self.fx, self.patients + ["CC-Q"])
        # Work for the reviewer from the start: three fractions 6 % high.
        for fraction in (1, 2, 3):
            r = self.fx.run(*rb.record_args("CC-Q", fraction, 6.0), user="tina")
            self.assertIn(r.returncode, LOGGED, r.stderr)

    def tearDown(self):
        self.fx.close()

    # ---- the workers -----------------------------------------------------------

    def logger(self, mrn, user, tally):
        for fraction in range(1, FRACTIONS_EACH + 1):
            deviation = 6.0 if fraction % 4 == 0 else 0.5
            r = run_retrying(self.fx, rb.record_args(mrn, fraction, deviation), user, tally,
                             accept=LOGGED)
            if r is not None and r.returncode in LOGGED:
                tally.logged.add((mrn, fraction))
                tally.bump("record")

    def reviewer(self, done, tally):
        turn = 0
        while not done.is_set() or turn < 4:
            r = run_retrying(self.fx, ["--json", "queue", "list", "--status", "open"], "phil", tally)
            if r is None or r.returncode != 0:
                continue
            items = json.loads(r.stdout)
            tally.bump("list")
            for item in items[:3]:
                turn += 1
                if turn % 2:
                    r = run_retrying(self.fx, ["queue", "ack", str(item["id"]), "--comment",
                                               "seen at the console (test)"], "phil", tally)
                    what = "ack"
                else:
                    r = run_retrying(self.fx, ["queue", "comment", str(item["id"]),
                                               "set-up checked (test)"], "phil", tally)
                    what = "comment"
                if r is not None and r.returncode == 0:
                    tally.bump(what)
            if not items:
                time.sleep(0.05)

    def lister(self, done, tally):
        i = 0
        while not done.is_set() or i < 3:
            mrn = self.patients[i % len(self.patients)]
            for args in (["--json", "history", "--patient", mrn], ["--json", "queue", "list"]):
                r = run_retrying(self.fx, args, "phil", tally)
                if r is not None and r.returncode == 0:
                    try:
                        json.loads(r.stdout)
                        tally.bump(args[1])
                    except ValueError:
                        tally.errors.append("%s printed invalid JSON" % args[1])
            if i % 5 == 0:
                r = run_retrying(self.fx, ["verify"], "admin", tally)
                if r is not None and r.returncode == 0:
                    tally.bump("verify")
            i += 1

    # ---- the tests ---------------------------------------------------------------

    def test_concurrency_writers_and_readers_lose_nothing(self):
        done = threading.Event()
        loggers = [Tally("logger %s" % mrn) for mrn in self.patients]
        review, listing = Tally("reviewer"), Tally("lister")
        threads = [threading.Thread(target=self.logger, args=(mrn, rb.THERAPISTS[i], loggers[i]))
                   for i, mrn in enumerate(self.patients)]
        side = [threading.Thread(target=self.reviewer, args=(done, review)),
                threading.Thread(target=self.lister, args=(done, listing))]
        start = time.monotonic()
        for t in threads + side:
            t.start()
        for t in threads:
            t.join()
        done.set()
        for t in side:
            t.join()
        seconds = time.monotonic() - start
        tallies = loggers + [review, listing]
        sys.stderr.write("concurrency test: %.1f s; %s\n" % (seconds, "; ".join(
            "%s %s, %d busy" % (t.name, t.ok, t.busy) for t in tallies)))
        for t in tallies:
            self.assertEqual(t.errors, [], t.name)

        con = rb.open_ro(self.fx)
        try:
            present = rb.fractions_by_patient(con)
            problems = rb.structural_problems(con)
            acks = con.execute("SELECT count(*) FROM review_events e JOIN users u ON u.id = e.user_id "
                               "WHERE e.kind = 'acknowledge' AND u.login = 'phil'").fetchone()[0]
            comments = con.execute("SELECT count(*) FROM review_events e JOIN users u "
                                   "ON u.id = e.user_id WHERE e.kind = 'comment' "
                                   "AND u.login = 'phil'").fetchone()[0]
        finally:
            con.close()
        # Exactly the fractions that reported success, each whole.
        for t, mrn in zip(loggers, self.patients):
            self.assertEqual(len(t.logged), FRACTIONS_EACH, t.name)
            self.assertEqual({(mrn, n) for n in present.get(mrn, {})}, t.logged, t.name)
            for number, n_measurements in present[mrn].items():
                self.assertEqual(n_measurements, len(rb.FIELDS), "%s fraction %d" % (mrn, number))
        # Every acknowledgement and comment that reported success, no more.
        self.assertGreater(review.ok.get("ack", 0) + review.ok.get("comment", 0), 0)
        self.assertEqual(acks, review.ok.get("ack", 0))
        self.assertEqual(comments, review.ok.get("comment", 0))
        self.assertGreater(listing.ok.get("history", 0), 0)
        self.assertEqual(problems, [])
        r = rb.verify(self.fx)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)

    def test_concurrency_lock_held_past_timeout_is_busy(self):
        """Another program holds the write lock longer than the busy timeout:
        record and queue ack wait, then give the one-line busy error with
        exit 3 and write nothing; reading goes on meanwhile (WAL); once the
        lock is gone the same record logs normally."""
        before = rb.open_ro(self.fx)
        n_before = before.execute("SELECT count(*) FROM measurements").fetchone()[0]
        audit_before = before.execute("SELECT count(*) FROM audit_log").fetchone()[0]
        before.close()
        shell = subprocess.Popen(["sqlite3", self.fx.db], stdin=subprocess.PIPE,
                                 stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        try:
            shell.stdin.write(".timeout 10000\nBEGIN EXCLUSIVE;\n"
                              "SELECT 'locked';\n")
            shell.stdin.flush()
            self.assertEqual(shell.stdout.readline().strip(), "locked", shell.stderr)

            r, seconds = rb.timed_run(self.fx, rb.record_args(self.patients[0], 1), "tina")
            self.assertEqual(r.returncode, EXIT_DB, r.stdout + r.stderr)
            self.assertTrue(r.stderr.startswith("fxledger: error: database busy"), r.stderr)
            self.assertEqual(r.stderr.count("\n"), 1, r.stderr)   # one line
            self.assertEqual(r.stdout, "")
            # It waited for the timeout before giving up (and not forever).
            self.assertGreaterEqual(seconds, BUSY_TIMEOUT_S - 0.5)
            self.assertLess(seconds, BUSY_TIMEOUT_S + 20)

            r = self.fx.run("queue", "ack", "1", "--comment", "during the lock", user="phil")
            self.assertEqual(r.returncode, EXIT_DB, r.stdout + r.stderr)
            self.assertTrue(r.stderr.startswith("fxledger: error: database busy"), r.stderr)

            # Readers are not blocked by a writer in WAL mode.
            r = self.fx.run("--json", "history", "--patient", "CC-Q", user="phil")
            self.assertEqual(r.returncode, 0, r.stderr)
            self.assertEqual(len(json.loads(r.stdout)), 3 * len(rb.FIELDS))
        finally:
            shell.stdin.write("ROLLBACK;\n.quit\n")
            shell.stdin.flush()
            shell.communicate(timeout=30)

        after = rb.open_ro(self.fx)
        try:
            self.assertEqual(after.execute("SELECT count(*) FROM measurements").fetchone()[0], n_before)
            self.assertEqual(after.execute("SELECT count(*) FROM audit_log").fetchone()[0], audit_before)
            self.assertEqual(rb.structural_problems(after), [])
        finally:
            after.close()
        r = self.fx.run(*rb.record_args(self.patients[0], 1), user="tina")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)


if __name__ == "__main__":
    unittest.main(verbosity=2)
