"""The rows that logging writes are pinned (issue 16, "the rows written by
`record` are identical before and after").

A fixed scenario on the invented department of review_scenario.py, with the
test build's fixed clock (FXLEDGER_NOW and --at): a series of results that
makes the detector drift rule fire, a fraction outside tolerance and one
beyond the action level, two consecutive results outside tolerance, an
amendment, a weekly field left out (missing measurement) and a fraction
inside the calibration's due window. Every row those commands wrote
(fractions, measurements, review_items, review_events, the audit rows and
their row seals) is dumped in a canonical text form and compared with
tests/data/record_rows_fixed.golden.

The golden file is the output of the code BEFORE the statement cache and
the other changes of issue 16 (main at commit 0c309da): a regression
reference, not an outside check value. The rows must not change when only
the speed of the program changes. If a change of behaviour is intended,
regenerate it with the build that has the change and review the diff:

    FXLEDGER_BIN=build/fxledger-testclock python3 tests/cli/test_record_rows_fixed.py --regenerate

Left out of the comparison, by name:
- audit_log.prev_hash and audit_log.hash: the chain runs through the rows
  of the set-up and the logins, whose content holds random keys (below), so
  the chain differs in every run. `fxledger verify` checks the chain
  instead, and the `seal` column (the SHA-256 of the row seals,
  docs/audit.md) is compared.
- the audit rows on entities `users` and `signing_keys`, and their row
  seals: the harness's logins (the clock passes the session's end once),
  not the logging commands, write them; they hold a new random signing key
  (src/store/auth.c, randombytes_buf) and the OS account and host name.
Every other column is compared; doubles by their exact value (Python's
repr round-trips a double). Data are invented."""
import json
import os
import sqlite3
import sys

from fxlcli import DATA, main
from review_scenario import ReviewCase, reading_for

GOLDEN = os.path.join(DATA, "record_rows_fixed.golden")
REGENERATE = "--regenerate" in sys.argv
if REGENERATE:
    sys.argv.remove("--regenerate")

# Tables the logging commands write, and the columns not compared (above).
TABLES = ("fractions", "measurements", "review_items", "review_events", "audit_log", "row_seals")
VARYING = {"audit_log": ("prev_hash", "hash")}
LOGIN_ENTITIES = "('users', 'signing_keys')"


def canonical(value):
    if isinstance(value, float):
        return repr(value)
    return json.dumps(value, ensure_ascii=False)


def dump(db, first_audit_id):
    """Every row of TABLES written from audit row first_audit_id on, one line
    per row: table, then column=value in the table's column order."""
    con = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    lines = []
    try:
        for t in TABLES:
            cols = [r[1] for r in con.execute("PRAGMA table_info(%s)" % t)]
            keep = [c for c in cols if c not in VARYING.get(t, ())]
            if t == "audit_log":
                where = "WHERE id >= %d AND entity NOT IN %s" % (first_audit_id, LOGIN_ENTITIES)
                order = "id"
            elif t == "row_seals":
                where = ("WHERE audit_id >= %d AND audit_id NOT IN (SELECT id FROM audit_log "
                         "WHERE entity IN %s)" % (first_audit_id, LOGIN_ENTITIES))
                order = "audit_id, tbl, row_id"
            else:
                where, order = "", "id"
            for row in con.execute("SELECT %s FROM %s %s ORDER BY %s"
                                   % (", ".join('"%s"' % c for c in keep), t, where, order)):
                lines.append(t + " " + " ".join("%s=%s" % (c, canonical(v)) for c, v in zip(keep, row)))
    finally:
        con.close()
    return "\n".join(lines) + "\n"


class RecordRowsFixedTest(ReviewCase):
    def readings(self, *pairs):
        args = []
        for name, dev in pairs:
            args += ["--field", name, "--detector", "D-1", "--reading", reading_for(dev)]
        return args

    def log(self, mrn, at, *pairs, expect):
        r = self.fx.run("--json", "record", "--patient", mrn, "--at", at, *self.readings(*pairs),
                        user="ther")
        self.assertEqual(r.returncode, expect, r.stdout + r.stderr)
        return json.loads(r.stdout)

    def scenario(self):
        fx = self.fx
        # The clock stands at the end of the first week: every treatment
        # time (--at) is earlier, so the therapist's one session lasts.
        fx.now = "2026-11-09T12:00:00Z"
        for u in ("ther", "aud"):  # logged in before the first row compared
            fx.ensure_session(u)
        con = sqlite3.connect(fx.db)
        first_audit_id = con.execute("SELECT max(id) + 1 FROM audit_log").fetchone()[0]
        con.close()
        # A drift series of the one detector across both patients (the
        # start-up results of test_queue.py's drift test, then +3 %), every
        # result within tolerance; the rule fires on the 15th result.
        devs = [1.0 if i % 2 == 0 else -1.0 for i in range(10)] + [3.0] * 6
        for i, d in enumerate(devs):
            at = "2026-11-%02dT%02d:00:00Z" % (2 + i // 8, 8 + i % 8)
            self.log("P-1" if i % 2 == 0 else "P-2", at, ("AP", d), expect=0)
        # Outside tolerance (+6 %) and beyond the action level (-10 %, a
        # mistyped reading) in one fraction; then the amendment.
        res = self.log("P-1", "2026-11-04T08:00:00Z", ("AP", 6.0), ("PA", -10.0), expect=12)
        mistyped = res["results"][1]["measurement_id"]
        fx.ok("amend", str(mistyped), "--reading", reading_for(-0.5), "--reason",
              "typed 18.0 for 19.9", user="ther")
        # Two consecutive results outside tolerance on one field.
        self.log("P-2", "2026-11-05T08:00:00Z", ("AP", 6.5), expect=11)
        self.log("P-2", "2026-11-06T08:00:00Z", ("AP", -6.5), expect=11)
        # P-2's weekly PA is never measured: missing from the first fraction
        # on, one item however often it is left out (docs/rules.md).
        self.log("P-2", "2026-11-09T08:00:00Z", ("AP", 0.0), expect=0)
        # Weeks later, inside the calibration's 14-day due window (valid
        # until 2026-12-31); P-1's weekly PA was due by 2026-11-11.
        fx.now = "2026-12-18T09:00:00Z"
        self.log("P-1", "2026-12-18T08:00:00Z", ("AP", 0.5), ("PA", 0.2), expect=0)
        return dump(fx.db, first_audit_id)

    def test_rows_written_by_record_are_unchanged(self):
        got = self.scenario()
        # The scenario reaches what it is meant to reach.
        for rule in ("detector_drift", "result", "missing_measurement", "calibration_due"):
            self.assertIn('rule="%s"' % rule, got, rule)
        self.assertIn("supersedes_id=", got)
        self.assertTrue(self.fx.json("verify", user="aud")["ok"])
        if REGENERATE:
            with open(GOLDEN, "w", encoding="utf-8") as f:
                f.write(got)
            self.skipTest("golden file written: %s" % GOLDEN)
        with open(GOLDEN, encoding="utf-8") as f:
            want = f.read()
        if got != want:
            got_l, want_l = got.splitlines(), want.splitlines()
            for n, (g, w) in enumerate(zip(got_l, want_l)):
                if g != w:
                    cols = [(a, b) for a, b in zip(w.split(" "), g.split(" ")) if a != b]
                    self.fail("line %d differs from the golden file (first: %s, now %s)\n"
                              "  golden: %s\n  now:    %s" % (n + 1, cols[0][0] if cols else "?",
                                                             cols[0][1] if cols else "?", w, g))
            self.fail("%d rows now, %d in the golden file" % (len(got_l), len(want_l)))


if __name__ == "__main__":
    main()
