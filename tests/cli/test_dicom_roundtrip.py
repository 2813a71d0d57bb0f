"""DICOM RT Plan import, round trip: fresh random plans are written with
pydicom (a reference implementation of the standard) by
tests/data/dicom/make_rtplan.py, converted to the DICOM JSON Model with
pydicom's to_json_dict() and, when dcmtk is installed, with dcm2json, and the
reader's unit test (build/tests/test_dicom_plan) compares every value it
reads with what was written. Also checks that the committed fixtures are what
the generator makes. Set FXL_DICOM_SEED to repeat a run; every plan is
invented.

Route: the reader has no command yet (plan import-dicom comes with the plan
commands), so the C unit test binary is the driver: it reads the directory
named by FXLEDGER_DICOM_DIR."""
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
import unittest

from fxlcli import BIN, SRC

GENERATOR = os.path.join(SRC, "tests", "data", "dicom", "make_rtplan.py")
FIXTURES = os.path.join(SRC, "tests", "data", "dicom")
DRIVER = os.path.join(os.path.dirname(os.path.abspath(BIN)), "tests", "test_dicom_plan")
HAVE_DCM2JSON = shutil.which("dcm2json") is not None


class DicomRoundTripTest(unittest.TestCase):
    def setUp(self):
        self.dir = tempfile.mkdtemp(prefix="fxldicom-")
        self.assertTrue(os.path.exists(DRIVER), "unit test driver not built: %s" % DRIVER)

    def tearDown(self):
        shutil.rmtree(self.dir, ignore_errors=True)

    def generate(self, *args):
        r = subprocess.run(["/usr/bin/python3", GENERATOR, self.dir] + list(args),
                           capture_output=True, text=True, timeout=300)
        self.assertEqual(r.returncode, 0, r.stderr)
        return r.stdout.split()

    def drive(self, seed):
        env = dict(os.environ, FXLEDGER_DICOM_DIR=self.dir)
        r = subprocess.run([DRIVER], capture_output=True, text=True, env=env, timeout=300)
        self.assertEqual(r.returncode, 0,
                         "seed %s (repeat with FXL_DICOM_SEED=%s):\n%s%s" % (seed, seed, r.stdout, r.stderr))
        return r.stdout + r.stderr

    def seed(self):
        return int(os.environ.get("FXL_DICOM_SEED") or time.time_ns() % 1000000)

    def test_random_plans_pydicom(self):
        seed = self.seed()
        files = self.generate("--seed", str(seed))
        self.assertGreaterEqual(len(files), 10)
        out = self.drive(seed)
        self.assertIn("checked %d plans" % len(files), out)

    @unittest.skipUnless(HAVE_DCM2JSON, "dcm2json (Debian package dcmtk) is not installed")
    def test_random_plans_dcm2json(self):
        seed = self.seed() + 1
        files = self.generate("--seed", str(seed), "--dcm2json")
        self.assertTrue(any(f.endswith(".dcmtk.json") for f in files))
        out = self.drive(seed)
        self.assertIn("checked %d plans" % len(files), out)

    def test_committed_fixtures_are_current(self):
        args = ["--dcm2json"] if HAVE_DCM2JSON else []
        files = self.generate(*args)
        for name in files:
            stem = name[:-len(".json")]
            for f in (name, stem + ".expect.json"):
                with open(os.path.join(self.dir, f), encoding="utf-8") as a, \
                        open(os.path.join(FIXTURES, f), encoding="utf-8") as b:
                    self.assertEqual(json.load(a), json.load(b),
                                     "%s differs from what make_rtplan.py makes: regenerate the fixtures" % f)


if __name__ == "__main__":
    unittest.main(verbosity=2)
