"""The bad-input catalogue: every command and sub-command of fxledger is fed
malformed, truncated, oversized, wrong-unit, out-of-range, wrong-type and
hostile input (SQL-like text, control characters, very long names, invalid
UTF-8 in arguments and files). Each must end with one clear line on stderr
starting 'fxledger: error: ', a non-zero exit code below 128 (no crash), no
traceback, nothing on stdout, and the database file byte-for-byte unchanged.

Some hostile-looking text is valid input (a name with an apostrophe, SQL-like
text as a patient identifier): those cases check that the text is stored
exactly as given and the schema is intact. Some wrong-unit input cannot be
refused as input (a reading typed in pC for an nC detector is a number like
any other): those cases check that the result is flagged and never a pass.

The department is built once per class and each case runs on the same
digest-checked database file (restored from a copy if a case changed it),
so the whole catalogue stays fast. Every command named in 'fxledger --help'
and every sub-command named in '<command> --help' also gets the generic
hostile cases, so a command added later is covered from the day it lands.
Test data is invented."""
import hashlib
import json
import os
import re
import sqlite3
import subprocess
import tempfile
import unittest

import record_fixture as rf
from fxlcli import BIN, DATA, Fxl, copy_database, main

SQL = "x'); DROP TABLE measurements;--"
ESC = "Bad\x1b[2J\x1b[31mName"           # terminal control sequence
NL = "two\nlines"
BAD_UTF8 = "Bad\udcff\udcfeName"          # bytes 0xFF 0xFE: never valid UTF-8 (RFC 3629)
LONG = "N" * 100_000                      # a 100 kB name
NOW = rf.NOW
BEAM_DATA = os.path.join(DATA, "beams", "linac1_6x.json")
DICOM_PLAN = os.path.join(DATA, "dicom", "three_field.json")   # Patient ID TEST-0002

# Commands with their sub-commands, as 'fxledger --help' lists them today.
# test_catalogue_covers_every_command checks this against the program.
FAMILIES_WITHOUT_SUB = ("init", "record", "history", "amend", "backup", "verify", "today")


# The department's Fxl: its users' sessions and passwords (fxlcli.py).
FX = None


# As root (CI), write permission bits do not bind: the read-only-folder case
# drops the capabilities that override them (setpriv(1), capabilities(7)).
AS_UNPRIVILEGED = (["setpriv", "--bounding-set", "-dac_override,-dac_read_search", "--inh-caps", "-all"]
                   if os.geteuid() == 0 else [])


def run(db, args, user="admin", stdin=None, now=NOW, extra_env=None, wrap=()):
    """Runs fxledger with arguments that may hold any bytes (str with
    surrogate escapes become raw bytes); output is kept as bytes. On the
    department's database the user acts in their session, with their
    password on a pipe; elsewhere (init, damaged files) an invented password
    is on the pipe."""
    env = dict(os.environ)
    env.pop("FXLEDGER_DB", None)
    env.pop("FXLEDGER_USER", None)
    env.update({"FXLEDGER_NOW": now, "NO_COLOR": "1"})
    state = FX.state_dir(user) if FX and isinstance(user, str) else tempfile.mkdtemp(prefix="fxlcat-")
    env["XDG_STATE_HOME"] = state
    if extra_env:
        env.update(extra_env)
    if FX and db == FX.db and isinstance(user, str):
        FX.ensure_session(user, now)
    password = FX.passwords.get(user, "") if FX and isinstance(user, str) else ""
    if isinstance(user, str) and not password and args and args[0] == "init":
        password = "Invented catalogue admin passphrase"
    rfd, wfd = os.pipe()
    os.write(wfd, password.encode() + b"\n")
    os.close(wfd)
    argv = list(wrap) + [BIN, "--db", db, "--user", user if isinstance(user, bytes) else os.fsencode(user),
            "--password-fd", str(rfd)] + [a if isinstance(a, bytes) else os.fsencode(str(a))
                                          for a in args]
    if isinstance(stdin, str):
        stdin = stdin.encode("utf-8", "surrogateescape")
    try:
        return subprocess.run(argv, input=stdin if stdin is not None else b"", capture_output=True,
                              env=env, timeout=60, pass_fds=(rfd,))
    finally:
        os.close(rfd)


def file_digest(path):
    h = hashlib.sha256()
    for suffix in ("", "-wal"):
        if os.path.exists(path + suffix):
            with open(path + suffix, "rb") as f:
                h.update(f.read())
    return h.hexdigest()


def plan_doc(**change):
    d = rf.plan_document()
    d["label"] = "CAT-2"
    d.update(change)
    return d


def good_readings():
    return {"format": "fxledger-readings", "version": 1, "patient": rf.MRN, "plan": rf.PLAN,
            "readings": [{"field": "AP", "detector": "D-1001", "reading": 20.0, "temp_c": 31.0}]}


def good_corrections():
    with open(rf.CORRECTIONS, encoding="utf-8") as f:
        d = json.load(f)
    for t in d["tables"]:
        t["effective_from"] = "2026-10-20"   # a new version: the loaded one is 2026-10-15
    return d


class Department:
    """One department built with fxledger's own commands, as in
    record_fixture.py, with one fraction logged: measurement #1 (REF, +6 %,
    outside tolerance, review item #1) and #2 (AP, within tolerance)."""

    def __init__(self):
        fx = self.fx = Fxl()
        fx.init()
        fx.ok("user", "add", "phil", "--name", "Phil Physicist", "--role", "physicist")
        fx.ok("user", "add", "tina", "--name", "Tina Therapist", "--role", "therapist")
        fx.ok("user", "add", "otto", "--name", "Otto Auditor", "--role", "auditor")
        fx.ok("machine", "add", "LINAC-A")
        fx.ok("machine", "beam", "6X", "--machine", "LINAC-A", "--modality", "photon",
              "--energy", "6", "--dmax", "1.5")
        for serial in ("D-1001", "D-2002"):
            fx.ok("detector", "add", serial, "--label", "Diode " + serial, "--kind", "photon_diode",
                  "--temp-coeff", str(rf.A_PER_C), now="2026-09-01T08:00:00Z")
            fx.ok("calib", "add", serial, "--machine", "LINAC-A", "--beam", "6X", "--point",
                  "entrance", "--chamber-dose", "100", "--readings", "10.0", "--temp", "20",
                  "--at", "2026-10-01")
        fx.ok("table", "load", rf.CORRECTIONS)
        fx.ok("levels", "set", "general", "--tolerance", "5", "--action", "8",
              "--effective", "2026-01-01")
        fx.ok("patient", "add", rf.MRN, "--family", "Example", "--given", "Invented")
        fx.ok("patient", "add", "TEST-0002", "--family", "Testperson", "--given", "Ada")
        fx.ok("plan", "import", fx.write("plan.json", json.dumps(rf.plan_document())))
        # 21.2 nC x 10 cGy/nC at 20 degC on the reference field = 212 cGy,
        # +6 % against 200 cGy: outside the 5 % tolerance (record_fixture formula).
        r = fx.run("record", "--patient", rf.MRN, "--detector", "D-1001", "--temp", "20",
                   "--field", "REF", "--reading", "21.2", "--field", "AP", "--reading", "20.0",
                   user="tina")
        assert r.returncode == 11, r.stdout + r.stderr
        # Everyone logged in before the snapshot: restoring it keeps the sessions.
        global FX
        FX = fx
        for login in ("admin", "phil", "tina", "otto"):
            fx.ensure_session(login, NOW)
        self.pristine = fx.path("pristine.db")
        copy_database(fx.db, self.pristine)   # the .db with its -wal (fxlcli.py)
        self.digest = file_digest(fx.db)
        self.files = self.write_files()

    def write_files(self):
        """The bad input files, by name."""
        fx = self.fx
        files = {}

        def put(name, content):
            p = fx.path(name)
            with open(p, "wb") as f:
                f.write(content if isinstance(content, bytes) else content.encode("utf-8"))
            files[name] = p

        good_plan = json.dumps(plan_doc(), indent=2)
        put("plan_good.json", good_plan)
        put("plan_malformed.json", good_plan.replace('"fractions": 5,', '"fractions": 5'))
        put("plan_truncated.json", good_plan[: len(good_plan) // 2])
        put("plan_empty.json", "")
        put("plan_5mb.json", json.dumps(plan_doc(comment="x" * 5_000_000)))
        put("plan_many_fields.json", json.dumps(plan_doc(fields=[dict(rf.plan_document()["fields"][0],
                                                                     name="F%d" % i)
                                                                for i in range(5000)])))
        put("plan_array.json", json.dumps([plan_doc()]))
        put("plan_fields_object.json", json.dumps(plan_doc(fields={"REF": 1})))
        d = plan_doc()
        d["fields"][0]["mu"] = "200"
        put("plan_mu_text.json", json.dumps(d))
        d = plan_doc()
        d["fields"][0]["mu"] = -5
        put("plan_mu_negative.json", json.dumps(d))
        put("plan_fractions_zero.json", json.dumps(plan_doc(fractions=0)))
        d = plan_doc()
        d["fields"][0]["ssd_cm"] = 1000          # SSD typed in mm
        put("plan_ssd_mm.json", json.dumps(d))
        d = plan_doc()
        d["fields"][0]["x_cm"] = 100             # jaw typed in mm
        put("plan_jaw_mm.json", json.dumps(d))
        d = plan_doc()
        d["fields"][0]["points"][0]["expected_dose_cgy"] = 20000   # 200 Gy typed in cGy x 100
        put("plan_dose_huge.json", json.dumps(d))
        put("plan_patient_sql.json", json.dumps(plan_doc(patient_mrn=SQL)))
        put("plan_site_bad_utf8.json", json.dumps(plan_doc(site="SITE_HERE")).encode().replace(
            b"SITE_HERE", b"Pel\xffvis"))
        d = plan_doc()
        d["fields"][0]["name"] = ESC
        put("plan_field_escape.json", json.dumps(d))
        put("plan_field_nul.json", json.dumps(plan_doc()).replace('"name": "REF"', '"name": "RE\\u0000F"'))
        put("plan_label_long.json", json.dumps(plan_doc(label=LONG)))
        put("plan_unknown_key.json", json.dumps(plan_doc(fractionz=5)))

        good_rd = json.dumps(good_readings(), indent=2)
        put("rd_malformed.json", good_rd.replace('"version": 1,', '"version": 1'))
        put("rd_truncated.json", good_rd[: len(good_rd) - 20])
        put("rd_5mb.json", good_rd + " " * 5_000_000)
        d = good_readings()
        d["readings"] = {"field": "AP"}
        put("rd_readings_object.json", json.dumps(d))
        d = good_readings()
        d["readings"][0]["reading"] = "20.0"
        put("rd_reading_text.json", json.dumps(d))
        d = good_readings()
        d["readings"][0]["temp_c"] = 304.15       # kelvin
        put("rd_temp_kelvin.json", json.dumps(d))
        d = good_readings()
        d["readings"][0]["reading"] = -20
        put("rd_reading_negative.json", json.dumps(d))
        d = good_readings()
        d["readings"] = d["readings"] * 65
        put("rd_too_many.json", json.dumps(d))
        d = good_readings()
        d["patient"] = SQL
        put("rd_patient_sql.json", json.dumps(d))
        put("rd_bad_utf8.json", json.dumps(good_readings()).encode().replace(b'"AP"', b'"A\xffP"'))
        d = good_readings()
        d["readings"][0]["field"] = ESC
        put("rd_field_escape.json", json.dumps(d))
        put("rd_array.json", json.dumps([good_readings()]))

        good_ct = json.dumps(good_corrections(), indent=2)
        put("ct_malformed.json", good_ct.replace('"version": 1,', '"version": 1'))
        put("ct_truncated.json", good_ct[: len(good_ct) // 3])
        put("ct_empty.json", "")
        put("ct_5mb.json", good_ct + " " * 5_000_000)
        d = good_corrections()
        d["tables"][0]["points"][0]["factor"] = 101.2     # percent, not a factor
        put("ct_factor_percent.json", json.dumps(d))
        d = good_corrections()
        d["tables"][0]["points"][0]["factor"] = "1.012"
        put("ct_factor_text.json", json.dumps(d))
        d = good_corrections()
        d["tables"] = {"field_size": []}
        put("ct_tables_object.json", json.dumps(d))
        d = good_corrections()
        d["tables"][0]["points"][1]["x"] = 4.0          # not increasing
        put("ct_x_order.json", json.dumps(d))
        d = good_corrections()
        d["detector"] = SQL
        put("ct_detector_sql.json", json.dumps(d))
        put("ct_bad_utf8.json", json.dumps(good_corrections()).encode().replace(
            b"invented test data", b"invented \xff\xfe data"))
        d = good_corrections()
        d["tables"][0]["parameter"] = "humidity"
        put("ct_parameter.json", json.dumps(d))
        put("ct_array.json", json.dumps([good_corrections()]))
        with open(BEAM_DATA, encoding="utf-8") as fh:
            beam = json.load(fh)
        beam["machine"] = "LINAC-A"

        def bd(name, change):
            d = json.loads(json.dumps(beam))
            change(d)
            put(name, json.dumps(d, indent=2))

        good_bd = json.dumps(beam, indent=2)
        put("bd_good.json", good_bd)
        put("bd_malformed.json", good_bd.replace('"energy": 6,', '"energy": 6'))
        put("bd_truncated.json", good_bd[: len(good_bd) // 2])
        put("bd_5mb.json", good_bd + " " * 5_000_000)
        bd("bd_dmax_mm.json", lambda d: d.update(dmax_cm=15))                          # mm
        bd("bd_distance_mm.json", lambda d: d["reference"].update(distance_cm=1015))   # mm
        bd("bd_dose_per_mu.json", lambda d: d["reference"].update(dose_cgy_per_mu=100))
        bd("bd_sc_text.json", lambda d: d["output_factors"].update(sc="1.0"))
        bd("bd_of_array.json", lambda d: d.update(output_factors=[1]))
        bd("bd_machine_sql.json", lambda d: d.update(machine=SQL))
        bd("bd_source_escape.json", lambda d: d.update(source=ESC))
        put("bd_bad_utf8.json", good_bd.encode().replace(b"invented test", b"invented \xff test"))

        with open(DICOM_PLAN, encoding="utf-8") as fh:
            rtplan = fh.read()
        put("dcm_malformed.json", rtplan.replace('"vr"', '"vr" "vr"', 1))
        put("dcm_truncated.json", rtplan[: len(rtplan) // 2])
        put("dcm_5mb.json", json.dumps([json.loads(rtplan)] * 800))
        put("dcm_array_of_two.json", json.dumps([json.loads(rtplan), json.loads(rtplan)]))
        put("dcm_bad_utf8.json", rtplan.encode().replace(b"Testperson", b"Test\xffperson"))
        put("dcm_name_escape.json", rtplan.replace("Testperson", "Test\\u001b[2Jperson"))
        d = json.loads(rtplan)
        d["00100020"]["Value"] = [SQL]
        put("dcm_patient_sql.json", json.dumps(d))
        # Issue 10: files cut inside a string (a name or a value), a repeated
        # DICOM tag, hexadecimal numbers in DICOM DS text, bidi and
        # zero-width characters in file fields.
        def cut_in(text, mark):
            return text[: text.index(mark) + len(mark)]
        put("plan_cut_in_string.json", cut_in(good_plan, '"Pelv'))
        put("rd_cut_in_string.json", cut_in(good_rd, '"D-10'))
        put("ct_cut_in_string.json", cut_in(good_ct, '"para'))
        put("bd_cut_in_string.json", cut_in(good_bd, '"LINAC'))
        put("dcm_cut_in_string.json", cut_in(rtplan, '"Testper'))
        # The patient ID (0010,0020) twice: the second would name another patient.
        put("dcm_dup_tag.json", rtplan.replace('{', '{"00100020":{"Value":["TEST-0001"],"vr":"LO"},', 1))
        # Beam Meterset (300A,0086) in a nested item, as "300a0086" beside "300A0086".
        put("dcm_dup_nested_tag.json", rtplan.replace('"300A0086":{"Value":[132.5],"vr":"DS"}',
                                                      '"300A0086":{"Value":[132.5],"vr":"DS"},'
                                                      '"300a0086":{"Value":[1325],"vr":"DS"}', 1))
        # C99 hexadecimal float text for 11.84 (strtod would take it; PS3.5 6.2 DS is decimal).
        put("dcm_hex_ds.json", rtplan.replace('"300A0086":{"Value":[132.5],"vr":"DS"}',
                                              '"300A0086":{"Value":["0x1.7b8p3"],"vr":"DS"}', 1))
        put("plan_site_bidi.json", json.dumps(plan_doc(site="Pel\u202evis")))
        d = plan_doc()
        d["fields"][0]["name"] = "RE\u200bF"
        put("plan_field_zero_width.json", json.dumps(d))
        d = good_readings()
        d["readings"][0]["detector"] = "D-1001\u200b"
        put("rd_detector_zero_width.json", json.dumps(d))
        put("dl_dup_key.json", '{"date": "2026-11-02", "appointments": '
                               '[{"time": "08:30", "mrn": "%s", "mrn": "TEST-0002"}]}' % rf.MRN)
        put("not_json.bin", bytes(range(256)) * 64)
        put("dl_no_header.csv", "08:30,P-1,plan\n")
        put("dl_many.csv", "time,mrn\n" + "".join("08:%02d,P-%d\n" % (i % 60, i) for i in range(501)))
        put("dl_bad_time.csv", "time,mrn\n25:00,P-1\n")
        put("dl_escape.csv", "time,mrn\n08:30,Bad\x1b[2JName\n")
        return files

    def restore(self):
        copy_database(self.pristine, self.fx.db)

    def close(self):
        self.fx.close()


# ---- the catalogue -------------------------------------------------------------------
#
# Each case: (category, args, options). Options: user (default admin), stdin,
# code (expected exit code), expect (a piece of the error line that names the
# subject), new_file (a path key that must not exist afterwards).
# Categories: malformed, truncated, oversized, wrong-unit, out-of-range,
# wrong-type, hostile.

M, T, O, U, R, W, H = ("malformed", "truncated", "oversized", "wrong-unit", "out-of-range",
                       "wrong-type", "hostile")


def catalogue(f):
    """The cases per command ('family sub'); f maps file names to paths."""
    rec = ["--patient", rf.MRN]
    good = ["--field", "AP", "--detector", "D-1001", "--reading", "20.0"]
    calib = ["calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point", "entrance",
             "--chamber-dose", "100", "--readings", "10.0", "--temp", "20"]
    beam = ["machine", "beam", "10X", "--machine", "LINAC-A", "--modality", "photon", "--energy", "10"]
    det = ["detector", "add", "D-9009", "--label", "Diode 9", "--temp-coeff", "0", "--kind", "photon_diode"]
    det_no_tc = ["detector", "add", "D-9009", "--label", "Diode 9", "--kind", "photon_diode"]

    def dcm(path, *extra):
        return ["plan", "import-dicom", path, "--machine", "LINAC-A", "--site", "Pelvis",
                "--technique", "3D"] + list(extra)
    return {
        "user add": [
            (M, ["user", "add", "ann", "--name"], dict(code=1, expect="--name")),
            (M, ["user", "add", "ann", "--role", "therapist"], dict(code=1, expect="--name")),
            (R, ["user", "add", "ann", "--name", "Ann", "--role", "superuser"], dict(expect="superuser")),
            (W, ["user", "add", "ann", "--name", "Ann", "--role", "3"], dict(expect="'3'")),
            (O, ["user", "add", "ann", "--name", LONG, "--role", "therapist"], dict(expect="name")),
            (O, ["user", "add", LONG, "--name", "Ann", "--role", "therapist"], dict(expect="login")),
            (H, ["user", "add", SQL, "--name", "Ann", "--role", "therapist"], dict(expect="login")),
            (H, ["user", "add", "ann", "--name", ESC, "--role", "therapist"], dict()),
            (H, ["user", "add", "ann", "--name", NL, "--role", "therapist"], dict()),
            (H, ["user", "add", "ann", "--name", BAD_UTF8, "--role", "therapist"], dict(expect="UTF-8")),
            (R, ["user", "add", "tina", "--name", "Tina Again", "--role", "therapist"], dict(expect="tina")),
            (R, ["user", "add", "ann", "--name", "Ann", "--role", "admin"], dict(user="phil", code=4)),
        ],
        "user list": [
            (M, ["user", "list", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "user deactivate": [
            (H, ["user", "deactivate", SQL], dict(expect="unknown user")),
            (R, ["user", "deactivate", "admin"], dict(expect="themselves")),
            (M, ["user", "deactivate"], dict(code=1)),
            (R, ["user", "deactivate", "tina"], dict(user="phil", code=4)),
        ],
        "user passwd": [
            (M, ["user", "passwd", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "user reset": [
            (M, ["user", "reset"], dict(code=1)),
            (H, ["user", "reset", SQL], dict(expect="unknown user")),
            (R, ["user", "reset", "admin"], dict(expect="own password")),
            (R, ["user", "reset", "tina"], dict(user="phil", code=4)),
        ],
        "user unlock": [
            (M, ["user", "unlock"], dict(code=1)),
            (H, ["user", "unlock", SQL], dict(expect="unknown user")),
            (R, ["user", "unlock", "tina"], dict(expect="not locked")),
        ],
        "user status": [
            (M, ["user", "status", "tina", "otto"], dict(code=1, expect="unexpected argument")),
            (H, ["user", "status", SQL], dict(expect="unknown user")),
            (R, ["user", "status", "admin"], dict(user="tina", code=4)),
        ],
        # A refused password is an audit row by design (docs/security.md), so
        # only what is refused before any password is asked is listed here;
        # the password cases are in test_identity.py.
        "login": [
            (M, ["login", "extra"], dict(code=1, expect="unexpected argument")),
            (M, ["login", "--new-password=x"], dict(code=1, expect="takes no value")),
        ],
        "logout": [
            (M, ["logout", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "setting list": [
            (M, ["setting", "list", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "setting set": [
            (T, ["setting", "set", "skin_temp_c"], dict(code=1)),
            (R, ["setting", "set", "no_such_key", "1"], dict(expect="no_such_key")),
            (U, ["setting", "set", "skin_temp_c", "305"], dict(expect="10 to 45")),   # kelvin
            (U, ["setting", "set", "skin_temp_c", "89.6"], dict(expect="10 to 45")),  # Fahrenheit
            (U, ["setting", "set", "implausible_pct", "0.5"], dict(expect="5 to 100")),  # a fraction
            (R, ["setting", "set", "implausible_pct", "1000"], dict(expect="5 to 100")),
            (W, ["setting", "set", "skin_temp_c", "warm"], dict(expect="skin_temp_c")),
            (W, ["setting", "set", "calibration_interval_days", "30 days"], dict(expect="1 to 3650")),
            (R, ["setting", "set", "alert_timeout_s", "1e9"], dict(expect="1 to 300")),
            (O, ["setting", "set", "department", LONG], dict(expect="department")),
            (O, ["setting", "set", "dispositions", ",".join("d%d" % i for i in range(40))],
             dict(expect="32")),
            (H, ["setting", "set", "department", BAD_UTF8], dict(expect="UTF-8")),
            (H, ["setting", "set", "department", ESC], dict()),
            (H, ["setting", "set", "timezone", SQL], dict(expect="timezone")),
            (H, ["setting", "set", SQL, "1"], dict()),
            (R, ["setting", "set", "skin_temp_c", "30"], dict(user="tina", code=4)),
        ],
        "machine add": [
            (M, ["machine", "add"], dict(code=1)),
            (U, ["machine", "add", "LINAC-B", "--sad", "1000"], dict(expect="50 to 200")),   # mm
            (W, ["machine", "add", "LINAC-B", "--sad", "abc"], dict(expect="not a number")),
            (R, ["machine", "add", "LINAC-A"], dict(expect="LINAC-A")),
            (O, ["machine", "add", LONG], dict()),
            (H, ["machine", "add", BAD_UTF8], dict(expect="UTF-8")),
            (H, ["machine", "add", ESC], dict()),
            (R, ["machine", "add", "LINAC-B"], dict(user="tina", code=4)),
        ],
        "machine beam": [
            (M, beam[:-2], dict(expect="energy is required")),
            (U, beam[:-1] + ["10000"], dict(expect="0.1 to 50")),                      # keV
            (U, beam + ["--dmax", "24"], dict(expect="0.1 to 9.9")),                   # mm
            (U, beam + ["--norm-distance", "1015"], dict(expect="50 to 200")),         # mm
            (W, beam[:-1] + ["ten"], dict(expect="not a number")),
            (R, ["machine", "beam", "P1", "--machine", "LINAC-A", "--modality", "proton",
                 "--energy", "150"], dict(expect="proton")),
            (H, beam[:4] + [SQL] + beam[5:], dict(expect="unknown machine")),
            (O, ["machine", "beam", LONG] + beam[3:], dict()),
            (H, ["machine", "beam", BAD_UTF8] + beam[3:], dict(expect="UTF-8")),
            (R, ["machine", "beam", "6X"] + beam[3:], dict(expect="6X")),
        ],
        "machine beamdata": [
            (M, ["machine", "beamdata", f["bd_malformed.json"]], dict(expect="malformed")),
            (T, ["machine", "beamdata", f["bd_truncated.json"]], dict(expect="line")),
            (O, ["machine", "beamdata", f["bd_5mb.json"]], dict(expect="larger than")),
            (U, ["machine", "beamdata", f["bd_dmax_mm.json"]], dict(expect="0.1 to 9.9 cm")),
            (U, ["machine", "beamdata", f["bd_distance_mm.json"]], dict(expect="50 to 200 cm")),
            (R, ["machine", "beamdata", f["bd_dose_per_mu.json"]], dict(expect="cGy/MU")),
            (W, ["machine", "beamdata", f["bd_sc_text.json"]], dict(expect="sc")),
            (W, ["machine", "beamdata", f["bd_of_array.json"]], dict(expect="output_factors")),
            (W, ["machine", "beamdata", f["not_json.bin"]], dict()),
            (H, ["machine", "beamdata", f["bd_machine_sql.json"]], dict(expect="not known")),
            (H, ["machine", "beamdata", f["bd_source_escape.json"]], dict(expect="control characters")),
            (H, ["machine", "beamdata", f["bd_bad_utf8.json"]], dict(expect="not UTF-8 (at byte")),
            (W, ["machine", "beamdata", f["bd_good.json"], "--effective", "soon"], dict(expect="soon")),
            (M, ["machine", "beamdata"], dict()),
            (R, ["machine", "beamdata", f["bd_good.json"]], dict(user="tina", code=4)),
        ],
        "machine show": [
            (H, ["machine", "show", SQL], dict(expect="unknown machine")),
            (M, ["machine", "show"], dict()),
            (O, ["machine", "show", LONG], dict(expect="unknown machine")),
        ],
        "machine list": [
            (M, ["machine", "list", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "detector add": [
            (M, det[:-2], dict(code=1, expect="--kind")),
            (U, det_no_tc + ["--temp-coeff", "0.3"], dict(expect="0.003 = 0.3 %/degC")),  # percent
            (W, det_no_tc + ["--temp-coeff", "0.3%"], dict(expect="not a number")),
            (M, det_no_tc, dict(expect="temperature coefficient is required")),
            (R, det[:-1] + ["laser"], dict(expect="laser")),
            (R, det + ["--unit", "Gy"], dict(expect="Gy")),
            (R, det + ["--dose-limit", "-5"], dict()),
            (W, det + ["--sensitivity", "high"], dict(expect="not a number")),
            (R, ["detector", "add", "D-1001"] + det[3:], dict(expect="D-1001")),
            (O, ["detector", "add", LONG] + det[3:], dict()),
            (H, ["detector", "add", BAD_UTF8] + det[3:], dict(expect="UTF-8")),
            (H, det[:4] + [ESC] + det[5:], dict()),
            (O, det + ["--buildup", LONG], dict()),
            (R, det, dict(user="tina", code=4)),
        ],
        "detector list": [
            (M, ["detector", "list", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "detector show": [
            (H, ["detector", "show", SQL], dict(expect="unknown detector")),
            (H, ["detector", "show", BAD_UTF8], dict()),
            (M, ["detector", "show"], dict(code=1)),
        ],
        "detector status": [
            (R, ["detector", "status", "D-2002", "broken", "--reason", "x"], dict(expect="broken")),
            (M, ["detector", "status", "D-2002", "out_for_service"], dict(code=1, expect="--reason")),
            (R, ["detector", "status", "D-2002", "out_for_service", "--reason", "x", "--at", "2026-12-01"],
             dict(expect="future")),
            (W, ["detector", "status", "D-2002", "out_for_service", "--reason", "x", "--at", "2026-13-01"],
             dict(expect="2026-13-01")),
            (O, ["detector", "status", "D-2002", "out_for_service", "--reason", LONG], dict()),
            (H, ["detector", "status", "D-2002", "out_for_service", "--reason", ESC], dict()),
            (H, ["detector", "status", SQL, "retired", "--reason", "x"], dict(expect="unknown detector")),
            (R, ["detector", "status", "D-2002", "out_for_service", "--reason", "x"],
             dict(user="tina", code=4)),
        ],
        "detector retire": [
            (H, ["detector", "retire", SQL, "--reason", "x"], dict(expect="unknown detector")),
            (W, ["detector", "retire", "D-2002", "--reason", "x", "--at", "yesterday"],
             dict(expect="yesterday")),
            (M, ["detector", "retire", "D-2002"], dict(code=1, expect="--reason")),
            (H, ["detector", "retire", "D-2002", "--reason", BAD_UTF8], dict(expect="UTF-8")),
        ],
        "calib add": [
            (M, calib[:11] + ["--readings", "10,,10"], dict(expect="reading 2")),
            (M, calib[:11], dict(expect="--readings is required")),
            (W, calib[:11] + ["--readings", "10,abc"], dict(expect="abc")),
            (R, calib[:11] + ["--readings", "10,-1"], dict(expect="-1")),
            (O, calib[:11] + ["--readings", ",".join(["10"] * 101)], dict(expect="100")),
            (U, calib[:14] + ["293.15"], dict(expect="10 to 45")),                     # kelvin
            (U, calib[:10] + ["200000", "--readings", "10.0"], dict(expect="2000")),   # mGy
            (U, calib + ["--ssd", "1000"], dict(expect="50 to 200")),                  # mm
            (R, calib[:8] + ["side"] + calib[9:], dict(expect="side")),
            (R, calib + ["--valid-days", "0"], dict(expect="1 to 3650")),
            (R, calib + ["--at", "2026-12-01"], dict(expect="future")),
            (R, calib + ["--at", "2026-10-10", "--valid-until", "2026-10-01"], dict()),
            (H, calib[:4] + [SQL] + calib[5:], dict(expect="unknown machine")),
            (H, calib + ["--notes", BAD_UTF8], dict(expect="UTF-8")),
            (H, calib + ["--notes", ESC], dict(expect="control character")),
            (O, calib + ["--notes", LONG], dict()),
            (R, calib, dict(user="tina", code=4)),
        ],
        "calib list": [
            (H, ["calib", "list", SQL], dict(expect="unknown detector")),
            (M, ["calib", "list", "D-1001", "extra"], dict(code=1)),
        ],
        "table load": [
            (M, ["table", "load", f["ct_malformed.json"]], dict(expect="line")),
            (T, ["table", "load", f["ct_truncated.json"]], dict(expect="truncated")),
            (T, ["table", "load", f["ct_empty.json"]], dict(expect="empty")),
            (O, ["table", "load", f["ct_5mb.json"]], dict(expect="larger than")),
            (U, ["table", "load", f["ct_factor_percent.json"]], dict(expect="101.2")),
            (W, ["table", "load", f["ct_factor_text.json"]], dict(expect="factor")),
            (W, ["table", "load", f["ct_tables_object.json"]], dict(expect="tables")),
            (W, ["table", "load", f["ct_array.json"]], dict()),
            (R, ["table", "load", f["ct_x_order.json"]], dict(expect="increase")),
            (R, ["table", "load", f["ct_parameter.json"]], dict(expect="humidity")),
            (H, ["table", "load", f["ct_detector_sql.json"]], dict(expect="unknown detector")),
            (H, ["table", "load", f["ct_bad_utf8.json"]], dict(expect="not UTF-8 at line")),
            (W, ["table", "load", f["not_json.bin"]], dict()),
            (M, ["table", "load", f["ct_malformed.json"] + ".missing"], dict(expect="cannot read")),
            (M, ["table", "load", os.path.dirname(f["ct_malformed.json"])], dict()),
            (R, ["table", "load", rf.CORRECTIONS], dict(user="tina", code=4)),
        ],
        "table list": [
            (H, ["table", "list", SQL], dict(expect="unknown detector")),
        ],
        "table show": [
            (W, ["table", "show", "abc"], dict(expect="abc")),
            (R, ["table", "show", "-1"], dict()),
            (R, ["table", "show", "99999"], dict(expect="99999")),
            (O, ["table", "show", "1" * 400], dict()),
            (H, ["table", "show", SQL], dict()),
        ],
        "patient add": [
            (M, ["patient", "add", "P-9"], dict(code=1, expect="--family")),
            (O, ["patient", "add", "P-9", "--family", LONG], dict(expect="family name")),
            (O, ["patient", "add", "P" * 65, "--family", "X"], dict(expect="MRN")),
            (H, ["patient", "add", "P-9", "--family", BAD_UTF8], dict(expect="UTF-8")),
            (H, ["patient", "add", BAD_UTF8, "--family", "X"], dict(expect="UTF-8")),
            (H, ["patient", "add", "P-9", "--family", ESC], dict(expect="control character")),
            (H, ["patient", "add", "P-9", "--family", NL], dict(expect="control character")),
            (W, ["patient", "add", "P-9", "--family", "X", "--birth-date", "01/02/1960"],
             dict(expect="01/02/1960")),
            (R, ["patient", "add", "P-9", "--family", "X", "--birth-date", "1960-02-30"],
             dict(expect="1960-02-30")),
            (R, ["patient", "add", "P-9", "--family", "X", "--birth-date", "2030-01-01"],
             dict(expect="2030-01-01")),
            (R, ["patient", "add", rf.MRN, "--family", "Other"], dict(expect=rf.MRN)),
            (R, ["patient", "add", "P-9", "--family", "X"], dict(user="otto", code=4)),
        ],
        "patient list": [
            (M, ["patient", "list", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "patient correct": [
            (M, ["patient", "correct", rf.MRN, "--family", "X"], dict(code=1, expect="--reason")),
            (M, ["patient", "correct", rf.MRN, "--reason", "typo"], dict(expect="nothing to correct")),
            (O, ["patient", "correct", rf.MRN, "--family", LONG, "--reason", "typo"], dict(user="phil")),
            (R, ["patient", "correct", rf.MRN, "--birth-date", "2030-01-01", "--reason", "typo"],
             dict(user="phil", expect="2030-01-01")),
            (R, ["patient", "correct", rf.MRN, "--family", "X", "--reason", "typo"],
             dict(user="tina", code=4)),
            (W, ["patient", "correct", rf.MRN, "--birth-date", "yesterday", "--reason", "typo"],
             dict(user="phil", expect="yesterday")),
            (H, ["patient", "correct", SQL, "--family", "X", "--reason", "typo"],
             dict(user="phil", expect="unknown patient")),
            (H, ["patient", "correct", rf.MRN, "--family", ESC, "--reason", "typo"],
             dict(user="phil")),
        ],
        "patient history": [
            (M, ["patient", "history"], dict(code=1)),
            (H, ["patient", "history", SQL], dict(expect="unknown patient")),
            (O, ["patient", "history", LONG], dict()),
            (W, ["patient", "history", rf.MRN, "extra"], dict(code=1)),
            (R, ["patient", "history", "P-NONE"], dict(code=2)),
        ],
        "patient show": [
            (H, ["patient", "show", SQL], dict(expect="unknown patient")),
            (H, ["patient", "show", BAD_UTF8], dict()),
            (M, ["patient", "show"], dict(code=1)),
        ],
        "plan import": [
            (M, ["plan", "import", f["plan_malformed.json"]], dict(expect="not valid JSON")),
            (T, ["plan", "import", f["plan_truncated.json"]], dict(expect="truncated")),
            (T, ["plan", "import", f["plan_empty.json"]], dict()),
            (O, ["plan", "import", f["plan_5mb.json"]], dict(expect="comment")),
            (O, ["plan", "import", f["plan_many_fields.json"]], dict(expect="fields")),
            (O, ["plan", "import", f["plan_label_long.json"]], dict(expect="label")),
            (W, ["plan", "import", f["plan_array.json"]], dict()),
            (W, ["plan", "import", f["plan_fields_object.json"]], dict(expect="fields")),
            (W, ["plan", "import", f["plan_mu_text.json"]], dict(expect="mu")),
            (R, ["plan", "import", f["plan_mu_negative.json"]], dict(expect="mu '-5'")),
            (R, ["plan", "import", f["plan_fractions_zero.json"]], dict(expect="fractions")),
            (U, ["plan", "import", f["plan_ssd_mm.json"]], dict(expect="ssd_cm")),
            (U, ["plan", "import", f["plan_jaw_mm.json"]], dict(expect="x_cm")),
            (U, ["plan", "import", f["plan_dose_huge.json"]], dict(expect="expected_dose_cgy")),
            (R, ["plan", "import", f["plan_unknown_key.json"]], dict(expect="fractionz")),
            (H, ["plan", "import", f["plan_patient_sql.json"]], dict(expect="unknown patient")),
            (H, ["plan", "import", f["plan_site_bad_utf8.json"]], dict(expect="not UTF-8 at line")),
            (H, ["plan", "import", f["plan_field_escape.json"]], dict(expect="control characters")),
            (H, ["plan", "import", f["plan_field_nul.json"]], dict(expect="escaped NUL")),
            (R, ["plan", "import", f["plan_mu_negative.json"] + ".missing"], dict(expect="cannot read")),
            (H, ["plan", "import", f["plan_good.json"], "--replaces", SQL], dict(expect="replace")),
            (W, ["plan", "import", f["not_json.bin"]], dict()),
            (R, ["plan", "import", f["plan_mu_negative.json"]], dict(user="tina", code=4)),
        ],
        "plan import-dicom": [
            (M, dcm(f["dcm_malformed.json"]), dict(expect="line")),
            (T, dcm(f["dcm_truncated.json"]), dict()),
            (O, dcm(f["dcm_5mb.json"]), dict()),
            (W, dcm(f["dcm_array_of_two.json"]), dict(expect="2 data sets")),
            (W, dcm(f["not_json.bin"]), dict()),
            (H, dcm(f["dcm_bad_utf8.json"]), dict(expect="not UTF-8 (at byte")),
            (H, dcm(f["dcm_name_escape.json"]), dict(expect="control characters")),
            (H, dcm(f["dcm_patient_sql.json"]), dict(expect="not known")),
            (M, dcm(DICOM_PLAN)[:3], dict(expect="--machine")),
            (R, dcm(DICOM_PLAN, "--setup", "sideways"), dict(expect="sideways")),
            (R, dcm(DICOM_PLAN, "--policy", "sometimes"), dict(expect="sometimes")),
            (W, dcm(DICOM_PLAN, "--exit", "G1=abc"), dict()),
            (U, dcm(DICOM_PLAN, "--exit", "G1=2000"), dict()),                            # mm
            (H, dcm(DICOM_PLAN, "--site", ESC), dict(expect="control character")),
            (H, dcm(DICOM_PLAN)[:4] + [SQL] + dcm(DICOM_PLAN)[5:], dict(expect="machine")),
            (R, dcm(DICOM_PLAN), dict(user="tina", code=4)),
        ],
        "plan list": [
            (H, ["plan", "list", SQL], dict(expect="unknown patient")),
            (M, ["plan", "list", rf.MRN, "extra"], dict(code=1)),
        ],
        "plan show": [
            (H, ["plan", "show", rf.MRN, SQL], dict(expect="has no plan")),
            (T, ["plan", "show", rf.MRN], dict(code=1)),
            (H, ["plan", "show", BAD_UTF8, rf.PLAN], dict()),
        ],
        "levels set": [
            (M, ["levels", "set", "new-set", "--tolerance", "5"], dict(expect="action level")),
            (R, ["levels", "set", "new-set", "--tolerance", "500", "--action", "600"], dict(expect="50")),
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "3"], dict(expect="action")),
            (W, ["levels", "set", "new-set", "--tolerance", "five", "--action", "8"],
             dict(expect="not a number")),
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--modality", "proton"],
             dict(expect="proton")),
            (U, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--energy", "6000"],
             dict(expect="50")),                                                          # keV
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--floor", "-1"],
             dict(expect="floor")),
            (W, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--effective",
                 "2026-13-01"], dict(expect="2026-13-01")),
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--point", "side"],
             dict(expect="side")),
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--detector-kind",
                 "laser"], dict(expect="laser")),
            (O, ["levels", "set", LONG, "--tolerance", "5", "--action", "8"], dict()),
            (H, ["levels", "set", BAD_UTF8, "--tolerance", "5", "--action", "8"], dict(expect="UTF-8")),
            (H, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8", "--site", ESC], dict()),
            (R, ["levels", "set", "new-set", "--tolerance", "5", "--action", "8"],
             dict(user="tina", code=4)),
        ],
        "levels list": [
            (W, ["levels", "list", "--at", "yesterday"], dict(code=1, expect="yesterday")),
            (M, ["levels", "list", "extra"], dict(code=1)),
        ],
        "record": [
            (M, ["record"] + rec + ["--reading", "20"], dict(code=1, expect="--field")),
            (T, ["record"] + rec + ["--field", "AP", "--detector", "D-1001"], dict(code=1, expect="--reading")),
            (W, ["record"] + rec + good[:-1] + ["twenty"], dict(expect="reading 'twenty'")),
            (U, ["record"] + rec + good[:-1] + ["20 nC"], dict(expect="reading '20 nC'")),
            (U, ["record"] + rec + good + ["--temp", "304.15"], dict(expect="10 to 45 degC")),  # K
            (U, ["record"] + rec + good + ["--temp", "89.6"], dict(expect="10 to 45 degC")),    # degF
            (R, ["record"] + rec + good[:-1] + ["-20"], dict(expect="must be > 0 nC")),
            (R, ["record"] + rec + good[:-1] + ["1e400"], dict(expect="1e400")),
            (R, ["record"] + rec + good + ["--fraction", "6"], dict(expect="1 to 5")),
            (W, ["record"] + rec + good + ["--fraction", "1.5"], dict(expect="1.5")),
            (R, ["record"] + rec + good + ["--fraction", "1"], dict(expect="already logged")),
            (R, ["record"] + rec + good + ["--at", "2026-11-03"], dict(expect="future")),
            (W, ["record"] + rec + good + ["--at", "2026-11-02T25:00"], dict(expect="2026-11-02T25:00")),
            (H, ["record", "--patient", SQL] + good, dict(user="tina", expect="unknown patient")),
            (H, ["record"] + rec + ["--field", ESC, "--detector", "D-1001", "--reading", "20"],
             dict(user="tina", expect="control character")),
            (H, ["record"] + rec + ["--field", BAD_UTF8, "--detector", "D-1001", "--reading", "20"],
             dict(user="tina", expect="UTF-8")),
            (O, ["record"] + rec + ["--field", LONG, "--detector", "D-1001", "--reading", "20"],
             dict(user="tina")),
            (M, ["record", "--file", f["rd_malformed.json"]], dict(user="tina", expect="malformed")),
            (T, ["record", "--file", f["rd_truncated.json"]], dict(user="tina", expect="truncated")),
            (O, ["record", "--file", f["rd_5mb.json"]], dict(user="tina", expect="larger than")),
            (O, ["record", "--file", f["rd_too_many.json"]], dict(user="tina", expect="1 to 64")),
            (W, ["record", "--file", f["rd_readings_object.json"]], dict(user="tina", expect="readings")),
            (W, ["record", "--file", f["rd_reading_text.json"]], dict(user="tina", expect="reading")),
            (W, ["record", "--file", f["rd_array.json"]], dict(user="tina")),
            (U, ["record", "--file", f["rd_temp_kelvin.json"]], dict(user="tina", expect="10 to 45 degC")),
            (R, ["record", "--file", f["rd_reading_negative.json"]], dict(user="tina", expect="> 0 nC")),
            (H, ["record", "--file", f["rd_patient_sql.json"]], dict(user="tina", expect="unknown patient")),
            (H, ["record", "--file", f["rd_bad_utf8.json"]], dict(user="tina", expect="not UTF-8 at line")),
            (H, ["record", "--file", f["rd_field_escape.json"]], dict(user="tina")),
            (W, ["record", "--file", f["not_json.bin"]], dict(user="tina")),
            (T, ["record", "--file", "-"], dict(user="tina", stdin='{"format": "fxledger-readings", "ver')),
            (H, ["record", "--file", "-"], dict(user="tina", stdin=b"\xff\xfe\x00\x00garbage")),
            (R, ["record"] + rec + good, dict(user="otto", code=4)),
        ],
        "history": [
            (M, ["history"], dict(code=1, expect="--patient")),
            (H, ["history", "--patient", SQL], dict(expect="unknown patient")),
            (H, ["history", "--patient", rf.MRN, "--field", SQL], dict(expect="unknown field")),
            (H, ["history", "--patient", BAD_UTF8], dict()),
            (O, ["history", "--patient", LONG], dict()),
            (R, ["history", "--patient", rf.MRN, "--field", "AP:sideways"], dict()),
            (W, ["history", "--patient", rf.MRN, "--plan", '["REC-1"]'], dict()),
        ],
        "queue list": [
            (R, ["queue", "list", "--status", "bogus"], dict(expect="bogus")),
            (R, ["queue", "list", "--severity", "9"], dict(expect="9")),
            (W, ["queue", "list", "--since", "last week"], dict(expect="last week")),
            (H, ["queue", "list", "--patient", SQL], dict(expect="unknown patient")),
        ],
        "queue show": [
            (W, ["queue", "show", "abc"], dict(expect="abc")),
            (R, ["queue", "show", "99999"], dict(expect="99999")),
            (R, ["queue", "show", "-1"], dict()),
            (H, ["queue", "show", SQL], dict()),
        ],
        "queue ack": [
            (R, ["queue", "ack", "99999"], dict(user="tina", expect="99999")),
            (O, ["queue", "ack", "1", "--comment", LONG], dict(user="tina")),
            (H, ["queue", "ack", "1", "--comment", BAD_UTF8], dict(user="tina", expect="UTF-8")),
            (H, ["queue", "ack", "1", "--comment", ESC], dict(user="tina")),
            (R, ["queue", "ack", "1"], dict(user="otto", code=4)),
        ],
        "queue comment": [
            (T, ["queue", "comment", "1"], dict(user="tina", code=1)),
            (O, ["queue", "comment", "1", LONG], dict(user="tina")),
            (H, ["queue", "comment", "1", BAD_UTF8], dict(user="tina", expect="UTF-8")),
            (H, ["queue", "comment", "1", ESC], dict(user="tina")),
            (W, ["queue", "comment", "one", "text"], dict(user="tina", expect="one")),
        ],
        "queue close": [
            (R, ["queue", "close", "1", "--disposition", SQL], dict(user="phil", expect="not in the list")),
            (M, ["queue", "close", "1"], dict(user="phil", code=1)),
            (H, ["queue", "close", "1", "--disposition", "other", "--comment", BAD_UTF8],
             dict(user="phil", expect="UTF-8")),
            (R, ["queue", "close", "1", "--disposition", "other"], dict(user="tina", code=4)),
        ],
        "queue reopen": [
            (R, ["queue", "reopen", "1", "--comment", "x"], dict(user="phil", expect="closed")),
            (M, ["queue", "reopen", "1"], dict(user="phil", code=1)),
        ],
        "amend": [
            (W, ["amend", "abc", "--reading", "20", "--reason", "typo"], dict(user="tina", expect="abc")),
            (R, ["amend", "99999", "--reading", "20", "--reason", "typo"], dict(user="tina", expect="99999")),
            (R, ["amend", "1", "--reading", "-2", "--reason", "typo"], dict(user="tina", expect="-2")),
            (U, ["amend", "1", "--reading", "20 nC", "--reason", "typo"], dict(user="tina", expect="20 nC")),
            (U, ["amend", "1", "--reading", "20", "--reason", "typo", "--temp", "304"],
             dict(user="tina", expect="10 to 45 degC")),
            (M, ["amend", "1", "--reading", "20"], dict(user="tina", code=1, expect="--reason")),
            (O, ["amend", "1", "--reading", "20", "--reason", LONG], dict(user="tina")),
            (H, ["amend", "1", "--reading", "20", "--reason", BAD_UTF8], dict(user="tina", expect="UTF-8")),
            (H, ["amend", "1", "--reading", "20", "--reason", ESC], dict(user="tina")),
            (H, ["amend", "1", "--reading", "20", "--reason", "x", "--detector", SQL],
             dict(user="tina", expect="unknown detector")),
            (R, ["amend", "1", "--reading", "20", "--reason", "x", "--background", "30"], dict(user="tina")),
            (R, ["amend", "1", "--reading", "20", "--reason", "x"], dict(user="otto", code=4)),
        ],
        "report patient": [
            (M, ["report", "patient", rf.MRN], dict(code=1, expect="--out", new_file="r1.pdf")),
            (H, ["report", "patient", SQL, "--out", "@r2.pdf"], dict(expect="not found", new_file="r2.pdf")),
            (O, ["report", "patient", LONG, "--out", "@r6.pdf"], dict(expect="not found", new_file="r6.pdf")),
            (R, ["report", "patient", rf.MRN, "--out", "@nodir/r3.pdf"], dict(new_file="nodir/r3.pdf")),
            (W, ["report", "patient", rf.MRN, "--out", "@r4.pdf", "--generated-at", "noon"],
             dict(expect="noon", new_file="r4.pdf")),
            (H, ["report", "patient", rf.MRN, "--out", "@r5.pdf", "--plan", SQL],
             dict(expect="not found", new_file="r5.pdf")),
        ],
        "report month": [
            (W, ["report", "month", "November", "--out", "@m1.pdf"], dict(expect="November", new_file="m1.pdf")),
            (R, ["report", "month", "2026-13", "--out", "@m2.pdf"], dict(expect="2026-13", new_file="m2.pdf")),
            (M, ["report", "month", "2026-11"], dict(code=1, expect="--out")),
            (H, ["report", "month", SQL, "--out", "@m3.pdf"], dict(new_file="m3.pdf")),
        ],
        "today": [
            (M, ["today", "--at"], dict(code=1)),
            (M, ["today", "--day-list", f["dl_no_header.csv"]], dict(expect="header")),
            (O, ["today", "--day-list", f["dl_many.csv"]], dict(expect="more than 500")),
            (R, ["today", "--at", "2026-13-01"], dict(expect="2026-13-01")),
            (R, ["today", "--day-list", f["dl_bad_time.csv"]], dict(expect="25:00")),
            (W, ["today", "--at", "noon"], dict(expect="noon")),
            (W, ["today", "--day-list", f["not_json.bin"]], dict()),
            (W, ["today", "--day-list", "@no-such-day-list.csv"], dict(code=2, expect="cannot open")),
            (H, ["today", "--day-list", f["dl_escape.csv"]], dict(expect="printable")),
            (H, ["today", "--at", SQL], dict(expect="not valid")),
        ],
        "stats": [
            (M, ["stats"], dict(code=1, expect="period is required")),
            (M, ["stats", "--month"], dict(code=1)),
            (W, ["stats", "--month", "November"], dict(expect="November")),
            (R, ["stats", "--month", "2026-13"], dict(expect="2026-13")),
            (R, ["stats", "--from", "2026-11-05", "--to", "2026-11-01"], dict(expect="must not be before")),
            (W, ["stats", "--from", "2026-02-30", "--to", "2026-03-01"], dict(expect="2026-02-30")),
            (W, ["stats", "--month", "2026-11", "--from", "2026-11-01"], dict(expect="not both")),
            (H, ["stats", "--month", "2026-11", "--by", SQL], dict(expect="grouping key")),
            (O, ["stats", "--month", "2026-11", "--by", LONG], dict(expect="grouping key")),
            (H, ["stats", "--month", "2026-11", "--out", "@s1" + ESC], dict(expect="control character")),
            (R, ["stats", "--month", "2026-11", "--out", "@nodir/s2.pdf"], dict(new_file="nodir/s2.pdf")),
        ],
        "export measurements": [
            (M, ["export", "measurements", "--format"], dict(code=1)),
            (W, ["export", "measurements", "--format", "xml"], dict(code=1, expect="csv or json")),
            (R, ["export", "measurements", "--month", "2026-13"], dict(expect="2026-13")),
            (W, ["export", "measurements", "--from", "yesterday", "--to", "2026-11-01"],
             dict(expect="yesterday")),
            (H, ["export", "measurements", "--patient", SQL], dict(expect="unknown patient")),
            (O, ["export", "measurements", "--detector", LONG], dict(expect="unknown detector")),
            (R, ["export", "measurements", "--out", f["not_json.bin"]], dict(expect="already exists")),
            (R, ["export", "measurements", "--out", "@nodir/x1.csv"], dict(new_file="nodir/x1.csv")),
            (H, ["export", "measurements", "--out", "@x2" + ESC], dict(expect="control character")),
        ],
        "audit list": [
            (M, ["audit", "list", "--who"], dict(code=1)),
            (W, ["audit", "list", "--limit", "ten"], dict(expect="ten")),
            (R, ["audit", "list", "--limit", "0"], dict()),
            (R, ["audit", "list", "--month", "2026-00"], dict(expect="2026-00")),
            (O, ["audit", "list", "--id", "9" * 40], dict()),
            (H, ["audit", "list", "--who", BAD_UTF8], dict(expect="UTF-8")),
        ],
        "audit show": [
            (M, ["audit", "show"], dict(code=1)),
            (W, ["audit", "show", "abc"], dict(expect="abc")),
            (R, ["audit", "show", "99999999"], dict(expect="not found")),
            (O, ["audit", "show", "9" * 40], dict()),
            (H, ["audit", "show", SQL], dict()),
        ],
        "backup": [
            (M, ["backup"], dict(code=1)),
            (R, ["backup", f["not_json.bin"]], dict(expect="exists")),
            (R, ["backup", "@nodir/b1.db"], dict(new_file="nodir/b1.db")),
            (O, ["backup", "@" + "b" * 5000], dict()),
            (R, ["backup", "@b2.db"], dict(user="tina", code=4, new_file="b2.db")),
            (W, ["backup", "@b3.db", "@b4.db"], dict(code=1, new_file="b3.db")),
            (W, ["backup", "@"], dict(expect="exists")),
            (H, ["backup", "@b5" + ESC], dict(expect="control character")),
            (H, ["backup", "@b6" + BAD_UTF8], dict(expect="UTF-8")),
        ],
        "verify": [
            (M, ["verify", "extra"], dict(code=1, expect="unexpected argument")),
        ],
        "restore": [
            (M, ["restore", "@b7.db"], dict(code=1, expect="backup file and the name of a new file",
                                             new_file="b7.db")),
            (R, ["restore", "@no-such-backup.db", "@r7.db"], dict(code=2, expect="No such file",
                                                                  new_file="r7.db")),
            (W, ["restore", f["not_json.bin"], "@r8.db"], dict(expect="not an fxledger database",
                                                                new_file="r8.db")),
            (R, ["restore", "@pristine.db", f["not_json.bin"]], dict(code=2, expect="already exists")),
            (O, ["restore", "@pristine.db", "@" + "r" * 5000], dict(expect="too long")),
            (H, ["restore", "@pristine.db", "@r9" + ESC], dict(expect="control character")),
            (M, ["restore", "@pristine.db", "@r10.db", "extra"], dict(code=1, new_file="r10.db")),
        ],
        # Refused before it listens (a case accepted would start the server:
        # run() then times out and the test fails).
        "serve": [
            (M, ["serve", "--tls-cert", "@x.pem"], dict(code=1, expect="go together")),
            (M, ["serve", "--listen", "bogus"], dict(code=1, expect="ADDR:PORT")),
            (R, ["serve", "--listen", "127.0.0.1:99999"], dict(code=1, expect="ADDR:PORT")),
            (R, ["serve", "--threads", "0"], dict(code=1, expect="1 to 64")),
            (W, ["serve", "--threads", "0x4"], dict(code=1, expect="'0x4' is not a whole number")),
            (W, ["serve", "--login-rate", "abc"], dict(code=1, expect="abc")),
            (O, ["serve", "--listen", "127.0.0.1:" + "9" * 5000], dict(code=1)),
            (H, ["serve", "--listen", SQL], dict(code=1)),
            # refused by the server's start-up, with the same prefix
            (W, ["serve", "--listen", "localhost:18080"], dict(code=1, expect="must be an IPv4 or IPv6")),
            (R, ["serve", "--listen", "127.0.0.1:18443", "--tls-cert", "@nope.pem", "--tls-key",
                 "@nope.key"], dict(code=2, expect="cannot read")),
            # 192.0.2.1: TEST-NET-1 (RFC 5737), never an address of this machine
            (R, ["serve", "--listen", "192.0.2.1:18080"], dict(code=2, expect="cannot listen on 192.0.2.1 port 18080: Cannot assign")),
        ],
    }


# ---- issue 10: strict numbers and text, repeated options, cut files ------------------

ZWSP = "\u200b"       # ZERO WIDTH SPACE (Unicode: general category Cf)
RLO = "\u202e"        # RIGHT-TO-LEFT OVERRIDE (Unicode UAX #9, a bidi control; CVE-2021-42574)


def strict_cases(f):
    """(category, args, options) as in catalogue(): each refused with one
    clear line naming the problem, exit below 128, the file unchanged."""
    rec = ["record", "--patient", rf.MRN, "--field", "AP", "--detector", "D-1001"]
    calib = ["calib", "add", "D-1001", "--machine", "LINAC-A", "--beam", "6X", "--point", "entrance",
             "--chamber-dose", "100", "--temp", "20"]

    def dcm(path):
        return ["plan", "import-dicom", path, "--machine", "LINAC-A", "--site", "Pelvis", "--technique", "3D"]
    return [
        # Hexadecimal, inf, nan: plain decimal only (include/fxl/number.h), the unit in the message.
        (W, rec + ["--reading", "0x14"], dict(user="tina", expect="reading '0x14'")),
        (W, rec + ["--reading", "0x1.7b8p3"], dict(user="tina", expect="0x1.7b8p3")),
        (W, rec + ["--reading", "inf"], dict(user="tina", expect="'inf'")),
        (W, rec + ["--reading", "nan"], dict(user="tina", expect="'nan'")),
        (W, rec + ["--reading", "20", "--temp", "0x14"], dict(user="tina", expect="10 to 45 degC")),
        (W, ["machine", "add", "LINAC-B", "--sad", "0x64"], dict(expect="SAD '0x64' is not a number (50 to 200 cm)")),
        (W, ["setting", "set", "skin_temp_c", "0x20"], dict(expect="skin_temp_c")),
        (W, calib + ["--readings", "0xA"], dict(expect="reading 1 '0xA' is not a number")),
        (W, ["levels", "set", "new-set", "--tolerance", "0x5", "--action", "8"], dict(expect="0x5")),
        (W, ["record", "--patient", rf.MRN, "--field", "AP", "--detector", "D-1001", "--reading", "20",
             "--fraction", "0x2"], dict(user="tina", expect="0x2")),
        (W, dcm(f["dcm_hex_ds.json"]), dict(expect="0x1.7b8p3")),
        # Zero-width and edge spaces in identifiers; bidi controls in identifiers and names.
        (H, ["patient", "add", "P" + ZWSP + "-9", "--family", "X"], dict(expect="zero-width")),
        (H, ["patient", "add", " P-9", "--family", "X"], dict()),
        (H, ["patient", "add", "P-9 ", "--family", "X"], dict()),
        (H, ["detector", "add", "D-1001" + ZWSP, "--label", "Diode", "--temp-coeff", "0", "--kind",
             "photon_diode"], dict(expect="zero-width")),
        (H, ["machine", "add", "LINAC" + ZWSP + "-A"], dict(expect="zero-width")),
        (H, ["patient", "add", "P-9", "--family", "Ex" + RLO + "elpmax"], dict(expect="bidirectional")),
        (H, ["patient", "add", "P" + RLO + "-9", "--family", "X"], dict(expect="bidirectional")),
        (H, ["user", "add", "ann", "--name", "Ann " + RLO + "nimda", "--role", "therapist"],
         dict(expect="bidirectional")),
        (H, ["plan", "import", f["plan_site_bidi.json"]], dict(expect="bidirectional")),
        (H, ["plan", "import", f["plan_field_zero_width.json"]], dict(expect="zero-width")),
        (H, ["record", "--file", f["rd_detector_zero_width.json"]], dict(user="tina", expect="zero-width")),
        # Repeated options: command options and global options alike.
        (M, ["patient", "add", "P-9", "--family", "X", "--family", "Y"], dict(code=1, expect="more than once")),
        (M, ["machine", "add", "LINAC-B", "--sad", "100", "--sad=90"], dict(code=1, expect="more than once")),
        (M, ["record", "--patient", rf.MRN, "--patient", "TEST-0002", "--field", "AP", "--detector", "D-1001",
             "--reading", "20"], dict(user="tina", code=1, expect="more than once")),
        (M, ["--user", "tina", "verify"], dict(code=1, expect="'--user' is given more than once")),
        (M, ["--db", "@other.db", "verify"], dict(code=1, expect="'--db' is given more than once",
                                                  new_file="other.db")),
        (M, ["--json", "--json", "verify"], dict(code=1, expect="more than once")),
        # Repeated DICOM tags, at the top and in a nested item.
        (M, dcm(f["dcm_dup_tag.json"]), dict(expect="tag (0010,0020) appears twice")),
        (M, dcm(f["dcm_dup_nested_tag.json"]), dict(expect="tag (300A,0086) appears twice")),
        (M, ["today", "--day-list", f["dl_dup_key.json"]], dict(expect="key 'mrn' appears twice")),
        # Files cut inside a string: truncated, in every reader.
        (T, ["plan", "import", f["plan_cut_in_string.json"]], dict(expect="inside a string")),
        (T, ["record", "--file", f["rd_cut_in_string.json"]], dict(user="tina", expect="inside a string")),
        (T, ["table", "load", f["ct_cut_in_string.json"]], dict(expect="inside a string")),
        (T, ["machine", "beamdata", f["bd_cut_in_string.json"]], dict(expect="inside a string")),
        (T, dcm(f["dcm_cut_in_string.json"]), dict(expect="inside a string")),
        # A missing input file is a data error (exit 2), not a database error.
        (R, ["plan", "import", "@no-such-plan.json"], dict(code=2, expect="No such file")),
        (R, ["machine", "beamdata", "@no-such-beam.json"], dict(code=2, expect="No such file")),
        (R, dcm("@no-such-plan.dcm"), dict(code=2, expect="No such file")),
        (R, ["record", "--file", "@no-such-readings.json"], dict(user="tina", code=2, expect="No such file")),
        (R, ["table", "load", "@no-such-table.json"], dict(code=2, expect="No such file")),
    ]


class CatalogueTest(unittest.TestCase):
    """Every refusal: one clear line, no crash, nothing written."""

    @classmethod
    def setUpClass(cls):
        cls.dep = Department()

    @classmethod
    def tearDownClass(cls):
        cls.dep.close()

    def refused(self, args, user="admin", stdin=None, code=None, expect=None, new_file=None, db=None):
        dep = self.dep
        db = db or dep.fx.db
        args = [dep.fx.path(a[1:]) if isinstance(a, str) and a.startswith("@") else a for a in args]
        before = file_digest(db)
        r = run(db, args, user=user, stdin=stdin)
        err = r.stderr.decode("utf-8", "replace")
        out = r.stdout.decode("utf-8", "replace")
        changed = file_digest(db) != before
        if changed and db == dep.fx.db:
            dep.restore()
        self.assertGreater(r.returncode, 0, "accepted (exit %d): %s" % (r.returncode, out[:300]))
        self.assertLess(r.returncode, 128, "crashed: " + err[:300])
        self.assertFalse(changed, "database changed by a refused command")
        self.assertTrue(err.startswith("fxledger: error: "), err[:300])
        self.assertEqual(err.count("\n"), 1, "one line: " + err[:300])
        self.assertNotIn("Traceback", err)
        self.assertNotIn("Segmentation", err)
        self.assertLess(len(r.stderr), 1200, "the error line is too long to read")
        self.assertEqual(out, "", "nothing on stdout for a refused command")
        self.assertNotIn("\x1b", err, "control sequences echoed to the terminal")
        r.stderr.decode("utf-8")    # valid UTF-8: no raw bytes of the bad input echoed
        if code is not None:
            self.assertEqual(r.returncode, code, err)
        if expect:
            self.assertIn(expect, err)
        if new_file:
            self.assertFalse(os.path.exists(dep.fx.path(new_file)), "%s was created" % new_file)
        return err

    def test_each_command_refuses_bad_input(self):
        for command, cases in catalogue(self.dep.files).items():
            for i, (category, args, opts) in enumerate(cases):
                with self.subTest(command=command, case=i, category=category):
                    self.refused(args, **opts)

    def test_strict_input_of_issue_10(self):
        """Hexadecimal numbers, zero-width and bidi characters, repeated
        options, repeated DICOM tags, answers too long for their buffer and
        files cut inside a string: one clear line each, the file unchanged."""
        for i, (category, args, opts) in enumerate(strict_cases(self.dep.files)):
            with self.subTest(case=i, category=category, args=[str(a)[:30] for a in args[:4]]):
                self.refused(args, **opts)
        # An interactive answer longer than its line buffer: refused whole,
        # never split into the next prompt (here the worklist's patient
        # prompt, before anything is written; the worklist itself is on
        # stdout, so this is not a refused() case).
        db = self.dep.fx.db
        before = file_digest(db)
        r = run(db, ["record", "--interactive"], user="tina", stdin="1" * 300 + "\n1\n")
        err = r.stderr.decode("utf-8", "replace")
        self.assertEqual(r.returncode, 2, err)
        self.assertEqual(err, "fxledger: error: an answer longer than 127 characters is refused as the "
                         "patient; nothing recorded\n")
        self.assertIn(b"Patient: line 1-", r.stdout)
        self.assertNotIn(b"1" * 50, r.stdout)
        self.assertEqual(file_digest(db), before)

    def test_catalogue_covers_every_category_of_every_command(self):
        """Each command family gets every category that applies to it;
        listings that take no input at least the malformed case."""
        cat = catalogue(self.dep.files)
        by_family = {}
        for command, cases in cat.items():
            by_family.setdefault(command.split()[0], set()).update(c[0] for c in cases)
        listing_only = {"verify", "login", "logout"}   # login: see its catalogue entry
        for family, cats in by_family.items():
            if family in listing_only:
                continue
            for category in (M, O, R, W, H):
                with self.subTest(family=family, category=category):
                    self.assertIn(category, cats)
        for family in ("setting", "machine", "detector", "calib", "table", "plan", "levels",
                       "record", "amend"):
            self.assertIn(U, by_family[family], family)
        for family in ("setting", "table", "plan", "record", "queue"):
            self.assertIn(T, by_family[family], family)

    def test_catalogue_covers_every_command(self):
        """Every command of 'fxledger --help' and every sub-command of
        '<command> --help' has cases here; the generic cases below run on
        any that were added since."""
        listed = discover_commands(self.dep.fx.db)
        cat = catalogue(self.dep.files)
        missing = [c for c in listed if c not in cat and c != "init"]
        self.assertEqual(missing, [], "commands without catalogue cases")

    def test_generic_hostile_input_on_every_command(self):
        """Whatever the command, an unknown option, invalid UTF-8, control
        characters, SQL-like text and a 100 kB argument are refused."""
        for command in discover_commands(self.dep.fx.db):
            if command == "init":
                continue
            words = command.split()
            for label, extra in (("unknown option", ["--no-such-option", SQL]),
                                 ("invalid UTF-8", [BAD_UTF8]),
                                 ("control characters", [ESC]),
                                 ("long argument", ["--no-such-option", LONG])):
                with self.subTest(command=command, case=label):
                    self.refused(words + extra, user="admin")

    def test_init_refuses_bad_input_and_creates_nothing(self):
        """init on a path that does not exist yet: nothing is created."""
        base = ["init", "--department", "Dept", "--admin-name", "Ann Admin", "--admin", "ann"]
        cases = [
            (M, ["init", "--department"], "needs a value"),
            (M, ["init", "--admin-name", "Ann Admin"], "--department"),
            (O, ["init", "--department", LONG, "--admin-name", "Ann"], "department"),
            (R, base + ["--timezone", "Mars/Olympus_Mons"], "Mars/Olympus_Mons"),
            (W, ["init", "--department", "Dept", "--admin-name", "Ann", "--admin", "bad login!"], "login"),
            (H, ["init", "--department", "Dept", "--admin-name", BAD_UTF8, "--admin", "ann"], "UTF-8"),
            (H, ["init", "--department", ESC, "--admin-name", "Ann", "--admin", "ann"], None),
            (H, ["init", "--department", "Dept", "--admin-name", "Ann", "--admin", SQL], "login"),
        ]
        for i, (category, args, expect) in enumerate(cases):
            with self.subTest(case=i, category=category):
                path = self.dep.fx.path("new-%d.db" % i)
                r = run(path, args, user="ann")
                err = r.stderr.decode("utf-8", "replace")
                self.assertTrue(0 < r.returncode < 128, err)
                self.assertTrue(err.startswith("fxledger: error: "), err[:300])
                self.assertEqual(err.count("\n"), 1, err[:300])
                self.assertLess(len(r.stderr), 1200)
                if expect:
                    self.assertIn(expect, err)
                self.assertFalse(os.path.exists(path), "init left a file behind")
        # An existing file, even a truncated or foreign one, is never overwritten.
        digest = file_digest(self.dep.files["not_json.bin"])
        r = run(self.dep.files["not_json.bin"], base)
        self.assertEqual(r.returncode, 2, r.stderr)
        self.assertIn(b"already exists", r.stderr)
        self.assertEqual(file_digest(self.dep.files["not_json.bin"]), digest)

    def test_global_options(self):
        for args, user, expect in (
                (["verify"], SQL, "needs a login"),
                (["verify"], BAD_UTF8, None),
                (["verify"], LONG, None),
                (["verify", "--db"], "admin", "needs a value"),
                (["--bogus", "verify"], "admin", None),
                ([SQL], "admin", "unknown command"),
                (["verify", "--user"], "admin", "needs a value")):
            with self.subTest(args=args[:2], user=user[:20]):
                self.refused(args, user=user, expect=expect)

    def test_truncated_and_damaged_database_files(self):
        """A database file cut short or overwritten is refused by every
        command with a clear line, and left as it was."""
        dep = self.dep
        with open(dep.pristine, "rb") as f:
            data = f.read()
        con = sqlite3.connect(dep.pristine)
        root, page = con.execute("SELECT rootpage, (SELECT page_size FROM pragma_page_size) FROM "
                                 "sqlite_schema WHERE name = 'patients'").fetchone()
        con.close()
        overwritten = bytearray(data)
        overwritten[(root - 1) * page: root * page] = b"\x55" * page   # the patients table's root page
        # What each says: a damaged file is damaged (integrity), never "not an
        # fxledger database"; the header (SQLite file format, "The Database
        # Header") tells a file cut short.
        damaged = {
            "cut to half": (data[: len(data) // 2], "is damaged (integrity: the file is cut short"),
            "cut to 100 bytes": (data[:100], "is damaged (integrity: the file is cut short"),
            "empty": (b"", "empty file"),
            "header destroyed": (b"\0" * 100 + data[100:], "no SQLite header"),
            "a page overwritten": (bytes(overwritten), None),
        }
        for name, (content, says) in damaged.items():
            path = dep.fx.path("damaged.db")
            for suffix in ("", "-wal", "-shm"):
                if os.path.exists(path + suffix):
                    os.remove(path + suffix)
            with open(path, "wb") as f:
                f.write(content)
            for args, user in ((["verify"], "admin"), (["patient", "list"], "admin"),
                               (["record", "--patient", rf.MRN, "--field", "AP", "--detector",
                                 "D-1001", "--reading", "20"], "tina"),
                               (["report", "month", "2026-11", "--out", "@dmg.pdf"], "admin"),
                               (["backup", "@dmg-copy.db"], "admin")):
                with self.subTest(damage=name, command=args[0]):
                    before = file_digest(path)
                    resolved = [dep.fx.path(a[1:]) if a.startswith("@") else a for a in args]
                    r = run(path, resolved, user=user)
                    err = r.stderr.decode("utf-8", "replace")
                    self.assertTrue(0 < r.returncode < 128, "exit %d: %s" % (r.returncode, err))
                    self.assertTrue(err.startswith("fxledger: error: "), err[:300])
                    # verify lists every problem it finds, one line each
                    if not (name == "a page overwritten" and args[0] == "verify"):
                        self.assertEqual(err.count("\n"), 1, err[:300])
                    # A damaged page is found only when it is read: a login
                    # may be written on intact pages before the command meets
                    # it (a full integrity check at every open would cost a
                    # read of the whole file; docs/robustness.md).
                    if name != "a page overwritten":
                        self.assertEqual(file_digest(path), before)
                    self.assertFalse(os.path.exists(dep.fx.path("dmg.pdf")))
                    self.assertFalse(os.path.exists(dep.fx.path("dmg-copy.db")))
                    if says:
                        self.assertIn(says, err)
                    if name not in ("header destroyed", "empty"):
                        self.assertNotIn("not an fxledger database", err)
                    if name == "a page overwritten" and args[:2] == ["patient", "list"]:
                        self.assertIn("is damaged (integrity: database disk image is malformed)", err)
                    if name == "a page overwritten" and args[0] == "record":
                        con = sqlite3.connect(path)   # nothing clinical was written
                        self.assertEqual(con.execute("SELECT count(*) FROM measurements").fetchone()[0], 2)
                        con.close()

    def test_database_in_a_read_only_folder(self):
        """A database in a folder it cannot write says so (SQLite must create
        the -wal and -shm files beside it), and a write-protected database
        file says it is read-only; nothing is written."""
        dep = self.dep
        folder = dep.fx.path("ro-folder")
        os.mkdir(folder)
        path = os.path.join(folder, "copy.db")
        copy_database(dep.pristine, path)
        try:
            for mode_dir, mode_file, says in ((0o555, 0o600, "is in a read-only folder"),
                                              (0o755, 0o400, "is read-only")):
                os.chmod(folder, mode_dir)
                os.chmod(path, mode_file)
                for args in (["patient", "list"], ["patient", "add", "P-RO", "--family", "X"], ["verify"]):
                    with self.subTest(folder=oct(mode_dir), file=oct(mode_file), command=args[:2]):
                        before = file_digest(path)
                        r = run(path, args, wrap=AS_UNPRIVILEGED)
                        err = r.stderr.decode("utf-8", "replace")
                        self.assertEqual(r.returncode, 3, err)
                        self.assertTrue(err.startswith("fxledger: error: "), err)
                        self.assertEqual(err.count("\n"), 1, err)
                        self.assertIn(says, err)
                        self.assertNotIn("not an fxledger database", err)
                        self.assertEqual(file_digest(path), before)
                        self.assertEqual(sorted(os.listdir(folder)), ["copy.db"])
        finally:
            os.chmod(folder, 0o755)
            os.chmod(path, 0o600)


class ValidHostileTextTest(unittest.TestCase):
    """Text that looks hostile but is valid is stored exactly as given, and
    the schema is intact afterwards."""

    @classmethod
    def setUpClass(cls):
        cls.dep = Department()

    @classmethod
    def tearDownClass(cls):
        cls.dep.close()

    def schema(self):
        con = sqlite3.connect(self.dep.fx.db)
        rows = con.execute("SELECT type, name, sql FROM sqlite_schema ORDER BY name").fetchall()
        n = con.execute("SELECT count(*) FROM measurements").fetchone()[0]
        con.close()
        return rows, n

    def test_sql_like_and_quoted_names_are_stored_verbatim(self):
        fx = self.dep.fx
        schema_before = self.schema()
        mrn = SQL
        family = "O'Brien"
        given = 'Ann "Robert\'); DELETE FROM audit_log;--" Zoë 李'
        out = fx.json("patient", "add", mrn, "--family", family, "--given", given)
        self.assertEqual((out["mrn"], out["family_name"], out["given_name"]), (mrn, family, given))
        shown = fx.json("patient", "show", mrn)
        self.assertEqual((shown["mrn"], shown["family_name"], shown["given_name"]), (mrn, family, given))
        con = sqlite3.connect(fx.db)
        row = con.execute("SELECT mrn, family_name, given_name FROM patients WHERE mrn = ?",
                          (mrn,)).fetchone()
        con.close()
        self.assertEqual(row, (mrn, family, given))
        # A plan and a comment with quotes and SQL-like text.
        plan = rf.plan_document()
        plan.update(patient_mrn=mrn, label="L'1; DROP TABLE plans;--", site="Head & Neck's")
        fx.ok("plan", "import", fx.write("quoted.json", json.dumps(plan)))
        self.assertEqual(fx.json("plan", "show", mrn, plan["label"])["site"], "Head & Neck's")
        fx.ok("queue", "comment", "1", "checked the diode'); DELETE FROM review_events;--", user="tina")
        events = fx.json("queue", "show", "1")["events"]
        self.assertEqual(events[-1]["comment"], "checked the diode'); DELETE FROM review_events;--")
        rows, n = self.schema()
        self.assertEqual(rows, schema_before[0], "schema changed")
        self.assertEqual(n, schema_before[1])
        self.assertTrue(fx.json("verify")["ok"])
        # Listings with that text are valid JSON and UTF-8.
        json.loads(fx.ok("--json", "patient", "list").stdout)
        json.loads(fx.ok("--json", "queue", "list", "--status", "all").stdout)


class WrongUnitDetectedTest(unittest.TestCase):
    """Wrong-unit numbers that are valid input on their own are logged as
    what they are: flagged, never a pass, no dose shown."""

    @classmethod
    def setUpClass(cls):
        cls.dep = Department()

    @classmethod
    def tearDownClass(cls):
        cls.dep.close()

    def setUp(self):
        self.dep.restore()

    def test_reading_in_pc_magnitude_for_an_nc_detector(self):
        # 20 nC typed as 20000 (pC): about 1000 times the expected dose: a gross
        # deviation, outside the action level, the unit slip named in the
        # reasons (docs/physics.md section 3.3).
        fx = self.dep.fx
        r = fx.run("--json", "record", "--patient", rf.MRN, "--field", "LAT:entrance",
                   "--detector", "D-1001", "--reading", "15000", user="tina")
        self.assertEqual(r.returncode, 12, r.stderr)
        res = json.loads(r.stdout)["results"][0]
        self.assertEqual(res["verdict"], "outside_action")
        self.assertIn("close to a factor 1000", " ".join(res["reasons"]))
        # OBL lies outside the SSD table: not evaluable whatever the reading.
        t = fx.run("record", "--patient", rf.MRN, "--field", "OBL", "--detector", "D-1001",
                   "--reading", "18000", user="tina", now="2026-11-03T09:00:00Z")
        self.assertEqual(t.returncode, 10, t.stderr)
        row = next(line for line in t.stdout.splitlines() if "OBL" in line and "nC" in line)
        self.assertNotIn("cGy    +", row)
        self.assertNotIn("within tolerance", t.stdout)

    def test_reading_in_microcoulomb_magnitude(self):
        # 20 nC typed as 0.020 (uC): a hundredth of the expected dose, a gross
        # deviation (outside the action level) whose reasons name the unit slip.
        r = self.dep.fx.run("--json", "record", "--patient", rf.MRN, "--field", "LAT:entrance",
                            "--detector", "D-1001", "--reading", "0.015", user="tina")
        self.assertEqual(r.returncode, 12, r.stderr)
        res = json.loads(r.stdout)["results"][0]
        self.assertEqual(res["verdict"], "outside_action")
        self.assertTrue(res["gross"])


def discover_commands(db):
    """'family' or 'family sub' for every command the program lists."""
    r = run(db, ["--help"])
    text = r.stdout.decode()
    section = text.split("commands:", 1)[1].split("global options:", 1)[0]
    families = [line.split()[0] for line in section.splitlines() if line.startswith("  ") and line.split()]
    found = []
    for fam in families:
        h = run(db, [fam, "--help"]).stdout.decode()
        if "sub-commands:" in h:
            part = h.split("sub-commands:", 1)[1]
            subs = [line.split()[0] for line in part.splitlines()
                    if re.match(r"^  [a-z]", line)]
            found += ["%s %s" % (fam, s) for s in subs]
        else:
            found.append(fam)
    return found


if __name__ == "__main__":
    main()
