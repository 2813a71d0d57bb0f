"""The web console under load (part of make bench; also on its own):

    /usr/bin/python3 tests/bench/web_load.py [build/fxledger-testclock] [CLIENTS] [FRACTIONS] [SERIAL]

Sets up an invented department (one photon diode, 5 % / 8 % levels, one
three-field patient per client and one more) through the test harness,
starts `fxledger serve` on loopback with 4 worker threads, and measures:

1. one client on one kept-open HTTP/1.1 connection posting SERIAL fractions
   one after the other to POST /api/v1/record (three readings each), and
   the commit floor: a kept-open SQLite connection (Python's sqlite3, the
   same SQLite library) with fxledger's durability (WAL, synchronous=FULL,
   foreign keys on) committing exactly the rows each of those posts wrote
   (fraction, measurements, audit rows and their seals, the session's
   activity), one transaction per fraction, on a copy of the database
   taken before the posts;
2. CLIENTS concurrent clients, each logged in with its own browser session
   on its own kept-open connection, posting FRACTIONS fractions each at
   once. A 503 (busy) is retried as the console tells the user to; anything
   else fails the run. Median and 95th-percentile latency of the successful
   posts by Python's statistics module (quantiles, inclusive method).

Afterwards every fraction must be stored exactly once and `fxledger verify`
must pass. All data are invented.
"""
import http.client
import json
import os
import sqlite3
import statistics
import sys
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
sys.path.insert(0, os.path.join(HERE, "..", "web"))


def _imports(binary):
    if binary:
        os.environ["FXLEDGER_BIN"] = os.path.abspath(binary)
    import webfixture
    return webfixture


class KeptClient:
    """A browser on one kept-open HTTP/1.1 connection (webfixture.Client
    opens one per request)."""

    def __init__(self, wf, server):
        self.wf = wf
        self.inner = wf.Client(server)
        self.conn = http.client.HTTPConnection("127.0.0.1", server.port, timeout=60)

    def login(self, login, password):
        self.inner.login(login, password)

    def post_json(self, path, body, csrf):
        h = {"Content-Type": "application/json", "X-CSRF-Token": csrf,
             "Cookie": "; ".join("%s=%s" % kv for kv in self.inner.cookies.items())}
        self.conn.request("POST", path, body=json.dumps(body).encode(), headers=h)
        r = self.conn.getresponse()
        return self.wf.Response(r.status, r.getheaders(), r.read())

    def close(self):
        self.conn.close()


THREADS = 4


def start_server(wf, fx, threads):
    """webfixture.Server with `threads` worker threads and the login rate
    limit raised for the many logins here."""
    return wf.Server(fx, ("--login-rate", "1000"), threads=threads)


def setup(wf, fx, clients, fractions, serial):
    fx.now = "2026-10-01T09:00:00Z"
    fx.ok("user", "add", "ther", "--name", "Invented Therapist", "--role", "therapist")
    fx.ok("user", "add", "phys", "--name", "Invented Physicist", "--role", "physicist")
    fx.ok("machine", "add", "LINAC1")
    fx.ok("machine", "beam", "6X", "--machine", "LINAC1", "--modality", "photon", "--energy", "6", "--dmax", "1.5")
    fx.ok("detector", "add", "D-1", "--label", "Diode 1", "--kind", "photon_diode", "--temp-coeff", "0")
    fx.ok("calib", "add", "D-1", "--machine", "LINAC1", "--beam", "6X", "--point", "entrance",
          "--chamber-dose", "100", "--readings", "10,10,10", "--temp", "20", "--valid-until", "2026-12-31",
          user="phys")
    fx.ok("levels", "set", "default", "--tolerance", "5", "--action", "8", "--effective", "2026-01-01",
          user="phys")
    for i in range(clients + 1):
        mrn = "L-%03d" % i
        n = (serial if i == clients else fractions) + 5
        fx.ok("patient", "add", mrn, "--family", "Load%03d" % i, "--given", "Invented", user="ther")
        plan = dict(wf.PLAN, patient_mrn=mrn, label="PL-" + mrn, fractions=n,
                    fields=[wf.field("AP", 0), wf.field("PA", 180), wf.field("LAT", 90)])
        fx.ok("plan", "import", fx.write("plan-%s.json" % mrn, json.dumps(plan)), user="phys")
    assert fx.login("ther").returncode == 0
    fx.now = "2026-12-20T09:00:00Z"


def day(i):
    t = time.strptime("2026-10-02", "%Y-%m-%d")
    return time.strftime("%Y-%m-%dT09:00:00Z", time.gmtime(time.mktime(t) - time.timezone + i * 86400))


def body_for(wf, i, k):
    # deviations cycle through -3 .. +3 % (within the 5 % tolerance)
    readings = [{"field": f, "point": "entrance", "detector": "D-1",
                 "reading": float(wf.reading_for(((i + k + j) % 7) - 3))}
                for j, f in enumerate(("AP", "PA", "LAT"))]
    return {"mrn": "L-%03d" % i, "fraction": k + 1, "treated_at": day(k), "readings": readings}


def floor_run(db, statements):
    """Commits each list of statements in its own transaction on one
    kept-open connection with fxledger's durability; returns the times."""
    c = sqlite3.connect(db, isolation_level=None)
    c.execute("PRAGMA foreign_keys = ON")
    c.execute("PRAGMA busy_timeout = 5000")
    c.execute("PRAGMA journal_mode = WAL")
    c.execute("PRAGMA synchronous = FULL")
    times = []
    for stmts in statements:
        t0 = time.perf_counter()
        c.execute("BEGIN IMMEDIATE")
        for s in stmts:
            c.execute(s)
        c.execute("COMMIT")
        times.append(time.perf_counter() - t0)
    c.close()
    return times


def measure(binary=None, clients=20, fractions=50, serial=41):
    wf = _imports(binary)
    from benchlib import new_rows_sql, snapshot
    fx = wf.Fxl()
    fx.init()
    setup(wf, fx, clients, fractions, serial)
    server = start_server(wf, fx, THREADS)
    res = {"clients": clients, "fractions": fractions, "serial_n": serial}
    try:
        # 1. one client, one kept-open connection, one fraction after the other
        one = KeptClient(wf, server)
        one.login("ther", fx.passwords["ther"])
        csrf = one.inner.get("/api/v1/me").json()["csrf"]
        floor_db = fx.path("floor.db")
        with sqlite3.connect("file:%s?mode=ro" % fx.db, uri=True) as src, sqlite3.connect(floor_db) as dst:
            src.backup(dst)
        lat, stmts, nrows = [], [], []
        for k in range(serial):
            before = snapshot(fx.db)
            t0 = time.perf_counter()
            r = one.post_json("/api/v1/record", body_for(wf, clients, k), csrf)
            dt_ = time.perf_counter() - t0
            if r.status != 201:
                raise AssertionError("POST /api/v1/record: %d %s" % (r.status, r.text[:300]))
            lines, n = new_rows_sql(fx.db, before)
            stmts.append([ln.rstrip(";") for ln in lines])
            nrows.append(n)
            lat.append(dt_)
        one.close()
        floor = floor_run(floor_db, stmts)
        res.update({"serial_median_s": statistics.median(lat[1:]), "serial_min_s": min(lat[1:]),
                    "floor_median_s": statistics.median(floor[1:]), "floor_min_s": min(floor[1:]),
                    "floor_rows": int(statistics.median(nrows)), "serial_all_s": lat, "floor_all_s": floor})

        # 2. concurrent clients
        lat2, errors, retries = [], [], [0]
        lock = threading.Lock()
        cl = []
        for i in range(clients):
            c = KeptClient(wf, server)
            c.login("ther", fx.passwords["ther"])
            cl.append((c, c.inner.get("/api/v1/me").json()["csrf"]))

        def work(i):
            c, token = cl[i]
            for k in range(fractions):
                body = body_for(wf, i, k)
                while True:
                    t0 = time.perf_counter()
                    try:
                        r = c.post_json("/api/v1/record", body, token)
                    except (OSError, http.client.HTTPException) as e:
                        with lock:
                            errors.append((i, k, "connection", str(e)))
                        return
                    d = time.perf_counter() - t0
                    if r.status == 503:
                        with lock:
                            retries[0] += 1
                        time.sleep(0.2)
                        continue
                    with lock:
                        if r.status == 201:
                            lat2.append(d)
                        else:
                            errors.append((i, k, r.status, r.text[:200]))
                    break

        t0 = time.perf_counter()
        threads = [threading.Thread(target=work, args=(i,)) for i in range(clients)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        wall = time.perf_counter() - t0
        for c, _ in cl:
            c.close()
    finally:
        err = server.stop()

    with sqlite3.connect("file:%s?mode=ro" % fx.db, uri=True) as db:
        n_fr = db.execute("SELECT count(*) FROM fractions").fetchone()[0]
        n_m = db.execute("SELECT count(*) FROM measurements").fetchone()[0]
        dup = db.execute("SELECT count(*) FROM (SELECT plan_id, number FROM fractions GROUP BY plan_id, number "
                         "HAVING count(*) > 1)").fetchone()[0]
    verify = fx.run("verify", user="ther")
    lat2.sort()
    q = statistics.quantiles(lat2, n=20, method="inclusive") if len(lat2) > 1 else [float("nan")] * 19
    expect = clients * fractions + serial
    ok = (not errors and n_fr == expect and n_m == 3 * expect and dup == 0
          and verify.returncode == 0 and "AddressSanitizer" not in err)
    res.update({"posted": len(lat2), "errors": errors[:5], "retries": retries[0], "wall_s": wall,
                "rate": len(lat2) / wall if wall else 0, "median_s": statistics.median(lat2) if lat2 else float("nan"),
                "p95_s": q[18], "max_s": lat2[-1] if lat2 else float("nan"), "stored_fractions": n_fr,
                "stored_measurements": n_m, "duplicates": dup, "verify_exit": verify.returncode,
                "verify": (verify.stdout + verify.stderr).strip(), "ok": ok})
    fx.close()
    return res


def main():
    a = sys.argv[1:]
    res = measure(a[0] if a else None, int(a[1]) if len(a) > 1 else 20, int(a[2]) if len(a) > 2 else 50,
                  int(a[3]) if len(a) > 3 else 41)
    print("one client, kept-open connection: POST /api/v1/record median %.1f ms (min %.1f) over %d fractions"
          % (res["serial_median_s"] * 1000, res["serial_min_s"] * 1000, res["serial_n"]))
    print("commit floor (same %d rows a fraction, kept-open sqlite3, WAL, synchronous=FULL): median %.1f ms; "
          "ratio %.2f" % (res["floor_rows"], res["floor_median_s"] * 1000,
                          res["serial_median_s"] / res["floor_median_s"]))
    print("clients %d x fractions %d (3 readings each), 4 server threads, loopback, kept-open connections"
          % (res["clients"], res["fractions"]))
    print("posted %d, errors %d, busy retries %d, wall %.1f s, %.1f fractions/s" % (
        res["posted"], len(res["errors"]), res["retries"], res["wall_s"], res["rate"]))
    print("latency median %.1f ms, 95th percentile %.1f ms, max %.1f ms" % (
        res["median_s"] * 1000, res["p95_s"] * 1000, res["max_s"] * 1000))
    print("stored fractions %d, measurements %d, duplicate numbers %d; verify exit %d" % (
        res["stored_fractions"], res["stored_measurements"], res["duplicates"], res["verify_exit"]))
    for e in res["errors"]:
        print("error:", e)
    print("web load: %s" % ("PASS" if res["ok"] else "FAIL"))
    return 0 if res["ok"] else 1


if __name__ == "__main__":
    sys.exit(main())
