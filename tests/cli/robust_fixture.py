"""Shared set-up of the crash-safety and concurrency tests (test_crash.py,
test_concurrency.py): an invented department built with fxledger's own
commands, patients with 100-fraction plans of three measured fields, the
readings that land at a chosen deviation, and the checks of the database
afterwards (read with Python's sqlite3 module, never written).

Reading to dose (AAPM Report 87 / TG-62; docs/physics.md), as in
record_fixture.py:
    D = (M - M_0) x N x CF_fs x CF_ssd x CF_wedge x CF_tray x CF_angle x CF_T
with --temp 20 (the calibration temperature) so that CF_T = 1.
Test data is invented: no real patient, plan or detector."""
import json
import sqlite3
import subprocess
import time

import record_fixture as rf
from fxlcli import Fxl, without_leak_check

FRACTIONS = 100          # the most a plan may have (FXL_PLAN_FRACTIONS_MAX)
TEMP_C = 20.0            # = the calibration temperature: CF_T = 1 (formula above)
THERAPISTS = ("tina", "tom", "tara", "theo", "tess", "tobi")

# The three fields of every plan: name, SSD (cm), jaws X x Y (cm), wedge
# (deg), incidence (deg), expected entrance dose (cGy). Invented.
FIELDS = (
    ("REF", 100, 10, 10, 0, 0, 200.0),
    ("AP", 100, 10, 20, 0, 0, 180.0),
    ("LAT", 90, 12, 12, 30, 30, 150.0),
)


def plan_document(mrn, label):
    fields = []
    for name, ssd, x, y, wedge, incidence, dose in FIELDS:
        fields.append({"name": name, "machine": "LINAC-A", "beam": "6X", "setup": "ssd",
                       "mu": 200, "ssd_cm": ssd, "x_cm": x, "y_cm": y, "wedge_deg": wedge,
                       "tray": False, "gantry_deg": 0, "incidence_deg": incidence,
                       "policy": "every",
                       "points": [{"point": "entrance", "expected_dose_cgy": dose,
                                   "expected_source": "tps"}]})
    return {"format": "fxledger-plan/1", "comment": "Invented test data.",
            "patient_mrn": mrn, "label": label, "site": "Pelvis", "technique": "3D",
            "fractions": FRACTIONS, "fields": fields}


def reading_for(field, deviation_pct=0.0):
    """The reading of D-1001 that the formula above turns into the field's
    expected dose x (1 + deviation), rounded to 0.001 nC."""
    name, ssd, x, y, wedge, incidence, dose = next(f for f in FIELDS if f[0] == field)
    per_nc = rf.dose(1.0, rf.equiv_square(x, y), ssd, wedge=wedge, angle=incidence, temp=TEMP_C)
    return round(dose * (1.0 + deviation_pct / 100.0) / per_nc, 3)


def record_args(mrn, fraction, deviation_pct=0.0):
    """Command line of one fraction with all three fields on D-1001."""
    args = ["record", "--patient", mrn, "--fraction", str(fraction), "--detector", "D-1001",
            "--temp", str(TEMP_C)]
    for name, *_ in FIELDS:
        args += ["--field", name, "--reading", "%.3f" % reading_for(name, deviation_pct)]
    return args


def build_department(fx, patients):
    """Users, LINAC-A 6X, D-1001 calibrated with its correction tables,
    general levels 5 % / 8 %, and one patient with plan 'C-1' per MRN."""
    fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
    for login in THERAPISTS:
        fx.ok("user", "add", login, "--name", login.title() + " Therapist", "--role", "therapist")
    fx.ok("machine", "add", "LINAC-A")
    fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon",
          "--energy", "6", "--dmax", "1.5")
    fx.ok("detector", "add", "D-1001", "--label", "Diode D-1001", "--kind", "photon_diode",
          "--temp-coeff", str(rf.A_PER_C), now="2026-09-01T08:00:00Z")
    fx.ok("calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point",
          "entrance", "--chamber-dose", "100", "--readings", "10.0", "--temp", str(rf.T_CAL),
          "--at", "2026-10-01", "--valid-days", "365")
    fx.ok("table", "load", rf.CORRECTIONS)
    fx.ok("levels", "set", "general", "--tolerance", "5", "--action", "8",
          "--effective", "2026-01-01")
    for mrn in patients:
        fx.ok("patient", "add", mrn, "--family", "Example", "--given", "Invented " + mrn)
        fx.ok("plan", "import", fx.write("plan-%s.json" % mrn, json.dumps(plan_document(mrn, "C-1"))),
              user="phil")


def env_for(fx, user):
    """The environment of `user`, logged in (their session, fxlcli.py)."""
    fx.ensure_session(user)
    return fx.env(user)


def popen_to_kill(fx, args, user):
    """Starts fxledger on fx's database without waiting, for a test that may
    kill it (no leak check at its exit, fxlcli.without_leak_check)."""
    env = without_leak_check(env_for(fx, user))
    return subprocess.Popen(fx.argv(*args, user=user), env=env,
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def timed_run(fx, args, user):
    """Runs fxledger to the end; returns (CompletedProcess, seconds)."""
    start = time.monotonic()
    r = fx.run(*args, user=user)
    return r, time.monotonic() - start


# ---- looking at the database afterwards -------------------------------------

def open_ro(fx):
    """A read-only connection (the file is never changed by the checks)."""
    con = sqlite3.connect("file:%s?mode=ro" % fx.db, uri=True, timeout=30)
    con.row_factory = sqlite3.Row
    return con


def fractions_by_patient(con):
    """{mrn: {fraction number: measurement count}} over every logged fraction."""
    out = {}
    for row in con.execute(
            "SELECT p.mrn AS mrn, f.number AS number, "
            "(SELECT count(*) FROM measurements m WHERE m.fraction_id = f.id) AS n "
            "FROM fractions f JOIN plans pl ON pl.id = f.plan_id "
            "JOIN patients p ON p.id = pl.patient_id"):
        out.setdefault(row["mrn"], {})[row["number"]] = row["n"]
    return out


def structural_problems(con):
    """Everything a half-written fraction would leave behind, as text lines
    (empty when the database is whole): measurements without a fraction,
    fractions or measurements without their audit row and audit rows
    without their fraction or measurement, review items pointing nowhere,
    and SQLite's own integrity and foreign-key checks."""
    problems = []
    ic = [r[0] for r in con.execute("PRAGMA integrity_check")]
    if ic != ["ok"]:
        problems.append("integrity_check: %s" % ic[:5])
    fk = con.execute("PRAGMA foreign_key_check").fetchall()
    if fk:
        problems.append("foreign_key_check: %d rows, first %s" % (len(fk), tuple(fk[0])))
    checks = (
        ("measurement without its fraction",
         "SELECT count(*) FROM measurements m WHERE NOT EXISTS "
         "(SELECT 1 FROM fractions f WHERE f.id = m.fraction_id)"),
        ("fraction without its audit row",
         "SELECT count(*) FROM fractions f WHERE NOT EXISTS (SELECT 1 FROM audit_log a "
         "WHERE a.entity = 'fractions' AND a.action = 'record' AND a.entity_id = f.id)"),
        ("measurement without its audit row",
         "SELECT count(*) FROM measurements m WHERE NOT EXISTS (SELECT 1 FROM audit_log a "
         "WHERE a.entity = 'measurements' AND a.entity_id = m.id)"),
        ("audit row of a fraction that is not there",
         "SELECT count(*) FROM audit_log a WHERE a.entity = 'fractions' AND NOT EXISTS "
         "(SELECT 1 FROM fractions f WHERE f.id = a.entity_id)"),
        ("audit row of a measurement that is not there",
         "SELECT count(*) FROM audit_log a WHERE a.entity = 'measurements' AND NOT EXISTS "
         "(SELECT 1 FROM measurements m WHERE m.id = a.entity_id)"),
        ("review item of a measurement that is not there",
         "SELECT count(*) FROM review_items r WHERE r.measurement_id IS NOT NULL AND NOT EXISTS "
         "(SELECT 1 FROM measurements m WHERE m.id = r.measurement_id)"),
        ("review item without its audit row",
         "SELECT count(*) FROM review_items r WHERE NOT EXISTS (SELECT 1 FROM audit_log a "
         "WHERE a.entity = 'review_items' AND a.entity_id = r.id)"),
    )
    for what, sql in checks:
        n = con.execute(sql).fetchone()[0]
        if n:
            problems.append("%d %s" % (n, what))
    return problems


def verify(fx):
    """fxledger verify: the audit chain and SQLite's checks, exit 0."""
    return fx.run("verify", user="admin")


def new_fx():
    return Fxl().init()
