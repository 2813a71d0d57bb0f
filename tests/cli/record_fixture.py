"""Shared set-up for the record command tests: an invented department built
with fxledger's own commands (users, machine and beam, detectors,
calibrations, correction tables, levels, patient, plan), and the reading to
dose formula used to compute check values.

Formula (AAPM Report 87 / TG-62; docs/physics.md):
    D = (M - M_0) x N x CF_fs x CF_ssd x CF_wedge x CF_tray x CF_angle x CF_T
    CF_T = 1 / (1 + a (T - T_cal))
Equivalent square of X x Y: 2XY / (X + Y) (Sterling rule).
Table factors are interpolated linearly between the points of
tests/data/corrections/diode_6x.json (physics: linear interpolation)."""
import json
import os

from fxlcli import DATA, FxlTestCase

CORRECTIONS = os.path.join(DATA, "corrections", "diode_6x.json")
READINGS = os.path.join(DATA, "readings")

MRN = "TEST-0101"
PLAN = "REC-1"
NOW = "2026-11-02T09:00:00Z"

# N of D-1001: 100 cGy chamber dose / 10.0 nC mean reading (TG-62
# cross-calibration arithmetic), calibrated at 20 degC, SSD 100, 10 x 10 cm.
N_D1001 = 100.0 / 10.0
T_CAL = 20.0
A_PER_C = 0.003        # the detectors' temperature coefficient, 0.3 %/degC
SKIN_DEFAULT_C = 32.0  # setting skin_temp_c default (docs/settings.md)


def plan_document():
    """An invented plan: REF at the reference conditions, AP with a 10 x 20 cm
    field, LAT measured at entrance and exit with wedge and oblique incidence,
    OBL at an SSD outside the commissioned SSD table (80 to 120 cm)."""
    def field(name, ssd, x, y, points, wedge=0, incidence=0, mu=200):
        return {"name": name, "machine": "LINAC-A", "beam": "6X", "setup": "ssd", "mu": mu,
                "ssd_cm": ssd, "x_cm": x, "y_cm": y, "wedge_deg": wedge, "tray": False,
                "gantry_deg": 0, "incidence_deg": incidence, "points": points}

    def entrance(dose):
        return {"point": "entrance", "expected_dose_cgy": dose, "expected_source": "tps"}

    return {
        "format": "fxledger-plan/1",
        "comment": "Invented test data; not a real patient or plan.",
        "patient_mrn": MRN, "label": PLAN, "site": "Pelvis", "technique": "3D",
        "fractions": 5,
        "fields": [
            field("REF", 100, 10, 10, [entrance(200.0)]),
            field("AP", 100, 10, 20, [entrance(200.0)]),
            field("LAT", 90, 10, 10, [entrance(150.0),
                                      {"point": "exit", "expected_dose_cgy": 60.0,
                                       "expected_source": "manual", "thickness_cm": 20}],
                  wedge=30, incidence=30),
            field("OBL", 130, 10, 10, [entrance(180.0)]),
        ],
    }


def interp(points, x):
    """Linear interpolation inside a table (never outside)."""
    for (x0, y0), (x1, y1) in zip(points, points[1:]):
        if x0 <= x <= x1:
            return y0 + (x - x0) / (x1 - x0) * (y1 - y0)
    raise ValueError("outside the table")


def table(parameter):
    with open(CORRECTIONS, encoding="utf-8") as f:
        doc = json.load(f)
    for t in doc["tables"]:
        if t["parameter"] == parameter:
            return [(p["x"], p["factor"]) for p in t["points"]]
    raise KeyError(parameter)


def equiv_square(x, y):
    return 2.0 * x * y / (x + y)  # Sterling rule


def cf_temp(t):
    return 1.0 / (1.0 + A_PER_C * (t - T_CAL))  # CF_T formula above


def dose(reading, fs_cm, ssd_cm, wedge=0, tray=0, angle=0, temp=SKIN_DEFAULT_C, background=0.0,
         n=N_D1001):
    """D from the formula in the module docstring with D-1001's tables."""
    return ((reading - background) * n * interp(table("field_size"), fs_cm)
            * interp(table("ssd"), ssd_cm) * dict(table("wedge"))[wedge]
            * dict(table("tray"))[tray] * interp(table("angle"), angle) * cf_temp(temp))


def deviation(measured, expected):
    """(D - D_exp) / D_exp x 100, rounded to 0.01 % as shown (core.h)."""
    return round((measured - expected) / expected * 100.0, 2)


class RecordTestCase(FxlTestCase):
    """A department ready for logging: everything a therapist needs exists."""

    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        fx.ok("machine", "add", "LINAC-A")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon",
              "--energy", "6", "--dmax", "1.5")
        for serial in ("D-1001", "D-2002", "D-3003"):
            fx.ok("detector", "add", serial, "--label", "Diode " + serial, "--kind",
                  "photon_diode", "--temp-coeff", str(A_PER_C), now="2026-09-01T08:00:00Z")
        calib = ["calib", "add", None, "--machine", "LINAC-A", "--beam", "6X", "--point",
                 "entrance", "--chamber-dose", "100", "--readings", "10.0", "--temp", "20"]
        for serial, extra in (("D-1001", ["--at", "2026-10-01"]),
                              ("D-2002", ["--at", "2026-10-01"]),
                              ("D-3003", ["--at", "2026-08-01", "--valid-days", "30"])):
            calib[2] = serial
            fx.ok(*(calib + extra))
        fx.ok("table", "load", CORRECTIONS)
        fx.ok("levels", "set", "general", "--tolerance", "5", "--action", "8",
              "--effective", "2026-01-01")
        fx.ok("patient", "add", MRN, "--family", "Example", "--given", "Invented")
        fx.ok("plan", "import", fx.write("plan.json", json.dumps(plan_document())))

    def record(self, *args, user="tina", **kw):
        return self.fx.run("record", "--patient", MRN, *args, user=user, **kw)

    def record_json(self, *args, user="tina", expect_code=0, **kw):
        r = self.fx.run("--json", "record", "--patient", MRN, *args, user=user, **kw)
        self.assertEqual(r.returncode, expect_code, r.stdout + r.stderr)
        return json.loads(r.stdout)
