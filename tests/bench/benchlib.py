"""Helpers of the benchmark (tests/bench/run_bench.py, web_load.py): timed
processes, peak memory, the rows a command wrote (to replay them with the
sqlite3 shell or a kept-open connection), and the machine and its load.
All data the benchmark handles are invented."""
import os
import platform
import shutil
import subprocess
import tempfile
import time

GNU_TIME = "/usr/bin/time"


def spawn_timed(argv, env=None, stdin_path=None):
    """Runs argv with os.posix_spawn; returns (wall s, CPU s user+system,
    exit code, output). Wall time from just before the spawn to the reaped
    exit (wait4); CPU time from the child's rusage."""
    out = tempfile.TemporaryFile()
    actions = [(os.POSIX_SPAWN_DUP2, out.fileno(), 1), (os.POSIX_SPAWN_DUP2, out.fileno(), 2)]
    if stdin_path:
        actions.insert(0, (os.POSIX_SPAWN_OPEN, 0, stdin_path, os.O_RDONLY, 0))
    else:
        actions.insert(0, (os.POSIX_SPAWN_OPEN, 0, os.devnull, os.O_RDONLY, 0))
    path = argv[0] if os.sep in argv[0] else shutil.which(argv[0])
    t0 = time.perf_counter()
    pid = os.posix_spawn(path, argv, env if env is not None else os.environ, file_actions=actions)
    _, status, ru = os.wait4(pid, 0)
    t1 = time.perf_counter()
    out.seek(0)
    text = out.read().decode("utf-8", "replace")
    out.close()
    return t1 - t0, ru.ru_utime + ru.ru_stime, os.waitstatus_to_exitcode(status), text


def peak_mib(argv, env=None, stdin_path=None):
    """The program's own peak resident set (MiB) by GNU time's %M: GNU time
    is a small C program, so its child's high-water mark is the program's,
    not a copy of this Python process (wait4's ru_maxrss of a child spawned
    from Python reports Python's own mark: the kernel carries it over exec).
    Returns (MiB, exit code, output), or (None, ...) without GNU time."""
    if not os.access(GNU_TIME, os.X_OK):
        return None, None, ""
    fd, rep = tempfile.mkstemp(prefix="fxl-time-")
    os.close(fd)
    try:
        _, _, code, text = spawn_timed([GNU_TIME, "-f", "%M", "-o", rep] + list(argv), env, stdin_path)
        with open(rep) as f:
            lines = [ln for ln in f.read().split() if ln.isdigit()]
        return (int(lines[-1]) / 1024.0 if lines else None), code, text
    finally:
        os.remove(rep)


# ---- the rows a command wrote ------------------------------------------------------

# tables whose rows change in place during a logging command (a session's
# last activity, the rules' kept state of sql/015); replayed as UPDATE
# statements, or INSERTs for new rows
MUTABLE = ("auth_sessions", "auth_lockout", "dose_since_calibration", "drift_charts")
FK_ORDER = ["patients", "plans", "fields", "fractions", "measurements", "review_items",
            "review_events", "signatures", "audit_log"]


def literal(v):
    if v is None:
        return "NULL"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, bytes):
        return "X'%s'" % v.hex()
    return "'" + str(v).replace("'", "''") + "'"


def snapshot(db):
    """What is needed to find the rows written after this moment."""
    import sqlite3
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    tables = [r[0] for r in c.execute(
        "SELECT m.name FROM sqlite_schema m WHERE m.type = 'table' AND EXISTS (SELECT 1 FROM "
        "pragma_table_info(m.name) p WHERE p.pk = 1 AND p.name = 'id' AND upper(p.type) = 'INTEGER')")]
    snap = {"ids": {t: c.execute('SELECT coalesce(max(id), 0) FROM "%s"' % t).fetchone()[0]
                    for t in tables},
            "mutable": {}}
    for t in MUTABLE:
        try:
            snap["mutable"][t] = {r[0]: r for r in c.execute('SELECT rowid, * FROM "%s"' % t)}
        except sqlite3.OperationalError:
            pass
    c.close()
    return snap


def new_rows_sql(db, before):
    """SQL statements that write, on an identical copy, every row written
    since `before`: new rows of the id tables and their row seals as
    INSERTs, rows changed in place (a session's activity) as UPDATEs.
    Returns (statements, number of rows)."""
    import sqlite3
    c = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    ids = before["ids"]
    tables = sorted(ids, key=lambda t: (FK_ORDER.index(t) if t in FK_ORDER else -1, t))
    lines, n = [], 0
    for t in tables:
        cur = c.execute('SELECT * FROM "%s" WHERE id > ? ORDER BY id' % t, (ids[t],))
        cols = [d[0] for d in cur.description]
        for row in cur:
            lines.append("INSERT INTO %s (%s) VALUES (%s);" % (
                t, ", ".join(cols), ", ".join(literal(v) for v in row)))
            n += 1
    if "audit_log" in ids:
        try:
            cur = c.execute("SELECT * FROM row_seals WHERE audit_id > ? ORDER BY audit_id, tbl, row_id",
                            (ids["audit_log"],))
            cols = [d[0] for d in cur.description]
            for row in cur:
                lines.append("INSERT INTO row_seals (%s) VALUES (%s);" % (
                    ", ".join(cols), ", ".join(literal(v) for v in row)))
                n += 1
        except sqlite3.OperationalError:
            pass
    for t, old in before["mutable"].items():
        cur = c.execute('SELECT rowid, * FROM "%s"' % t)
        cols = [d[0] for d in cur.description][1:]
        for row in cur:
            if old.get(row[0]) == row:
                continue
            if row[0] in old:
                sets = ", ".join("%s = %s" % (col, literal(v)) for col, v in zip(cols, row[1:])
                                 if old[row[0]][1 + cols.index(col)] != v)
                lines.append("UPDATE %s SET %s WHERE rowid = %d;" % (t, sets, row[0]))
            else:
                lines.append("INSERT INTO %s (%s) VALUES (%s);" % (
                    t, ", ".join(cols), ", ".join(literal(v) for v in row[1:])))
            n += 1
    c.close()
    return lines, n


def copy_db(src, dst):
    """A copy of a database that no process is writing: the file and its WAL."""
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(dst + suffix):
            os.remove(dst + suffix)
    shutil.copyfile(src, dst)
    if os.path.exists(src + "-wal"):
        shutil.copyfile(src + "-wal", dst + "-wal")
    return dst


def read_through(path):
    """Reads a file once from start to end, so that its pages are in the
    page cache before anything on it is timed (the benchmark's premise)."""
    buf = bytearray(8 << 20)
    with open(path, "rb", buffering=0) as f:
        while f.readinto(buf):
            pass


# ---- the machine ---------------------------------------------------------------------

def machine(workdir, build_dir):
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
        disk += ", rotational=%s" % rot
    build_type = sh("grep -m1 '^CMAKE_BUILD_TYPE:' %s/CMakeCache.txt | cut -d= -f2" % build_dir)
    cflags = sh("grep -m1 '^CMAKE_C_FLAGS_%s:' %s/CMakeCache.txt | cut -d= -f2" % (
        build_type.upper() or "NONE", build_dir)) if build_type else ""
    return {
        "cpu": cpu or platform.processor(),
        "cores": os.cpu_count(),
        "memory": mem,
        "disk": disk,
        "kernel": platform.release(),
        "sqlite": sh("sqlite3 --version | cut -d' ' -f1"),
        "python_sqlite": __import__("sqlite3").sqlite_version,
        "build": ("%s (%s)" % (build_type, cflags)) if build_type else "unknown",
        "compiler": sh("cc --version | head -1"),
        "python": platform.python_version(),
    }


def load():
    return [round(x, 2) for x in os.getloadavg()]
