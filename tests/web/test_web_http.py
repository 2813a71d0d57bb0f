"""HTTP tests of the web console (fxledger serve) with Python's standard
library: every route refuses without a session and with the wrong role, a
POST without a valid CSRF token is refused, nothing is written on a refused
request, a hostile patient name and a comment with a right-to-left override
are shown escaped on every page, the security headers and cookie
attributes, signatures, size limits, error pages without internals, and the
JSON API with an API token. The route list is read from src/web/routes.c so
that a new route is covered by the refusal tests without editing them.
Data invented (webfixture.py)."""
import os
import re
import sqlite3
import subprocess
import sys
import unittest
import urllib.parse

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from webfixture import (BIDI_COMMENT, Client, Fxl, Server, department, hostile_escaped,  # noqa: E402
                        reading_for)
from fxlcli import SRC  # noqa: E402

ROLE_OF = {"ther": "therapist", "phys": "physicist", "aud": "auditor", "admin": "admin"}
# The role masks of src/web/routes.c, by macro name.
MASKS = {"ANY": {"therapist", "physicist", "auditor", "admin"},
         "CLIN": {"therapist", "physicist", "admin"},
         "PHYS": {"physicist", "admin"},
         "AUDIT": {"auditor", "physicist", "admin"},
         "ADMIN": {"admin"}}


def routes():
    """(method, path, roles, flags) of every route in the table."""
    with open(os.path.join(SRC, "src", "web", "routes.c"), encoding="utf-8") as f:
        text = f.read()
    out = []
    for m in re.finditer(r'\{"(GET|POST)", "([^"]+)", (\w+), (\w+), ([^}]+)\}', text):
        method, path, _handler, roles, flags = m.groups()
        out.append((method, path, MASKS.get(roles, set()), flags))
    return out


class ConsoleHttp(unittest.TestCase):
    """One department, one server, a browser per user (logged in once)."""

    @classmethod
    def setUpClass(cls):
        cls.fx = fx = Fxl().init()
        department(fx)
        for u in ("ther", "phys", "aud"):
            r = fx.login(u)
            assert r.returncode == 0, r.stderr
        with sqlite3.connect("file:%s?mode=ro" % fx.db, uri=True) as db:
            cls.last_cli_row = db.execute("SELECT max(id) FROM audit_log").fetchone()[0]
        cls.server = Server(fx, ["--login-rate", "100"])
        cls.c = {}
        for u in ("ther", "phys", "aud", "admin"):
            cls.c[u] = Client(cls.server)
            cls.c[u].login(u, fx.passwords[u])
        # One fraction with an action-level result (a hold and a review
        # item) logged over HTTP by the therapist, for the pages below.
        t = cls.c["ther"]
        t.get("/worklist")
        r = t.post("/fraction/begin", {"mrn": "P-1", "plan": "PL-P-1"})
        assert r.status == 303, r.text
        cls.fraction = re.search(r"id=(\d+)", r.header("Location")).group(1)
        t.get(r.header("Location"))
        for name, dev in (("AP", 1.0), ("PA", 12.0), ("LAT", -2.0)):
            r = t.post("/fraction/field", {"id": cls.fraction, "field": name, "point": "entrance",
                                           "detector": "D-1", "reading": reading_for(dev), "temp": ""})
            assert r.status == 303, r.text
        t.get("/fraction?id=" + cls.fraction)
        r = t.post("/fraction/close", {"id": cls.fraction})
        assert r.status == 200, r.text
        items = cls.c["phys"].get("/api/v1/queue?mrn=P-1").json()
        cls.item = str([i for i in items if i["rule"] == "result"][0]["id"])

    @classmethod
    def tearDownClass(cls):
        err = cls.server.stop()
        cls.fx.close()
        assert "AddressSanitizer" not in err and "runtime error" not in err, err

    def anon(self):
        return Client(self.server)

    # ---- refusals ------------------------------------------------------------

    def test_every_route_refuses_without_a_session(self):
        before = self.fx.digest()
        anon = self.anon()
        n = 0
        for method, path, roles, flags in routes():
            if "WEB_PUBLIC" in flags:
                continue
            n += 1
            with self.subTest(route=(method, path)):
                r = anon.request(method, path, body={} if method == "POST" else None)
                if path.startswith("/api/"):
                    self.assertEqual(r.status, 401, r.text)
                    self.assertIn("error", r.json())
                elif method == "GET":
                    self.assertEqual(r.status, 303)
                    self.assertTrue(r.header("Location").startswith("/login?next="), r.header("Location"))
                else:
                    self.assertEqual(r.status, 401, r.text)
        self.assertGreater(n, 30)
        # A forged session cookie is no session either.
        forged = self.anon()
        forged.cookies["fxl_session"] = "0" * 64
        self.assertEqual(forged.get("/queue").status, 303)
        self.assertEqual(forged.get("/api/v1/me").status, 401)
        self.assertEqual(self.fx.digest(), before, "a refused request wrote to the database")

    def test_every_route_refuses_the_wrong_role(self):
        before = self.fx.digest()
        checked = 0
        for method, path, roles, flags in routes():
            if "WEB_PUBLIC" in flags:
                continue
            for user, role in ROLE_OF.items():
                if role in roles:
                    continue
                checked += 1
                with self.subTest(route=(method, path), user=user):
                    c = self.c[user]
                    if path.startswith("/api/") and method == "POST":
                        r = c.request(method, path, json_body={}, headers={"X-CSRF-Token": c.csrf})
                    elif method == "POST":
                        r = c.post(path, {"id": self.item})
                    else:
                        r = c.get(path)
                    self.assertEqual(r.status, 403, r.text[:500])
                    self.assertIn(role, r.text)
        self.assertGreater(checked, 20)
        self.assertEqual(self.fx.digest(), before, "a refused request wrote to the database")

    def test_post_without_valid_csrf_is_refused_and_writes_nothing(self):
        p = self.c["phys"]
        p.get("/item?id=" + self.item)
        other = self.c["ther"].csrf
        anon = self.anon()
        anon.get("/login")
        before = self.fx.digest()
        for token in (None, "", "0" * 64, other, anon.csrf, p.csrf[:-1] + ("0" if p.csrf[-1] != "0" else "1")):
            with self.subTest(token=token):
                fields = {"id": self.item, "action": "comment", "comment": "should not be written"}
                if token is not None:
                    fields["csrf"] = token
                r = p.post("/item/event", fields, csrf=False)
                self.assertEqual(r.status, 403, r.text[:300])
                self.assertIn("CSRF", r.text)
        # the JSON API with the session cookie needs the header too
        r = p.request("POST", "/api/v1/item/event", json_body={"id": int(self.item), "action": "comment",
                                                               "comment": "no"})
        self.assertEqual(r.status, 403)
        # logging in needs the pre-login token as well
        r = anon.post("/login", {"login": "ther", "password": self.fx.passwords["ther"]}, csrf=False)
        self.assertEqual(r.status, 403)
        self.assertEqual(self.fx.digest(), before, "a refused request wrote to the database")
        self.assertNotIn("should not be written", p.get("/item?id=" + self.item).text)

    def test_signature_needs_the_password(self):
        p = self.c["phys"]
        p.get("/item?id=" + self.item)
        before = self.fx.digest()
        r = p.post("/item/sign", {"id": self.item, "action": "close", "disposition": "set-up error"})
        self.assertEqual(r.status, 403)
        self.assertIn("password", r.text)
        self.assertEqual(self.fx.digest(), before)
        # therapists may not close at all
        t = self.c["ther"]
        t.get("/item?id=" + self.item)
        r = t.post("/item/sign", {"id": self.item, "action": "close", "disposition": "set-up error",
                                  "password": self.fx.passwords["ther"]})
        self.assertEqual(r.status, 403)
        self.assertEqual(self.fx.digest(), before)
        self.assertIn("acknowledged" if False else "open", p.get("/api/v1/item?id=" + self.item).json()["status"])

    # ---- escaping ----------------------------------------------------------------

    def test_hostile_text_is_escaped_on_every_page(self):
        pages = []
        for method, path, roles, flags in routes():
            if method != "GET" or path.startswith("/api/") or path in ("/report", "/verify", "/"):
                continue
            pages.append(path)
        query = {"/patient": "?mrn=P-1", "/item": "?id=" + self.item, "/fraction": "?id=" + self.fraction}
        shows_name = {"/worklist", "/patients", "/patient", "/queue", "/item", "/fraction", "/reports"}
        for path in pages:
            for user, c in self.c.items():
                if ROLE_OF[user] not in dict((p, r) for _m, p, r, _f in routes() if _m == "GET")[path] and \
                        path != "/login":
                    continue
                with self.subTest(page=path, user=user):
                    r = c.get(path + query.get(path, ""))
                    if path == "/login":
                        self.assertEqual(r.status, 303)   # logged in: sent home
                        continue
                    self.assertEqual(r.status, 200, r.text[:300])
                    hostile_escaped(self, r.text)
                    if path in shows_name:
                        self.assertIn("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;&quot;Q&amp;A", r.text)
                        self.assertIn("Evil&lt;b&gt;bold&lt;/b&gt;", r.text)
        # Text with a right-to-left override and markup typed into a filter
        # or a link: the store refuses the override at every entry (it never
        # reaches the record), and nothing of it comes back as live markup or
        # as the raw control (src/web/format.c would show it as "[U+202E]";
        # tests/unit/test_web_escape.c).
        q = urllib.parse.quote(BIDI_COMMENT)
        for path in ("/queue?mrn=" + q, "/queue?detector=" + q, "/patient?mrn=" + q,
                     "/calibrations?serial=" + q, "/login?next=" + q):
            with self.subTest(echo=path):
                r = self.c["phys"].get(path) if not path.startswith("/login") else self.anon().get(path)
                hostile_escaped(self, r.text)
        r = self.c["phys"].get("/queue?mrn=" + q)
        self.assertIn(r.status, (400, 404, 422))
        self.assertIn("bidirectional", r.text)

    def test_every_console_write_is_audited_with_the_client_address(self):
        with sqlite3.connect("file:%s?mode=ro" % self.fx.db, uri=True) as db:
            rows = db.execute("SELECT action, client FROM audit_log WHERE id > ?", (self.last_cli_row,)).fetchall()
        actions = [a for a, _c in rows]
        # the logins, the fraction begun, three readings and the close, at least
        for a in ("login", "record", "close"):
            self.assertIn(a, actions)
        self.assertEqual([r for r in rows if r[1] != "127.0.0.1"], [])

    def test_worklist_after_treatment(self):
        text = self.c["ther"].get("/worklist").text
        p1 = text[text.index('<span class="mrn">P-1</span>'):]
        p1 = p1[:p1.index("/patient?mrn=P-1")]
        self.assertIn("treated today", p1)
        self.assertIn("HOLD", p1)
        # no focused "log" button for a patient already treated today
        self.assertNotIn("autofocus", p1)
        self.assertIn("Log a second fraction today (2)", p1)

    def test_bidi_comment_is_refused_and_writes_nothing(self):
        p = self.c["phys"]
        p.get("/item?id=" + self.item)
        before = self.fx.digest()
        r = p.post("/item/event", {"id": self.item, "action": "comment", "comment": BIDI_COMMENT})
        self.assertEqual(r.status, 422, r.text[:300])
        self.assertIn("bidirectional", r.text)
        self.assertEqual(self.fx.digest(), before)

    def test_no_inline_script_and_security_headers(self):
        r = self.c["ther"].get("/worklist")
        csp = r.header("Content-Security-Policy")
        self.assertIn("default-src 'none'", csp)
        self.assertIn("script-src 'self'", csp)
        self.assertNotIn("unsafe-inline", csp)
        self.assertIn("frame-ancestors 'none'", csp)
        self.assertEqual(r.header("X-Content-Type-Options"), "nosniff")
        self.assertEqual(r.header("Cache-Control"), "no-store")
        for page in ("/worklist", "/fraction?id=" + self.fraction, "/patient?mrn=P-1"):
            text = self.c["ther"].get(page).text
            self.assertIsNone(re.search(r"<script(?![^>]*\bsrc=\"/assets/)", text), page)
            self.assertNotIn(" style=", text)
            self.assertNotIn(" onclick=", text)
            self.assertIsNone(re.search(r"(src|href)=\"(https?:)?//", text), "external resource on " + page)

    def test_session_cookie_attributes(self):
        c = self.anon()
        c.get("/login")
        r = c.post("/login", {"login": "aud", "password": self.fx.passwords["aud"]})
        self.assertEqual(r.status, 303)
        cookie = r.header("Set-Cookie")
        m = re.match(r"fxl_session=([0-9a-f]{64}); ", cookie)
        self.assertTrue(m, cookie)
        for attr in ("HttpOnly", "SameSite=Strict", "Path=/"):
            self.assertIn(attr, cookie)
        self.assertNotIn("Secure", cookie)      # plain HTTP on loopback
        # logout ends the session on the server, not only in the browser
        token = m.group(1)
        c.get("/reports")
        r = c.post("/logout")
        self.assertEqual(r.status, 303)
        self.assertIn("Max-Age=0", r.header("Set-Cookie"))
        replay = self.anon()
        replay.cookies["fxl_session"] = token
        self.assertEqual(replay.get("/reports").status, 303)

    def test_errors_show_no_internals(self):
        p = self.c["phys"]
        for path in ("/item?id=999999", "/item?id=1%27%20OR%201=1", "/patient?mrn=%27;DROP%20TABLE%20x",
                     "/nope", "/api/v1/item?id=999999"):
            with self.subTest(path=path):
                r = p.get(path)
                self.assertIn(r.status, (400, 404), r.text[:300])
                low = r.text.lower()
                for word in ("sqlite", "select ", "constraint", "stack", "src/"):
                    self.assertNotIn(word, low)

    def test_request_size_limit(self):
        p = self.c["phys"]
        p.get("/item?id=" + self.item)
        before = self.fx.digest()
        r = p.post("/item/event", {"id": self.item, "action": "comment", "comment": "x" * 100000})
        self.assertEqual(r.status, 413)
        self.assertEqual(self.fx.digest(), before)

    def test_api_token_issue_use_revoke(self):
        a = self.c["admin"]
        a.get("/users")
        r = a.post("/users", {"action": "token_issue", "login": "phys", "label": "invented RV bridge"})
        self.assertEqual(r.status, 200, r.text[:500])
        token = re.search(r"<pre>([0-9a-f]{64})</pre>", r.text).group(1)
        api = self.anon()
        auth = {"Authorization": "Bearer " + token}
        me = api.get("/api/v1/me", headers=auth)
        self.assertEqual(me.status, 200)
        self.assertEqual(me.json()["role"], "physicist")
        q = api.get("/api/v1/queue?mrn=P-1", headers=auth)
        self.assertEqual(q.status, 200)
        self.assertTrue(any(str(i["id"]) == self.item for i in q.json()))
        # a token needs no CSRF header; a write is audited with the client address
        r = api.request("POST", "/api/v1/item/event", headers=auth,
                        json_body={"id": int(self.item), "action": "comment", "comment": "via the API"})
        self.assertEqual(r.status, 200, r.text)
        with sqlite3.connect("file:%s?mode=ro" % self.fx.db, uri=True) as db:
            row = db.execute("SELECT user, action, client FROM audit_log ORDER BY id DESC LIMIT 1").fetchone()
        self.assertEqual(row, ("phys", "comment", "127.0.0.1"))
        # the wrong role through a token
        self.assertEqual(api.get("/users", headers=auth).status, 303)      # pages need a session
        self.assertEqual(api.get("/api/v1/verify", headers=auth).status, 200)
        # revoked: refused
        tid = re.findall(r'name="token" value="(\d+)"', a.get("/users").text)[0]   # newest first
        r = a.post("/users", {"action": "token_revoke", "token": tid})
        self.assertEqual(r.status, 303)
        self.assertEqual(api.get("/api/v1/me", headers=auth).status, 401)

    def test_api_records_a_fraction(self):
        a = self.c["admin"]
        a.get("/users")
        r = a.post("/users", {"action": "token_issue", "login": "ther", "label": "invented console bridge"})
        token = re.search(r"<pre>([0-9a-f]{64})</pre>", r.text).group(1)
        api = self.anon()
        auth = {"Authorization": "Bearer " + token}
        before = self.fx.digest()
        bad = api.request("POST", "/api/v1/record", headers=auth, json_body={
            "mrn": "P-2", "readings": [{"field": "AP", "detector": "D-1", "reading": -1}]})
        self.assertEqual(bad.status, 422, bad.text)
        self.assertEqual(self.fx.digest(), before)
        readings = [{"field": f, "point": "entrance", "detector": "D-1", "reading": float(reading_for(d))}
                    for f, d in (("AP", 0.0), ("PA", 6.0), ("LAT", -3.0))]
        r = api.request("POST", "/api/v1/record", headers=auth, json_body={"mrn": "P-2", "readings": readings})
        self.assertEqual(r.status, 201, r.text)
        res = r.json()["results"]
        # D = M x N = 20 nC x 10 cGy/nC = 200 cGy (webfixture.reading_for); 6 % is
        # outside the 5 % tolerance and inside the 8 % action level
        self.assertEqual([x["verdict"] for x in res], ["within_tolerance", "outside_tolerance", "within_tolerance"])
        self.assertAlmostEqual(res[0]["corrected_dose_cgy"], 200.0, places=2)
        self.assertAlmostEqual(res[1]["deviation_pct"], 6.0, places=2)
        self.assertIsNotNone(res[1]["review_item_id"])
        hist = api.get("/api/v1/patient/history?mrn=P-2", headers=auth).json()
        self.assertEqual(len(hist), 3)
        page = self.c["ther"].get("/patient?mrn=P-2").text
        self.assertIn("<svg", page)
        self.assertEqual(page.count('class="verdict v-outside_tolerance"'), 1)

    def test_item_workflow_acknowledge_close_reopen(self):
        t, p = self.c["ther"], self.c["phys"]
        me = t.get("/api/v1/me").json()
        readings = [{"field": "PA", "point": "entrance", "detector": "D-1", "reading": float(reading_for(6.5))}]
        r = t.request("POST", "/api/v1/record", headers={"X-CSRF-Token": me["csrf"]},
                      json_body={"mrn": "P-2", "readings": readings})
        self.assertEqual(r.status, 201, r.text)
        item = str(r.json()["results"][0]["review_item_id"])
        t.get("/item?id=" + item)
        r = t.post("/item/event", {"id": item, "action": "acknowledge", "comment": "invented: seen at the unit"})
        self.assertEqual(r.status, 303)
        p.get("/item?id=" + item)
        r = p.post("/item/sign", {"id": item, "action": "close", "disposition": "detector placement",
                                  "comment": "invented", "password": "not the password"})
        self.assertEqual(r.status, 403)
        self.assertIn("Signature refused", r.text)
        r = p.post("/item/sign", {"id": item, "action": "close", "disposition": "detector placement",
                                  "comment": "invented", "password": self.fx.passwords["phys"]})
        self.assertEqual(r.status, 303, r.text[:400])
        page = p.get(r.header("Location")).text
        self.assertIn("closed, signed", page)
        self.assertIn("Signed by Invented Physicist", page)
        r = p.post("/item/sign", {"id": item, "action": "reopen", "comment": "invented: re-check",
                                  "password": self.fx.passwords["phys"]})
        self.assertEqual(r.status, 303, r.text[:400])
        ev = p.get("/api/v1/item?id=" + item).json()
        self.assertEqual([e["kind"] for e in ev["events"]], ["open", "acknowledge", "close", "reopen"])
        self.assertEqual(ev["status"], "open")
        v = self.c["aud"].get("/api/v1/verify").json()
        self.assertTrue(v["ok"], v)
        self.assertGreaterEqual(v["signatures_checked"], 2)
        self.assertTrue(v["anchor"].startswith("fxledger-anchor rows="))
        page = self.c["aud"].get("/verify").text
        self.assertIn("Verified", page)
        self.assertIn("fxledger-anchor rows=", page)
        # the anchor line kept from before checks out; a forged one does not
        aud = self.c["aud"]
        line = v["anchor"]
        q = "/api/v1/verify?anchor=" + urllib.parse.quote(line)
        held = aud.get(q).json()
        self.assertTrue(held["ok"], held)
        self.assertEqual(held["anchor_rows"], int(re.search(r"rows=(\d+)", line).group(1)))
        self.assertIn("holds", aud.get("/verify?anchor=" + urllib.parse.quote(line)).text)
        head = re.search(r"head=([0-9a-f]{64})", line).group(1)
        forged = line.replace(head, ("0" if head[0] != "0" else "1") + head[1:])
        bad = aud.get("/api/v1/verify?anchor=" + urllib.parse.quote(forged)).json()
        self.assertFalse(bad["ok"])
        self.assertTrue(bad["record_problems"], bad)
        self.assertIn("FAILED", aud.get("/verify?anchor=" + urllib.parse.quote(forged)).text)
        self.assertEqual(aud.get("/api/v1/verify?anchor=not%20an%20anchor").status, 422)

    def test_reports_on_request(self):
        a = self.c["aud"]
        before = self.fx.digest()
        for query, name in (("kind=month&month=2026-11", "fxledger-month-2026-11.pdf"),
                            ("kind=patient&mrn=P-1", "fxledger-patient-P-1.pdf")):
            with self.subTest(query=query):
                r = a.get("/report?" + query)
                self.assertEqual(r.status, 200, r.text[:300] if r.status != 200 else "")
                self.assertEqual(r.header("Content-Type"), "application/pdf")
                self.assertIn(name, r.header("Content-Disposition"))
                self.assertTrue(r.body.startswith(b"%PDF-"))
                pdf = self.fx.path(name)
                with open(pdf, "wb") as f:
                    f.write(r.body)
                # qpdf --check exits 0 for a well-formed file (qpdf manual)
                q = subprocess.run(["qpdf", "--check", pdf], capture_output=True, text=True)
                self.assertEqual(q.returncode, 0, q.stdout + q.stderr)
        self.assertEqual(a.get("/report?kind=month&month=2026-13").status, 422)
        self.assertEqual(a.get("/report?kind=patient&mrn=NOPE").status, 404)
        self.assertEqual(self.c["ther"].get("/report?kind=month&month=2026-11").status, 403)
        self.assertEqual(self.fx.digest(), before, "a report wrote to the database")

    def test_levels_saved_with_signature(self):
        p = self.c["phys"]
        p.get("/levels")
        fields = {"name": "web-electron", "tolerance": "4", "action": "6", "modality": "electron"}
        before = self.fx.digest()
        r = p.post("/levels", fields)
        self.assertEqual(r.status, 403)
        self.assertEqual(self.fx.digest(), before)
        r = p.post("/levels", dict(fields, password=self.fx.passwords["phys"]))
        self.assertEqual(r.status, 303, r.text[:500])
        sets = {x["name"]: x for x in p.get("/api/v1/levels").json()}
        self.assertEqual(sets["web-electron"]["tolerance_pct"], 4)
        self.assertEqual(sets["web-electron"]["action_pct"], 6)
        self.assertEqual(sets["web-electron"]["modality"], "electron")
        # action below tolerance is refused by the store, nothing written
        p.get("/levels")
        before = self.fx.digest()
        r = p.post("/levels", {"name": "web-bad", "tolerance": "6", "action": "4",
                               "password": self.fx.passwords["phys"]})
        self.assertIn(r.status, (400, 409, 422), r.text[:300])
        self.assertNotIn("web-bad", [x["name"] for x in p.get("/api/v1/levels").json()])

    def test_busy_database_asks_to_retry(self):
        p = self.c["phys"]
        p.get("/item?id=" + self.item)
        before = self.fx.digest()
        # another writer holds the write lock past the busy timeout (5 s, src/store/db.c)
        db = sqlite3.connect(self.fx.db, isolation_level=None, timeout=1)
        try:
            db.execute("BEGIN IMMEDIATE")
            r = p.post("/item/event", {"id": self.item, "action": "comment", "comment": "invented, waits"})
        finally:
            db.execute("ROLLBACK")
            db.close()
        self.assertEqual(r.status, 503, r.text[:300])
        self.assertIn("busy", r.text)
        self.assertIn("Nothing was written", r.text)
        self.assertEqual(r.header("Retry-After"), "2")
        self.assertEqual(self.fx.digest(), before)


class ConsoleLogin(unittest.TestCase):
    """Lockout, the login rate limit, the first-login change and the idle
    timeout, on a department of its own (the clock moves)."""

    @classmethod
    def setUpClass(cls):
        cls.fx = fx = Fxl().init()
        fx.ok("user", "add", "locky", "--name", "Invented Locked", "--role", "therapist")
        fx.ok("user", "add", "newbie", "--name", "Invented Newcomer", "--role", "therapist")
        assert fx.login("locky").returncode == 0
        cls.server = Server(fx, ["--login-rate", "100"])

    @classmethod
    def tearDownClass(cls):
        err = cls.server.stop()
        cls.fx.close()
        assert "AddressSanitizer" not in err and "runtime error" not in err, err

    def test_lockout_and_unlock(self):
        c = Client(self.server)
        c.get("/login")
        # auth_max_failures is 5 by default (docs/settings.md)
        for i in range(5):
            r = c.post("/login", {"login": "locky", "password": "wrong password %d" % i})
            self.assertEqual(r.status, 401, r.text[:300])
            self.assertNotIn("fxl_session", r.header("Set-Cookie") or "")
        r = c.post("/login", {"login": "locky", "password": self.fx.passwords["locky"]})
        self.assertEqual(r.status, 401)
        self.assertNotIn("fxl_session=", r.header("Set-Cookie") or "")
        a = Client(self.server)
        a.login("admin", self.fx.passwords["admin"])
        page = a.get("/users").text
        self.assertIn("locked", page)
        r = a.post("/users", {"action": "unlock", "login": "locky"})
        self.assertEqual(r.status, 303)
        c2 = Client(self.server)
        c2.login("locky", self.fx.passwords["locky"])
        self.assertEqual(c2.get("/worklist").status, 200)

    def test_first_login_changes_the_one_time_password(self):
        c = Client(self.server)
        c.get("/login")
        r = c.post("/login", {"login": "newbie", "password": self.fx.otps["newbie"]})
        self.assertEqual(r.status, 200)
        self.assertIn("one-time password", r.text)
        self.assertNotIn("fxl_session=", r.header("Set-Cookie") or "")
        new = "Invented#first-login-42"
        r = c.post("/password/first", {"login": "newbie", "otp": self.fx.otps["newbie"], "new": new,
                                        "repeat": new + "x"})
        self.assertEqual(r.status, 400)
        r = c.post("/password/first", {"login": "newbie", "otp": self.fx.otps["newbie"], "new": new,
                                        "repeat": new})
        self.assertEqual(r.status, 303, r.text[:500])
        self.assertEqual(c.get("/worklist").status, 200)

    def test_idle_timeout(self):
        c = Client(self.server)
        c.login("admin", self.fx.passwords["admin"])
        self.assertEqual(c.get("/users").status, 200)
        try:
            # auth_idle_minutes is 15 by default (docs/settings.md)
            self.server.set_now("2026-11-02T09:14:00Z")
            self.assertEqual(c.get("/users").status, 200)
            self.server.set_now("2026-11-02T09:30:00Z")
            r = c.get("/users")
            self.assertEqual(r.status, 303)
            self.assertTrue(r.header("Location").startswith("/login"))
            self.assertEqual(c.get("/api/v1/me").status, 401)
        finally:
            self.server.set_now(self.fx.now)

    def test_login_rate_limit(self):
        s = Server(self.fx, ["--login-rate", "3"])
        try:
            c = Client(s)
            c.get("/login")
            codes = [c.post("/login", {"login": "nobody", "password": "wrong password"}).status
                     for _ in range(4)]
            self.assertEqual(codes, [401, 401, 401, 429])
        finally:
            s.stop()



class ConsoleTls(unittest.TestCase):
    """HTTPS with --tls-cert/--tls-key: cookies get Secure, HSTS is sent."""

    def test_tls_cookies_are_secure(self):
        fx = Fxl().init()
        try:
            cert, key = fx.path("cert.pem"), fx.path("key.pem")
            # a throw-away self-signed certificate for 127.0.0.1 (openssl req(1))
            r = subprocess.run(["openssl", "req", "-x509", "-newkey", "ec", "-pkeyopt",
                                "ec_paramgen_curve:prime256v1", "-nodes", "-keyout", key, "-out", cert,
                                "-days", "2", "-subj", "/CN=127.0.0.1", "-addext", "subjectAltName=IP:127.0.0.1"],
                               capture_output=True, text=True)
            self.assertEqual(r.returncode, 0, r.stderr)
            s = Server(fx, ["--tls-cert", cert, "--tls-key", key])
            try:
                c = Client(s, tls_ca=cert)
                page = c.get("/login")
                self.assertIn("Secure", page.header("Set-Cookie"))
                self.assertIn("max-age=", page.header("Strict-Transport-Security"))
                r = c.post("/login", {"login": "admin", "password": fx.passwords["admin"]})
                self.assertEqual(r.status, 303)
                cookie = r.header("Set-Cookie")
                self.assertTrue(cookie.startswith("fxl_session="), cookie)
                for attr in ("Secure", "HttpOnly", "SameSite=Strict"):
                    self.assertIn(attr, cookie)
                self.assertEqual(c.get("/users").status, 200)
            finally:
                s.stop()
            # behind a TLS reverse proxy on the same host: plain HTTP on
            # loopback, cookies marked Secure all the same
            s = Server(fx, ["--behind-tls-proxy"])
            try:
                page = Client(s).get("/login")
                self.assertIn("; Secure", page.header("Set-Cookie"))
                self.assertIsNotNone(page.header("Strict-Transport-Security"))
            finally:
                s.stop()
        finally:
            fx.close()


if __name__ == "__main__":
    unittest.main(verbosity=2)
