"""The manual pages: the build writes build/man/fxledger.1 and one
fxledger-COMMAND.1 per command with the program's hidden '--man-pages' mode,
from the same option tables that --help prints. This test reads --help of the
program users run (every command, every sub-command) and checks that each
command, sub-command and option it prints appears in the rendered page, in
the section of its own sub-command, that man-db renders every page without a
warning (the check lintian runs: man --warnings -E UTF-8 -l), and that the
gzip copies that are installed hold the same text. Reference renderer: man-db
and groff from Debian (man(1), groff_man(7))."""
import gzip
import os
import re
import shutil
import subprocess
import unittest

from fxlcli import SHIPPED_BIN

MAN_DIR = os.path.join(os.path.dirname(os.path.abspath(SHIPPED_BIN)), "man")
OPTION = re.compile(r"^\s+--([a-z0-9-]+)", re.M)


def run_help(*args):
    p = subprocess.run([SHIPPED_BIN, *args, "--help"], capture_output=True, text=True,
                       env={"PATH": os.environ.get("PATH", "/usr/bin:/bin"), "NO_COLOR": "1"})
    if p.returncode != 0:
        raise AssertionError("fxledger %s --help exited %d: %s" % (" ".join(args), p.returncode, p.stderr))
    return p.stdout


def commands_of(text):
    """The command table of 'fxledger --help': the lines under 'commands:'."""
    section = text.split("commands:", 1)[1].split("global options:", 1)[0]
    return [m.group(1) for m in re.finditer(r"^  (\S+)\s", section, re.M)]


def subs_of(text):
    if "sub-commands:" not in text:
        return []
    section = text.split("sub-commands:", 1)[1].split("\n\n", 1)[0]
    return [m.group(1) for m in re.finditer(r"^  (\S+)\s", section, re.M)]


def render(page):
    """The page as man-db shows it, plain text, wide enough that no option is
    hyphenated; groff's Unicode hyphen (U+2010) is read as '-'."""
    env = {"PATH": os.environ.get("PATH", "/usr/bin:/bin"), "MANWIDTH": "250", "LC_ALL": "C.UTF-8",
           "MAN_KEEP_FORMATTING": ""}
    p = subprocess.run(["man", "--warnings", "-E", "UTF-8", "-l", page], capture_output=True, text=True,
                       env=env)
    return p.returncode, p.stdout.replace("\u2010", "-"), p.stderr


@unittest.skipUnless(shutil.which("man"), "man-db is not installed (tools/install-deps.sh lists it)")
class ManPages(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.top_help = run_help()
        cls.commands = commands_of(cls.top_help)

    def page(self, name):
        path = os.path.join(MAN_DIR, name + ".1")
        self.assertTrue(os.path.exists(path), "%s was not written by the build" % path)
        rc, text, warnings = render(path)
        self.assertEqual(rc, 0, "man -l %s failed: %s" % (path, warnings))
        self.assertEqual(warnings.strip(), "", "man --warnings on %s" % path)
        # The installed copy (gzip -9n) is the same page.
        with open(path, "rb") as f, gzip.open(path + ".gz", "rb") as g:
            self.assertEqual(f.read(), g.read(), "%s.gz differs from %s" % (path, path))
        return text

    def test_one_page_per_command_and_no_other(self):
        self.assertGreater(len(self.commands), 10)
        want = {"fxledger.1"} | {"fxledger-%s.1" % c for c in self.commands}
        have = {f for f in os.listdir(MAN_DIR) if f.endswith(".1")}
        self.assertEqual(have, want)

    def test_main_page_lists_every_command_and_global_option(self):
        text = self.page("fxledger")
        self.assertIn("fxledger - fraction-by-fraction logbook", text)
        commands = text.split("COMMANDS", 1)[1].split("GLOBAL OPTIONS", 1)[0]
        for c in self.commands:
            self.assertRegex(commands, r"(?m)^\s+%s\b" % re.escape(c), "command %s" % c)
            self.assertIn("fxledger-%s(1)" % c, commands)
        glob = self.top_help.split("global options:", 1)[1]
        page_glob = text.split("GLOBAL OPTIONS", 1)[1].split("ENVIRONMENT", 1)[0]
        opts = OPTION.findall(glob)
        self.assertIn("password-fd", opts)
        for o in opts:
            self.assertRegex(page_glob, r"(?m)^\s+--%s\b" % re.escape(o), "global option --%s" % o)
        self.assertIn("EXIT STATUS", text)
        self.assertIn("do not replace, the judgement of a", text.replace("\n", " ").replace("  ", " "))

    def test_every_option_of_every_command_is_in_its_page(self):
        checked = 0
        for c in self.commands:
            with self.subTest(command=c):
                text = self.page("fxledger-" + c)
                self.assertIn("fxledger-%s - " % c, text)
                help_text = run_help(c)
                subs = subs_of(help_text)
                if not subs:
                    for o in OPTION.findall(help_text):
                        self.assertRegex(text.split("OPTIONS", 1)[1], r"(?m)^\s+--%s\b" % re.escape(o),
                                         "fxledger %s --%s" % (c, o))
                        checked += 1
                    continue
                # A family: each sub-command in the list and in a section of
                # its own, holding exactly its own options.
                listing = text.split("SUB-COMMANDS", 1)[0]
                headings = list(re.finditer(r"(?m)^   fxledger %s (\S+)$" % re.escape(c), text))
                self.assertEqual([h.group(1) for h in headings], subs)
                for i, h in enumerate(headings):
                    sub = h.group(1)
                    self.assertRegex(listing, r"(?m)^\s+%s\b" % re.escape(sub))
                    end = headings[i + 1].start() if i + 1 < len(headings) else text.index("EXIT STATUS")
                    section = text[h.end():end]
                    for o in OPTION.findall(run_help(c, sub)):
                        self.assertRegex(section, r"(?m)^\s+--%s\b" % re.escape(o),
                                         "fxledger %s %s --%s" % (c, sub, o))
                        checked += 1
        # Every sub-command prints at least --json and --help.
        self.assertGreater(checked, 2 * len(self.commands))


if __name__ == "__main__":
    unittest.main()
