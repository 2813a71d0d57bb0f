"""The README tour, run verbatim: the indented command block under "A short
tour" in README.md is extracted (continuation lines joined as the shell
joins them) and run by bash, one command at a time, with the program
installed by the CMake install rules (what 'make install' runs) into a
temporary PREFIX on PATH, in a directory holding only a copy of
docs/examples/ - what a fresh clone offers. The program is the one users
run (real clock). Each command must succeed, and the first reading must be
within tolerance (20.4 nC x 100/10.0233 cGy/nC x 1/(1 + 0.003 x (32 - 21))
= 197.0 cGy against 200.0 cGy: -1.49 %, formula of docs/physics.md)."""
import os
import re
import shutil
import subprocess
import tempfile
import unittest

from fxlcli import BIN, SRC, main

BUILD = os.path.dirname(os.path.abspath(BIN))


def tour_commands():
    with open(os.path.join(SRC, "README.md"), encoding="utf-8") as f:
        text = f.read()
    section = text[text.index("## A short tour"):]
    section = section[:section.index("\n## ", 3)]
    lines, block = [], False
    for line in section.splitlines():
        if line.startswith("    "):
            block = True
            lines.append(line[4:])
        elif block and line.strip():
            break
    joined, commands = "", []
    for line in lines:
        if line.endswith("\\"):
            joined += line[:-1]
            continue
        commands.append(joined + line)
        joined = ""
    return commands


class ReadmeTourTest(unittest.TestCase):
    def setUp(self):
        self.dir = tempfile.mkdtemp(prefix="fxltour-")
        self.prefix = os.path.join(self.dir, "prefix")
        r = subprocess.run(["cmake", "--install", BUILD, "--prefix", self.prefix],
                           capture_output=True, text=True, timeout=120)
        self.assertEqual(r.returncode, 0, r.stderr)
        self.work = os.path.join(self.dir, "clone")
        shutil.copytree(os.path.join(SRC, "docs", "examples"),
                        os.path.join(self.work, "docs", "examples"))

    def tearDown(self):
        shutil.rmtree(self.dir, ignore_errors=True)

    def test_tour_runs_as_written(self):
        commands = tour_commands()
        self.assertGreater(len(commands), 10)
        self.assertTrue(commands[0].startswith("export FXLEDGER_DB="))
        env = {k: v for k, v in os.environ.items() if not k.startswith("FXLEDGER_")}
        env["PATH"] = os.path.join(self.prefix, "bin") + os.pathsep + env.get("PATH", "")
        env["NO_COLOR"] = "1"
        script = "set -e\n"
        outputs = []
        for i, cmd in enumerate(commands):
            script_i = script + cmd + "\n"
            r = subprocess.run(["bash", "-c", script_i], cwd=self.work, env=env, capture_output=True,
                               text=True, timeout=120)
            self.assertEqual(r.returncode, 0, "%s\n%s%s" % (cmd, r.stdout, r.stderr))
            outputs.append(r.stdout)
            if cmd.startswith("export "):
                script += cmd + "\n"
        record = [o for c, o in zip(commands, outputs) if " record " in c][0]
        row = next(l for l in record.splitlines() if l.startswith("#1 "))
        self.assertIn("197.0", row)
        self.assertIn("-1.49 %", row)
        self.assertIn("within tol.", row)
        self.assertTrue(os.path.isfile(os.path.join(self.work, "P-0001.pdf")))
        # The tour's fxledger is the installed one, not the build's.
        r = subprocess.run(["bash", "-c", "command -v fxledger"], env=env, capture_output=True, text=True)
        self.assertEqual(r.stdout.strip(), os.path.join(self.prefix, "bin", "fxledger"))


if __name__ == "__main__":
    main()
