"""A small invented department for the review, audit, backup and amendment
tests, set up through the real commands: users of every role, one 6 MV beam,
one photon diode calibrated to N = 100 cGy / 10 nC = 10 cGy/nC under the
reference conditions (SSD 100 cm, 10 x 10 cm, so every correction factor is
1 and the temperature coefficient 0), two patients whose fields sit at those
reference conditions with an expected dose of 200 cGy, and levels of 5 % /
8 %. A reading of 20 nC is then 200 cGy and 0 % deviation; 20 x (1 + d/100)
nC gives d %. All data are invented."""
import json

from fxlcli import FxlTestCase

PLAN = {
    "format": "fxledger-plan/1",
    "comment": "Invented example data for tests; not a real patient or plan.",
    "site": "Pelvis",
    "technique": "3D box",
    "fractions": 25,
    "dose_per_fraction_cgy": 200,
}


def field(name, policy, gantry):
    return {"name": name, "machine": "LINAC1", "beam": "6X", "setup": "ssd", "mu": 200,
            "ssd_cm": 100, "x_cm": 10, "y_cm": 10, "wedge_deg": 0, "tray": False,
            "gantry_deg": gantry, "incidence_deg": 0, "policy": policy,
            "points": [{"point": "entrance", "expected_dose_cgy": 200, "expected_source": "tps"}]}


def reading_for(deviation_pct):
    """The reading in nC that gives this deviation from 200 cGy."""
    return "%.4f" % (20.0 * (1 + deviation_pct / 100.0))


class ReviewCase(FxlTestCase):
    """FxlTestCase with the invented department set up (clock 2026-11-02)."""

    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.now = "2026-10-01T09:00:00Z"
        fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
        fx.ok("user", "add", "phys", "--name", "Invented Physicist", "--role", "physicist")
        fx.ok("user", "add", "aud", "--name", "Invented Auditor", "--role", "auditor")
        fx.ok("machine", "add", "LINAC1")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon",
              "--energy", "6", "--dmax", "1.5")
        self.add_diode("D-1", "2026-12-31")
        fx.ok("levels", "set", "default", "--tolerance", "5", "--action", "8",
              "--effective", "2026-01-01")
        for mrn, family in (("P-1", "Example"), ("P-2", "Sample")):
            fx.ok("patient", "add", mrn, "--family", family, "--given", "Invented")
            plan = dict(PLAN, patient_mrn=mrn, label="PL-" + mrn,
                        fields=[field("AP", "first", 0), field("PA", "weekly", 180)])
            fx.ok("plan", "import", fx.write("plan-%s.json" % mrn, json.dumps(plan)), user="phys")
        fx.now = "2026-11-02T09:00:00Z"

    def add_diode(self, serial, valid_until, *options, user=None):
        """A photon diode with no temperature coefficient ('detector add'
        options beside), calibrated for 6X entrance to N = 10 cGy/nC."""
        self.fx.ok("detector", "add", serial, "--label", "Diode " + serial[2:], "--kind",
                   "photon_diode", "--temp-coeff", "0", *options)
        self.calibrate_diode(serial, valid_until, user=user)

    def calibrate_diode(self, serial, valid_until, user=None):
        self.fx.ok("calib", "add", serial, "--machine", "LINAC1", "--beam", "6X", "--point",
                   "entrance", "--chamber-dose", "100", "--readings", "10,10,10", "--temp", "20",
                   "--valid-until", valid_until, user=user)

    def record(self, mrn, at, *readings, user="ther", expect=(0, 10, 11, 12)):
        """Logs one fraction: readings are (field, deviation_pct) pairs with
        detector D-1; returns the parsed JSON result."""
        args = ["--json", "record", "--patient", mrn, "--at", at]
        for name, dev in readings:
            args += ["--field", name, "--detector", "D-1", "--reading", reading_for(dev)]
        if at > self.fx.now:
            self.fx.now = at    # the clock moves on with the treatment days
        r = self.fx.run(*args, user=user)
        self.assertIn(r.returncode, expect, r.stderr)
        return json.loads(r.stdout)

    def queue(self, *args, user="aud"):
        return self.fx.json("queue", *args, user=user)
