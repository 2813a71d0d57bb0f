#!/usr/bin/python3
"""What one `fxledger record` costs in statements and instructions, measured
in ways that do not depend on the machine's load (docs/performance.md).
Not part of `make test` nor of `make bench`; run on demand:

    tests/bench/record_cost.py build/fxledger-testclock [--callgrind] [--syscalls]

Sets up a small INVENTED department through the test harness
(tests/cli/fxlcli.py: one photon diode calibrated to N = 10 cGy/nC at the
reference conditions, levels 5 % / 8 %, one patient with a three-field plan),
logs 20 fractions, keeps a copy of that state (SQLite backup API), and then
logs the same next fraction (three readings, within tolerance) on that same
state again for each measurement:

  - the calls the program makes to sqlite3_prepare_v2 / _v3 and to
    sqlite3_exec, counted by a small LD_PRELOAD library compiled here with
    cc (calls inside libsqlite3 itself, such as the statements that
    sqlite3_exec prepares, are not counted);
  - with --callgrind, the instructions of the whole process
    (valgrind --tool=callgrind, "Collected" total);
  - with --syscalls, the file-system calls that cost the disk (fsync,
    fdatasync, pwrite64, ftruncate, unlink), counted by strace -c.
"""
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "cli"))

COUNTER_C = r"""
#define _GNU_SOURCE
#include <dlfcn.h>
#include <stdio.h>
#include <stdlib.h>

static long n_prepare, n_inner, n_exec;
static int in_exec;   /* inside sqlite3_exec: its own prepares are counted apart */

/* FXL_COUNT_SQL=PATH: one line per call, its SQL text (for reading). */
static void note(const char *kind, const char *sql)
{
    const char *path = getenv("FXL_COUNT_SQL");
    FILE *f = path ? fopen(path, "a") : NULL;
    if (f) {
        fprintf(f, "%s ", kind);
        for (; *sql; sql++)
            fputc(*sql == '\n' ? ' ' : *sql, f);
        fputc('\n', f);
        fclose(f);
    }
}

int sqlite3_prepare_v2(void *db, const char *sql, int n, void **st, const char **tail)
{
    static int (*real)(void *, const char *, int, void **, const char **);
    if (!real)
        real = (int (*)(void *, const char *, int, void **, const char **))dlsym(RTLD_NEXT, "sqlite3_prepare_v2");
    if (in_exec)
        n_inner++;
    else
        n_prepare++;
    note(in_exec ? "exec-prepare" : "prepare", sql);
    return real(db, sql, n, st, tail);
}

int sqlite3_prepare_v3(void *db, const char *sql, int n, unsigned flags, void **st, const char **tail)
{
    static int (*real)(void *, const char *, int, unsigned, void **, const char **);
    if (!real)
        real = (int (*)(void *, const char *, int, unsigned, void **, const char **))dlsym(RTLD_NEXT, "sqlite3_prepare_v3");
    if (in_exec)
        n_inner++;
    else
        n_prepare++;
    note(in_exec ? "exec-prepare" : "prepare", sql);
    return real(db, sql, n, flags, st, tail);
}

int sqlite3_exec(void *db, const char *sql, void *cb, void *arg, char **err)
{
    static int (*real)(void *, const char *, void *, void *, char **);
    if (!real)
        real = (int (*)(void *, const char *, void *, void *, char **))dlsym(RTLD_NEXT, "sqlite3_exec");
    int rc;
    n_exec++;
    note("exec", sql);
    in_exec++;
    rc = real(db, sql, cb, arg, err);
    in_exec--;
    return rc;
}

__attribute__((destructor)) static void report(void)
{
    const char *path = getenv("FXL_COUNT_OUT");
    FILE *f = path ? fopen(path, "w") : NULL;
    if (f) {
        fprintf(f, "%ld %ld %ld\n", n_prepare, n_exec, n_inner);
        fclose(f);
    }
}
"""


# Functions whose inclusive instruction counts are printed with --callgrind.
WATCH = (":sqlite3_prepare_v2 ", ":fxl_seal_attach ", ":fxl_open ", ":fxl_record_fraction ",
         ":fxl_audit_append ", ":fxl_seal_pending ", ":fxl_rules_after_record ", ":main ")


def department(fx):
    fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
    fx.ok("machine", "add", "LINAC1")
    fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon",
          "--energy", "6", "--dmax", "1.5")
    fx.ok("detector", "add", "D-1", "--label", "Diode 1", "--kind", "photon_diode",
          "--temp-coeff", "0")
    fx.ok("calib", "add", "D-1", "--machine", "LINAC1", "--beam", "6X", "--point", "entrance",
          "--chamber-dose", "100", "--readings", "10,10,10", "--temp", "20",
          "--valid-until", "2027-06-30")
    fx.ok("levels", "set", "default", "--tolerance", "5", "--action", "8",
          "--effective", "2026-01-01")
    fx.ok("patient", "add", "P-1", "--family", "Example", "--given", "Invented")
    fields = [{"name": n, "machine": "LINAC1", "beam": "6X", "setup": "ssd", "mu": 200,
               "ssd_cm": 100, "x_cm": 10, "y_cm": 10, "wedge_deg": 0, "tray": False,
               "gantry_deg": g, "incidence_deg": 0, "policy": "every",
               "points": [{"point": "entrance", "expected_dose_cgy": 200,
                           "expected_source": "tps"}]}
              for n, g in (("AP", 0), ("PA", 180), ("LAT", 90))]
    import json
    plan = {"format": "fxledger-plan/1", "comment": "Invented example data; not a real plan.",
            "patient_mrn": "P-1", "label": "PL-1", "site": "Pelvis", "technique": "3D",
            "fractions": 30, "dose_per_fraction_cgy": 200, "fields": fields}
    fx.ok("plan", "import", fx.write("plan.json", json.dumps(plan)))


def readings(devs):
    args = []
    for name, d in zip(("AP", "PA", "LAT"), devs):
        args += ["--field", name, "--detector", "D-1", "--reading", "%.4f" % (20.0 * (1 + d / 100.0))]
    return args


def main():
    from fxlcli import Fxl
    binary = os.path.abspath(sys.argv[1])
    use_callgrind = "--callgrind" in sys.argv
    use_strace = "--syscalls" in sys.argv
    work = tempfile.mkdtemp(prefix="fxlcost-")
    fx = Fxl(now="2026-09-25T09:00:00Z", bin=binary).init()
    try:
        department(fx)
        for i in range(20):
            day = 1 + i + 2 * (i // 5)              # weekdays of October 2026
            fx.now = "2026-10-%02dT17:00:00Z" % min(day, 31)
            fx.ok("record", "--patient", "P-1", "--at", "2026-10-%02dT08:00:00Z" % min(day, 31),
                  *readings([(i % 5) - 2.0, 1.0 - (i % 3), 0.5]), user="ther")
        fx.now = "2026-11-02T09:00:00Z"
        fx.ensure_session("ther")
        snap = os.path.join(work, "snapshot.db")
        with sqlite3.connect(fx.db) as src, sqlite3.connect(snap) as dst:
            src.backup(dst)

        def fresh():
            for suffix in ("", "-wal", "-shm"):
                if os.path.exists(fx.db + suffix):
                    os.remove(fx.db + suffix)
            with sqlite3.connect(snap) as src, sqlite3.connect(fx.db) as dst:
                src.backup(dst)

        argv = fx.argv("record", "--patient", "P-1", "--at", "2026-11-02T08:00:00Z",
                       *readings([0.4, -0.3, 1.2]), user="ther")
        env = fx.env("ther")

        so = os.path.join(work, "count.so")
        src = os.path.join(work, "count.c")
        with open(src, "w") as f:
            f.write(COUNTER_C)
        subprocess.run(["cc", "-shared", "-fPIC", "-O2", "-o", so, src, "-ldl"], check=True)
        fresh()
        out = os.path.join(work, "count.txt")
        counted = dict(env, LD_PRELOAD=so, FXL_COUNT_OUT=out)
        if os.environ.get("FXL_COUNT_SQL"):
            counted["FXL_COUNT_SQL"] = os.path.abspath(os.environ["FXL_COUNT_SQL"])
        r = subprocess.run(argv, env=counted,
                           capture_output=True, text=True)
        if r.returncode != 0:
            raise SystemExit("record failed: " + r.stdout + r.stderr)
        with open(out) as f:
            n_prepare, n_exec, n_inner = map(int, f.read().split())
        print("one record (3 readings, within tolerance, 20 fractions before it):")
        print("  statements prepared (sqlite3_prepare_v2/_v3, outside sqlite3_exec): %d" % n_prepare)
        print("  sqlite3_exec calls: %d, preparing %d statements inside them" % (n_exec, n_inner))
        print("  all sqlite3_prepare_v2/_v3 calls: %d" % (n_prepare + n_inner))
        if use_callgrind:
            fresh()
            cg = os.path.join(work, "callgrind.out")
            r = subprocess.run(["valgrind", "--tool=callgrind", "--callgrind-out-file=" + cg] + argv,
                               env=env, capture_output=True, text=True)
            if r.returncode != 0:
                raise SystemExit("record under callgrind failed: " + r.stderr[-2000:])
            total = [line for line in r.stderr.splitlines() if "Collected" in line]
            print("  instructions (callgrind, whole process):    %s" % total[-1].split(":")[-1].strip())
            ann = subprocess.run(["callgrind_annotate", "--inclusive=yes", "--threshold=100", cg],
                                 capture_output=True, text=True).stdout
            for line in ann.splitlines():
                if "=>" not in line and any(k in line for k in WATCH):
                    print("  " + line.strip())
        if use_strace:
            fresh()
            out = os.path.join(work, "strace.txt")
            r = subprocess.run(["strace", "-f", "-c", "-o", out, "-e",
                                "trace=fsync,fdatasync,pwrite64,ftruncate,unlink"] + argv,
                               env=env, capture_output=True, text=True)
            if r.returncode != 0:
                raise SystemExit("record under strace failed: " + r.stderr[-2000:])
            with open(out) as f:
                for line in f:
                    parts = line.split()
                    if len(parts) >= 5 and parts[-1] in ("fsync", "fdatasync", "pwrite64",
                                                         "ftruncate", "unlink"):
                        print("  %-10s %s calls" % (parts[-1], parts[3]))
            beside = [sfx for sfx in ("-wal", "-shm") if os.path.exists(fx.db + sfx)]
            print("  files beside the database after it: %s" % (", ".join(beside) or "none"))
    finally:
        fx.close()
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
