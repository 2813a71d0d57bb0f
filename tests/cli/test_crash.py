"""Crash safety: fxledger record is killed with SIGKILL at random moments
while it logs fractions in a loop. Afterwards every fraction whose command
reported it logged is there with all its measurements, no fraction is
half-written (fewer measurements than given, a measurement or review item
without its audit row, ...), fxledger verify passes and SQLite's
integrity_check says ok. Design: docs/robustness.md.

Short in `make test` (40 kills); FXL_LONG=1 runs 400 (hundreds, across
four patients). FXL_CRASH_SEED fixes the random delays (default: printed)."""
import os
import random
import signal
import statistics
import sys
import time
import unittest

import robust_fixture as rb

LONG = os.environ.get("FXL_LONG") == "1"
KILLS = 400 if LONG else 40
# Exit codes of a record that logged the fraction (docs/cli.md): all within
# tolerance, not evaluable, outside tolerance, outside action level.
LOGGED = (0, 10, 11, 12)


class CrashTest(unittest.TestCase):

    def setUp(self):
        self.seed = int(os.environ.get("FXL_CRASH_SEED") or random.SystemRandom().randrange(1 << 30))
        self.rng = random.Random(self.seed)
        n_patients = (KILLS + rb.FRACTIONS - 1) // rb.FRACTIONS
        self.patients = ["CR-%03d" % (i + 1) for i in range(n_patients)]
        self.fx = rb.new_fx()
        rb.build_department(self.fx, self.patients + ["CR-CAL"])

    def tearDown(self):
        self.fx.close()

    def calibrate(self):
        """Median wall time of an undisturbed record on this build (a
        sanitizer or valgrind build is many times slower), so that the kill
        delays cover the whole life of the process, from start to exit."""
        times = []
        for fraction in range(1, 6):
            r, seconds = rb.timed_run(self.fx, rb.record_args("CR-CAL", fraction), "tina")
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            times.append(seconds)
        return statistics.median(times)

    def test_crash_sigkill_while_logging(self):
        median_s = self.calibrate()
        # 0 to 1.5 x the median: most kills land inside the process, some
        # after its end (those must have logged). For a quick build this is
        # about the 0 to 30 ms of the design.
        max_delay_s = max(0.005, 1.5 * median_s)
        attempts = []          # (mrn, fraction, returncode, stderr)
        for i in range(KILLS):
            mrn = self.patients[i // rb.FRACTIONS]
            fraction = i % rb.FRACTIONS + 1
            # Every fifth fraction 6 % high: review items and the rules over
            # history write in the same transaction.
            deviation = 6.0 if fraction % 5 == 0 else self.rng.uniform(-2.0, 2.0)
            p = rb.popen_to_kill(self.fx, rb.record_args(mrn, fraction, deviation),
                         self.rng.choice(rb.THERAPISTS))
            time.sleep(self.rng.uniform(0.0, max_delay_s))
            if p.poll() is None:
                p.send_signal(signal.SIGKILL)
            out, err = p.communicate()
            attempts.append((mrn, fraction, p.returncode, err))

        killed = sum(1 for a in attempts if a[2] == -signal.SIGKILL)
        logged = [a for a in attempts if a[2] in LOGGED]
        other = [a for a in attempts if a[2] not in LOGGED and a[2] != -signal.SIGKILL]
        con = rb.open_ro(self.fx)
        try:
            present = rb.fractions_by_patient(con)
            problems = rb.structural_problems(con)
        finally:
            con.close()
        killed_but_present = sum(1 for a in attempts if a[2] == -signal.SIGKILL
                                 and a[1] in present.get(a[0], {}))
        sys.stderr.write(
            "crash test: seed %d, %d attempts, median record %.0f ms, delays 0-%.0f ms: "
            "%d killed (%d of them had committed), %d finished and logged, %d other\n" % (
                self.seed, KILLS, median_s * 1000, max_delay_s * 1000, killed,
                killed_but_present, len(logged), len(other)))

        # Every command ends logged or killed: a killed predecessor never
        # leaves the database unusable (no "database error" after a crash).
        self.assertEqual(other, [], "commands neither logged nor killed (seed %d)" % self.seed)
        # The test only means something if it really killed mid-run.
        self.assertGreaterEqual(killed, KILLS // 4, "too few kills (seed %d)" % self.seed)
        # Every fraction reported logged is there with all three measurements.
        for mrn, fraction, code, err in logged:
            self.assertEqual(present.get(mrn, {}).get(fraction), len(rb.FIELDS),
                             "%s fraction %d exited %d but is not whole (seed %d)" % (
                                 mrn, fraction, code, self.seed))
        # No fraction is half-written, and none appeared that was not attempted.
        attempted = {(a[0], a[1]) for a in attempts}
        for mrn, fractions in present.items():
            for number, n_measurements in fractions.items():
                if mrn != "CR-CAL":
                    self.assertIn((mrn, number), attempted)
                self.assertEqual(n_measurements, len(rb.FIELDS),
                                 "%s fraction %d has %d measurements (seed %d)" % (
                                     mrn, number, n_measurements, self.seed))
        self.assertEqual(problems, [], "seed %d" % self.seed)
        r = rb.verify(self.fx)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        # And the logbook goes on: the next fraction logs normally.
        r = self.fx.run(*rb.record_args("CR-CAL", 6), user="tina")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)

    def test_crash_kill_can_be_detected(self):
        """The checks can fail: a fraction whose measurements were cut off
        (written here by hand into a copy, as a crash without a transaction
        would leave it) is reported, and so is a broken audit chain."""
        import sqlite3
        r = self.fx.run(*rb.record_args(self.patients[0], 1), user="tina")
        self.assertEqual(r.returncode, 0, r.stderr)
        copy = self.fx.path("copy.db")
        src = sqlite3.connect(self.fx.db)
        dst = sqlite3.connect(copy)
        src.backup(dst)
        src.close()
        # Drop the triggers that refuse deletes, then cut one measurement:
        # what a writer without one transaction could leave behind.
        for (name,) in dst.execute("SELECT name FROM sqlite_schema WHERE type = 'trigger'").fetchall():
            dst.execute('DROP TRIGGER "%s"' % name)
        dst.execute("DELETE FROM measurements WHERE id = (SELECT max(id) FROM measurements)")
        dst.commit()
        dst.close()
        orig = self.fx.db
        self.fx.db = copy
        try:
            con = rb.open_ro(self.fx)
            present = rb.fractions_by_patient(con)
            problems = rb.structural_problems(con)
            con.close()
            self.assertEqual(present[self.patients[0]][1], len(rb.FIELDS) - 1)
            self.assertTrue(any("audit row of a measurement" in p for p in problems), problems)
        finally:
            self.fx.db = orig


if __name__ == "__main__":
    unittest.main(verbosity=2)
