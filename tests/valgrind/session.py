"""A representative fxledger session for `make valgrind` (run_valgrind.sh
points FXLEDGER_BIN at a wrapper that starts each command under valgrind):
set-up of an invented department, plan import, beam data, logging from
options and from a readings file, a refused bad input, an amendment, the
review queue worked to a close, listings, both PDF reports, an online
backup and verify. Every command's exit code is checked here; the valgrind
logs are checked by run_valgrind.sh. Test data is invented."""
import json
import os
import sys
import unittest

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "cli"))

import robust_fixture as rb  # noqa: E402
from fxlcli import DATA  # noqa: E402


class ValgrindSession(unittest.TestCase):

    def setUp(self):
        self.fx = rb.new_fx()
        rb.build_department(self.fx, ["VG-1"])

    def tearDown(self):
        self.fx.close()

    def test_session(self):
        fx = self.fx
        fx.ok("machine", "add", "LINAC1", user="phil")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon",
              "--energy", "6", "--dmax", "1.5", user="phil")
        fx.ok("machine", "beamdata", os.path.join(DATA, "beams", "linac1_6x.json"), user="phil")
        fx.ok("record", *rb.record_args("VG-1", 1)[1:], user="tina")
        r = fx.run(*rb.record_args("VG-1", 2, 6.0), user="tina")
        self.assertEqual(r.returncode, 11, r.stderr)           # outside tolerance
        readings = {"format": "fxledger-readings", "version": 1, "patient": "VG-1",
                    "fraction": 3,
                    "readings": [{"field": name, "detector": "D-1001",
                                  "reading": rb.reading_for(name), "temp_c": rb.TEMP_C}
                                 for name, *_ in rb.FIELDS]}
        fx.ok("record", "--file", fx.write("r.json", json.dumps(readings)), user="tina")
        r = fx.run("record", "--patient", "VG-1", "--field", "REF", "--detector", "D-1001",
                   "--reading", "-3", user="tina")
        self.assertEqual(r.returncode, 2, r.stderr)            # refused, nothing written
        r = fx.run("record", "--file", fx.write("cut.json", json.dumps(readings)[:70]), user="tina")
        self.assertEqual(r.returncode, 2, r.stderr)            # truncated file
        history = fx.json("history", "--patient", "VG-1", user="phil")
        fx.ok("amend", str(history[0]["measurement_id"]), "--reading", "%.3f" % rb.reading_for("REF", 1.0),
              "--reason", "typed the wrong digit (test)", user="tina")
        items = fx.json("queue", "list", user="phil")
        self.assertTrue(items)
        item = str(items[0]["id"])
        fx.ok("queue", "show", item, user="phil")
        fx.ok("queue", "ack", item, "--comment", "seen (test)", user="tina")
        fx.ok("queue", "comment", item, "set-up re-checked (test)", user="phil")
        fx.ok("queue", "close", item, "--disposition", "set-up error", user="phil")
        fx.ok("--json", "detector", "list", user="phil")
        fx.ok("plan", "show", "VG-1", "C-1", user="phil")
        fx.ok("report", "patient", "VG-1", "--out", fx.path("p.pdf"),
              "--generated-at", "2026-11-30", user="phil")
        fx.ok("report", "month", "2026-11", "--out", fx.path("m.pdf"),
              "--generated-at", "2026-11-30", user="phil")
        fx.ok("backup", fx.path("copy.db"), user="admin")
        fx.ok("verify", user="admin")


if __name__ == "__main__":
    unittest.main(verbosity=2)
