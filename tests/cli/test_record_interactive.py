"""fxledger record, interactive, with piped standard input: the fields due
are asked one by one in plan order (REF, AP, LAT entrance, LAT exit, OBL;
record_fixture.py, every field with the default policy 'first', so all are
due at fraction 1) with the detector filled in; each field is saved as soon
as its reading and temperature are entered and its verdict is shown before
the next field is asked; a due field left blank is named at the end and its
missing-measurement item is opened then; the end of input (a session that
ends) keeps every field entered and leaves the fraction open to resume; the
patient's holds are shown before the readings and beside the verdicts, and
"continue treatment as planned" is never printed while one is open.
Without --patient the worklist is offered and its line number taken.
Check values: the reading-to-dose formula of record_fixture.py."""
import json
import os
import signal
import sqlite3
import subprocess
import time

from fxlcli import main, without_leak_check
from record_fixture import MRN, SKIN_DEFAULT_C, RecordTestCase, deviation, dose

CONTINUE = "continue treatment as planned"


class RecordInteractiveTest(RecordTestCase):
    def interactive(self, lines, *args, now=None, patient=True, **kw):
        stdin = "\n".join(lines) + "\n"
        self.fx.ensure_session(kw.get("user", "tina"), now)   # logged in before any digest
        if patient:
            return self.record("--interactive", *args, stdin=stdin, now=now, **kw)
        return self.fx.run("record", "--interactive", *args, stdin=stdin, now=now,
                           user=kw.pop("user", "tina"), **kw)

    def sql(self, query):
        con = sqlite3.connect(self.fx.db)
        try:
            return con.execute(query).fetchall()
        finally:
            con.close()

    def test_field_by_field_verdict_before_next_field(self):
        lines = [
            "D-1001", "20.0", "20",    # REF: no detector known yet, reading, temperature
            "", "21.0", "",            # AP: detector [D-1001] (the patient's last), reading, temp [32]
            "", "",                    # LAT entrance: detector [D-1001], blank reading skips
            "", "",                    # LAT exit: detector [D-1001], skip
            "", "",                    # OBL: detector [D-1001], skip
        ]
        r = self.interactive(lines)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        out = r.stdout
        # REF's verdict comes before AP is asked (the therapist sees it
        # before delivering the next field).
        ref_verdict = out.index("-> deviation +0.00 %, within tolerance")
        ap_prompt = out.index("Field AP entrance")
        self.assertLess(ref_verdict, ap_prompt)
        self.assertLess(out.index("Field REF entrance"), ref_verdict)
        # REF: 20.0 nC x 10 cGy/nC at T_cal: 200 cGy against 200 (formula, record_fixture.py)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([(h["field"], h["fraction"]) for h in hist], [("REF", 1), ("AP", 1)])
        want_ap = dose(21.0, 2 * 10 * 20 / 30, 100, temp=SKIN_DEFAULT_C)
        self.assertAlmostEqual(hist[1]["corrected_dose_cgy"], want_ap, places=9)
        self.assertEqual(hist[1]["deviation_pct"], deviation(want_ap, 200.0))
        self.assertFalse(hist[1]["temp_entered"])
        # The skipped due fields are named at the end and their items exist now.
        self.assertIn("Not measured: LAT entrance was due (first fraction)", " ".join(out.split()))
        self.assertIn("OBL entrance was due", " ".join(out.split()))
        keys = [k for (k,) in self.sql("SELECT rule_key FROM review_items WHERE rule = "
                                       "'missing_measurement' ORDER BY id")]
        self.assertEqual(len(keys), 3)   # LAT entrance, LAT exit, OBL
        self.assertTrue(all(k.endswith(":fraction:1") for k in keys), keys)
        self.assertIn("Fraction 1 closed: 2 fields measured.", out)
        # The next fraction does not open them a second time.
        self.record("--field", "REF", "--detector", "D-1001", "--reading", "20.0", "--temp", "20",
                    now="2026-11-03T09:00:00Z")
        self.assertEqual(len(self.sql("SELECT id FROM review_items WHERE rule = "
                                      "'missing_measurement'")), 3)

    def test_worklist_line_number_and_prefilled_detectors(self):
        # Fraction 1 from options leaves D-1001 as the detector of REF and AP.
        self.record("--detector", "D-1001", "--temp", "20", "--field", "REF", "--reading", "20.0",
                    "--field", "AP", "--reading", "21.0", "--field", "LAT:entrance", "--reading",
                    "15.0", "--field", "LAT:exit", "--reading", "6.0", "--field", "OBL",
                    "--reading", "18.0")
        # Fraction 2: nothing is due under 'first': every field is offered.
        lines = ["1", "20.5", "", "", "", "", "", "", "", "", ""]
        r = self.interactive(lines, patient=False, now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("Worklist for 2026-11-03", r.stdout)
        self.assertIn("Patient: line 1-1 or MRN: 1", r.stdout)
        self.assertIn("place D-1001 at the entrance", r.stdout)
        self.assertNotIn("detector [", r.stdout.split("Field AP")[0])
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual((hist[-1]["fraction"], hist[-1]["field"], hist[-1]["detector"]),
                         (2, "REF", "D-1001"))

    def test_end_of_input_keeps_what_was_entered_and_resumes(self):
        r = self.interactive(["D-1001", "20.0", "20", "", "21.0"])   # ends during AP
        self.assertEqual(r.returncode, 1, r.stdout + r.stderr)
        self.assertIn("the 1 field entered is saved; fraction 1 stays open", r.stderr)
        self.assertEqual([h["field"] for h in self.fx.json("history", "--patient", MRN)], ["REF"])
        day = self.fx.json("today")
        self.assertTrue(day["patients"][0]["resuming"])
        self.assertEqual(day["patients"][0]["next_fraction"], 1)
        self.assertEqual([f["field"] for f in day["patients"][0]["fields"] if f["measured"]], ["REF"])
        # Resumed: REF is not asked again, AP is (D-1001 filled in: the patient's last).
        r = self.interactive(["21.0", "", "", "", "", "", "", ""], now="2026-11-02T09:30:00Z")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertIn("resumed", r.stdout)
        self.assertNotIn("Field REF", r.stdout)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([(h["fraction"], h["field"]) for h in hist], [(1, "REF"), (1, "AP")])

    def test_kill_mid_fraction_loses_nothing_entered(self):
        """The session is killed (SIGKILL, no chance to clean up) while the
        second field is asked: the first field is in the database."""
        self.fx.ensure_session("tina")
        env = without_leak_check(self.fx.env("tina"))
        p = subprocess.Popen(self.fx.argv("record", "--patient", MRN, "--interactive", user="tina"),
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, env=env)
        p.stdin.write(b"D-1001\n20.0\n20\n\n")
        p.stdin.flush()
        seen, deadline = b"", time.monotonic() + 30
        while b"Field AP" not in seen or not seen.rstrip().endswith(b"):"):
            if time.monotonic() > deadline:
                break
            chunk = os.read(p.stdout.fileno(), 4096)
            if not chunk:
                break
            seen += chunk
        self.assertIn(b"within tolerance", seen)
        p.send_signal(signal.SIGKILL)
        p.wait(timeout=10)
        p.stdout.close()
        p.stderr.close()
        p.stdin.close()
        self.assertEqual(p.returncode, -signal.SIGKILL)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([(h["fraction"], h["field"], h["reading"]) for h in hist], [(1, "REF", 20.0)])
        self.fx.ok("verify")

    def test_hold_before_readings_and_beside_verdicts(self):
        # Fraction 1: REF outside the action level (22.0 nC -> 220 cGy, +10 %).
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "22.0", "--temp", "20")
        self.assertEqual(r.returncode, 12, r.stderr)
        item = self.sql("SELECT id FROM review_items WHERE rule = 'result'")[0][0]
        # Fraction 2, within tolerance: the hold is shown before the first
        # reading is asked, and again with the verdicts; never "continue".
        lines = ["20.0", "20", "", "", "", "", "", "", "", "", "", ""]
        r = self.interactive(lines, now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        out = r.stdout
        self.assertLess(out.index("HOLD #%d" % item), out.index("reading nC"))
        self.assertNotIn(CONTINUE, out)
        self.assertIn("Treatment is on hold: review item #%d" % item, " ".join(out.split()))
        self.assertIn("a physicist has investigated and closed", " ".join(out.split()))
        # Options form too: before the table and beside it.
        r = self.record("--field", "AP", "--detector", "D-1001", "--reading", "21.0", "--temp", "20",
                        "--fraction", "3", now="2026-11-04T09:00:00Z")
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertTrue(r.stdout.startswith("Open before this fraction was logged:"), r.stdout)
        self.assertNotIn(CONTINUE, r.stdout)
        # Once a physicist closes it, the guidance may say so again.
        self.fx.ok("queue", "close", str(item), "--disposition", "set-up error", "--comment",
                   "re-checked", user="phil")
        r = self.record("--field", "REF", "--detector", "D-1001", "--reading", "20.0", "--temp", "20",
                        now="2026-11-05T09:00:00Z")
        self.assertIn(CONTINUE, r.stdout)

    def test_action_level_holds_before_the_next_field(self):
        lines = ["D-1001", "22.0", "20", "n"]
        r = self.interactive(lines)
        self.assertEqual(r.returncode, 12, r.stdout + r.stderr)
        out = r.stdout
        self.assertIn("HOLD TREATMENT: do not deliver the next field.", out)
        self.assertIn("Go on logging fields already delivered? [y/N]:", out)
        self.assertNotIn("Field AP", out)
        self.assertIn("Stopped on a hold: the fraction stays open.", " ".join(out.split()))
        self.assertTrue(self.fx.json("today")["patients"][0]["resuming"])

    def test_json_output_with_prompts_on_stderr(self):
        lines = ["D-1001", "20.0", "20", "", "", "", "", "", "", "", ""]
        r = self.fx.run("--json", "record", "--patient", MRN, "--interactive",
                        stdin="\n".join(lines) + "\n", user="tina")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        doc = json.loads(r.stdout)
        self.assertEqual([x["field"] for x in doc["results"]], ["REF"])
        self.assertTrue(doc["fraction_closed"])
        self.assertEqual(sorted(m["field"] for m in doc["missing"]), ["AP", "LAT", "LAT", "OBL"])
        self.assertIn("reading nC", r.stderr)

    def test_interactive_refuses_option_readings(self):
        self.assertFailsUnchanged("record", "--patient", MRN, "--interactive", "--field", "REF",
                                  "--detector", "D-1001", "--reading", "20", user="tina",
                                  expect_code=1, expect_in="--interactive asks for the readings")

    def test_prompt_hints_are_things_one_can_do_there(self):
        lines = ["D-1001", "d", "D-2002", "20.0", "", "", "", "", "", "", "", "", ""]
        r = self.interactive(lines)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        # 'd' at the reading prompt changes the detector, as the prompt says.
        self.assertIn("(Enter skips, d: other detector)", r.stdout)
        self.assertEqual(self.fx.json("history", "--patient", MRN)[0]["detector"], "D-2002")

    def test_answers_refused_whole_never_split_or_echoed_raw(self):
        """An answer longer than the prompt's 255-character buffer is refused
        whole: its tail is never taken as the next answer (before, the first
        255 nines were read as a reading of 9.99e254 nC and the tail "20" as
        the temperature). Piped input stops there, since the lines after it
        were meant for later prompts; no reading is saved (the fraction begun
        stays open to resume, as when input ends). The catalogue checks the
        file unchanged for a long answer at the patient prompt. Piped answers
        are shown made printable: an escape sequence typed into the pipe
        never reaches the terminal."""
        r = self.interactive(["D-1001", "9" * 255 + "20", "20", "", "", "", "", "", "", ""])
        self.assertEqual(r.returncode, 2, r.stdout + r.stderr)
        self.assertIn("an answer longer than 255 characters is refused", r.stderr)
        self.assertIn("the 0 fields entered are saved", r.stderr)
        self.assertEqual(r.stderr.count("\n"), 1, r.stderr)
        self.assertNotIn("9" * 50, r.stdout + r.stderr)
        self.assertEqual(self.sql("SELECT COUNT(*) FROM measurements"), [(0,)])
        # A NUL byte in an answer: refused whole too (C would cut "20\0.5" to "20").
        r = self.interactive(["D-1001", "20\x00.5", "20"])
        self.assertEqual(r.returncode, 2, r.stdout + r.stderr)
        self.assertIn("an answer holding a NUL byte is refused", r.stderr)
        self.assertEqual(self.sql("SELECT COUNT(*) FROM measurements"), [(0,)])
        # 255 characters exactly still fit (a padded reading is a number).
        r = self.interactive(["D-1001", " " * 251 + "20.0", "20", "", "", "", "", "", "", "", ""])
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        # Escape sequences and a bidi override piped in: echoed as '?', never raw.
        r = self.interactive(["\x1b[2J\x1b[31m20", "\u202e20", "21.0", "", "", "", "", "", "", "", ""],
                             now="2026-11-03T09:00:00Z")
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        self.assertNotIn("\x1b", r.stdout + r.stderr)
        self.assertIn("?[2J?[31m20", r.stdout)
        hist = self.fx.json("history", "--patient", MRN)
        self.assertEqual([h["reading"] for h in hist if h["fraction"] == 2][0], 21.0)


if __name__ == "__main__":
    main()
