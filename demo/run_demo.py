#!/usr/bin/python3
"""The fxledger demo: an INVENTED department, "Riverside Oncology Centre",
built from nothing in demo/out/ with fxledger's own commands, then about two
weeks of logged fractions, the physicist's review queue and the PDF reports.

Every person, patient, plan, detector, calibration, reading and password
here is invented for the demo; none is real. The invented passwords reach
fxledger through --password-fd, so the demo runs with no prompt. The readings are made up so that the
corrected doses land at chosen deviations from the expected doses: mostly
small, with one result outside tolerance, two consecutive results outside
tolerance that escalate, one outside the action level, one mistyped reading
that is amended, and one detector that drifts slowly. The independent
expected-dose model gets invented beam data for LINAC-A 6X; it cross-checks
the planning-system values of the breast plan at import, and gives the
expected doses of a fifth patient whose plan comes from a DICOM RT Plan
(DICOM JSON Model, made for the demo by make_demo_rtplan.py).

Usage: run_demo.py PATH/TO/fxledger-testclock

The demo plays two weeks in minutes, so it needs the test build of the
program (fxledger-testclock), whose clock FXLEDGER_NOW fixes; the program
users run (fxledger) ignores FXLEDGER_NOW.
"""
import calendar
import json
import os
import random
import re
import shutil
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "data")
# FXLEDGER_DEMO_OUT moves the output (tests/cli/test_demo_rows.py runs the demo in a
# temporary directory).
OUT = os.environ.get("FXLEDGER_DEMO_OUT") or os.path.join(HERE, "out")
DB = os.path.join(OUT, "demo.db")

BIN = os.path.abspath(sys.argv[1] if len(sys.argv) > 1 else os.path.join(HERE, "..", "build", "fxledger-testclock"))

DAYS = ["2026-11-%02d" % d for d in (2, 3, 4, 5, 6, 9, 10, 11, 12, 13)]  # two working weeks
CAL_TEMP_C = 21.0
A_PER_C = 0.0025  # temperature coefficient of the invented diodes, fraction per degC


# Invented passwords of the invented staff, given to fxledger through a pipe
# (--password-fd), never on the command line: the demo runs with no prompt.
# 'user add' prints a one-time password; each user replaces it with theirs at
# their first login. Each user has a state directory of their own for the
# session file, as each person would on their own OS account.
PASSWORDS = {}
ONE_TIME = {}
SESSIONS = {}   # login -> [login time, last activity] in seconds
IDLE_S, ABSOLUTE_S = 15 * 60, 12 * 3600   # fxledger's defaults


def invented_password(login):
    return "Invented demo passphrase for " + login[::-1]


def seconds(iso):
    return calendar.timegm(time.strptime(iso, "%Y-%m-%dT%H:%M:%SZ"))


def call(args, user, now, lines):
    """One fxledger call as `user` with `lines` on the password pipe."""
    state = os.path.join(OUT, "state", user)
    os.makedirs(state, mode=0o700, exist_ok=True)
    env = dict(os.environ, FXLEDGER_DB=DB, FXLEDGER_NOW=now, NO_COLOR="1", XDG_STATE_HOME=state)
    env.pop("FXLEDGER_USER", None)
    rfd, wfd = os.pipe()
    os.write(wfd, "".join(x + "\n" for x in lines).encode())
    os.close(wfd)
    try:
        return subprocess.run([BIN, "--user", user, "--password-fd", str(rfd)] + [str(a) for a in args],
                              capture_output=True, text=True, env=env, pass_fds=(rfd,))
    finally:
        os.close(rfd)


def ensure_session(user, now):
    t = seconds(now)
    s = SESSIONS.get(user)
    if s and t < s[1] + IDLE_S and t < s[0] + ABSOLUTE_S:
        return
    if user in ONE_TIME:
        r = call(["login", "--new-password"], user, now, [ONE_TIME.pop(user), PASSWORDS[user]])
    else:
        r = call(["login"], user, now, [PASSWORDS[user]])
    if r.returncode != 0:
        sys.stderr.write("demo: login of %s failed:\n%s" % (user, r.stderr))
        sys.exit(1)
    SESSIONS[user] = [t, t]


def run(*args, user="adm", now="2026-10-26T08:00:00Z", show=False, ok_codes=(0,)):
    """Runs fxledger on the demo database; prints its output when asked."""
    if args[0] == "init":
        PASSWORDS[user] = invented_password(user)
    else:
        ensure_session(user, now)
    r = call(args, user, now, [PASSWORDS[user]])
    if r.returncode not in ok_codes:
        sys.stderr.write("demo step failed (%d): fxledger %s\n%s%s" % (
            r.returncode, " ".join(map(str, args)), r.stdout, r.stderr))
        sys.exit(1)
    s = SESSIONS.get(user)
    if s and seconds(now) >= s[1] + 60:
        s[1] = seconds(now)
    m = re.search(r"one-time password for '([^']+)': (\S+)", r.stdout)
    if m:
        ONE_TIME[m.group(1)] = m.group(2)
        PASSWORDS[m.group(1)] = invented_password(m.group(1))
    if show:
        print("$ fxledger " + " ".join(quote(a) for a in args))
        sys.stdout.write(r.stdout if not m else r.stdout.replace(m.group(2), "(one-time password)"))
        sys.stdout.write(r.stderr)
        print()
    return r


def quote(a):
    a = str(a)
    return "'%s'" % a if (" " in a or not a) else a


def heading(text):
    print("=" * 78)
    print(text)
    print("=" * 78)


# ---- the invented department's equipment ----------------------------------

DETECTORS = [
    # serial, label, kind, nominal sensitivity (nC per cGy)
    ("PD-0101", "Photon diode 1 (6 MV cap)", "photon_diode", 0.090),
    ("PD-0102", "Photon diode 2 (15 MV cap)", "photon_diode", 0.085),
    ("PD-0103", "Photon diode 3 (exit, 15 MV cap)", "photon_diode", 0.088),
    ("ED-0201", "Electron diode 1", "electron_diode", 0.075),
]

# detector, machine, beam, point, readings for 100 cGy at the chamber (nC)
CALIBRATIONS = [
    ("PD-0101", "LINAC-A", "6X", "entrance", [9.012, 9.018, 9.009]),
    ("PD-0101", "LINAC-B", "6X", "entrance", [9.041, 9.036, 9.047]),
    ("PD-0102", "LINAC-A", "15X", "entrance", [8.514, 8.509, 8.520]),
    ("PD-0103", "LINAC-A", "15X", "exit", [8.203, 8.198, 8.210]),
    ("ED-0201", "LINAC-A", "9E", "entrance", [7.488, 7.493, 7.485]),
]


def setup():
    heading("Riverside Oncology Centre (an invented department): setting up")
    if os.path.exists(OUT):
        shutil.rmtree(OUT)
    os.makedirs(OUT)
    run("init", "--department", "Riverside Oncology Centre (invented demo)", "--admin", "adm",
        "--admin-name", "Ada Admin", "--timezone", "Europe/London", show=True)
    for login, name, role in (("mkeller", "Dr Mara Keller", "physicist"),
                              ("jokafor", "Dr Jide Okafor", "physicist"),
                              ("lsands", "Lena Sands", "therapist"),
                              ("rpatel", "Ravi Patel", "therapist"),
                              ("qaudit", "Quinn Auditor", "auditor")):
        run("user", "add", login, "--name", name, "--role", role)
    ph = "mkeller"
    run("machine", "add", "LINAC-A", user=ph)
    run("machine", "add", "LINAC-B", user=ph)
    for machine, beam, modality, energy, dmax in (("LINAC-A", "6X", "photon", 6, 1.5),
                                                  ("LINAC-A", "15X", "photon", 15, 2.9),
                                                  ("LINAC-A", "9E", "electron", 9, 2.1),
                                                  ("LINAC-B", "6X", "photon", 6, 1.5)):
        run("machine", "beam", beam, "--machine", machine, "--modality", modality,
            "--energy", energy, "--dmax", dmax, user=ph)
    # Beam data of the independent expected-dose model for LINAC-A 6X (invented).
    run("machine", "beamdata", os.path.join(DATA, "beamdata-LINAC-A-6X.json"), "--effective", "2026-10-26",
        user=ph, show=True)
    for serial, label, kind, sens in DETECTORS:
        run("detector", "add", serial, "--label", label, "--kind", kind, "--sensitivity", sens,
            "--temp-coeff", A_PER_C, "--dose-limit", 500000, user=ph)
    for serial, machine, beam, point, readings in CALIBRATIONS:
        r = run("calib", "add", serial, "--machine", machine, "--beam", beam, "--point", point,
                "--chamber-dose", 100, "--readings", ",".join(map(str, readings)),
                "--temp", CAL_TEMP_C, "--valid-days", 90, "--at", "2026-10-26",
                "--chamber", "Farmer-type chamber FC-7 (invented)", user=ph,
                *(["--thickness", EXIT_PHANTOM_CM] if point == "exit" else []),
                show=(serial == "PD-0101" and machine == "LINAC-A"))
    for f in sorted(os.listdir(DATA)):
        if f.startswith("corrections-"):
            run("table", "load", os.path.join(DATA, f), user=ph)
    run("levels", "set", "photon-entrance", "--modality", "photon", "--point", "entrance",
        "--tolerance", 5, "--action", 8, "--floor", 2, "--effective", "2026-10-26", user=ph)
    run("levels", "set", "photon-exit", "--modality", "photon", "--point", "exit",
        "--tolerance", 7, "--action", 10, "--floor", 2, "--effective", "2026-10-26", user=ph)
    run("levels", "set", "electron-entrance", "--modality", "electron", "--point", "entrance",
        "--tolerance", 5, "--action", 8, "--floor", 2, "--effective", "2026-10-26", user=ph)
    run("levels", "set", "breast-tangents", "--site", "Breast", "--modality", "photon",
        "--point", "entrance", "--tolerance", 6, "--action", 9, "--floor", 2,
        "--effective", "2026-10-26", user=ph)
    run("levels", "list", user=ph, show=True)
    for mrn, family, given in (("DEMO-1001", "Halloran", "Bridget"),
                               ("DEMO-1002", "Nakamura-Ortiz", "Tomás"),
                               ("DEMO-1003", "Søndergaard", "Ingrid"),
                               ("DEMO-1004", "Mwangi", "Peter")):
        run("patient", "add", mrn, "--family", family, "--given", given, user="lsands")
        # The breast plan's planning-system values are cross-checked against the
        # model at import (the other plans: no beam data for their beams).
        run("plan", "import", os.path.join(DATA, "plan-%s.json" % mrn), user=ph, show=(mrn == "DEMO-1002"))
    run("plan", "show", "DEMO-1002", "BR-R-1", user=ph, show=True)
    dicom_patient()


def dicom_patient():
    """A fifth patient whose plan arrives as a DICOM RT Plan (DICOM JSON
    Model): the expected doses are the independent model's."""
    heading("A new patient from a DICOM RT Plan, expected doses from the independent model")
    run("patient", "add", "DEMO-1005", "--family", "Lindqvist", "--given", "Aurelio", user="rpatel")
    run("plan", "import-dicom", os.path.join(DATA, "rtplan-DEMO-1005.json"), "--machine", "LINAC-A",
        "--site", "Thorax", "--technique", "3D AP-PA", "--policy", "every", user="mkeller", show=True)
    run("plan", "show", "DEMO-1005", "THX-AP-PA", user="mkeller", show=True)
    shown = json.loads(run("--json", "plan", "show", "DEMO-1005", "THX-AP-PA", user="mkeller").stdout)
    PLANS["DEMO-1005"] = plan_from_show(shown)


def plan_from_show(shown):
    """The imported plan in the shape of a plan file, for reading_for()."""
    fields = {}
    for f in shown["fields"]:
        d = fields.setdefault(f["name"], dict(f, points=[]))
        d["points"].append({"point": f["point"], "expected_dose_cgy": f["expected_dose_cgy"]})
    return {"patient_mrn": shown["patient_mrn"], "fractions": shown["fractions"], "fields": list(fields.values())}


# ---- readings that give chosen deviations ---------------------------------

def load_tables():
    """(detector, machine, beam, parameter) -> [(x, factor)] from demo/data."""
    tables = {}
    for f in os.listdir(DATA):
        if f.startswith("corrections-"):
            with open(os.path.join(DATA, f), encoding="utf-8") as fh:
                doc = json.load(fh)
            for t in doc["tables"]:
                tables[(doc["detector"], t["machine"], t["beam"], t["parameter"])] = [
                    (p["x"], p["factor"]) for p in t["points"]]
    return tables


TABLES = load_tables()
EXIT_PHANTOM_CM = 20  # phantom behind which the exit diode was calibrated (invented)


def interp(points, x):
    for (x0, y0), (x1, y1) in zip(points, points[1:]):
        if x0 <= x <= x1:
            return y0 + (x - x0) / (x1 - x0) * (y1 - y0)
    return dict(points)[x]


def factor_n(serial, machine, beam, point):
    for s, m, b, p, readings in CALIBRATIONS:
        if (s, m, b, p) == (serial, machine, beam, point):
            return 100.0 / (sum(readings) / len(readings))
    raise KeyError(serial)


PLANS = {}
for _f in os.listdir(DATA):
    if _f.startswith("plan-"):
        with open(os.path.join(DATA, _f), encoding="utf-8") as _fh:
            _doc = json.load(_fh)
        PLANS[_doc["patient_mrn"]] = _doc


def reading_for(mrn, field_name, point, serial, deviation_pct, temp_c):
    """The reading that the reading-to-dose formula (docs/physics.md) turns
    into the expected dose x (1 + deviation)."""
    field = next(f for f in PLANS[mrn]["fields"] if f["name"] == field_name)
    expected = next(p["expected_dose_cgy"] for p in field["points"] if p["point"] == point)
    key = (serial, field["machine"], field["beam"])
    eq_sq = 2.0 * field["x_cm"] * field["y_cm"] / (field["x_cm"] + field["y_cm"])
    if point == "exit":
        # exit tables: thickness and source-to-detector distance (SSD + thickness)
        thick = next(p["thickness_cm"] for p in field["points"] if p["point"] == point)
        cf_dist = (interp(TABLES[key + ("thickness",)], thick)
                   * interp(TABLES[key + ("sdd",)], field["ssd_cm"] + thick))
    else:
        cf_dist = interp(TABLES[key + ("ssd",)], field["ssd_cm"])
    cf = (interp(TABLES[key + ("field_size",)], eq_sq) * cf_dist
          * interp(TABLES[key + ("wedge",)], field["wedge_deg"])
          * interp(TABLES[key + ("tray",)], 1 if field["tray"] else 0)
          * interp(TABLES[key + ("angle",)], field["incidence_deg"]))
    cf_t = 1.0 / (1.0 + A_PER_C * (temp_c - CAL_TEMP_C))
    n = factor_n(serial, field["machine"], field["beam"], point)
    return round(expected * (1.0 + deviation_pct / 100.0) / (n * cf * cf_t), 3)


# ---- two weeks of treatment ---------------------------------------------------

rng = random.Random(20261102)
rng_dicom = random.Random(1005)  # DEMO-1005 draws its own numbers: the others' stay as they were


def noise(r=rng):
    return r.gauss(0.4, 1.3)


def drift(day_index):
    """PD-0101 slowly reads high from the second week (an invented fault)."""
    return 0.0 if day_index < 4 else 1.6 + 0.35 * (day_index - 4)


SCHEDULE = {
    # mrn: (first day index, number of fractions), readings per field
    "DEMO-1001": (0, [("AP", "entrance", "PD-0102"), ("AP", "exit", "PD-0103"),
                      ("PA", "entrance", "PD-0102"), ("LLAT", "entrance", "PD-0102"),
                      ("RLAT", "entrance", "PD-0102")]),
    "DEMO-1002": (0, [("MED", "entrance", "PD-0101"), ("LAT", "entrance", "PD-0101")]),
    "DEMO-1003": (5, [("E1", "entrance", "ED-0201")]),
    "DEMO-1004": (0, [("PA", "entrance", "PD-0101")]),
    "DEMO-1005": (5, [("AP", "entrance", "PD-0101"), ("PA", "entrance", "PD-0101")]),
}

# (mrn, fraction, field, point) -> deviation forced for the story
STORY = {
    ("DEMO-1001", 4, "RLAT", "entrance"): 6.2,     # outside tolerance once; fine next day
    ("DEMO-1004", 3, "PA", "entrance"): -11.4,     # SSD set-up error: outside action level
    ("DEMO-1002", 6, "LAT", "entrance"): 6.6,      # outside tolerance ...
    ("DEMO-1002", 7, "LAT", "entrance"): 6.9,      # ... again, same sign: escalates
}
SHOWN = {("DEMO-1001", 1), ("DEMO-1001", 4), ("DEMO-1004", 3), ("DEMO-1002", 7), ("DEMO-1003", 2),
         ("DEMO-1005", 1)}
THERAPISTS = ["lsands", "rpatel"]


def treat():
    heading("Two weeks of treatment: what the therapist sees at the console")
    amend_target = None
    for day_index, day in enumerate(DAYS):
        for slot, (mrn, (first, readings)) in enumerate(sorted(SCHEDULE.items())):
            if day_index < first:
                continue
            fraction = day_index - first + 1
            if fraction > PLANS[mrn]["fractions"]:
                continue
            at = "%sT%02d:%02d:00Z" % (day, 8 + slot, 10 + 7 * slot)
            therapist = THERAPISTS[(day_index + slot) % 2]
            args = ["record", "--patient", mrn, "--at", at]
            r = rng_dicom if mrn == "DEMO-1005" else rng
            for field, point, serial in readings:
                dev = STORY.get((mrn, fraction, field, point))
                if dev is None:
                    dev = noise(r) + (drift(day_index) if serial == "PD-0101" else 0.0)
                temp = round(r.uniform(30.5, 33.5), 1)
                reading = reading_for(mrn, field, point, serial, dev, temp)
                if (mrn, fraction) == ("DEMO-1003", 2):
                    amend_target = reading
                    reading = round(reading * 10, 2)  # a slipped decimal point
                args += ["--field", "%s:%s" % (field, point), "--detector", serial,
                         "--reading", reading, "--temp", temp]
            shown = (mrn, fraction) in SHOWN
            if shown:
                print("--- %s, %s, fraction %d, logged by %s" % (day, mrn, fraction, therapist))
            r = run(*args, user=therapist, now=at, show=shown, ok_codes=(0, 10, 11, 12))
            if not shown:
                worst = {0: "all within tolerance", 10: "not evaluable or implausible",
                         11: "outside tolerance", 12: "OUTSIDE ACTION LEVEL"}[r.returncode]
                print("%s  %-9s fraction %2d  %d reading(s): %s" % (day, mrn, fraction, len(readings), worst))
            if (mrn, fraction) == ("DEMO-1003", 2):
                amend(at, amend_target)
    print()


def amend(at, correct_reading):
    hist = json.loads(run("--json", "history", "--patient", "DEMO-1003", user="lsands", now=at).stdout)
    rows = hist["measurements"] if isinstance(hist, dict) else hist
    # a slipped decimal point is a gross deviation (outside the action level)
    wrong = [m for m in rows if m.get("gross") and not m.get("superseded_by")][-1]
    print("--- the therapist re-reads the electrometer: %s was typed for %s" % (wrong["reading"], correct_reading))
    run("amend", wrong["measurement_id"], "--reading", correct_reading, "--reason",
        "decimal point slipped: typed %s for %s" % (wrong["reading"], correct_reading),
        user="lsands", now=at[:-3] + "30Z", show=True, ok_codes=(0, 10, 11, 12))


# ---- review -------------------------------------------------------------------

def review():
    heading("The physicist's review queue")
    later = "2026-11-13T17:30:00Z"
    items = json.loads(run("--json", "queue", "list", "--status", "all", user="mkeller", now=later).stdout)
    items = items["items"] if isinstance(items, dict) else items

    def find(rule, summary_part):
        for it in items:
            if it["rule"] == rule and summary_part in json.dumps(it, ensure_ascii=False):
                return it["id"]
        return None

    spine = find("result", "DEMO-1004")
    if spine:
        run("queue", "ack", spine, "--comment", "called to the unit; treatment held", user="rpatel",
            now="2026-11-04T11:45:00Z")
        run("queue", "close", spine, "--disposition", "set-up error", "--comment",
            "SSD set at 110 cm instead of 100 cm; corrected before fraction 4, dose within 1 % since",
            user="mkeller", now="2026-11-05T09:15:00Z")
    electron = find("result", "DEMO-1003")
    if electron:
        run("queue", "close", electron, "--disposition", "other", "--comment",
            "typing error; amended reading within tolerance", user="jokafor", now="2026-11-10T12:00:00Z")
    breast = find("result", "DEMO-1002")
    if breast:
        run("queue", "ack", breast, "--comment", "detector re-taped on the marked spot for fraction 8",
            user="lsands", now="2026-11-11T09:05:00Z")
    run("queue", "list", user="mkeller", now=later, show=True)
    if spine:
        run("queue", "show", spine, user="mkeller", now=later, show=True)


# ---- the console at the start of a day -------------------------------------------

def console_day():
    heading("Monday 16 November at the console: the worklist, then a patient on hold")
    morning = "2026-11-16T07:45:00Z"
    run("today", "--day-list", os.path.join(DATA, "daylist-2026-11-16.csv"), user="lsands",
        now=morning, show=True)
    # DEMO-1002 still has the escalated LAT result open (acknowledged, not
    # closed): the hold is shown before the readings and beside the verdicts.
    at = "2026-11-16T08:31:00Z"
    answers = []
    for field, point in (("MED", "entrance"), ("LAT", "entrance")):
        answers += [str(reading_for("DEMO-1002", field, point, "PD-0101", 0.8, 32.0)), "32"]
    stdin = "\n".join(["2"] + answers) + "\n"
    # The therapist works in her login session (opened once, as at the console).
    ensure_session("rpatel", at)
    env = dict(os.environ, FXLEDGER_DB=DB, FXLEDGER_NOW=at, NO_COLOR="1",
               XDG_STATE_HOME=os.path.join(OUT, "state", "rpatel"))
    env.pop("FXLEDGER_USER", None)
    print("$ fxledger record        (line 2 of the worklist, then the readings as they come)")
    r = subprocess.run([BIN, "--user", "rpatel", "record", "--interactive"], input=stdin,
                       capture_output=True, text=True, env=env)
    if r.returncode not in (0, 10, 11, 12):
        sys.stderr.write("demo step failed (%d): record\n%s%s" % (r.returncode, r.stdout, r.stderr))
        sys.exit(1)
    sys.stdout.write(r.stdout)
    print()


def reports():
    heading("Reports for the auditor")
    gen = "2026-12-01T08:00:00Z"
    patient_pdf = os.path.join(OUT, "patient-DEMO-1002.pdf")
    month_pdf = os.path.join(OUT, "month-2026-11.pdf")
    run("report", "patient", "DEMO-1002", "--out", patient_pdf, "--generated-at", gen,
        user="qaudit", now=gen, show=True)
    for mrn in ("DEMO-1001", "DEMO-1003"):   # midline pairs; an amendment and a closed review
        run("report", "patient", mrn, "--out", os.path.join(OUT, "patient-%s.pdf" % mrn),
            "--generated-at", gen, user="qaudit", now=gen, show=True)
    run("report", "month", "2026-11", "--out", month_pdf, "--generated-at", gen,
        user="qaudit", now=gen, show=True)
    stats_pdf = os.path.join(OUT, "stats-2026-11.pdf")
    run("stats", "--month", "2026-11", "--by", "site,technique,energy,point,detector",
        "--out", stats_pdf, "--generated-at", gen, user="mkeller", now=gen, show=True)
    run("stats", "--month", "2026-11", "--by", "site", user="mkeller", now=gen, show=True)
    run("verify", user="qaudit", now=gen, show=True)
    print("demo database: %s" % os.path.relpath(DB))
    print("reports:       %s, %s, %s" % (os.path.relpath(patient_pdf), os.path.relpath(month_pdf),
                                     os.path.relpath(stats_pdf)))
    print()
    print("All people, patients, plans, detectors and readings in this demo are invented.")


def main():
    if not os.access(BIN, os.X_OK):
        sys.exit("demo: %s is not built; run 'make demo'" % BIN)
    setup()
    treat()
    review()
    console_day()
    reports()


if __name__ == "__main__":
    main()
