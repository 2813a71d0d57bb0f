#!/usr/bin/python3
"""fxledger's performance benchmark (docs/performance.md). Run on demand:

    make bench                          (builds, then runs this script)
    make bench BENCH_SCALE=network      (also a network-scale database, ~6 million measurements)
    tests/bench/run_bench.py --fxledger build/fxledger-testclock [--workdir DIR] [--scale network]

Builds (or reuses) synthetic databases with tests/bench/gen_department.py -
INVENTED data only - a large one (20 years of a busy department), a small
one (the last 2 years of the same department, so the same months hold the
same number of measurements) and on demand a network one (ten departments'
twenty years in one database), and prints, in one run on this machine:

  - logging one fraction with 'fxledger record' (process start to exit)
    beside the sqlite3 shell inserting the very same rows with the same
    durability (WAL, synchronous=FULL, foreign keys on), wall and CPU time;
    with a diode 8 years in service and with a young one; on the large and
    the small database;
  - listing the open review queue; the monthly and per-patient reports, with
    the program's own peak memory (GNU time);
  - the web console: logging a fraction through POST /api/v1/record on a
    kept-open connection against the commit floor (a kept-open SQLite
    connection committing the same rows, same durability), and the latency
    at 20 concurrent clients (tests/bench/web_load.py);
  - the machine, and the load average before and after each section.

Each target is printed with its figure and met / MISSED; the exit status is
1 when a target is missed. Users log in once per database copy
(tests/cli/fxlcli.py) and every timed command runs inside that session.
"""
import argparse
import datetime as dt
import hashlib
import json
import os
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
GEN = os.path.join(HERE, "gen_department.py")
sys.path.insert(0, HERE)
sys.path.insert(0, os.path.join(HERE, "..", "cli"))
import benchlib  # noqa: E402
from benchlib import copy_db, load, new_rows_sql, peak_mib, snapshot, spawn_timed  # noqa: E402
from fxlcli import Fxl, epoch, invented_password  # noqa: E402

# Targets (issue 16). Ratios are of medians measured in the same run.
TARGET_RECORD_RATIO = 1.3      # record within 1.3x the sqlite3 shell on the same rows
TARGET_FLAT = 1.2              # "flat": 8-year / young diode, large / small db, network / department
TARGET_QUEUE_S = 0.050         # queue listing under 50 ms (as before)
TARGET_MONTH_S = 0.150         # monthly report on the 20-year database
TARGET_PATIENT_S = 0.050       # per-patient report on the 20-year database
TARGET_MIB = 64.0              # peak memory of a report
TARGET_GROWTH = 1.5            # a report on the large db within 1.5x the small db's
TARGET_BUILD_S = 900.0         # the 20-year database in minutes, not hours
TARGET_WEB_RATIO = 5.0         # POST /api/v1/record within 5x the commit floor
NET_QUEUE_S = 0.020            # network scale: queue under 20 ms
NET_MONTH_S = 0.5              # network scale: monthly report under 0.5 s
# size of one department-year of the generator's data, with seals (GiB)
GIB_PER_DEPT_YEAR = 0.065

USERS = ("ther01", "phys1", "audit1")


def ms(s):
    return "%.1f ms" % (s * 1000)


def med(xs):
    return statistics.median(xs) if xs else float("nan")


def file_sha(*paths):
    h = hashlib.sha256()
    for path in paths:
        with open(path, "rb") as f:
            h.update(f.read())
    return h.hexdigest()[:16]


# ---- databases ------------------------------------------------------------------

def ensure_db(args, name, years, departments=1):
    """Generates <workdir>/<name>.db unless one built with the same generator,
    parameters, program version and migrations exists; returns (path, stats)."""
    path = os.path.join(args.workdir, name + ".db")
    stamp_path = path + ".stamp.json"
    per_day = args.per_day * departments
    version = subprocess.run([args.fxledger, "--version"], capture_output=True, text=True).stdout.strip()
    sql_dir = os.path.join(HERE, "..", "..", "sql")
    stamp = {"generator": file_sha(GEN, os.path.join(HERE, "..", "cli", "fxlcli.py")),
             "years": years, "per_day": per_day, "departments": departments,
             "end": args.end, "seed": args.seed, "fxledger": version,
             "schema": file_sha(*[os.path.join(sql_dir, f) for f in sorted(os.listdir(sql_dir))])}
    if not args.regenerate and os.path.exists(stamp_path) and os.path.exists(path):
        with open(stamp_path) as f:
            old = json.load(f)
        if old.get("stamp") == stamp:
            old["stats"]["reused"] = True
            return path, old["stats"]
    print("generating %s (%d years, %d department(s), invented data) ..." % (path, years, departments),
          flush=True)
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, GEN, "--fxledger", args.fxledger, "--db", path,
                        "--years", str(years), "--end", args.end, "--per-day", str(per_day),
                        "--departments", str(departments), "--seed", str(args.seed), "--quiet"]
                       + (["--verify"] if args.verify else []), capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit("run_bench: generating %s failed:\n%s%s" % (path, r.stdout[-3000:], r.stderr[-3000:]))
    stats = json.loads(r.stdout)
    stats["wall_s"] = round(time.perf_counter() - t0, 1)
    stats["reused"] = False
    with open(stamp_path, "w") as f:
        json.dump({"stamp": stamp, "stats": stats}, f, indent=1)
    return path, stats


class Session:
    """The benchmark's users logged in once on one database copy (the
    harness of tests/cli/fxlcli.py: passwords on a pipe, a session file per
    user); every timed command then runs in that session."""

    def __init__(self, args, db, now):
        self.fx = Fxl(now=now, user="ther01", bin=args.fxledger)
        self.fx.db = db
        self.minute = 0     # the logging clock: minutes after 07:00 of the next day
        for u in USERS:
            self.fx.passwords[u] = invented_password(u)
            r = self.fx.login(u, now)
            if r.returncode != 0:
                sys.exit("run_bench: login of %s on %s failed (%d): %s" % (u, db, r.returncode, r.stderr))

    def cmd(self, user, now, *args):
        """(argv, env) of a command as `user` at `now`, in the session."""
        self.fx.ensure_session(user, now)
        return self.fx.argv(*args, user=user), self.fx.env(user, now)

    def seen(self, user, now):
        s = self.fx.sessions.get(user)
        if s and epoch(now) >= s["seen"] + 60:
            s["seen"] = epoch(now)

    def close(self):
        self.fx.close()


def section(results, name):
    """Records the load average before and after a section of the run."""
    class _S:
        def __enter__(self):
            self.t0 = time.perf_counter()
            self.before = load()
            print("%s (load %s) ..." % (name, self.before), flush=True)
            return self

        def __exit__(self, *exc):
            results.setdefault("sections", {})[name] = {
                "load_before": self.before, "load_after": load(),
                "wall_s": round(time.perf_counter() - self.t0, 1)}
    return _S()


# ---- logging one fraction ---------------------------------------------------------

def pick_courses(targets, group):
    """Courses of the targets file on an old (>= 7 years) or a young
    (<= 3 years) diode; entrance-only plans first (their readings are
    evaluable with the generator's entrance tables)."""
    cs = [c for c in targets["courses"]
          if (c["detector_years"] >= 7 if group == "old" else c["detector_years"] <= 3)]
    cs.sort(key=lambda c: (any(f["field"].endswith(":exit") for f in c["fields"]), c["mrn"]))
    for c in cs:
        c.setdefault("logged", 0)   # kept in targets: a second series continues the count
    return cs


def record_argv(c):
    args = ["record", "--patient", c["mrn"]]
    for f in c["fields"]:
        args += ["--field", f["field"], "--detector", f["detector"], "--reading", str(f["reading"]),
                 "--temp", str(f["temp_c"])]
    return args


def bench_record(args, sess, db, twin, targets, groups, rounds, results_peak):
    """Logs fractions with fxledger on db, round-robin over the groups of
    courses (each round: one of each group), and, when twin is given,
    inserts the same rows with the sqlite3 shell on twin (an identical
    copy) right after each. A generator that stops before each round, so
    that interleaved() can run the rounds of two databases in turn; its
    value is {group: timings}.

    Before the timed rounds, one fraction of every course the rounds will
    use (untimed for the medians; the first on each detector timed as
    "first"): a department's detectors and courses have logged earlier
    fractions, so the rules' kept state (sql/015, docs/rules.md: the dose
    per detector, a drift chart per detector, beam and point) is there, as
    in service. Such a first fraction reads the rows since the calibration,
    as every fraction did before the kept state; its times are kept apart
    in "first"."""
    day = targets["next_day"]
    res = {g: {"fx": [], "fx_cpu": [], "sq": [], "sq_cpu": [], "rows": [], "codes": [],
               "first": [], "detector": None, "detector_years": None} for g in groups}
    pools = {g: pick_courses(targets, g) for g in groups}
    for g in groups:
        if not pools[g]:
            sys.exit("run_bench: no running course on a%s diode in %s" % (
                "n 8-year-old" if g == "old" else " young", db))
    script = os.path.join(args.workdir, "insert.sql")

    def choose(g, i):
        # room for this fraction and the course's first fraction before the rounds
        pool = [c for c in pools[g] if c["next_fraction"] + c["logged"] + 1 <= c["fractions"]]
        # entrance-only plans while they last: all three readings evaluable
        entrance = [c for c in pool if not any(f["field"].endswith(":exit") for f in c["fields"])]
        pool = entrance or pool
        if not pool:
            sys.exit("run_bench: the courses on the %s diode ran out of fractions" % g)
        return pool[i % len(pool)]

    def log(c, peak=False):
        """One fraction of course c; returns (wall, cpu, code, shell wall,
        shell cpu, rows) (shell figures None without a twin)."""
        c["logged"] += 1
        now = "%sT%02d:%02d:00Z" % (day, 7 + sess.minute // 60, sess.minute % 60)
        sess.minute += 1
        argv, env = sess.cmd("ther01", now, *record_argv(c))
        before = snapshot(db) if twin else None
        if peak:
            pk, code, out = peak_mib(argv, env)
            results_peak["record"] = pk
            t_fx, cpu_fx = None, None
            if pk is None:            # no GNU time: the warm-up runs plainly
                _, _, code, out = spawn_timed(argv, env)
        else:
            t_fx, cpu_fx, code, out = spawn_timed(argv, env)
        if code not in (0, 10, 11, 12):
            sys.exit("run_bench: fxledger record failed (%d):\n%s" % (code, out))
        sess.seen("ther01", now)
        t_sq = cpu_sq = n = None
        if twin:
            lines, n = new_rows_sql(db, before)
            with open(script, "w", encoding="utf-8") as f:
                # the connection settings of fxledger (src/store/db.c)
                f.write("PRAGMA foreign_keys = ON;\nPRAGMA busy_timeout = 5000;\n"
                        "PRAGMA journal_mode = WAL;\nPRAGMA synchronous = FULL;\n"
                        "BEGIN IMMEDIATE;\n%s\nCOMMIT;\n" % "\n".join(lines))
            t_sq, cpu_sq, scode, sout = spawn_timed(["sqlite3", "-batch", "-bail", twin],
                                                    stdin_path=script)
            if scode != 0:
                sys.exit("run_bench: the sqlite3 shell failed (%d):\n%s" % (scode, sout))
        return t_fx, cpu_fx, code, t_sq, cpu_sq, n

    # The rounds' courses, chosen first (a course the first fractions below
    # filled up would otherwise shift the choice onto courses never logged).
    schedule = {g: [] for g in groups}
    for i in range(rounds + 1):
        for g in groups:
            c = choose(g, i)
            c["logged"] += 1            # reserved for round i
            schedule[g].append(c)
    for g in groups:
        for c in schedule[g]:
            c["logged"] -= 1
    # a first fraction of each course of the rounds (the first of all
    # measures the peak memory; the first on each detector is timed)
    for g in groups:
        seen, courses = set(), set()
        for c in schedule[g]:
            if c["mrn"] in courses:
                continue
            courses.add(c["mrn"])
            dets = {f["detector"] for f in c["fields"]}
            if dets <= seen:
                # a course of a detector already warm: its own drift series
                # (detector, beam, point) start here, untimed
                log(c)
                continue
            seen |= dets
            peak = results_peak is not None and g == groups[0] and not res[g]["first"] and \
                "record" not in results_peak
            t_fx = log(c, peak=peak)[0]
            res[g]["first"].append(t_fx)
    for i in range(rounds + 1):                 # round 0 warms up, untimed
        yield
        for g in groups:
            c = schedule[g][i]
            t_fx, cpu_fx, code, t_sq, cpu_sq, n = log(c)
            r = res[g]
            r["detector"], r["detector_years"] = c["detector"], c["detector_years"]
            if i > 0:
                r["fx"].append(t_fx)
                r["fx_cpu"].append(cpu_fx)
                r["codes"].append(code)
                if twin:
                    r["sq"].append(t_sq)
                    r["sq_cpu"].append(cpu_sq)
                    r["rows"].append(n)
    for g in groups:
        res[g]["first"] = [t for t in res[g]["first"] if t is not None]
    return res


def interleaved(*runs):
    """Runs the rounds of several bench_record generators in turn (one
    round of each, then the next), so that a ratio between two databases
    compares runs of the same minutes: this machine's speed drifts by up to
    a third within a few minutes (docs/performance.md). Returns their
    values in order."""
    values = [None] * len(runs)
    live = list(enumerate(runs))
    while live:
        for entry in list(live):
            try:
                next(entry[1])
            except StopIteration as done:
                values[entry[0]] = done.value
                live.remove(entry)
    return values


# ---- listings and reports ------------------------------------------------------------

def bench_queue(sess, now, rounds):
    times, cpu = [], []
    for i in range(rounds + 1):
        argv, env = sess.cmd("phys1", now, "queue", "list")
        t, c, code, out = spawn_timed(argv, env)
        if code != 0:
            sys.exit("run_bench: queue list failed (%d):\n%s" % (code, out))
        if i > 0:
            times.append(t)
            cpu.append(c)
    argv, env = sess.cmd("phys1", now, "--json", "queue", "list")
    r = subprocess.run(argv, env=env, capture_output=True, text=True)
    doc = json.loads(r.stdout)
    items = doc["items"] if isinstance(doc, dict) else doc
    return {"times": times, "cpu": cpu, "items": len(items)}


def bench_reports(kind, jobs, rounds, now):
    """Times `fxledger report KIND WHAT` on each (session, what, out) of
    jobs, alternating between them round by round so that all see the same
    load; the warm-up run measures the peak memory (GNU time)."""
    res = [{"times": [], "cpu": []} for _ in jobs]
    for i in range(rounds + 1):
        for (sess, what, out_pdf), r in zip(jobs, res):
            if os.path.exists(out_pdf):
                os.remove(out_pdf)
            argv, env = sess.cmd("audit1", now, "report", kind, what, "--out", out_pdf,
                                 "--generated-at", "2026-01-05T07:00:00Z")
            if i == 0:
                r["peak_mib"], code, out = peak_mib(argv, env)
                if r["peak_mib"] is None:
                    _, _, code, out = spawn_timed(argv, env)
            else:
                t, c, code, out = spawn_timed(argv, env)
                r["times"].append(t)
                r["cpu"].append(c)
            if code != 0:
                sys.exit("run_bench: report %s %s failed (%d):\n%s" % (kind, what, code, out))
            sess.seen("audit1", now)
    for (sess, what, out_pdf), r in zip(jobs, res):
        r["pdf_bytes"] = os.path.getsize(out_pdf)
        print("  report %s %s on %s: median %s (CPU %s), peak %s" % (
            kind, what, os.path.basename(sess.fx.db), ms(med(r["times"])), ms(med(r["cpu"])),
            "%.1f MiB" % r["peak_mib"] if r["peak_mib"] else "not measured"), flush=True)
    return res


def month_rows(db, month):
    """Measurements treated in the month (UTC bounds; the report uses the
    department's zone, a few hours' difference)."""
    y, m = map(int, month.split("-"))
    nxt = "%04d-%02d" % (y + (m == 12), 1 if m == 12 else m + 1)
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    n = c.execute("SELECT count(*) FROM measurements m JOIN fractions f ON f.id = m.fraction_id "
                  "WHERE f.treated_at >= ? AND f.treated_at < ?", (month, nxt)).fetchone()[0]
    c.close()
    return n


def report_patient(db, month):
    """A patient whose whole course was treated in or around the month, with
    the most fractions."""
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    row = c.execute(
        "SELECT pt.mrn, p.fractions, count(m.id) FROM plans p JOIN patients pt ON pt.id = p.patient_id "
        "JOIN fractions f ON f.plan_id = p.id JOIN measurements m ON m.fraction_id = f.id "
        "WHERE p.id IN (SELECT plan_id FROM fractions WHERE treated_at >= ? AND number = 1) "
        "GROUP BY p.id HAVING max(f.number) = p.fractions ORDER BY p.fractions DESC, p.id LIMIT 1",
        (month,)).fetchone()
    c.close()
    return row


# ---- main -----------------------------------------------------------------------------

def need_gib(args):
    """Disk the run needs: each database, its working copy (and the twin of
    the large one)."""
    g = GIB_PER_DEPT_YEAR * (args.years * 3 + args.small_years * 2) + 1
    if args.scale == "network":
        g += GIB_PER_DEPT_YEAR * args.years * args.network_departments * 2
    return g


def main():
    ap = argparse.ArgumentParser(description="fxledger performance benchmark (invented data)")
    ap.add_argument("--fxledger", default=os.path.join(HERE, "..", "..", "build", "fxledger-testclock"))
    ap.add_argument("--workdir", default=os.path.join(tempfile.gettempdir(), "fxledger-bench"))
    ap.add_argument("--scale", choices=("standard", "network"), default="standard",
                    help="network: also ten departments' twenty years in one database")
    ap.add_argument("--years", type=int, default=20, help="years in the large database")
    ap.add_argument("--small-years", type=int, default=2, help="years in the small database")
    ap.add_argument("--per-day", type=int, default=40, help="patients measured a day per department")
    ap.add_argument("--network-departments", type=int, default=10)
    ap.add_argument("--end", default="2026-01-01")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--rounds", type=int, default=21, help="timed runs of each command")
    ap.add_argument("--web-clients", type=int, default=20)
    ap.add_argument("--web-fractions", type=int, default=50, help="fractions per concurrent client")
    ap.add_argument("--web-serial", type=int, default=41, help="fractions on one kept-open connection")
    ap.add_argument("--no-web", dest="web", action="store_false", help="skip the web console")
    ap.add_argument("--regenerate", action="store_true", help="rebuild the databases")
    ap.add_argument("--no-verify", dest="verify", action="store_false",
                    help="skip 'fxledger verify' on freshly generated databases")
    ap.add_argument("--markdown", help="also write the results as Markdown to this file")
    args = ap.parse_args()
    args.fxledger = os.path.abspath(args.fxledger)
    if not os.access(args.fxledger, os.X_OK):
        sys.exit("run_bench: %s is not built (run 'make bench')" % args.fxledger)
    if not shutil.which("sqlite3"):
        sys.exit("run_bench: the sqlite3 shell is needed (Debian package sqlite3)")
    os.makedirs(args.workdir, exist_ok=True)
    free_gib = shutil.disk_usage(args.workdir).free / 2**30
    existing = sum(os.path.getsize(os.path.join(args.workdir, f)) for f in os.listdir(args.workdir)
                   if f.endswith(".db")) / 2**30
    if free_gib + existing < need_gib(args):
        sys.exit("run_bench: the %s scale needs about %.0f GiB in %s, which has %.1f GiB free "
                 "(%.1f GiB of databases already there); free space or give --workdir on a larger "
                 "disk" % (args.scale, need_gib(args), args.workdir, free_gib, existing))
    if not os.access(benchlib.GNU_TIME, os.X_OK):
        print("run_bench: GNU time (%s, Debian package time) is missing: peak memory is not "
              "measured" % benchlib.GNU_TIME, flush=True)

    build_dir = os.path.dirname(args.fxledger)
    results = {"machine": benchlib.machine(args.workdir, build_dir), "scale": args.scale,
               "load_start": load(), "peak_mib": {}}
    with section(results, "databases"):
        large_gen, large_stats = ensure_db(args, "large-%dy" % args.years, args.years)
        small_gen, small_stats = ensure_db(args, "small-%dy" % args.small_years, args.small_years)
    results.update({"large": large_stats, "small": small_stats})
    with open(large_gen + ".targets.json") as f:
        targets = json.load(f)
    with open(small_gen + ".targets.json") as f:
        targets_small = json.load(f)
    end = dt.date.fromisoformat(args.end)
    last = end - dt.timedelta(days=1)
    month = "%04d-%02d" % (last.year, last.month)
    prev_month = "%04d-%02d" % (last.year, last.month - 1) if last.month > 1 else "%04d-12" % (last.year - 1)
    day = targets["next_day"]
    start_now = "%sT07:00:00Z" % day
    report_now = "%sT18:00:00Z" % day

    with section(results, "working copies and logins"):
        large = copy_db(large_gen, os.path.join(args.workdir, "run-large.db"))
        small = copy_db(small_gen, os.path.join(args.workdir, "run-small.db"))
        s_large = Session(args, large, start_now)
        s_small = Session(args, small, start_now)
        # the twin: the large copy after the logins, so that both hold the same rows
        twin = copy_db(large, os.path.join(args.workdir, "run-large-twin.db"))
    size_large, size_small = os.path.getsize(large_gen), os.path.getsize(small_gen)

    with section(results, "logging fractions"):
        # the small database's rounds between the large one's: paired in time
        rec, rec_small = interleaved(
            bench_record(args, s_large, large, twin, targets, ("old", "young"), args.rounds,
                         results["peak_mib"]),
            bench_record(args, s_small, small, None, targets_small, ("young",), args.rounds, None))
    all_fx = rec["old"]["fx"] + rec["young"]["fx"]
    all_sq = rec["old"]["sq"] + rec["young"]["sq"]
    all_fx_cpu = rec["old"]["fx_cpu"] + rec["young"]["fx_cpu"]
    all_sq_cpu = rec["old"]["sq_cpu"] + rec["young"]["sq_cpu"]
    print("  record median %s (CPU %s), sqlite3 shell %s (CPU %s); 8-year diode %s, young %s, small db %s"
          % (ms(med(all_fx)), ms(med(all_fx_cpu)), ms(med(all_sq)), ms(med(all_sq_cpu)),
             ms(med(rec["old"]["fx"])), ms(med(rec["young"]["fx"])), ms(med(rec_small["young"]["fx"]))),
          flush=True)

    with section(results, "queue"):
        q = bench_queue(s_large, report_now, args.rounds)
    print("  queue list median %s (%d items)" % (ms(med(q["times"])), q["items"]), flush=True)

    with section(results, "reports"):
        rr = max(3, args.rounds // 3)
        mon_l, mon_s = bench_reports("month", [
            (s_large, month, os.path.join(args.workdir, "month-large.pdf")),
            (s_small, month, os.path.join(args.workdir, "month-small.pdf"))], rr, report_now)
        pat = report_patient(large, prev_month)
        pat_sm = report_patient(small, prev_month)
        pat_l, pat_s = bench_reports("patient", [
            (s_large, pat[0], os.path.join(args.workdir, "patient-large.pdf")),
            (s_small, pat_sm[0], os.path.join(args.workdir, "patient-small.pdf"))], rr, report_now)

    web = None
    if args.web:
        with section(results, "web console"):
            import web_load
            web = web_load.measure(args.fxledger, args.web_clients, args.web_fractions, args.web_serial)
        print("  web: POST record median %s on a kept-open connection, floor %s; %d clients: "
              "median %s, p95 %s" % (ms(web["serial_median_s"]), ms(web["floor_median_s"]),
                                     web["clients"], ms(web["median_s"]), ms(web["p95_s"])), flush=True)

    net = None
    if args.scale == "network":
        with section(results, "network database"):
            net_gen, net_stats = ensure_db(args, "network-%dx%dy" % (args.network_departments, args.years),
                                           args.years, args.network_departments)
        with open(net_gen + ".targets.json") as f:
            targets_net = json.load(f)
        with section(results, "network timings"):
            netdb = copy_db(net_gen, os.path.join(args.workdir, "run-network.db"))
            # the copy's 10 GiB on the disk first, or its write-back slows the commits timed
            # next; then read once, so that its pages are in the page cache like the others'
            # (copying it pushed part of it out: 15,760 blocks read from the disk by one record)
            os.sync()
            benchlib.read_through(netdb)
            s_net = Session(args, netdb, start_now)
            # the department's young diodes again, round by round with the network's: paired
            rec_net, rec_dept = interleaved(
                bench_record(args, s_net, netdb, None, targets_net, ("young",), args.rounds, None),
                bench_record(args, s_large, large, None, targets, ("young",), args.rounds, None))
            q_net = bench_queue(s_net, report_now, args.rounds)
            mon_n, = bench_reports("month", [(s_net, month, os.path.join(args.workdir, "month-net.pdf"))],
                                   rr, report_now)
            pat_n_row = report_patient(netdb, prev_month)
            pat_n, = bench_reports("patient", [(s_net, pat_n_row[0],
                                                os.path.join(args.workdir, "patient-net.pdf"))], rr, report_now)
        net = {"stats": net_stats, "record": rec_net, "record_dept": rec_dept, "queue": q_net, "month": mon_n,
               "patient": pat_n, "patient_row": pat_n_row, "size": os.path.getsize(net_gen)}

    # ---- the table ----
    fx_med, sq_med = med(all_fx), med(all_sq)
    ratio, cpu_ratio = fx_med / sq_med, med(all_fx_cpu) / med(all_sq_cpu)
    old_m, young_m = med(rec["old"]["fx"]), med(rec["young"]["fx"])
    old_c, young_c = med(rec["old"]["fx_cpu"]), med(rec["young"]["fx_cpu"])
    small_m, small_c = med(rec_small["young"]["fx"]), med(rec_small["young"]["fx_cpu"])
    q_med = med(q["times"])
    ml, msm = med(mon_l["times"]), med(mon_s["times"])
    pl, ps = med(pat_l["times"]), med(pat_s["times"])
    build_s = large_stats.get("setup_s", 0) + large_stats.get("bulk_s", 0)
    rows = []  # (figure, measured, target, met)

    def add(fig, val, target="", met=None):
        rows.append((fig, val, target, "met" if met else "MISSED" if met is not None else ""))

    def peak(r):
        return "%.1f MiB" % r["peak_mib"] if r.get("peak_mib") else "peak not measured"

    def mem_ok(r):
        return r.get("peak_mib") is None or r["peak_mib"] < TARGET_MIB

    add("build the large database (%d years, %d measurements)" % (
        args.years, large_stats["rows"].get("measurements", 0)),
        "%.0f s (%.0f s set-up with fxledger, %.0f s bulk SQL with seals and signatures; then verify "
        "%s s)%s" % (build_s, large_stats.get("setup_s", 0), large_stats.get("bulk_s", 0),
                     large_stats.get("verify_s", "-"), " (built earlier)" if large_stats.get("reused") else ""),
        "minutes, not hours (< %.0f s)" % TARGET_BUILD_S, build_s < TARGET_BUILD_S)
    add("log one fraction (3 readings), fxledger record, process start to exit, large db",
        "%s (min %s, max %s); CPU %s" % (ms(fx_med), ms(min(all_fx)), ms(max(all_fx)), ms(med(all_fx_cpu))))
    add("same rows (median %d) inserted by the sqlite3 shell, same durability" % med(
        rec["old"]["rows"] + rec["young"]["rows"]),
        "%s (min %s, max %s); CPU %s" % (ms(sq_med), ms(min(all_sq)), ms(max(all_sq)), ms(med(all_sq_cpu))))
    add("ratio record / sqlite3 shell (medians), wall; CPU beside it",
        "%.2f (CPU %.2f)" % (ratio, cpu_ratio), "<= %.1f (wall)" % TARGET_RECORD_RATIO,
        ratio <= TARGET_RECORD_RATIO)
    add("record with diode %s (%.0f years in service) / diode %s (%.0f years), wall; CPU" % (
        rec["old"]["detector"], rec["old"]["detector_years"], rec["young"]["detector"],
        rec["young"]["detector_years"]),
        "%s / %s = %.2f (CPU %s / %s = %.2f)" % (ms(old_m), ms(young_m), old_m / young_m, ms(old_c),
                                                 ms(young_c), old_c / young_c),
        "<= %.1f (flat in the detector's age)" % TARGET_FLAT, old_m / young_m <= TARGET_FLAT)
    add("record, large db (%d years) / small db (%d years), young diodes, wall; CPU" % (
        args.years, args.small_years),
        "%s / %s = %.2f (CPU %.2f)" % (ms(young_m), ms(small_m), young_m / small_m, young_c / small_c),
        "<= %.1f (flat in the database's size)" % TARGET_FLAT, young_m / small_m <= TARGET_FLAT)
    firsts = rec["old"]["first"] + rec["young"]["first"]
    if firsts:
        add("record, the first fraction on each of %d detectors (reads the rows since the "
            "calibration; the rules' kept state starts), large db" % len(firsts),
            "median %s (min %s, max %s)" % (ms(med(firsts)), ms(min(firsts)), ms(max(firsts))))
    add("record peak memory (its own, GNU time)", "%.1f MiB" % results["peak_mib"]["record"]
        if results["peak_mib"].get("record") else "not measured")
    add("list the open queue (%d items), fxledger queue list" % q["items"],
        "%s (CPU %s)" % (ms(q_med), ms(med(q["cpu"]))), "< %.0f ms" % (TARGET_QUEUE_S * 1000),
        q_med < TARGET_QUEUE_S)
    add("monthly report %s, large db (%d measurements in the month)" % (month, month_rows(large, month)),
        "%s (CPU %s), %s" % (ms(ml), ms(med(mon_l["cpu"])), peak(mon_l)),
        "<= %.0f ms, < %.0f MiB" % (TARGET_MONTH_S * 1000, TARGET_MIB),
        ml <= TARGET_MONTH_S and mem_ok(mon_l))
    add("monthly report %s, small db (%d measurements in the month)" % (month, month_rows(small, month)),
        "%s (CPU %s), %s" % (ms(msm), ms(med(mon_s["cpu"])), peak(mon_s)))
    add("monthly report, large / small db (db sizes %.1fx), wall; CPU" % (size_large / size_small),
        "%.2f (CPU %.2f)" % (ml / msm, med(mon_l["cpu"]) / med(mon_s["cpu"])),
        "<= %.1f (grows with the month, not the db)" % TARGET_GROWTH, ml / msm <= TARGET_GROWTH)
    add("per-patient report %s (%d measurements), large db" % (pat[0], pat[2]),
        "%s (CPU %s), %s" % (ms(pl), ms(med(pat_l["cpu"])), peak(pat_l)),
        "<= %.0f ms, < %.0f MiB" % (TARGET_PATIENT_S * 1000, TARGET_MIB),
        pl <= TARGET_PATIENT_S and mem_ok(pat_l))
    add("per-patient report %s (%d measurements), small db" % (pat_sm[0], pat_sm[2]),
        "%s (CPU %s), %s" % (ms(ps), ms(med(pat_s["cpu"])), peak(pat_s)))
    add("per-patient report, large / small db, wall; CPU",
        "%.2f (CPU %.2f)" % (pl / ps, med(pat_l["cpu"]) / med(pat_s["cpu"])),
        "<= %.1f (grows with the course, not the db)" % TARGET_GROWTH, pl / ps <= TARGET_GROWTH)
    if web:
        add("web: POST /api/v1/record, one client, kept-open connection (%d fractions, 3 readings)"
            % web["serial_n"], "%s (min %s)" % (ms(web["serial_median_s"]), ms(web["serial_min_s"])))
        add("commit floor: the same %d rows per fraction, kept-open SQLite connection, WAL, "
            "synchronous=FULL" % web["floor_rows"], "%s (min %s)" % (ms(web["floor_median_s"]),
                                                                    ms(web["floor_min_s"])))
        add("ratio web record / commit floor (medians)", "%.2f" % (web["serial_median_s"] / web["floor_median_s"]),
            "<= %.0f" % TARGET_WEB_RATIO, web["serial_median_s"] / web["floor_median_s"] <= TARGET_WEB_RATIO)
        add("web: %d concurrent clients x %d fractions, latency median / 95th percentile (inclusive)" % (
            web["clients"], web["fractions"]),
            "%s / %s (max %s; %.0f fractions/s; %d busy retries)" % (
                ms(web["median_s"]), ms(web["p95_s"]), ms(web["max_s"]), web["rate"], web["retries"]),
            "figures (no target set); all stored once, verify passes", web["ok"])
    if net:
        nr, nq = med(net["record"]["young"]["fx"]), med(net["queue"]["times"])
        nd = med(net["record_dept"]["young"]["fx"])
        nm, npt = med(net["month"]["times"]), med(net["patient"]["times"])
        ns = net["stats"]
        add("network database: %d departments x %d years, %d measurements, %.1f GiB" % (
            args.network_departments, args.years, ns["rows"].get("measurements", 0), net["size"] / 2**30),
            "built in %.0f s (bulk %.0f s), verify %s s%s" % (
                ns.get("setup_s", 0) + ns.get("bulk_s", 0), ns.get("bulk_s", 0), ns.get("verify_s", "-"),
                " (built earlier)" if ns.get("reused") else ""))
        add("network: queue list (%d items)" % net["queue"]["items"], ms(nq),
            "< %.0f ms" % (NET_QUEUE_S * 1000), nq < NET_QUEUE_S)
        add("network: monthly report %s" % month, "%s, %s" % (ms(nm), peak(net["month"])),
            "< %.0f ms" % (NET_MONTH_S * 1000), nm < NET_MONTH_S)
        add("network: per-patient report %s / the department's" % net["patient_row"][0],
            "%s / %s = %.2f" % (ms(npt), ms(pl), npt / pl), "<= %.1f (unchanged)" % TARGET_GROWTH,
            npt / pl <= TARGET_GROWTH)
        add("network: record / the department's (young diodes, rounds in turn)", "%s / %s = %.2f" % (
            ms(nr), ms(nd), nr / nd), "<= %.1f (unchanged)" % TARGET_FLAT, nr / nd <= TARGET_FLAT)
    add("database size, large / small", "%.0f MiB / %.0f MiB" % (size_large / 2**20, size_small / 2**20))

    m = results["machine"]
    lines = ["| figure | measured | target | |", "| --- | --- | --- | --- |"]
    lines += ["| %s | %s | %s | %s |" % r for r in rows]
    sec = results["sections"]
    head = [
        "fxledger benchmark, %s (invented data: tests/bench/gen_department.py), scale %s" % (
            dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"), args.scale),
        "machine: %s, %s cores, %s memory; disk %s; Linux %s; SQLite %s (shell) / %s (Python); "
        "fxledger %s build, %s" % (m["cpu"], m["cores"], m["memory"], m["disk"], m["kernel"], m["sqlite"],
                                   m["python_sqlite"], m["build"], m["compiler"]),
        "timings: median of %d runs (reports: %d, large and small db alternating) after one warm-up "
        "run (which measures peak memory under GNU time), whole process spawned with posix_spawn, "
        "files in the page cache" % (args.rounds, rr),
        "load average (1, 5, 15 min) by section, before -> after: %s" % "; ".join(
            "%s %s -> %s" % (k, v["load_before"], v["load_after"]) for k, v in sec.items()),
        "record exit codes seen: %s; large db: %s" % (
            sorted(set(rec["old"]["codes"] + rec["young"]["codes"])),
            large_stats.get("verify", "not verified").replace("\n", "; ")),
        ""]
    text = "\n".join(head + lines)
    print()
    print(text)
    results.update({"record": rec, "record_small": rec_small, "queue": q, "month_large": mon_l,
                    "month_small": mon_s, "patient_large": pat_l, "patient_small": pat_s, "web": web,
                    "network": net, "table": rows, "load_end": load()})
    with open(os.path.join(args.workdir, "results.json"), "w") as f:
        json.dump(results, f, indent=1)
    if args.markdown:
        with open(args.markdown, "w") as f:
            f.write(text + "\n")
    for s in (s_large, s_small):
        s.close()
    missed = [r[0] for r in rows if r[3] == "MISSED"]
    if missed:
        print("\ntargets missed: %s" % "; ".join(missed))
        sys.exit(1)
    print("\nall targets met")


if __name__ == "__main__":
    main()
