"""Output files never clobber (include/fxl/outfile.h): 'report --out' and
'backup' refuse the open database, its -wal/-shm, another SQLite file, an
existing file (unless --force), a symlink, a directory and a device, and
leave the database unchanged; the files fxledger creates are mode 0600;
'init' refuses a dangling symlink. The SQLite header bytes checked are those
of the SQLite file format ("SQLite format 3\\0", sqlite.org/fileformat.html).
Test data is invented."""
import os
import stat
import subprocess

from fxlcli import FxlTestCase, main


class OutfileTest(FxlTestCase):

    def setUp(self):
        super().setUp()
        self.old_umask = os.umask(0o022)   # a common default: files would be 0644 without care
        self.fx.ok("patient", "add", "OUT-1", "--family", "Output")

    def tearDown(self):
        os.umask(self.old_umask)
        super().tearDown()

    def report(self, out, *extra, **kw):
        return self.assertFailsUnchanged("report", "patient", "OUT-1", "--out", out, *extra, expect_code=2, **kw)

    def test_database_and_side_files_refused_even_with_force(self):
        before = self.fx.digest()   # the .db and its -wal
        for target in (self.fx.db, self.fx.db + "-wal", self.fx.db + "-shm"):
            for force in ((), ("--force",)):
                with self.subTest(target=target, force=force):
                    r = self.report(target, *force)
                    self.assertTrue("open fxledger database" in r.stderr or "SQLite database" in r.stderr,
                                    r.stderr)
        self.assertEqual(self.fx.digest(), before)
        self.assertEqual(self.fx.json("verify")["ok"], True)

    def test_other_sqlite_file_refused_even_with_force(self):
        copy = self.fx.path("copy.db")
        self.fx.ok("backup", copy)
        before = open(copy, "rb").read()
        r = self.report(copy, "--force")
        self.assertIn("SQLite database file", r.stderr)
        self.assertEqual(open(copy, "rb").read(), before)

    def test_existing_file_needs_force(self):
        other = self.fx.write("notes.txt", "invented notes kept by a user\n")
        r = self.report(other)
        self.assertIn("already exists; give --force", r.stderr)
        self.assertEqual(open(other).read(), "invented notes kept by a user\n")
        self.fx.ok("report", "patient", "OUT-1", "--out", other, "--force")
        with open(other, "rb") as f:
            self.assertEqual(f.read(5), b"%PDF-")   # PDF header, ISO 32000-1 section 7.5.2
        self.assertEqual(stat.S_IMODE(os.stat(other).st_mode), 0o600)

    def test_symlink_directory_and_device_refused(self):
        target = self.fx.write("target.txt", "kept\n")
        link = self.fx.path("link.pdf")
        os.symlink(target, link)
        dangling = self.fx.path("dangling.pdf")
        os.symlink(self.fx.path("nowhere.pdf"), dangling)
        for out, why in ((link, "symbolic link"), (dangling, "symbolic link"),
                         (self.fx.dir, "directory"), ("/dev/null", "device")):
            for force in ((), ("--force",)):
                with self.subTest(out=out, force=force):
                    r = self.report(out, *force)
                    self.assertIn(why, r.stderr)
        self.assertEqual(open(target).read(), "kept\n")
        self.assertFalse(os.path.exists(self.fx.path("nowhere.pdf")))

    def test_created_files_are_0600_and_no_temporary_file_is_left(self):
        out = self.fx.path("new.pdf")
        self.fx.ok("report", "patient", "OUT-1", "--out", out)
        self.assertEqual(stat.S_IMODE(os.stat(out).st_mode), 0o600)
        copy = self.fx.path("b.db")
        self.fx.ok("backup", copy)
        self.assertEqual(stat.S_IMODE(os.stat(copy).st_mode), 0o600)
        self.assertEqual(stat.S_IMODE(os.stat(self.fx.db).st_mode), 0o600)
        left = [n for n in os.listdir(self.fx.dir) if ".part-" in n]
        self.assertEqual(left, [])

    def test_backup_onto_existing_or_database_refused(self):
        for target in (self.fx.db, self.fx.write("x.txt", "x")):
            with self.subTest(target=target):
                self.assertFailsUnchanged("backup", target, expect_code=2)

    def test_init_refuses_dangling_symlink(self):
        link = self.fx.path("new.db")
        os.symlink(self.fx.path("elsewhere.db"), link)
        # the harness names its own database, so call the program directly
        r = self.fx.run("--db", link, "init", "--department", "Invented", "--admin", "admin",
                        "--admin-name", "Invented Admin")
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn("symbolic link", r.stderr)
        self.assertFalse(os.path.exists(self.fx.path("elsewhere.db")))


if __name__ == "__main__":
    main()
