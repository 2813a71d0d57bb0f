"""make package: the Debian package CPack's DEB generator builds from the
build under test. Checked against Debian's own tools: lintian (Debian's
package checker) must report no error; dpkg-deb reads the control data and
the contents; dpkg installs it into a throwaway root (--root) whose package
list is a copy of this Debian 12 system's, so the dependencies that
dpkg-shlibdeps worked out must be satisfied by real Debian 12 packages; and
the installed program runs. Nothing may be started or created at install:
the package has no maintainer scripts. Skipped when cpack, dpkg-deb or
lintian are missing (tools/install-deps.sh lists them)."""
import gzip
import os
import re
import shutil
import subprocess
import tempfile
import unittest

from fxlcli import SHIPPED_BIN, main

BUILD = os.path.dirname(os.path.abspath(SHIPPED_BIN))
TOOLS = ("cpack", "dpkg-deb", "dpkg", "lintian", "dpkg-shlibdeps")


@unittest.skipUnless(all(shutil.which(t) for t in TOOLS), "needs %s" % ", ".join(TOOLS))
class PackageTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.mkdtemp(prefix="fxlpkg-")
        r = subprocess.run(["cpack", "-G", "DEB", "-B", cls.tmp], cwd=BUILD, capture_output=True,
                           text=True, timeout=600)
        if r.returncode != 0:
            raise AssertionError("cpack failed:\n" + r.stdout + r.stderr)
        debs = [f for f in os.listdir(cls.tmp) if f.endswith(".deb")]
        assert len(debs) == 1, debs
        cls.deb = os.path.join(cls.tmp, debs[0])

    @classmethod
    def tearDownClass(cls):
        shutil.rmtree(cls.tmp, ignore_errors=True)

    def field(self, name):
        return subprocess.run(["dpkg-deb", "-f", self.deb, name], capture_output=True, text=True,
                              check=True).stdout.strip()

    def test_lintian_reports_no_error(self):
        r = subprocess.run(["lintian", "--tag-display-limit", "0", self.deb], capture_output=True,
                           text=True, timeout=600)
        errors = [line for line in r.stdout.splitlines() if line.startswith("E:")]
        self.assertEqual(errors, [], r.stdout)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)

    def test_control_and_contents(self):
        self.assertEqual(self.field("Package"), "fxledger")
        self.assertRegex(self.field("Version"), r"^\d+\.\d+\.\d+-\d+$")
        depends = self.field("Depends")
        # From dpkg-shlibdeps: the libraries the program and its modules
        # link (ldd of each; libmicrohttpd and DCMTK only through the
        # modules), and the fonts named by hand.
        for lib in ("libsqlite3-0", "libsodium23", "libcjson1", "libhpdf-2.3.0", "libutf8proc2",
                    "libmicrohttpd12", "libdcmtk17", "fonts-dejavu-core", "libc6"):
            self.assertIn(lib, depends)
        listing = subprocess.run(["dpkg-deb", "-c", self.deb], capture_output=True, text=True,
                                 check=True).stdout
        files = set(re.findall(r"\s\./(\S+)$", listing, re.M))
        for f in ("usr/bin/fxledger", "usr/share/doc/fxledger/copyright",
                  "usr/share/doc/fxledger/changelog.Debian.gz", "usr/share/man/man1/fxledger.1.gz",
                  "usr/share/man/man1/fxledger-restore.1.gz", "usr/lib/systemd/system/fxledger.service",
                  "usr/lib/systemd/system/fxledger-backup.service",
                  "usr/lib/systemd/system/fxledger-backup.timer",
                  "usr/lib/fxledger/fxledger-scheduled-backup",
                  "usr/lib/fxledger/modules/fxledger-web.so",
                  "usr/lib/fxledger/modules/fxledger-dicom.so",
                  "usr/share/doc/fxledger/docs/deployment.md"):
            self.assertIn(f, files)
        # The report font subset (docs/reports.md), where the program looks,
        # when the build made it (fontTools at configure time).
        for n in ("fxledger-DejaVuSans-subset.ttf", "fxledger-DejaVuSans-Bold-subset.ttf"):
            if os.path.isfile(os.path.join(BUILD, "fonts", n)):
                self.assertIn("usr/share/fxledger/fonts/" + n, files)
        self.assertFalse([f for f in files if "testclock" in f], "the test build is not shipped")
        # No maintainer scripts: installing creates no account, no database
        # and starts nothing (docs/deployment.md).
        with tempfile.TemporaryDirectory() as d:
            subprocess.run(["dpkg-deb", "-e", self.deb, d], check=True)
            self.assertEqual(sorted(os.listdir(d)), ["control", "md5sums"])

    def test_installs_into_a_throwaway_root_and_runs(self):
        with tempfile.TemporaryDirectory() as root:
            admin = os.path.join(root, "var", "lib", "dpkg")
            os.makedirs(os.path.join(admin, "updates"))
            os.makedirs(os.path.join(admin, "info"))
            # This Debian 12 system's package list: the dependencies must be
            # real, installed Debian packages, checked by dpkg itself.
            shutil.copy("/var/lib/dpkg/status", os.path.join(admin, "status"))
            r = subprocess.run(["dpkg", "--root=" + root, "--force-not-root", "--log=/dev/null",
                                "--install", self.deb], capture_output=True, text=True, timeout=120)
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            exe = os.path.join(root, "usr", "bin", "fxledger")
            v = subprocess.run([exe, "--version"], capture_output=True, text=True, timeout=30)
            self.assertEqual(v.returncode, 0, v.stderr)
            self.assertRegex(v.stdout, r"^fxledger \d+\.\d+\.\d+")
            # The installed program finds its web console module (it is
            # loaded before the database is opened, which then fails here).
            s = subprocess.run([exe, "--db", os.path.join(root, "none.db"), "serve", "--listen",
                                "127.0.0.1:0"], capture_output=True, text=True, timeout=30)
            self.assertEqual(s.returncode, 3, s.stderr)
            self.assertIn("does not exist", s.stderr)
            self.assertNotIn("module", s.stderr)
            # Stripped (lintian's unstripped-binary-or-object is an error).
            self.assertNotIn("not stripped", subprocess.run(["file", exe], capture_output=True,
                                                            text=True).stdout if shutil.which("file") else "")
            unit = open(os.path.join(root, "usr", "lib", "systemd", "system", "fxledger.service")).read()
            for line in ("User=fxledger", "UMask=0077", "StateDirectoryMode=0700", "NoNewPrivileges=yes",
                         "ProtectSystem=strict",
                         "ExecStart=/usr/bin/fxledger --db /var/lib/fxledger/fxledger.db serve "
                         "--listen 127.0.0.1:8617"):
                self.assertIn(line, unit.splitlines())
            with gzip.open(os.path.join(root, "usr", "share", "doc", "fxledger", "changelog.Debian.gz"),
                           "rt") as f:
                self.assertRegex(f.readline(), r"^fxledger \(%s\) " % re.escape(self.field("Version")))
            # Nothing created outside the package's own files.
            self.assertFalse(os.path.exists(os.path.join(root, "var", "lib", "fxledger")))
            self.assertFalse(os.path.exists(os.path.join(root, "etc")))
            listed = subprocess.run(["dpkg", "--root=" + root, "-L", "fxledger"], capture_output=True,
                                    text=True, check=True).stdout
            self.assertIn("/usr/bin/fxledger", listed)


if __name__ == "__main__":
    main()
