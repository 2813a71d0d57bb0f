"""make install: the CMake install rules put the fxledger program under
PREFIX/bin and the documentation under PREFIX/share/doc/fxledger; DESTDIR
stages the same tree (how a package is built). The test installs the build
under test into temporary directories and runs the installed program."""
import os
import subprocess
import tempfile
import unittest

from fxlcli import BIN, SRC, Fxl, main

BUILD = os.path.dirname(os.path.abspath(BIN))


class InstallTest(unittest.TestCase):
    def install(self, prefix, destdir=None):
        env = dict(os.environ)
        if destdir:
            env["DESTDIR"] = destdir
        r = subprocess.run(["cmake", "--install", BUILD, "--prefix", prefix],
                           capture_output=True, text=True, env=env, timeout=120)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)

    def test_prefix_puts_the_program_in_bin(self):
        with tempfile.TemporaryDirectory() as d:
            prefix = os.path.join(d, "usr")
            self.install(prefix)
            exe = os.path.join(prefix, "bin", "fxledger")
            self.assertTrue(os.access(exe, os.X_OK), exe)
            env = dict(os.environ, PATH=os.path.join(prefix, "bin") + os.pathsep + os.environ["PATH"])
            r = subprocess.run(["fxledger", "--version"], capture_output=True, text=True, env=env,
                               timeout=30)
            self.assertEqual(r.returncode, 0, r.stderr)
            self.assertIn("fxledger", r.stdout)
            doc = os.path.join(prefix, "share", "doc", "fxledger")
            self.assertTrue(os.path.isfile(os.path.join(doc, "README.md")))
            self.assertTrue(os.path.isfile(os.path.join(doc, "docs", "record.md")))
            # The manual pages the build wrote, gzipped (Debian policy 12.1).
            man1 = os.path.join(prefix, "share", "man", "man1")
            self.assertTrue(os.path.isfile(os.path.join(man1, "fxledger.1.gz")))
            self.assertTrue(os.path.isfile(os.path.join(man1, "fxledger-record.1.gz")))

    def test_report_fonts_installed_where_the_program_finds_them(self):
        """The build's font subset (docs/reports.md) goes to
        PREFIX/share/fxledger/fonts, and the installed program embeds it
        (pdffonts, poppler-utils, names the embedded fonts)."""
        build_fonts = os.path.join(BUILD, "fonts")
        names = ("fxledger-DejaVuSans-subset.ttf", "fxledger-DejaVuSans-Bold-subset.ttf")
        if not all(os.path.isfile(os.path.join(build_fonts, n)) for n in names):
            self.skipTest("this build made no font subset (no fontTools at configure time)")
        with tempfile.TemporaryDirectory() as d:
            prefix = os.path.join(d, "opt", "fxl")
            self.install(prefix)
            for n in names:
                with open(os.path.join(prefix, "share", "fxledger", "fonts", n), "rb") as a, \
                        open(os.path.join(build_fonts, n), "rb") as b:
                    self.assertEqual(a.read(), b.read(), n)
            fx = Fxl(bin=os.path.join(prefix, "bin", "fxledger")).init()
            try:
                out = fx.path("month.pdf")
                fx.ok("report", "month", "2026-02", "--out", out)
                r = subprocess.run(["pdffonts", out], capture_output=True, text=True, check=True)
                self.assertEqual(r.stderr, "")
                self.assertIn("DejaVuSans-FxlSubset", r.stdout)
                self.assertNotIn("+DejaVuSans,", r.stdout)
            finally:
                fx.close()

    def test_destdir_stages_under_the_prefix(self):
        with tempfile.TemporaryDirectory() as d:
            self.install("/usr", destdir=d)
            self.assertTrue(os.access(os.path.join(d, "usr", "bin", "fxledger"), os.X_OK))
            self.assertFalse(os.path.exists(os.path.join(d, "bin")))

    def test_makefile_default_prefix_is_usr_local(self):
        # make -n prints the commands without running them (GNU make manual).
        r = subprocess.run(["make", "-n", "-C", SRC, "install", "BUILD=" + BUILD],
                           capture_output=True, text=True, timeout=60)
        self.assertEqual(r.returncode, 0, r.stderr)
        self.assertIn("cmake --install %s --prefix /usr/local" % BUILD, r.stdout)


if __name__ == "__main__":
    main()
