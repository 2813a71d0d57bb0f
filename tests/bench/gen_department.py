#!/usr/bin/python3
"""Synthetic data generator for fxledger's performance benchmark.

EVERYTHING THIS SCRIPT WRITES IS INVENTED: the department, its staff, the
patients (names made of random syllables, MRNs 'SYN-nnnnnn'), plans,
detectors, calibrations, readings and review decisions. No real person,
patient or measurement is behind any row. The database it builds is for
measuring speed and memory only; its numbers must never be read as clinical
results.

What it builds (docs/performance.md):
  - set-up through fxledger's own commands (init, users, machines and beams,
    tolerance and action levels), so that the schema, settings and first
    audit rows are exactly what a real department has;
  - then, written directly with SQL in large transactions, N years of a busy
    department: --per-day patients measured every working day (250 a year),
    3 measured points per plan (about 40 x 3 x 250 = 30,000 measurements a
    year), courses of 10 to 30 fractions that overlap, 6 diodes in service
    (2 per linac) replaced every 4 calendar years, quarterly
    recalibrations, correction tables per detector and beam, review items for
    every result outside tolerance, implausible entries and calibrations
    falling due, with their acknowledge / comment / close events, amendments
    of the implausible entries, and one audit row per write.

The rows follow the schema's foreign keys and CHECKs, the snapshot columns
of each measurement follow the reading-to-dose formula of docs/physics.md
with the detector's own tables and calibration, and the audit rows carry a
valid SHA-256 chain in the canonical form of docs/audit.md, each with the
seals of the rows written since the previous audit row (SHA-256 of each
row's canonical content, computed by SQLite with the expression of
src/store/seal.c); a review item's status changes right after the event
that leads to it (the guard of sql/011_record_guards.sql); every close,
calibration, correction table and plan carries the Ed25519 signature of the
invented physicist who made it, with the key the program made at their
first login, opened with their password as a signing act does (libsodium
through ctypes). So 'fxledger verify' passes on the result (--verify).
Users log in through tests/cli/fxlcli.py (passwords on a pipe, one session
per user); the program's hash parameters are untouched.

Usage:
  gen_department.py --fxledger BIN --db PATH [--years 20] [--end 2026-01-01]
                    [--per-day 40] [--seed 1] [--verify]

It also writes PATH + '.targets.json': the courses still running at the end
and, for each, the readings that log its next fraction within tolerance on
the next working day (the benchmark logs those with 'fxledger record').
"""
import argparse
import ctypes
import ctypes.util
import datetime as dt
import hashlib
import json
import math
import os
import random
import sqlite3
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "cli"))
from fxlcli import Fxl  # noqa: E402  the one harness that logs users in (tests/cli/fxlcli.py)

GENESIS = "0" * 64
UTC = "%Y-%m-%dT%H:%M:%SZ"

# ---- the invented department --------------------------------------------------

DEPARTMENT = "Synthetic Oncology Department (invented benchmark data)"
TIMEZONE = "Europe/Berlin"

PHYSICISTS = [("phys1", "Dr Alma Veder"), ("phys2", "Dr Kofi Brandt"),
              ("phys3", "Dr Ines Marlow"), ("phys4", "Dr Tomas Ruell")]
THERAPISTS = [("ther%02d" % i, name) for i, name in enumerate([
    "Lea Fenwick", "Omar Tessel", "Nina Haldor", "Rui Castell", "Mia Oakes",
    "Jon Prell", "Ada Quist", "Sam Ilvers", "Eve Marten", "Ken Dorow"], 1)]
AUDITORS = [("audit1", "Quinn Ferro")]

MACHINES = {
    "LINAC-A": [("6X", 6, 1.5), ("15X", 15, 2.9)],
    "LINAC-B": [("6X", 6, 1.5), ("10X", 10, 2.3)],
    "LINAC-C": [("6X", 6, 1.5), ("18X", 18, 3.2)],
}
MACHINE_ORDER = ["LINAC-A", "LINAC-B", "LINAC-C"]

# name, tolerance %, action %, floor cGy, scope options of 'fxledger levels set'
LEVELS = [
    ("photon-entrance", 5, 8, 2, ["--modality", "photon", "--point", "entrance"]),
    ("photon-exit", 7, 10, 2, ["--modality", "photon", "--point", "exit"]),
    ("breast-entrance", 6, 9, 2, ["--site", "Breast", "--modality", "photon", "--point", "entrance"]),
]

# site, technique, share, fractions (min, max), fields: (name, gantry, wedge,
# incidence, x, y, ssd, exit?)
SITES = [
    ("Breast", "3D tangents", 0.30, (15, 25),
     [("MED", 300, 15, 10, 8.5, 20, 91.5, False), ("LAT", 120, 15, 10, 8.5, 20, 90.5, False),
      ("MED", 300, 15, 10, 8.5, 20, 91.5, True)]),
    ("Pelvis", "3D box", 0.20, (23, 28),
     [("AP", 0, 0, 0, 16, 16, 90, False), ("PA", 180, 0, 0, 16, 16, 88, False),
      ("AP", 0, 0, 0, 16, 16, 90, True)]),
    ("Prostate", "3D conformal", 0.15, (20, 30),
     [("ANT", 0, 0, 0, 8, 9, 91, False), ("RLAT", 270, 30, 0, 7, 9, 83, False),
      ("LLAT", 90, 30, 0, 7, 9, 83, False)]),
    ("Lung", "3D conformal", 0.12, (15, 30),
     [("AP", 0, 0, 0, 11, 13, 93, False), ("POST", 180, 0, 0, 11, 13, 88, False),
      ("OBL", 45, 15, 20, 9, 12, 92, False)]),
    ("Head and neck", "3D opposed laterals", 0.08, (25, 30),
     [("RLAT", 270, 0, 0, 12, 10, 93, False), ("LLAT", 90, 0, 0, 12, 10, 93, False),
      ("SCF", 0, 0, 0, 20, 8, 100, False)]),
    ("Bone", "AP/PA", 0.10, (10, 15),
     [("AP", 0, 0, 0, 14, 18, 95, False), ("PA", 180, 0, 0, 14, 18, 95, False),
      ("AP", 0, 0, 0, 14, 18, 95, True)]),
    ("Brain", "opposed laterals", 0.05, (10, 30),
     [("RLAT", 270, 0, 0, 18, 20, 91, False), ("LLAT", 90, 0, 0, 18, 20, 91, False),
      ("VERT", 0, 0, 0, 10, 10, 100, False)]),
]

# The correction tables every detector gets, per beam (invented values):
# parameter -> [(x, factor)]; a small per-detector variation is applied.
TABLE_TEMPLATE = {
    "field_size": [(4.0, 1.018), (6.0, 1.010), (10.0, 1.000), (15.0, 0.993), (20.0, 0.989),
                   (30.0, 0.984), (40.0, 0.981)],
    "ssd": [(70.0, 0.972), (80.0, 0.982), (90.0, 0.991), (100.0, 1.000), (110.0, 1.007),
            (120.0, 1.013)],
    "wedge": [(0.0, 1.000), (15.0, 1.006), (30.0, 1.013), (45.0, 1.021), (60.0, 1.030)],
    "tray": [(0.0, 1.000), (1.0, 1.004)],
    "angle": [(0.0, 1.000), (15.0, 0.999), (30.0, 0.995), (45.0, 0.985), (60.0, 0.968),
              (75.0, 0.950)],
}
PARAMS = ["field_size", "ssd", "wedge", "tray", "angle"]
DISCRETE = {"wedge", "tray"}

SLOTS_PER_MACHINE = 2
GENERATION_YEARS = 4          # a diode is replaced every 4 calendar years
LONG_YEARS, LONG_OFFSET = 8, 2  # ... but LINAC-A's first diode serves 8 (2018-2025, 2010-2017, ...)
CALIB_EVERY_DAYS = 91         # quarterly cross-calibration
CALIB_VALID_DAYS = 100
CALIB_DUE_DAYS = 14           # setting calibration_due_days (default)
T_CAL = 21.0
A_PER_C = 0.0025
SKIN_DEFAULT_C = 32.0
DOSE_LIMIT_CGY = 1000000.0
FAMILY_SYLL = ["ar", "bel", "cor", "dan", "el", "fen", "gar", "hol", "is", "jun", "kel", "lor",
               "mar", "nor", "ost", "pel", "quin", "ros", "sten", "tal", "ul", "ver", "wen", "yor"]
GIVEN = ["Alex", "Bea", "Cai", "Dana", "Emil", "Fay", "Gus", "Hana", "Ivo", "Jana", "Kai", "Lina",
         "Milo", "Nora", "Otto", "Pia", "Rafe", "Sara", "Tove", "Uma", "Vic", "Wim", "Yara", "Zeno"]
DISPOSITIONS_TOL = [("detector placement", 0.40), ("set-up error", 0.20),
                    ("clinically accepted", 0.30), ("anatomy change", 0.10)]


def ts(t):
    return t.strftime(UTC)


def holidays(year):
    """An invented holiday calendar: ten fixed dates a year off."""
    days = [(1, 1), (1, 2), (4, 17), (5, 1), (5, 29), (10, 3), (12, 24), (12, 25), (12, 26),
            (12, 31)]
    return {dt.date(year, m, d) for m, d in days}


def working_days(start, end):
    """Mondays to Fridays in [start, end), less the invented holidays."""
    out, d, hol = [], start, {}
    while d < end:
        if d.year not in hol:
            hol[d.year] = holidays(d.year)
        if d.weekday() < 5 and d not in hol[d.year]:
            out.append(d)
        d += dt.timedelta(days=1)
    return out


def interp(points, x):
    """Linear interpolation inside the table, as the record path does."""
    for (x0, y0), (x1, y1) in zip(points, points[1:]):
        if x0 <= x <= x1:
            return y0 + (x - x0) / (x1 - x0) * (y1 - y0) if x1 != x0 else y0
    raise ValueError("outside the table")


def cf_of(tables, param, x):
    pts = tables[param]
    if param in DISCRETE:
        return dict(pts)[x]
    return interp(pts, x)


def num(v):
    """A number as fxledger's JSON would hold it (integers without '.0')."""
    if v is None:
        return None
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return int(v)
    return v


# The tables whose rows fxledger seals (src/store/seal.c, fxl_sealed_tables);
# the generator writes rows of these only.
SEALED = {"machines", "beams", "beam_data", "detectors", "detector_status", "calibrations",
          "correction_tables", "patients", "patient_corrections", "plans", "fields",
          "threshold_sets", "fractions", "fraction_marks", "measurements", "review_items",
          "review_events", "daylist_imports", "daylist_lines", "signing_keys", "api_tokens"}

# Signed tables and the child rows their signed content carries
# (src/store/signature.c, TABLES): entity -> (child, fk, order).
SIGNED_CHILD = {"review_events": None, "calibrations": None,
                "correction_tables": ("correction_points", "table_id", "x"),
                "plans": ("fields", "plan_id", "id")}


class Sodium:
    """The few libsodium calls a signing act makes (the program's own
    library, through ctypes): open a user's sealed secret key with their
    password (crypto_pwhash Argon2id + crypto_secretbox), sign (Ed25519)."""

    def __init__(self):
        name = ctypes.util.find_library("sodium") or "libsodium.so.23"
        self.so = so = ctypes.CDLL(name)
        if so.sodium_init() < 0:
            sys.exit("gen_department: libsodium does not initialise")
        so.crypto_pwhash.argtypes = [ctypes.c_char_p, ctypes.c_ulonglong, ctypes.c_char_p,
                                     ctypes.c_ulonglong, ctypes.c_char_p, ctypes.c_ulonglong,
                                     ctypes.c_size_t, ctypes.c_int]
        so.crypto_secretbox_open_easy.argtypes = [ctypes.c_char_p, ctypes.c_char_p,
                                                  ctypes.c_ulonglong, ctypes.c_char_p,
                                                  ctypes.c_char_p]
        so.crypto_sign_detached.argtypes = [ctypes.c_char_p, ctypes.c_void_p, ctypes.c_char_p,
                                            ctypes.c_ulonglong, ctypes.c_char_p]

    def open_secret(self, password, salt, nonce, sealed, ops, mem):
        key = ctypes.create_string_buffer(32)
        pw = password.encode()
        if self.so.crypto_pwhash(key, 32, pw, len(pw), salt, ops, mem, 2) != 0:  # ARGON2ID13
            sys.exit("gen_department: crypto_pwhash failed")
        sk = ctypes.create_string_buffer(len(sealed) - 16)
        if self.so.crypto_secretbox_open_easy(sk, sealed, len(sealed), nonce, key) != 0:
            sys.exit("gen_department: the password does not open the signing key")
        return sk.raw

    def sign(self, sk, msg):
        sig = ctypes.create_string_buffer(64)
        self.so.crypto_sign_detached(sig, None, msg, len(msg), sk)
        return sig.raw.hex()


class Audit:
    """Audit rows with the SHA-256 chain and row seals of docs/audit.md.
    add() takes the rows written since the previous audit row (the seals it
    will carry); the hashes are computed at flush, once those rows are in
    the database, because a seal is over the row as SQLite stores it."""

    def __init__(self, last_id, last_hash):
        self.next_id = last_id + 1
        self.prev = last_hash
        self.rows = []       # pending entries, in id order
        self.pending = {}    # (tbl, row id) -> status of a review item or None, in write order

    def mark(self, tbl, row_id, status=None):
        key = (tbl, row_id)
        self.pending.pop(key, None)
        self.pending[key] = status

    def add(self, at, user, action, entity, entity_id, content, sign=None):
        self.rows.append({"id": self.next_id, "at": at, "user": user, "action": action,
                          "entity": entity, "entity_id": entity_id, "content": content,
                          "seals": self.pending, "sign": sign})
        self.pending = {}
        self.next_id += 1
        return self.next_id - 1


class Gen:
    def __init__(self, args):
        self.a = args
        self.rng = random.Random(args.seed)
        self.bin = os.path.abspath(args.fxledger)
        self.db = os.path.abspath(args.db)
        self.end = dt.date.fromisoformat(args.end)
        self.start = dt.date(self.end.year - args.years, self.end.month, self.end.day)
        self.days = working_days(self.start, self.end)
        self.setup_now = dt.datetime.combine(self.days[0], dt.time(6, 0)) - dt.timedelta(days=3)
        self.rows = {}        # table -> list of tuples
        self.counts = {}
        self.scheduled = {}   # date -> [(datetime, fn, args)]
        # the department(s): LINAC-A..C, and for a network D02-LINAC-A ... per department
        self.machines, self.machine_order = {}, []
        for d in range(args.departments):
            for m in MACHINE_ORDER:
                name = m if d == 0 else "D%02d-%s" % (d + 1, m)
                self.machines[name] = MACHINES[m]
                self.machine_order.append(name)

    # ---- set-up through fxledger's commands ---------------------------------

    def fx(self, *args, user="admin"):
        r = self.fxl.run(*args, user=user)
        if r.returncode != 0:
            sys.exit("gen_department: fxledger %s failed (%d): %s%s" % (
                " ".join(map(str, args)), r.returncode, r.stdout, r.stderr))
        return r

    def setup(self):
        """init and the first admin's password, users (each logs in once and
        sets an own password: the physicists' signing keys), machines and
        levels, all through the program (tests/cli/fxlcli.py passes each
        password on a pipe, --password-fd, and keeps one session per user)."""
        os.makedirs(os.path.dirname(self.db), exist_ok=True)
        for suffix in ("", "-wal", "-shm", ".targets.json"):
            if os.path.exists(self.db + suffix):
                os.remove(self.db + suffix)
        self.fxl = Fxl(now=ts(self.setup_now), user="admin", bin=self.bin)
        self.fxl.db = self.db
        self.fx("init", "--department", DEPARTMENT, "--admin", "admin", "--admin-name",
                "Adrian Admin (invented)", "--timezone", TIMEZONE)
        for login, name in PHYSICISTS:
            self.fx("user", "add", login, "--name", name, "--role", "physicist")
        for login, name in THERAPISTS:
            self.fx("user", "add", login, "--name", name, "--role", "therapist")
        for login, name in AUDITORS:
            self.fx("user", "add", login, "--name", name, "--role", "auditor")
        # the users the benchmark works as, and every physicist (they sign)
        for login in [p for p, _ in PHYSICISTS] + ["ther01", "audit1"]:
            r = self.fxl.login(login)
            if r.returncode != 0:
                sys.exit("gen_department: login of %s failed: %s" % (login, r.stderr))
        for m in self.machine_order:
            self.fx("machine", "add", m, user="phys1")
            for beam, energy, dmax in self.machines[m]:
                self.fx("machine", "beam", beam, "--machine", m, "--modality", "photon",
                        "--energy", energy, "--dmax", dmax, user="phys1")
        for name, tol, act, floor, scope in LEVELS:
            self.fx("levels", "set", name, "--tolerance", tol, "--action", act, "--floor", floor,
                    "--effective", self.days[0].isoformat(), *scope, user="phys1")

    # ---- bulk rows -------------------------------------------------------------

    def connect(self):
        c = sqlite3.connect(self.db, isolation_level=None)
        c.execute("PRAGMA journal_mode = OFF")  # rebuilt from scratch on failure anyway
        c.execute("PRAGMA synchronous = OFF")
        c.execute("PRAGMA cache_size = -1000000")
        c.execute("PRAGMA foreign_keys = OFF")  # checked at the end by 'fxledger verify'
        self.c = c
        q = lambda sql: c.execute(sql).fetchall()
        self.users = {login: uid for uid, login in q("SELECT id, login FROM users")}
        self.names = {login: name for login, name in q("SELECT login, full_name FROM users")}
        self.beams = {(m, b): (bid, energy) for bid, m, b, energy in q(
            "SELECT b.id, mc.name, b.name, b.energy FROM beams b JOIN machines mc ON mc.id = b.machine_id")}
        self.sets = {name: (sid, tol, act, floor) for sid, name, tol, act, floor in q(
            "SELECT id, name, tolerance_pct, action_pct, floor_cgy FROM threshold_sets")}
        last = q("SELECT id, hash FROM audit_log ORDER BY id DESC LIMIT 1")[0]
        self.audit = Audit(last[0], last[1])
        self.next_id = {}
        for t in ("detectors", "detector_status", "correction_tables", "calibrations", "patients",
                  "plans", "fields", "fractions", "measurements", "review_items", "review_events",
                  "signatures"):
            self.next_id[t] = q("SELECT coalesce(max(id), 0) + 1 FROM %s" % t)[0][0]
        # each signer's key, opened with their password as a signing act does
        self.sodium = Sodium()
        self.keys = {}
        for login, key_id, salt, nonce, sealed, ops, mem in q(
                "SELECT u.login, s.key_id, s.salt, s.nonce, s.sealed, s.opslimit, s.memlimit "
                "FROM signing_secrets s JOIN users u ON u.id = s.user_id"):
            if login in dict(PHYSICISTS):
                sk = self.sodium.open_secret(self.fxl.passwords[login], bytes.fromhex(salt),
                                             bytes.fromhex(nonce), bytes.fromhex(sealed), ops, mem)
                self.keys[login] = (key_id, sk)
        missing = [p for p, _ in PHYSICISTS if p not in self.keys]
        if missing:
            sys.exit("gen_department: no signing key for %s" % ", ".join(missing))
        # canonical row content for the seals, as src/store/seal.c builds it
        self.canon_sql = {}
        for t in SEALED:
            cols = [r[0] for r in q("SELECT name FROM pragma_table_info('%s') ORDER BY cid" % t)]
            if not cols:
                continue
            expr = ", ".join("'%s', %s" % (col, "?" if (t == "review_items" and col == "status")
                                               else 't."%s"' % col) for col in cols)
            tail = (", 'points', (SELECT json_group_array(json_array(p.x, p.factor)) FROM "
                    "(SELECT x, factor FROM main.correction_points WHERE table_id = t.id ORDER BY x) p)))"
                    if t == "correction_tables" else "))")
            self.canon_sql[t] = "json_patch('{}', json_object(" + expr + tail

    def new_id(self, table):
        i = self.next_id[table]
        self.next_id[table] = i + 1
        return i

    def put(self, table, row, status=None):
        self.rows.setdefault(table, []).append(row)
        self.counts[table] = self.counts.get(table, 0) + 1
        if table == "correction_points":
            self.audit.mark("correction_tables", row[0])
        elif table == "review_items":
            self.audit.mark(table, row[0], row[3])
        elif table == "review_events":
            self.audit.mark(table, row[0][0])
        elif table in SEALED:
            self.audit.mark(table, row[0])

    def sign(self, entity, row_id, login, at, meaning):
        """A signing act on a row written just before: the signatures row
        and its audit row 'sign' (src/store/signature.c); the content hash
        and the Ed25519 signature are made at flush, over the stored row."""
        sid = self.new_id("signatures")
        key_id, _ = self.keys[login]
        content = {"entity": entity, "entity_id": row_id, "login": login,
                   "printed_name": self.names[login], "meaning": meaning,
                   "content_sha256": None, "key": key_id}
        self.counts["signatures"] = self.counts.get("signatures", 0) + 1
        self.audit.add(at, login, "sign", "signatures", sid, content,
                       sign=(sid, entity, row_id, login, at, meaning))

    INSERT = {
        "detectors": "INSERT INTO detectors (id, serial, label, kind, reading_unit, sensitivity, "
                     "temp_coeff_per_c, buildup, dose_limit_cgy, created_at) VALUES (?,?,?,?,?,?,?,?,?,?)",
        "detector_status": "INSERT INTO detector_status (id, detector_id, status, effective_at, reason, "
                           "user_id, created_at) VALUES (?,?,?,?,?,?,?)",
        "correction_tables": "INSERT INTO correction_tables (id, detector_id, beam_id, parameter, "
                             "effective_from, source, user_id, created_at) VALUES (?,?,?,?,?,?,?,?)",
        "correction_points": "INSERT INTO correction_points (table_id, x, factor) VALUES (?,?,?)",
        "calibrations": "INSERT INTO calibrations (id, detector_id, beam_id, point, calibrated_at, "
                        "valid_until, chamber_dose_cgy, readings, reading_n, reading_mean, reading_sd, "
                        "factor_cgy_per_unit, temp_c, ssd_cm, field_size_cm, chamber, notes, user_id, "
                        "created_at) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
        "patients": "INSERT INTO patients (id, mrn, family_name, given_name, birth_date, created_at) "
                    "VALUES (?,?,?,?,?,?)",
        "plans": "INSERT INTO plans (id, patient_id, label, site, technique, fractions, "
                 "dose_per_fraction_cgy, replaces_plan_id, source, user_id, created_at) "
                 "VALUES (?,?,?,?,?,?,?,?,?,?,?)",
        "fields": "INSERT INTO fields (id, plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, y_cm, "
                  "wedge_deg, tray, gantry_deg, incidence_deg, thickness_cm, expected_dose_cgy, "
                  "expected_source, policy) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
        "fractions": "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) "
                     "VALUES (?,?,?,?,?,?)",
        "measurements": "INSERT INTO measurements (id, fraction_id, field_id, detector_id, reading, "
                        "reading_unit, temp_c, temp_entered, calibration_id, factor_n, cf_field_size, "
                        "cf_ssd, cf_wedge, cf_tray, cf_angle, cf_temp, corrected_dose_cgy, "
                        "expected_dose_cgy, deviation_pct, threshold_set_id, tolerance_pct, action_pct, "
                        "floor_cgy, verdict, reasons, supersedes_id, amend_reason, user_id, created_at) "
                        "VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
        "review_items": "INSERT INTO review_items (id, rule, severity, status, measurement_id, "
                        "patient_id, detector_id, field_id, summary, opened_at, rule_key) "
                        "VALUES (?,?,?,?,?,?,?,?,?,?,?)",
        "review_events": "INSERT INTO review_events (id, item_id, kind, disposition, comment, user_id, "
                         "created_at) VALUES (?,?,?,?,?,?,?)",
    }
    ORDER = ["detectors", "detector_status", "correction_tables", "correction_points",
             "calibrations", "patients", "plans", "fields", "fractions", "measurements",
             "review_items", "review_events"]

    def flush(self):
        c = self.c
        c.execute("BEGIN")
        for t in self.ORDER:
            if not self.rows.get(t):
                continue
            if t == "review_events":
                # each event, then the status change it leads to: the guard
                # review_items_status_by_event (sql/011) accepts a status
                # only as the newest review event of the database says
                for row, status in self.rows[t]:
                    c.execute(self.INSERT[t], row)
                    if status:
                        c.execute("UPDATE review_items SET status = ? WHERE id = ?", (status, row[1]))
            else:
                c.executemany(self.INSERT[t], self.rows[t])
            self.rows[t] = []
        if self.audit.rows:
            self.flush_audit()
        c.execute("COMMIT")

    def canon(self, tbl, row_id, status, cache):
        """The canonical content of a row as fxledger seals it (seal.c)."""
        if tbl == "review_items":
            r = self.c.execute("SELECT %s FROM main.review_items t WHERE t.rowid = ?"
                               % self.canon_sql[tbl], (status, row_id)).fetchone()
            return r[0]
        if (tbl, row_id) not in cache:
            ids = sorted(i for (t, i) in self.pending_refs if t == tbl)
            for rid, text in self.c.execute(
                    "SELECT t.rowid, %s FROM main.\"%s\" t WHERE t.rowid BETWEEN ? AND ?"
                    % (self.canon_sql[tbl], tbl), (ids[0], ids[-1])):
                cache[(tbl, rid)] = text
        return cache[(tbl, row_id)]

    def signed_content_sha(self, entity, row_id):
        """SHA-256 of a signed row's canonical content (signature.c)."""
        out = [b"fxledger row v1\n", entity.encode(), b"\n"]

        def rows(sql, arg):
            cur = self.c.execute(sql, (arg,))
            names = [d[0] for d in cur.description]
            for row in cur:
                for name, v in zip(names, row):
                    if v is None:
                        continue
                    if isinstance(v, int):
                        out.append(b"%s=i:%d\n" % (name.encode(), v))
                    elif isinstance(v, float):
                        out.append(b"%s=r:%s\n" % (name.encode(), (b"%.17g" % v)))
                    elif isinstance(v, bytes):
                        out.append(b"%s=b%d:%s\n" % (name.encode(), len(v), v))
                    else:
                        e = v.encode("utf-8")
                        out.append(b"%s=t%d:%s\n" % (name.encode(), len(e), e))
                out.append(b"\n")
        rows("SELECT * FROM %s WHERE id = ?" % entity, row_id)
        child = SIGNED_CHILD[entity]
        if child:
            out += [child[0].encode(), b"\n"]
            rows("SELECT * FROM %s WHERE %s = ? ORDER BY %s" % child, row_id)
        return hashlib.sha256(b"".join(out)).hexdigest()

    def flush_audit(self):
        """Hashes the pending audit rows in order: signatures made over the
        stored rows, each row's seals (SHA-256 of 'tbl\nrowid\ncanonical'),
        the seal digest and the chain (docs/audit.md)."""
        self.pending_refs = {k for e in self.audit.rows for k in e["seals"]}
        cache, seals, sigs, out = {}, [], [], []
        prev = self.audit.prev
        for e in self.audit.rows:
            if e["sign"]:
                sid, entity, row_id, login, at, meaning = e["sign"]
                sha = self.signed_content_sha(entity, row_id)
                e["content"]["content_sha256"] = sha
                key_id, sk = self.keys[login]
                msg = ("fxledger signature v1\n%s\n%d\n%s\n%s\n%s\n%s\n%s" % (
                    entity, row_id, login, self.names[login], at, meaning, sha)).encode("utf-8")
                sigs.append((sid, entity, row_id, self.users[login], key_id, login,
                             self.names[login], at, meaning, sha, self.sodium.sign(sk, msg)))
            lines = []
            for (tbl, row_id), status in sorted(e["seals"].items()):
                text = self.canon(tbl, row_id, status, cache)
                h = hashlib.sha256(("%s\n%d\n%s" % (tbl, row_id, text)).encode("utf-8")).hexdigest()
                seals.append((tbl, row_id, e["id"], h))
                lines.append("%s %d %s\n" % (tbl, row_id, h))
            seal = hashlib.sha256("".join(lines).encode()).hexdigest() if lines else None
            text = json.dumps(e["content"], separators=(",", ":"), ensure_ascii=False)
            eid = "" if not e["entity_id"] else str(e["entity_id"])
            canon = "%s\n%d\n%s\n%s\n%s\n%s\n%s\n%s" % (prev, e["id"], e["at"], e["user"],
                                                        e["action"], e["entity"], eid, text)
            if seal:
                canon += "\nseal:" + seal
            h = hashlib.sha256(canon.encode("utf-8")).hexdigest()
            out.append((e["id"], e["at"], e["user"], e["action"], e["entity"], e["entity_id"] or None,
                        text, prev, h, seal))
            prev = h
        c = self.c
        c.executemany("INSERT INTO signatures (id, entity, entity_id, user_id, key_id, login, "
                      "printed_name, signed_at, meaning, content_sha256, signature) "
                      "VALUES (?,?,?,?,?,?,?,?,?,?,?)", sigs)
        c.executemany("INSERT INTO row_seals (tbl, row_id, audit_id, sha256) VALUES (?,?,?,?)", seals)
        c.executemany("INSERT INTO audit_log (id, at, user, action, entity, entity_id, content, "
                      "prev_hash, hash, seal) VALUES (?,?,?,?,?,?,?,?,?,?)", out)
        self.counts["audit_log"] = self.counts.get("audit_log", 0) + len(out)
        self.counts["row_seals"] = self.counts.get("row_seals", 0) + len(seals)
        self.audit.prev = prev
        self.audit.rows = []

    def schedule(self, when, fn, *args):
        self.scheduled.setdefault(when.date(), []).append((when, fn, args))

    def run_scheduled(self, upto):
        """Writes the scheduled events of every date up to `upto`, in time order."""
        for d in sorted(k for k in self.scheduled if k <= upto):
            for when, fn, args in sorted(self.scheduled.pop(d), key=lambda e: e[0]):
                fn(*args)

    # ---- detectors, their tables and calibrations ------------------------------

    def physicist(self):
        return self.rng.choice(PHYSICISTS)[0]

    def therapist(self):
        return self.rng.choice(THERAPISTS)[0]

    def generation(self, machine, slot, day):
        """(generation number, first year, years): a diode is replaced every
        4 calendar years, except the first diode of LINAC-A, kept in service
        8 years (2018 to 2025 at the default end): the benchmark logs with it
        to see that logging does not grow with a detector's age."""
        if machine == self.machine_order[0] and slot == 0:
            g = (day.year - LONG_OFFSET) // LONG_YEARS
            return g, g * LONG_YEARS + LONG_OFFSET, LONG_YEARS
        g = day.year // GENERATION_YEARS
        return g, g * GENERATION_YEARS, GENERATION_YEARS

    def add_detector(self, machine, slot, gen, when):
        rng = self.rng
        _, first, years = gen
        prefix = machine[:3] if machine.startswith("D") and machine[3] == "-" else ""
        serial = "SYN-%s%s%d-%d" % (prefix, machine[-1], slot + 1, first)
        did = self.new_id("detectors")
        at = ts(when)
        ph = self.physicist()
        sens = round(rng.uniform(0.085, 0.095), 4)
        label = "Synthetic diode %s%s%d, generation of %d-%d" % (
            prefix, machine[-1], slot + 1, first, first + years - 1)
        self.put("detectors", (did, serial, label, "photon_diode", "nC", sens, A_PER_C, None,
                               DOSE_LIMIT_CGY, at))
        self.audit.add(at, ph, "create", "detectors", did, {
            "serial": serial, "label": label, "kind": "photon_diode", "reading_unit": "nC",
            "sensitivity": sens, "temp_coeff_per_c": A_PER_C, "buildup": None,
            "dose_limit_cgy": num(DOSE_LIMIT_CGY), "status": "in_service"})
        det = {"id": did, "serial": serial, "sens": sens, "machine": machine, "born": when,
               "tables": {}, "calib": {}, "calib_hist": {}, "due_item": {}}
        for beam, _, _ in self.machines[machine]:
            bid = self.beams[(machine, beam)][0]
            tables = {}
            for p in PARAMS:
                tid = self.new_id("correction_tables")
                wobble = rng.uniform(-0.003, 0.003)
                pts = [(x, round(f if x in (0.0, 10.0, 100.0) and f == 1.0 else f * (1 + wobble), 4))
                       for x, f in TABLE_TEMPLATE[p]]
                tables[p] = pts
                source = "invented commissioning data for the benchmark"
                self.put("correction_tables", (tid, did, bid, p, at, source, self.users[ph], at))
                for x, f in pts:
                    self.put("correction_points", (tid, x, f))
                self.audit.add(at, ph, "load", "correction_tables", tid, {
                    "serial": serial, "machine": machine, "beam": beam, "parameter": p,
                    "effective_from": at, "source": source,
                    "points": [[num(x), num(f)] for x, f in pts]})
                self.sign("correction_tables", tid, ph, at, "correction table loaded")
            det["tables"][beam] = tables
        return det

    def calibrate(self, det, when):
        """Cross-calibrates the detector for every beam and point; closes the
        calibration-due items of the calibrations it supersedes."""
        rng = self.rng
        ph = self.physicist()
        at = ts(when)
        years_in_use = (when - det["born"]).days / 365.25
        for beam, _, _ in self.machines[det["machine"]]:
            bid = self.beams[(det["machine"], beam)][0]
            for point in ("entrance", "exit"):
                # sensitivity falls slowly with accumulated dose (invented)
                mean0 = det["sens"] * 100.0 * (1.0 - 0.008 * years_in_use) * (0.97 if point == "exit" else 1.0)
                readings = [round(mean0 * (1 + rng.gauss(0, 0.0008)), 3) for _ in range(3)]
                mean = sum(readings) / 3
                sd = math.sqrt(sum((r - mean) ** 2 for r in readings) / 2)
                factor = 100.0 / mean
                cid = self.new_id("calibrations")
                valid = ts(when + dt.timedelta(days=CALIB_VALID_DAYS))
                chamber = "Farmer-type chamber FC-9 (invented)"
                self.put("calibrations", (cid, det["id"], bid, point, at, valid, 100.0,
                                          json.dumps(readings, separators=(",", ":")), 3, mean, sd,
                                          factor, T_CAL, 100.0, 10.0, chamber, None,
                                          self.users[ph], at))
                self.audit.add(at, ph, "create", "calibrations", cid, {
                    "serial": det["serial"], "machine": det["machine"], "beam": beam,
                    "point": point, "calibrated_at": at, "valid_until": valid,
                    "chamber_dose_cgy": 100, "readings": readings, "reading_mean": mean,
                    "reading_sd": sd, "factor_cgy_per_unit": factor, "temp_c": num(T_CAL),
                    "ssd_cm": 100, "field_size_cm": 10})
                self.sign("calibrations", cid, ph, at, "calibration confirmed")
                key = (beam, point)
                old = det["calib"].get(key)
                det["calib"][key] = {"id": cid, "factor": factor, "valid_until": valid,
                                     "due_from": ts(when + dt.timedelta(days=CALIB_VALID_DAYS - CALIB_DUE_DAYS))}
                if old and old["id"] in det["due_item"]:
                    item = det["due_item"].pop(old["id"])
                    self.event(item, "close", when + dt.timedelta(minutes=30), ph,
                               "calibration", "recalibrated: calibration #%d" % cid)

    def retire(self, det, when):
        at = ts(when)
        ph = self.physicist()
        sid = self.new_id("detector_status")
        reason = "replaced by the next generation (invented)"
        self.put("detector_status", (sid, det["id"], "retired", at, reason, self.users[ph], at))
        self.audit.add(at, ph, "status", "detector_status", sid, {
            "serial": det["serial"], "status": "retired", "effective_at": at, "reason": reason})
        for cid, item in list(det["due_item"].items()):
            self.event(item, "close", when + dt.timedelta(minutes=5), ph, "other",
                       "detector retired")
        det["due_item"] = {}

    # ---- review items and their events ---------------------------------------

    def open_item(self, rule, severity, at, user, summary, measurement=None, patient=None,
                  detector=None, field=None, rule_key=None, life=()):
        """Opens an item; life = [(datetime, kind, user, disposition, comment)]
        lists its future events; those after the end of the data are left out.
        The item's status follows its events as in the review store."""
        iid = self.new_id("review_items")
        self.put("review_items", (iid, rule, severity, "open", measurement, patient, detector,
                                  field, summary, at, rule_key))
        item = {"id": iid, "status": "open"}
        self.write_event(item, "open", at, user, None, None)
        content = {"rule": rule, "severity": severity}
        if measurement:
            content["measurement_id"] = measurement
        content["summary"] = summary
        self.audit.add(at, user, "open", "review_items", iid, content)
        for when, kind, who, disp, comment in life:
            self.event(item, kind, when, who, disp, comment)
        return item

    def event(self, item, kind, when, user, disposition=None, comment=None):
        if when.date() >= self.end:
            return
        self.schedule(when, self.write_event, item, kind, ts(when), user, disposition, comment)

    def write_event(self, item, kind, at, user, disposition, comment):
        eid = self.new_id("review_events")
        before = item["status"]
        after = {"acknowledge": "acknowledged", "close": "closed", "reopen": "open",
                 "open": "open"}.get(kind, before)
        change = after if (after != before and kind != "open") else None
        self.put("review_events", ((eid, item["id"], kind, disposition, comment, self.users[user], at),
                                   change))
        if kind == "open":
            return
        item["status"] = after
        if change:
            self.audit.mark("review_items", item["id"], after)
        content = {"item_id": item["id"], "kind": kind}
        if disposition:
            content["disposition"] = disposition
        if comment:
            content["comment"] = comment
        content["status_before"] = before
        content["status_after"] = after
        self.audit.add(at, user, kind, "review_events", eid, content)
        if kind == "close":
            self.sign("review_events", eid, user, at, "review closed: %s" % disposition)
        elif kind == "reopen":
            self.sign("review_events", eid, user, at, "review reopened")

    # ---- patients, plans, fractions -------------------------------------------

    def new_course(self, chair, day):
        rng = self.rng
        machine = self.machine_order[chair % len(self.machine_order)]
        slot = (chair // len(self.machine_order)) % SLOTS_PER_MACHINE
        r, acc = rng.random(), 0.0
        for site in SITES:
            acc += site[2]
            if r <= acc:
                break
        name, technique, _, (fmin, fmax), fields = site
        n_fr = rng.randint(fmin, fmax)
        pid = self.new_id("patients")
        mrn = "SYN-%06d" % pid
        family = "".join(rng.choice(FAMILY_SYLL) for _ in range(rng.randint(2, 3))).capitalize()
        given = rng.choice(GIVEN)
        birth = "%04d-%02d-%02d" % (day.year - rng.randint(25, 90), rng.randint(1, 12),
                                    rng.randint(1, 28))
        t0 = dt.datetime.combine(day, dt.time(6, 30)) + dt.timedelta(minutes=chair)
        at = ts(t0)
        ph = self.physicist()
        self.put("patients", (pid, mrn, family, given, birth, at))
        self.audit.add(at, ph, "create", "patients", pid, {
            "mrn": mrn, "family_name": family, "given_name": given, "birth_date": birth})
        plan_id = self.new_id("plans")
        label = "%s-1" % name[:2].upper()
        dpf = 200.0 if n_fr > 15 else 300.0
        self.put("plans", (plan_id, pid, label, name, technique, n_fr, dpf, None, "json",
                           self.users[ph], at))
        self.audit.add(at, ph, "import", "plans", plan_id, {
            "patient_mrn": mrn, "label": label, "site": name, "technique": technique,
            "fractions": n_fr, "dose_per_fraction_cgy": num(dpf), "field_rows": len(fields)})
        beam = "6X" if rng.random() < 0.7 else self.machines[machine][1][0]
        flist = []
        for fname, gantry, wedge, incid, x, y, ssd, is_exit in fields:
            fid = self.new_id("fields")
            point = "exit" if is_exit else "entrance"
            x = round(x * rng.uniform(0.9, 1.1), 1)
            y = round(y * rng.uniform(0.9, 1.1), 1)
            ssd = round(ssd + rng.uniform(-2, 2), 1)
            mu = round(rng.uniform(80, 160), 0)
            thick = round(rng.uniform(16, 28), 1) if is_exit else None
            expected = round(rng.uniform(35, 60) if is_exit else rng.uniform(60, 130), 1)
            bid = self.beams[(machine, beam)][0]
            self.put("fields", (fid, plan_id, fname, bid, point, "ssd", mu, ssd, x, y, float(wedge), 0,
                                float(gantry), float(incid), thick, expected, "tps", "every"))
            self.audit.add(at, ph, "create", "fields", fid, {
                "plan_id": plan_id, "name": fname, "machine": machine, "beam": beam,
                "point": point, "setup": "ssd", "mu": num(mu), "ssd_cm": num(ssd),
                "x_cm": num(x), "y_cm": num(y), "wedge_deg": wedge, "tray": False,
                "gantry_deg": gantry, "incidence_deg": incid, "thickness_cm": num(thick),
                "expected_dose_cgy": num(expected), "expected_source": "tps", "policy": "every"})
            eq = 2.0 * x * y / (x + y)  # Sterling rule
            flist.append({"id": fid, "name": fname, "point": point, "eq": eq, "ssd": ssd,
                          "wedge": float(wedge), "angle": float(incid), "expected": expected,
                          "prev": None, "cf": {}})
        self.sign("plans", plan_id, ph, at, "plan imported")
        site_set = "breast-entrance" if name == "Breast" else "photon-entrance"
        return {"patient": pid, "mrn": mrn, "plan": plan_id, "label": label, "site": name,
                "machine": machine, "slot": slot, "beam": beam, "fractions": n_fr, "done": 0,
                "fields": flist, "set_entrance": site_set}

    def deviation(self):
        r = self.rng.random()
        if r < 0.93:
            return self.rng.gauss(0.2, 1.6)
        if r < 0.995:
            return self.rng.gauss(0.0, 3.2)
        return self.rng.choice((-1, 1)) * self.rng.gauss(7.5, 2.5)   # set-up errors

    def measure(self, course, f, det, frac_id, number, at, created, user, reading=None,
                supersedes=None, reason=None):
        """One measurement row with its snapshot; returns (id, verdict, dev)."""
        rng = self.rng
        beam = course["beam"]
        cal = det["calib"][(beam, f["point"])]
        key = det["id"]
        if key not in f["cf"]:
            t = det["tables"][beam]
            f["cf"][key] = (cf_of(t, "field_size", f["eq"]), cf_of(t, "ssd", f["ssd"]),
                            cf_of(t, "wedge", f["wedge"]), cf_of(t, "tray", 0.0),
                            cf_of(t, "angle", f["angle"]))
        cfs = f["cf"][key]
        prod = cfs[0] * cfs[1] * cfs[2] * cfs[3] * cfs[4]
        entered = rng.random() < 0.6
        temp = round(rng.gauss(32.0, 1.0), 1) if entered else SKIN_DEFAULT_C
        cf_t = 1.0 / (1.0 + A_PER_C * (temp - T_CAL))
        expected = f["expected"]
        if reading is None:
            dev_true = self.deviation()
            reading = round(expected * (1 + dev_true / 100.0) / (cal["factor"] * prod * cf_t), 3)
            if rng.random() < 0.001:
                reading = round(reading * 10, 2)       # a slipped decimal point
        dose = reading * cal["factor"] * prod * cf_t
        dev = round((dose - expected) / expected * 100.0, 2)
        set_name = "photon-exit" if f["point"] == "exit" else course["set_entrance"]
        sid, tol, act, floor = self.sets[set_name]
        adev, diff = abs(dev), round(abs(dose - expected), 2)
        if adev > 50 or not (0.1 <= dose / expected <= 10):
            verdict = "implausible"
            reasons = ["measured %.2f cGy against expected %.2f cGy is a deviation of %+.2f %%, beyond "
                       "the plausible limit of 50 %%; probable entry or unit error" % (dose, expected, dev)]
            dose_col = dose
        elif floor > 0 and diff <= floor:
            verdict = "within_tolerance"
            reasons = ["difference of %.2f cGy from the expected %.2f cGy is within the %.2f cGy floor "
                       "for small doses" % (diff, expected, floor)]
            dose_col = dose
        elif adev <= tol:
            verdict = "within_tolerance"
            reasons = ["deviation %+.2f %% is within the tolerance level of %.2f %%" % (dev, tol)]
            dose_col = dose
        elif adev <= act:
            verdict = "outside_tolerance"
            reasons = ["deviation %+.2f %% is beyond the tolerance level of %.2f %% (action level %.2f %%)"
                       % (dev, tol, act)]
            dose_col = dose
        else:
            verdict = "outside_action"
            reasons = ["deviation %+.2f %% is beyond the action level of %.2f %%" % (dev, act)]
            dose_col = dose
        mid = self.new_id("measurements")
        reasons_text = json.dumps(reasons, separators=(",", ":"))
        self.put("measurements", (mid, frac_id, f["id"], det["id"], reading, "nC", temp,
                                  1 if entered else 0, cal["id"], cal["factor"], cfs[0], cfs[1],
                                  cfs[2], cfs[3], cfs[4], cf_t, dose_col, expected, dev, sid, tol,
                                  act, floor, verdict, reasons_text, supersedes, reason,
                                  self.users[user], created))
        content = {"fraction_id": frac_id, "field": f["name"], "point": f["point"],
                   "detector": det["serial"], "reading": num(reading), "reading_unit": "nC",
                   "background": 0, "temp_c": num(temp), "temp_entered": entered,
                   "calibration_id": cal["id"], "factor_n": cal["factor"],
                   "cf_field_size": num(cfs[0]), "cf_ssd": num(cfs[1]), "cf_wedge": num(cfs[2]),
                   "cf_tray": num(cfs[3]), "cf_angle": num(cfs[4]), "cf_temp": cf_t,
                   "corrected_dose_cgy": dose_col, "expected_dose_cgy": num(expected),
                   "deviation_pct": num(dev), "threshold_set_id": sid, "verdict": verdict,
                   "escalated": False, "reasons": reasons}
        if supersedes:
            content["supersedes_id"] = supersedes
            content["amend_reason"] = reason
        self.audit.add(created, user, "amend" if supersedes else "record", "measurements", mid,
                       content)
        return mid, verdict, dev, reading

    def result_item(self, course, f, det, mid, number, verdict, dev, at_dt, user, amended=False):
        rng = self.rng
        sev = {"outside_action": 4, "implausible": 3, "outside_tolerance": 2}[verdict]
        words = {"outside_action": "outside action level", "implausible": "implausible entry",
                 "outside_tolerance": "outside tolerance"}[verdict]
        summary = "%s%s plan '%s' fraction %d, field %s %s, detector %s: %s, deviation %+.2f %%" % (
            "amended reading: " if amended else "", course["mrn"], course["label"], number,
            f["name"], f["point"], det["serial"], words, dev)
        ph = self.physicist()
        if verdict == "outside_action":
            life = [(at_dt + dt.timedelta(minutes=rng.randint(10, 50)), "acknowledge", user, None,
                     "treatment held; physicist called"),
                    (at_dt + dt.timedelta(days=1, hours=rng.randint(1, 6)), "close", ph,
                     rng.choice(["set-up error", "detector placement", "clinically accepted"]),
                     "investigated at the unit; set-up checked before the next fraction")]
        elif verdict == "implausible":
            life = [(at_dt + dt.timedelta(hours=rng.randint(2, 8)), "close", ph, "other",
                     "typing error; the amended reading is judged on its own")]
        else:
            r, acc = rng.random(), 0.0
            for disp, share in DISPOSITIONS_TOL:
                acc += share
                if r <= acc:
                    break
            # most are closed within the week, some wait for a busy physicist
            wait = rng.randint(1, 6) if rng.random() < 0.85 else rng.randint(7, 30)
            close_at = at_dt + dt.timedelta(days=wait, hours=rng.randint(0, 6))
            life = []
            if rng.random() < 0.3:
                life.append((at_dt + dt.timedelta(hours=rng.randint(1, 20)), "acknowledge", ph, None,
                             "seen; watch the next fraction"))
            life.append((close_at, "close", ph, disp, None))
        return self.open_item("result", sev, ts(at_dt), user, summary, measurement=mid,
                              patient=course["patient"], detector=det["id"], field=f["id"],
                              life=life)

    def due_check(self, det, beam, point, at_dt, user):
        cal = det["calib"][(beam, point)]
        at = ts(at_dt)
        if at < cal["due_from"] or cal["id"] in det["due_item"]:
            return
        days_left = (dt.datetime.strptime(cal["valid_until"], UTC) - at_dt).days
        summary = "detector %s: calibration #%d (%s %s) due: valid until %s, %d days left" % (
            det["serial"], cal["id"], beam, point, cal["valid_until"][:10], days_left)
        det["due_item"][cal["id"]] = self.open_item(
            "calibration_due", 1, at, user, summary, detector=det["id"],
            rule_key="calibration:%d" % cal["id"])

    def treat(self, course, det, day, chair, slot_time):
        rng = self.rng
        number = course["done"] + 1
        user = self.therapist()
        treated = slot_time
        created = treated + dt.timedelta(seconds=rng.randint(20, 240))
        at_t, at_c = ts(treated), ts(created)
        frac_id = self.new_id("fractions")
        self.put("fractions", (frac_id, course["plan"], number, at_t, self.users[user], at_c))
        self.audit.add(at_c, user, "record", "fractions", frac_id, {
            "patient": course["mrn"], "plan": course["label"], "number": number,
            "treated_at": at_t, "measurements": len(course["fields"])})
        for f in course["fields"]:
            mid, verdict, dev, reading = self.measure(course, f, det, frac_id, number, at_t, at_c, user)
            if verdict != "within_tolerance":
                self.result_item(course, f, det, mid, number, verdict, dev, created, user)
            if verdict == "implausible":
                # the therapist re-reads the electrometer and amends (docs/record.md)
                fixed = round(reading / 10.0, 3)
                later = created + dt.timedelta(minutes=rng.randint(2, 9))
                reason = "decimal point slipped: typed %g for %g" % (reading, fixed)
                nid, v2, d2, _ = self.measure(course, f, det, frac_id, number, at_t, ts(later), user,
                                              reading=fixed, supersedes=mid, reason=reason)
                if v2 != "within_tolerance":
                    self.result_item(course, f, det, nid, number, v2, d2, later, user, amended=True)
        for (beam, point) in {(course["beam"], f["point"]) for f in course["fields"]}:
            self.due_check(det, beam, point, created, user)
        course["done"] = number

    # ---- the whole period --------------------------------------------------------

    def run(self):
        t0 = time.time()
        self.setup()
        t_setup = time.time() - t0
        self.connect()
        rng = self.rng
        dets = {}        # (machine, slot) -> detector
        next_cal = {}
        chairs = [None] * self.a.per_day
        for di, day in enumerate(self.days):
            morning = dt.datetime.combine(day, dt.time(7, 0))
            # detectors: the first, and a new generation every 4 (one: 8) calendar years
            for m in self.machine_order:
                for s in range(SLOTS_PER_MACHINE):
                    d = dets.get((m, s))
                    gen = self.generation(m, s, day)
                    if d is None or d["gen"] != gen[0]:
                        if d is not None:
                            self.retire(d, morning + dt.timedelta(minutes=5 * s))
                        d = self.add_detector(m, s, gen, morning + dt.timedelta(minutes=5 * s + 1))
                        d["gen"] = gen[0]
                        dets[(m, s)] = d
                        next_cal[d["id"]] = day
                    if next_cal[d["id"]] <= day:
                        self.calibrate(d, morning + dt.timedelta(minutes=15 + 5 * s))
                        next_cal[d["id"]] = day + dt.timedelta(days=CALIB_EVERY_DAYS)
            # events due since the last working day (weekends included)
            self.run_scheduled(day - dt.timedelta(days=1))
            # treatments: the chairs of each machine one after another from 08:00
            per_machine = {}
            for chair in range(self.a.per_day):
                c = chairs[chair]
                if c is None or c["done"] >= c["fractions"]:
                    c = chairs[chair] = self.new_course(chair, day)
                m = c["machine"]
                k = per_machine.get(m, 0)
                per_machine[m] = k + 1
                slot_time = dt.datetime.combine(day, dt.time(8, 0)) + dt.timedelta(
                    minutes=14 * k + rng.randint(0, 8))
                self.treat(c, dets[(m, c["slot"])], day, chair, slot_time)
            # review work done later today
            self.run_scheduled(day)
            if di % 20 == 19 or di == len(self.days) - 1:
                self.flush()
            if di % 250 == 249 and not self.a.quiet:
                print("  %s: %d measurements, %.0f s" % (day, self.counts.get("measurements", 0),
                                                        time.time() - t0), flush=True)
        self.run_scheduled(self.end - dt.timedelta(days=1))
        self.flush()
        t_bulk = time.time() - t0 - t_setup
        self.c.execute("PRAGMA journal_mode = WAL")
        if self.a.analyze:
            self.c.execute("ANALYZE")
        self.c.close()
        self.write_targets(chairs, dets)
        stats = {"setup_s": round(t_setup, 1), "bulk_s": round(t_bulk, 1),
                 "first_day": self.days[0].isoformat(), "last_day": self.days[-1].isoformat(),
                 "working_days": len(self.days), "rows": self.counts,
                 "size_bytes": os.path.getsize(self.db)}
        if self.a.verify:
            tv = time.time()
            r = self.fxl.run("verify", user="audit1")
            stats["verify_s"] = round(time.time() - tv, 1)
            stats["verify"] = (r.stdout + r.stderr).strip()
            if r.returncode != 0:
                print(json.dumps(stats, indent=1))
                sys.exit("gen_department: 'fxledger verify' failed on the synthetic database")
        self.fxl.close()
        return stats

    def write_targets(self, chairs, dets):
        """Readings that log the next fraction of each running course within
        tolerance: reading = expected / (N x CFs x CF_T), docs/physics.md."""
        nxt = self.end
        while nxt.weekday() >= 5 or nxt in holidays(nxt.year):
            nxt += dt.timedelta(days=1)
        out = []
        for chair, c in enumerate(chairs):
            if c is None or c["done"] >= c["fractions"]:
                continue
            det = dets[(c["machine"], c["slot"])]
            fields = []
            for f in c["fields"]:
                cal = det["calib"][(c["beam"], f["point"])]
                t = det["tables"][c["beam"]]
                prod = (cf_of(t, "field_size", f["eq"]) * cf_of(t, "ssd", f["ssd"]) *
                        cf_of(t, "wedge", f["wedge"]) * cf_of(t, "tray", 0.0) * cf_of(t, "angle", f["angle"]))
                temp = 32.0
                cf_t = 1.0 / (1.0 + A_PER_C * (temp - T_CAL))
                reading = round(f["expected"] * 1.004 / (cal["factor"] * prod * cf_t), 3)
                fields.append({"field": "%s:%s" % (f["name"], f["point"]), "detector": det["serial"],
                               "reading": reading, "temp_c": temp})
            out.append({"mrn": c["mrn"], "plan": c["label"], "next_fraction": c["done"] + 1,
                        "fractions": c["fractions"], "fields": fields, "detector": det["serial"],
                        "detector_since": det["born"].date().isoformat(),
                        "detector_years": round((self.end - det["born"].date()).days / 365.25, 1)})
        with open(self.db + ".targets.json", "w", encoding="utf-8") as fh:
            json.dump({"comment": "invented benchmark data", "next_day": nxt.isoformat(),
                       "courses": out}, fh, indent=1)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--fxledger", required=True, help="the fxledger program")
    ap.add_argument("--db", required=True, help="database to create (replaced if it exists)")
    ap.add_argument("--years", type=int, default=20)
    ap.add_argument("--end", default="2026-01-01", help="first day after the data (YYYY-MM-DD)")
    ap.add_argument("--per-day", type=int, default=40, help="patients measured per working day")
    ap.add_argument("--departments", type=int, default=1,
                    help="departments in one database (a network: 3 linacs each; give --per-day "
                         "40 x N for the same load per department)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--verify", action="store_true", help="run 'fxledger verify' on the result")
    ap.add_argument("--analyze", action="store_true",
                    help="run ANALYZE at the end (verify then names sqlite_stat1 as a table outside "
                         "the schema)")
    ap.add_argument("--quiet", action="store_true")
    a = ap.parse_args()
    stats = Gen(a).run()
    print(json.dumps(stats, indent=1))


if __name__ == "__main__":
    main()
