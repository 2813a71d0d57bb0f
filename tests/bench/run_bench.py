#!/usr/bin/python3
"""fxledger's performance benchmark (docs/performance.md). Run on demand:

    make bench                    (builds, then runs this script)
    tests/bench/run_bench.py --fxledger build/fxledger-testclock [--workdir DIR]

Builds (or reuses) two synthetic databases with tests/bench/gen_department.py
- INVENTED data only - a large one (20 years of a busy department) and a
small one (the last 2 years of the same department, so the same months hold
the same number of measurements), and prints, in one run on this machine:

  - the time to build the large database;
  - the time to log one fraction with 'fxledger record' from process start
    to exit on the large database, beside the time the sqlite3 shell takes to
    insert the very same rows with the same durability settings (WAL,
    synchronous=FULL, foreign keys on), and their ratio;
  - the time to list the open review queue;
  - the time and peak memory to write one monthly and one per-patient report,
    on the large and on the small database;
  - the size of both databases.

Each figure is printed with its target; the exit status is 1 when a target
is missed. Every timing is the wall time of a whole process (fork to exit)
measured here, the median of several runs after one warm-up run, with the
database files in the page cache. Peak memory is the child's maximum
resident set size from wait4().
"""
import argparse
import datetime as dt
import hashlib
import json
import os
import platform
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
GEN = os.path.join(HERE, "gen_department.py")

TARGET_RECORD_RATIO = 2.0      # logging within 2x the bare sqlite3 insert
TARGET_QUEUE_S = 0.050         # queue listing under 50 ms
TARGET_MONTH_S = 1.0           # monthly report under 1 s
TARGET_MONTH_MIB = 64.0        # ... with peak memory under 64 MiB
TARGET_GROWTH = 1.5            # month on the large db within 1.5x the small db's
TARGET_BUILD_S = 600.0         # the large database in minutes, not hours


def run_timed(argv, env=None, stdin=None, cpu=None):
    """Runs a process; returns (seconds, peak RSS in MiB, exit code, stdout);
    appends its CPU time (user + system, seconds) to the list `cpu` if given."""
    out = tempfile.TemporaryFile()
    t0 = time.perf_counter()
    p = subprocess.Popen(argv, env=env, stdin=stdin, stdout=out, stderr=subprocess.STDOUT)
    _, status, ru = os.wait4(p.pid, 0)
    t1 = time.perf_counter()
    p.returncode = os.waitstatus_to_exitcode(status)
    if cpu is not None:
        cpu.append(ru.ru_utime + ru.ru_stime)
    out.seek(0)
    text = out.read().decode("utf-8", "replace")
    out.close()
    return t1 - t0, ru.ru_maxrss / 1024.0, p.returncode, text


def fx_env(db, user, now=None):
    env = dict(os.environ, FXLEDGER_DB=db, FXLEDGER_USER=user, NO_COLOR="1")
    env.pop("FXLEDGER_NOW", None)
    if now:
        env["FXLEDGER_NOW"] = now
    return env


def file_sha(path):
    h = hashlib.sha256()
    with open(path, "rb") as f:
        h.update(f.read())
    return h.hexdigest()[:16]


def mib(n):
    return n / 1048576.0


# ---- databases ------------------------------------------------------------------

def ensure_db(args, name, years):
    """Generates <workdir>/<name>.db unless one built with the same generator,
    parameters and fxledger schema exists; returns (path, stats)."""
    path = os.path.join(args.workdir, name + ".db")
    stamp_path = path + ".stamp.json"
    version = subprocess.run([args.fxledger, "--version"], capture_output=True, text=True).stdout.strip()
    stamp = {"generator": file_sha(GEN), "years": years, "per_day": args.per_day,
             "end": args.end, "seed": args.seed, "fxledger": version,
             "schema_files": sorted(os.listdir(os.path.join(HERE, "..", "..", "sql")))}
    if not args.regenerate and os.path.exists(stamp_path) and os.path.exists(path):
        with open(stamp_path) as f:
            old = json.load(f)
        if old.get("stamp") == stamp:
            old["stats"]["reused"] = True
            return path, old["stats"]
    print("generating %s (%d years of invented data) ..." % (path, years), flush=True)
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, GEN, "--fxledger", args.fxledger, "--db", path,
                        "--years", str(years), "--end", args.end, "--per-day", str(args.per_day),
                        "--seed", str(args.seed), "--quiet"] + (["--verify"] if args.verify else []),
                       capture_output=True, text=True)
    if r.returncode != 0:
        sys.exit("run_bench: generating %s failed:\n%s%s" % (path, r.stdout, r.stderr))
    stats = json.loads(r.stdout)
    stats["wall_s"] = round(time.perf_counter() - t0, 1)
    stats["reused"] = False
    with open(stamp_path, "w") as f:
        json.dump({"stamp": stamp, "stats": stats}, f, indent=1)
    return path, stats


def working_copy(src, dst):
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(dst + suffix):
            os.remove(dst + suffix)
    shutil.copyfile(src, dst)
    return dst


# ---- logging one fraction against the sqlite3 shell ------------------------------

def table_ids(db):
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    tables = [r[0] for r in c.execute(
        "SELECT name FROM sqlite_schema WHERE type = 'table' AND sql LIKE '%id %INTEGER PRIMARY KEY%'")]
    ids = {t: c.execute("SELECT coalesce(max(id), 0) FROM \"%s\"" % t).fetchone()[0] for t in tables}
    c.close()
    return ids


def literal(v):
    if v is None:
        return "NULL"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    return "'" + str(v).replace("'", "''") + "'"


FK_ORDER = ["patients", "plans", "fields", "fractions", "measurements", "review_items",
            "review_events", "audit_log"]


def new_rows_sql(db, before):
    """INSERT statements for every row added since `before` (table -> max id)."""
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    tables = sorted(before, key=lambda t: (FK_ORDER.index(t) if t in FK_ORDER else -1, t))
    lines, n = [], 0
    for t in tables:
        cur = c.execute("SELECT * FROM \"%s\" WHERE id > ? ORDER BY id" % t, (before[t],))
        cols = [d[0] for d in cur.description]
        for row in cur:
            lines.append("INSERT INTO %s (%s) VALUES (%s);" % (
                t, ", ".join(cols), ", ".join(literal(v) for v in row)))
            n += 1
    c.close()
    return lines, n


def bench_record(args, db, twin, targets, rounds):
    """Logs `rounds` fractions with fxledger on db, and inserts the same rows
    with the sqlite3 shell on twin (an identical copy); returns timings."""
    courses = targets["courses"]
    day = targets["next_day"]
    fx_times, sq_times, rows, codes, fx_cpu, sq_cpu = [], [], [], [], [], []
    for i in range(rounds + 1):                  # round 0 warms up, untimed
        c = courses[i % len(courses)]
        if c["next_fraction"] + i // len(courses) > c["fractions"]:
            continue                             # that course is finished
        now = "%sT%02d:%02d:00Z" % (day, 8 + (i // 60), i % 60)
        argv = [args.fxledger, "record", "--patient", c["mrn"]]
        for f in c["fields"]:
            argv += ["--field", f["field"], "--detector", f["detector"], "--reading",
                     str(f["reading"]), "--temp", str(f["temp_c"])]
        before = table_ids(db)
        t_fx, _, code, out = run_timed(argv, env=fx_env(db, "ther01", now), cpu=fx_cpu)
        if code not in (0, 10, 11, 12):
            sys.exit("run_bench: fxledger record failed (%d):\n%s" % (code, out))
        lines, n = new_rows_sql(db, before)
        script = os.path.join(args.workdir, "insert.sql")
        with open(script, "w", encoding="utf-8") as f:
            # the durability settings fxledger's connections use (store/db.c)
            f.write("PRAGMA foreign_keys = ON;\nPRAGMA busy_timeout = 5000;\n"
                    "PRAGMA journal_mode = WAL;\nPRAGMA synchronous = FULL;\n"
                    "BEGIN IMMEDIATE;\n%s\nCOMMIT;\n" % "\n".join(lines))
        with open(script, "rb") as stdin:
            t_sq, _, scode, sout = run_timed(["sqlite3", "-batch", "-bail", twin], stdin=stdin,
                                             cpu=sq_cpu)
        if scode != 0:
            sys.exit("run_bench: the sqlite3 shell failed (%d):\n%s" % (scode, sout))
        if i > 0:
            fx_times.append(t_fx)
            sq_times.append(t_sq)
            rows.append(n)
            codes.append(code)
    return {"fx": fx_times, "sq": sq_times, "rows": rows, "codes": codes,
            "fx_cpu": fx_cpu[1:], "sq_cpu": sq_cpu[1:]}


# ---- listings and reports ------------------------------------------------------------

def bench_queue(args, db, now, rounds):
    times = []
    for i in range(rounds + 1):
        t, _, code, out = run_timed([args.fxledger, "queue", "list"], env=fx_env(db, "phys1", now))
        if code != 0:
            sys.exit("run_bench: queue list failed (%d):\n%s" % (code, out))
        if i > 0:
            times.append(t)
    r = subprocess.run([args.fxledger, "--json", "queue", "list"], env=fx_env(db, "phys1", now),
                       capture_output=True, text=True)
    doc = json.loads(r.stdout)
    items = doc["items"] if isinstance(doc, dict) else doc
    return {"times": times, "items": len(items)}


def bench_reports(args, kind, jobs, rounds):
    """Times `fxledger report KIND WHAT` on each (db, what, out) of jobs,
    alternating between them round by round so that both see the same load
    on the machine; returns one result per job."""
    res = [{"times": [], "peaks": []} for _ in jobs]
    for i in range(rounds + 1):
        for (db, what, out_pdf), r in zip(jobs, res):
            if os.path.exists(out_pdf):
                os.remove(out_pdf)
            t, peak, code, out = run_timed([args.fxledger, "report", kind, what, "--out", out_pdf,
                                            "--generated-at", "2026-01-05T07:00:00Z"],
                                           env=fx_env(db, "audit1"))
            if code != 0:
                sys.exit("run_bench: report %s %s failed (%d):\n%s" % (kind, what, code, out))
            if i > 0:
                r["times"].append(t)
                r["peaks"].append(peak)
    for (db, what, out_pdf), r in zip(jobs, res):
        r["peak_mib"] = max(r.pop("peaks"))
        r["pdf_bytes"] = os.path.getsize(out_pdf)
        print("  report %s %s on %s: median %s, peak %.1f MiB" % (
            kind, what, os.path.basename(db), ms(statistics.median(r["times"])), r["peak_mib"]),
            flush=True)
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


# ---- the machine --------------------------------------------------------------------

def machine(workdir):
    def sh(cmd):
        r = subprocess.run(cmd, shell=True, capture_output=True, text=True)
        return r.stdout.strip()
    cpu = sh("grep -m1 'model name' /proc/cpuinfo | cut -d: -f2").strip()
    mem = sh("free -h | awk '/^Mem:/ {print $2}'")
    df = sh("df -h --output=source,fstype,size,avail %s | tail -1" % workdir).split()
    dev = os.path.basename(df[0]) if df else ""
    block = dev.rstrip("0123456789") if not dev.startswith("nvme") else dev.split("p")[0]
    rot = sh("cat /sys/block/%s/queue/rotational 2>/dev/null" % block)
    disk = "%s %s, %s, %s free" % (df[0], df[1], df[2], df[3]) if len(df) == 4 else "unknown"
    if block.startswith("vd"):
        disk += ", virtio block device"
    if rot:
        disk += ", kernel flag rotational=%s" % rot
    return {
        "cpu": cpu or platform.processor(),
        "cores": os.cpu_count(),
        "memory": mem,
        "disk": disk,
        "kernel": platform.release(),
        "sqlite": sh("sqlite3 --version | cut -d' ' -f1"),
        "python": platform.python_version(),
    }


# ---- output ---------------------------------------------------------------------------

def ms(s):
    return "%.1f ms" % (s * 1000)


def main():
    ap = argparse.ArgumentParser(description="fxledger performance benchmark (invented data)")
    ap.add_argument("--fxledger", default=os.path.join(HERE, "..", "..", "build", "fxledger"))
    ap.add_argument("--workdir", default=os.path.join(tempfile.gettempdir(), "fxledger-bench"))
    ap.add_argument("--years", type=int, default=20, help="years in the large database")
    ap.add_argument("--small-years", type=int, default=2, help="years in the small database")
    ap.add_argument("--per-day", type=int, default=40)
    ap.add_argument("--end", default="2026-01-01")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--rounds", type=int, default=21, help="timed runs of each command")
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
    need_gib = 0.05 * args.years * 3 + 1
    if free_gib < need_gib:
        sys.exit("run_bench: %s has %.1f GiB free; about %.0f GiB are needed" % (
            args.workdir, free_gib, need_gib))

    mach = machine(args.workdir)
    large_gen, large_stats = ensure_db(args, "large-%dy" % args.years, args.years)
    small_gen, small_stats = ensure_db(args, "small-%dy" % args.small_years, args.small_years)
    with open(large_gen + ".targets.json") as f:
        targets = json.load(f)
    end = dt.date.fromisoformat(args.end)
    last = end - dt.timedelta(days=1)
    month = "%04d-%02d" % (last.year, last.month)
    queue_now = "%sT18:00:00Z" % targets["next_day"]
    results = {"machine": mach, "large": large_stats, "small": small_stats}

    print("working copies ...", flush=True)
    large = working_copy(large_gen, os.path.join(args.workdir, "run-large.db"))
    twin = working_copy(large_gen, os.path.join(args.workdir, "run-large-twin.db"))
    small = working_copy(small_gen, os.path.join(args.workdir, "run-small.db"))
    size_large, size_small = os.path.getsize(large), os.path.getsize(small)

    load_start = os.getloadavg()
    print("logging fractions ...", flush=True)
    rec = bench_record(args, large, twin, targets, args.rounds)
    print("  record median %s, sqlite3 shell median %s" % (ms(statistics.median(rec["fx"])),
                                                         ms(statistics.median(rec["sq"]))), flush=True)
    print("queue ...", flush=True)
    q = bench_queue(args, large, queue_now, args.rounds)
    print("  queue list median %s (%d items)" % (ms(statistics.median(q["times"])), q["items"]), flush=True)
    print("reports ...", flush=True)
    rr = max(3, args.rounds // 3)
    mon_l, mon_s = bench_reports(args, "month", [
        (large, month, os.path.join(args.workdir, "month-large.pdf")),
        (small, month, os.path.join(args.workdir, "month-small.pdf"))], rr)
    prev_month = "%04d-%02d" % (last.year, last.month - 1) if last.month > 1 else "%04d-12" % (last.year - 1)
    pat = report_patient(large, prev_month)
    pat_sm = report_patient(small, prev_month)
    pat_l, pat_s = bench_reports(args, "patient", [
        (large, pat[0], os.path.join(args.workdir, "patient-large.pdf")),
        (small, pat_sm[0], os.path.join(args.workdir, "patient-small.pdf"))], rr)

    fx_med, sq_med = statistics.median(rec["fx"]), statistics.median(rec["sq"])
    ratio = fx_med / sq_med
    q_med = statistics.median(q["times"])
    ml, msm = statistics.median(mon_l["times"]), statistics.median(mon_s["times"])
    pl, ps = statistics.median(pat_l["times"]), statistics.median(pat_s["times"])
    build_s = large_stats.get("setup_s", 0) + large_stats.get("bulk_s", 0)

    rows = []  # (figure, measured, target, met)

    def add(fig, val, target, met):
        rows.append((fig, val, target, "met" if met else "MISSED" if met is not None else ""))

    add("build the large database (%d years, %d measurements)" % (
        args.years, large_stats["rows"].get("measurements", 0)),
        "%.0f s (%.0f s set-up with fxledger, %.0f s bulk SQL; then verify %s s)%s" % (
            build_s, large_stats.get("setup_s", 0), large_stats.get("bulk_s", 0),
            large_stats.get("verify_s", "-"), " (built earlier)" if large_stats.get("reused") else ""),
        "minutes, not hours (< %.0f s)" % TARGET_BUILD_S, build_s < TARGET_BUILD_S)
    add("log one fraction (3 readings), fxledger record, process start to exit",
        "%s (min %s, max %s)" % (ms(fx_med), ms(min(rec["fx"])), ms(max(rec["fx"]))), "", None)
    add("same %d rows inserted by the sqlite3 shell, same durability" % statistics.median(rec["rows"]),
        "%s (min %s, max %s)" % (ms(sq_med), ms(min(rec["sq"])), ms(max(rec["sq"]))), "", None)
    add("ratio record / sqlite3 shell (medians)", "%.2f" % ratio,
        "<= %.1f" % TARGET_RECORD_RATIO, ratio <= TARGET_RECORD_RATIO)
    add("CPU time (user + system) of the same runs: record / sqlite3 shell",
        "%s / %s" % (ms(statistics.median(rec["fx_cpu"])), ms(statistics.median(rec["sq_cpu"]))),
        "(shown for reading the wall times on a busy machine)", None)
    add("list the open queue (%d items), fxledger queue list" % q["items"], ms(q_med),
        "< %.0f ms" % (TARGET_QUEUE_S * 1000), q_med < TARGET_QUEUE_S)
    add("monthly report %s, large db (%d measurements in the month)" % (month, month_rows(large, month)),
        "%s, peak %.1f MiB" % (ms(ml), mon_l["peak_mib"]),
        "< %.0f ms, < %.0f MiB" % (TARGET_MONTH_S * 1000, TARGET_MONTH_MIB),
        ml < TARGET_MONTH_S and mon_l["peak_mib"] < TARGET_MONTH_MIB)
    add("monthly report %s, small db (%d measurements in the month)" % (month, month_rows(small, month)),
        "%s, peak %.1f MiB" % (ms(msm), mon_s["peak_mib"]),
        "< %.0f ms, < %.0f MiB" % (TARGET_MONTH_S * 1000, TARGET_MONTH_MIB),
        msm < TARGET_MONTH_S and mon_s["peak_mib"] < TARGET_MONTH_MIB)
    add("monthly report time, large / small db (db sizes %.1fx)" % (size_large / size_small),
        "%.2f" % (ml / msm), "<= %.1f (grows with the month, not the db)" % TARGET_GROWTH,
        ml / msm <= TARGET_GROWTH)
    same = "as the monthly: < %.0f ms, < %.0f MiB" % (TARGET_MONTH_S * 1000, TARGET_MONTH_MIB)
    add("per-patient report %s (%d measurements), large db" % (pat[0], pat[2]),
        "%s, peak %.1f MiB" % (ms(pl), pat_l["peak_mib"]), same,
        pl < TARGET_MONTH_S and pat_l["peak_mib"] < TARGET_MONTH_MIB)
    add("per-patient report %s (%d measurements), small db" % (pat_sm[0], pat_sm[2]),
        "%s, peak %.1f MiB" % (ms(ps), pat_s["peak_mib"]), same,
        ps < TARGET_MONTH_S and pat_s["peak_mib"] < TARGET_MONTH_MIB)
    add("per-patient report time, large / small db", "%.2f" % (pl / ps),
        "<= %.1f (grows with the course, not the db)" % TARGET_GROWTH, pl / ps <= TARGET_GROWTH)
    add("database size, large", "%.0f MiB" % mib(size_large), "", None)
    add("database size, small", "%.0f MiB" % mib(size_small), "", None)

    lines = ["| figure | measured | target | |", "| --- | --- | --- | --- |"]
    lines += ["| %s | %s | %s | %s |" % r for r in rows]
    head = [
        "fxledger benchmark, %s (invented data: tests/bench/gen_department.py)" % dt.datetime.now(
            dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "machine: %s, %s cores, %s memory; disk %s; Linux %s; SQLite %s" % (
            mach["cpu"], mach["cores"], mach["memory"], mach["disk"], mach["kernel"], mach["sqlite"]),
        "timings: median of %d runs (reports: %d, large and small db alternating) after one "
        "warm-up run, whole process, files in the page cache" % (args.rounds, rr),
        "load average (1 min) %.1f at the start of the timings, %.1f at the end (%d cores); "
        "other processes on the machine widen the spread" % (load_start[0], os.getloadavg()[0],
                                                             mach["cores"]),
        "record exit codes seen: %s; large db: %s" % (sorted(set(rec["codes"])),
                                                     large_stats.get("verify", "not verified")),
        ""]
    text = "\n".join(head + lines)
    print()
    print(text)
    results.update({"record": rec, "queue": q, "month_large": mon_l, "month_small": mon_s,
                    "patient_large": pat_l, "patient_small": pat_s, "table": rows})
    with open(os.path.join(args.workdir, "results.json"), "w") as f:
        json.dump(results, f, indent=1)
    if args.markdown:
        with open(args.markdown, "w") as f:
            f.write(text + "\n")
    missed = [r[0] for r in rows if r[3] == "MISSED"]
    if missed:
        print("\ntargets missed: %s" % "; ".join(missed))
        sys.exit(1)
    print("\nall targets met")


if __name__ == "__main__":
    main()
