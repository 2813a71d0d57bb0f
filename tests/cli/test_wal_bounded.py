"""The -wal file stays short however many commands write (src/store/db.c,
wal_hook; docs/performance.md, change 21). A command does not checkpoint
when it closes (docs/robustness.md), so the copy into the database file
happens at the commit after which the WAL holds 200 pages: it copies them
and empties the WAL. With SQLite's own passive auto-checkpoint instead, the
copied frames stayed in the WAL, the next process could not know they had
been copied, and the WAL grew with every command (checked: the test fails
so).

Frames still in use are counted by the WAL format of
https://www.sqlite.org/fileformat2.html section 4.1: a 32-byte header whose
salts (bytes 16-23) every valid frame's 24-byte header repeats (bytes 8-15).
The department is review_scenario.py's (invented)."""
import os

from fxlcli import main
from review_scenario import ReviewCase, reading_for

CHECKPOINT_PAGES = 200


def wal_frames(path):
    """Frames of the WAL's current generation (0 for no or an empty file)."""
    if not os.path.exists(path):
        return 0
    with open(path, "rb") as f:
        data = f.read()
    if len(data) < 32:
        return 0
    page, salts = int.from_bytes(data[8:12], "big"), data[16:24]
    n, pos = 0, 32
    while pos + 24 + page <= len(data) and data[pos + 8:pos + 16] == salts:
        n += 1
        pos += 24 + page
    return n


class WalBoundedTest(ReviewCase):
    def test_wal_emptied_as_it_fills(self):
        wal = self.fx.db + "-wal"
        seen, most, per_fraction = [], 0, 0
        for i in range(24):
            at = "2026-11-%02dT%02d:00:00Z" % (2 + i // 8, 8 + i % 8)
            before = wal_frames(wal)
            self.fx.now = at[:-3] + "30Z"
            r = self.fx.run("record", "--patient", "P-1" if i % 2 else "P-2", "--at", at,
                            "--field", "AP", "--detector", "D-1", "--reading",
                            reading_for(0.1 * i), user="ther")
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            after = wal_frames(wal)
            seen.append(after)
            if after > before:
                per_fraction = max(per_fraction, after - before)
            most = max(most, after)
        # the WAL was emptied along the way (not only by the last command)
        self.assertTrue(any(b < a for a, b in zip(seen, seen[1:])), seen)
        # and never held more than the threshold and one command's frames
        self.assertLessEqual(most, CHECKPOINT_PAGES + per_fraction, seen)
        # it did fill past a few fractions' worth, so the bound was tested
        self.assertGreater(sum(seen), 0)
        self.assertTrue(self.fx.json("verify", user="aud")["ok"])


if __name__ == "__main__":
    main()
