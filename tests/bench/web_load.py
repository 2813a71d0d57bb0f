"""Load run of the web console (not part of make test): CLIENTS concurrent
clients, each logged in with its own browser session, post FRACTIONS
fractions each (three readings per fraction, one patient per client) to
POST /api/v1/record of `fxledger serve` over loopback. A 503 (busy) is
retried as the console tells the user to; anything else fails the run.
Afterwards every fraction must be stored exactly once and `fxledger verify`
must pass. Prints the median and 95th-percentile latency of the successful
posts (Python's statistics module). All data are invented.

    /usr/bin/python3 tests/bench/web_load.py [build/fxledger-testclock] [CLIENTS] [FRACTIONS]
"""
import json
import os
import sqlite3
import statistics
import sys
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "web"))
if len(sys.argv) > 1:
    os.environ["FXLEDGER_BIN"] = os.path.abspath(sys.argv[1])

from webfixture import PLAN, Client, Fxl, Server, field, reading_for  # noqa: E402

CLIENTS = int(sys.argv[2]) if len(sys.argv) > 2 else 20
FRACTIONS = int(sys.argv[3]) if len(sys.argv) > 3 else 50


def setup(fx):
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
    for i in range(CLIENTS):
        mrn = "L-%03d" % i
        fx.ok("patient", "add", mrn, "--family", "Load%03d" % i, "--given", "Invented", user="ther")
        plan = dict(PLAN, patient_mrn=mrn, label="PL-" + mrn, fractions=FRACTIONS + 5,
                    fields=[field("AP", 0), field("PA", 180), field("LAT", 90)])
        fx.ok("plan", "import", fx.write("plan-%s.json" % mrn, json.dumps(plan)), user="phys")
    assert fx.login("ther").returncode == 0
    fx.now = "2026-12-20T09:00:00Z"


def day(i):
    t = time.strptime("2026-10-02", "%Y-%m-%d")
    return time.strftime("%Y-%m-%dT09:00:00Z", time.gmtime(time.mktime(t) - time.timezone + i * 86400))


def main():
    fx = Fxl()
    fx.init()
    setup(fx)
    server = Server(fx, ["--login-rate", "1000", "--threads", "4"])
    lat, errors, retries = [], [], [0]
    lock = threading.Lock()
    clients = []
    for i in range(CLIENTS):
        c = Client(server)
        c.login("ther", fx.passwords["ther"])
        clients.append((c, c.get("/api/v1/me").json()["csrf"]))

    def work(i):
        c, csrf = clients[i]
        for k in range(FRACTIONS):
            # deviations cycle through -3 .. +3 % (within the 5 % tolerance)
            readings = [{"field": f, "point": "entrance", "detector": "D-1",
                         "reading": float(reading_for(((i + k + j) % 7) - 3))}
                        for j, f in enumerate(("AP", "PA", "LAT"))]
            body = {"mrn": "L-%03d" % i, "fraction": k + 1, "treated_at": day(k), "readings": readings}
            while True:
                t0 = time.perf_counter()
                r = c.request("POST", "/api/v1/record", headers={"X-CSRF-Token": csrf}, json_body=body)
                dt = time.perf_counter() - t0
                if r.status == 503:
                    with lock:
                        retries[0] += 1
                    time.sleep(0.2)
                    continue
                with lock:
                    if r.status == 201:
                        lat.append(dt)
                    else:
                        errors.append((i, k, r.status, r.text[:200]))
                break

    t0 = time.perf_counter()
    threads = [threading.Thread(target=work, args=(i,)) for i in range(CLIENTS)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    wall = time.perf_counter() - t0
    err = server.stop()

    with sqlite3.connect("file:%s?mode=ro" % fx.db, uri=True) as db:
        n_fr = db.execute("SELECT count(*) FROM fractions").fetchone()[0]
        n_m = db.execute("SELECT count(*) FROM measurements").fetchone()[0]
        dup = db.execute("SELECT count(*) FROM (SELECT plan_id, number FROM fractions GROUP BY plan_id, number "
                         "HAVING count(*) > 1)").fetchone()[0]
    verify = fx.run("verify", user="ther")
    lat.sort()
    q = statistics.quantiles(lat, n=20, method="inclusive") if len(lat) > 1 else [float("nan")] * 19
    print("clients %d x fractions %d (3 readings each), 4 server threads, loopback" % (CLIENTS, FRACTIONS))
    print("posted %d, errors %d, busy retries %d, wall %.1f s, %.1f fractions/s" % (
        len(lat), len(errors), retries[0], wall, len(lat) / wall))
    print("latency median %.1f ms, 95th percentile %.1f ms, max %.1f ms" % (
        statistics.median(lat) * 1000, q[18] * 1000, lat[-1] * 1000))
    print("stored fractions %d, measurements %d, duplicate numbers %d; verify exit %d" % (
        n_fr, n_m, dup, verify.returncode))
    ok = (not errors and n_fr == CLIENTS * FRACTIONS and n_m == 3 * CLIENTS * FRACTIONS and dup == 0
          and verify.returncode == 0 and "AddressSanitizer" not in err)
    for e in errors[:5]:
        print("error:", e)
    fx.close()
    print("web load: %s" % ("PASS" if ok else "FAIL"))
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
