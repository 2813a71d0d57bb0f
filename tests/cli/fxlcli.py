"""Shared harness for the command-line tests: runs the test build of fxledger
(build/fxledger-testclock, the same sources with a clock that FXLEDGER_NOW
fixes) against a temporary database with a fixed clock, and checks that
failed commands leave the database file byte-for-byte unchanged. SHIPPED_BIN
is the program users run, which ignores FXLEDGER_NOW; only tests about that
binary itself use it. Test data here is invented.

Identity: every command needs a logged-in user. The harness gives each user
an invented password, logs each user in once per scenario (its own
XDG_STATE_HOME inside the test directory holds that user's session file),
replaces the one-time password of 'user add' at that first login, and passes
the user's password on a pipe (--password-fd) to every call, so that signing
acts can read it; the program reads the pipe only when it needs a password.
Argon2id makes each login cost a noticeable fraction of a second: tests log
in once per user per scenario, never per command."""
import calendar
import hashlib
import json
import os
import re
import shutil
import sqlite3
import subprocess
import tempfile
import time
import unittest
import urllib.parse

BIN = os.environ.get("FXLEDGER_BIN") or os.path.join(
    os.path.dirname(__file__), "..", "..", "build", "fxledger-testclock")
SHIPPED_BIN = os.environ.get("FXLEDGER_SHIPPED_BIN") or os.path.join(
    os.path.dirname(__file__), "..", "..", "build", "fxledger")
SRC = os.environ.get("FXLEDGER_SRC") or os.path.join(os.path.dirname(__file__), "..", "..")
DATA = os.path.join(SRC, "tests", "data")

# The program's defaults (docs/settings.md): a session ends after 15 minutes
# unused or 12 hours after login; activity is recorded at most once a minute.
IDLE_S = 15 * 60
ABSOLUTE_S = 12 * 3600
TOUCH_S = 60

OTP_LINE = re.compile(r"one-time password for '([^']+)': (\S+)")


def invented_password(login):
    """An invented password for a test user (12+ characters, not containing
    the login, as the policy asks)."""
    pw = "Invented#" + hashlib.sha256(("fxledger test " + login).encode()).hexdigest()[:12]
    while login and login.lower() in pw.lower():
        pw += "!"
        pw = pw.replace(login, "")
    return pw


def epoch(iso):
    """Seconds of a fixed-clock time; the real clock for a value the program
    itself refuses as a fixed clock (it then uses the real time)."""
    try:
        return calendar.timegm(time.strptime(iso, "%Y-%m-%dT%H:%M:%SZ"))
    except (ValueError, TypeError):
        return int(time.time())


def without_leak_check(env):
    """env for a process the test kills with SIGKILL, with LeakSanitizer's
    check at exit turned off in the sanitizer build (make sanitize). A kill
    that lands while that check stops the process's threads makes the check
    write "Unable to get registers from thread N" to the report directory,
    which fails the run though nothing leaked; a killed process has no exit
    to check anyway. AddressSanitizer's other checks stay on (a later option
    overrides an earlier one)."""
    env = dict(env)
    for name in ("ASAN_OPTIONS", "LSAN_OPTIONS"):
        if name in env:
            env[name] += ":detect_leaks=0"
    return env


def copy_database(src, dst):
    """A copy of the database src at dst, made with SQLite's backup API
    (Python's sqlite3 Connection.backup), as 'fxledger backup' makes one.
    The database is the .db file together with its -wal: fxledger leaves
    the latest committed rows in the -wal when it closes (no checkpoint at
    close, docs/robustness.md), so a copy of the .db file alone would lose
    them. src is opened read-only (nothing beside it changes); whatever was
    at dst, with its -wal and -shm, is replaced; the copy is one file, mode
    0600 as init makes it."""
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(dst + suffix):
            os.remove(dst + suffix)
    s = sqlite3.connect("file:%s?mode=ro" % urllib.parse.quote(src), uri=True)
    try:
        d = sqlite3.connect(dst)
        try:
            s.backup(d)
        finally:
            d.close()
    finally:
        s.close()
    os.chmod(dst, 0o600)
    return dst


class Fxl:
    """One temporary database and the ways to drive fxledger on it."""

    def __init__(self, now="2026-11-02T09:00:00Z", user="admin", bin=None):
        self.bin = bin or BIN   # SHIPPED_BIN only for tests about the program users run
        self.dir = tempfile.mkdtemp(prefix="fxltest-")
        self.db = os.path.join(self.dir, "test.db")
        self.now = now
        self.user = user
        self.passwords = {}     # login -> invented password
        self.otps = {}          # login -> one-time password not yet replaced
        self.sessions = {}      # login -> {"start": epoch, "seen": epoch}

    def close(self):
        shutil.rmtree(self.dir, ignore_errors=True)

    def path(self, name):
        return os.path.join(self.dir, name)

    def write(self, name, text):
        """Writes a file in the test directory and returns its path."""
        p = self.path(name)
        with open(p, "w", encoding="utf-8") as f:
            f.write(text if isinstance(text, str) else json.dumps(text))
        return p

    def state_dir(self, login):
        """The XDG_STATE_HOME of the OS user who works as `login`."""
        name = login or "none"
        if not re.fullmatch(r"[A-Za-z0-9._-]{1,64}", name):
            name = "x-" + hashlib.sha256(name.encode("utf-8", "surrogateescape")).hexdigest()[:16]
        d = self.path("state-" + name)
        os.makedirs(d, mode=0o700, exist_ok=True)
        return d

    def env(self, user=None, now=None, extra=None):
        """The environment of a call as `user` (after ensure_session for a
        test that starts the binary itself)."""
        e = dict(os.environ)
        e.pop("FXLEDGER_DB", None)
        e.pop("FXLEDGER_USER", None)
        e["FXLEDGER_NOW"] = now or self.now
        e["NO_COLOR"] = "1"
        e["XDG_STATE_HOME"] = self.state_dir(user or self.user)
        if extra:
            e.update(extra)
        return e

    def argv(self, *args, user=None, password_fd=None):
        """The command line of a call as `user` (global options first)."""
        args = [str(x) for x in args]
        # A test that names another database ("--db", COPY) runs on that one:
        # fxledger refuses a global option given twice.
        lead = [] if "--db" in args or any(x.startswith("--db=") for x in args) else ["--db", self.db]
        a = [self.bin] + lead + ["--user", user or self.user]
        if password_fd is not None:
            a += ["--password-fd", str(password_fd)]
        return a + args

    def exec(self, args, user, now, stdin=None, env=None, password_lines=None):
        """One call with the password pipe holding password_lines (a list of
        lines, or None for no pipe)."""
        e = self.env(user, now, env)
        rfd = None
        if password_lines is not None:
            rfd, wfd = os.pipe()
            os.write(wfd, "".join(p + "\n" for p in password_lines).encode())
            os.close(wfd)
        try:
            return subprocess.run(self.argv(*args, user=user, password_fd=rfd),
                                  input=stdin, capture_output=True, text=True, env=e, timeout=60,
                                  pass_fds=(rfd,) if rfd is not None else ())
        finally:
            if rfd is not None:
                os.close(rfd)

    def login(self, user=None, now=None):
        """Logs `user` in (replacing a one-time password first); returns the
        CompletedProcess of 'fxledger login'."""
        u = user or self.user
        t = now or self.now
        if u in self.otps:
            r = self.exec(["login", "--new-password"], u, t,
                          password_lines=[self.otps[u], self.passwords[u]])
        else:
            r = self.exec(["login"], u, t, password_lines=[self.passwords.get(u, "")])
        if r.returncode == 0:
            self.otps.pop(u, None)
            self.sessions[u] = {"start": epoch(t), "seen": epoch(t)}
        else:
            self.sessions.pop(u, None)
        return r

    def ensure_session(self, user=None, now=None):
        """Logs `user` in unless their session is still live at `now`."""
        u = user or self.user
        t = epoch(now or self.now)
        s = self.sessions.get(u)
        if s and t < s["seen"] + IDLE_S and t < s["start"] + ABSOLUTE_S:
            return
        if u in self.passwords:
            self.login(u, now)

    def forget_session(self, user=None):
        """The harness's view after the session ended outside it."""
        self.sessions.pop(user or self.user, None)

    def run(self, *args, user=None, stdin=None, now=None, env=None, password=None, login=True):
        """Runs fxledger as `user`; returns the CompletedProcess (text mode).
        password: the lines on the password pipe (default: the user's
        password; False: no pipe at all); login: make sure of a session."""
        u = user or self.user
        t = now or self.now
        args = [str(a) for a in args]
        if args and args[0] == "init" or args[:2] == ["--json", "init"]:
            return self._init(args, u, t, stdin, env, password)
        if login:
            self.ensure_session(u, t)
        if password is False:
            lines = None
        elif password is not None:
            lines = list(password) if isinstance(password, (list, tuple)) else [password]
        else:
            lines = [self.passwords.get(u, "")]
        r = self.exec(args, u, t, stdin, env, lines)
        self._note(args, u, t, r)
        return r

    def _init(self, args, u, t, stdin, env, password):
        admin = args[args.index("--admin") + 1] if "--admin" in args[:-1] else u
        if admin not in self.passwords:
            self.passwords[admin] = invented_password(admin)
        lines = None if password is False else (
            [password] if isinstance(password, str) else (password or [self.passwords[admin]]))
        r = self.exec(args, u, t, stdin, env, lines)
        if r.returncode != 0 and admin not in self.sessions:
            pass
        return r

    def _note(self, args, u, t, r):
        """Keeps the harness's view of passwords and sessions in step."""
        ok = r.returncode == 0 or r.returncode >= 10
        s = self.sessions.get(u)
        if ok and s and epoch(t) >= s["seen"] + TOUCH_S:
            s["seen"] = epoch(t)
        if r.returncode != 0:
            return
        words = [a for a in args if a != "--json"]
        for m in OTP_LINE.finditer(r.stdout):
            self._new_otp(m.group(1), m.group(2))
        if '"one_time_password"' in r.stdout:
            try:
                o = json.loads(r.stdout)
                self._new_otp(o["login"], o["one_time_password"])
            except (ValueError, KeyError):
                pass
        if words[:1] == ["logout"]:
            self.sessions.pop(u, None)

    def _new_otp(self, login, otp):
        self.otps[login] = otp
        self.passwords.setdefault(login, invented_password(login))
        self.sessions.pop(login, None)

    def ok(self, *args, **kw):
        """Runs fxledger and fails the test unless it exits 0."""
        r = self.run(*args, **kw)
        if r.returncode != 0:
            raise AssertionError("fxledger %s failed (%d):\n%s%s" % (
                " ".join(map(str, args)), r.returncode, r.stdout, r.stderr))
        return r

    def json(self, *args, **kw):
        """Runs fxledger --json and returns the parsed output."""
        return json.loads(self.ok("--json", *args, **kw).stdout)

    def digest(self):
        """SHA-256 of the database file and its WAL, to prove nothing changed.
        The WAL is checkpointed into the file first: fxledger leaves its
        commits in the -wal (SQLITE_DBCONFIG_NO_CKPT_ON_CLOSE) and any other
        program that opens the file last (the sqlite3 shell of a refused
        attack) moves them into the .db and removes the -wal - the same
        record in other bytes. A file that cannot be written (a read-only
        test) is hashed as it is."""
        if os.path.exists(self.db + "-wal"):
            try:
                con = sqlite3.connect(self.db)
                try:
                    con.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchall()
                finally:
                    con.close()
            except sqlite3.Error:
                pass
        h = hashlib.sha256()
        for suffix in ("", "-wal"):
            p = self.db + suffix
            if os.path.exists(p):
                with open(p, "rb") as f:
                    h.update(f.read())
        return h.hexdigest()

    # One initialised database (and its admin session) per process and set
    # of init arguments, copied for each scenario: init and the admin's
    # login cost three Argon2id runs, the copy nothing.
    _templates = {}

    def init(self, department="Invented Test Department"):
        key = (department, self.now, self.bin)
        t = Fxl._templates.get(key)
        if t is None or not os.path.exists(t["db"]):
            self.ok("init", "--department", department, "--admin", "admin",
                    "--admin-name", "Test Admin", user="admin")
            self.ensure_session("admin")
            tdir = tempfile.mkdtemp(prefix="fxltemplate-")
            tdb = os.path.join(tdir, "template.db")
            copy_database(self.db, tdb)
            Fxl._templates[key] = {"db": tdb, "token": self._token("admin"),
                                   "password": self.passwords["admin"],
                                   "session": dict(self.sessions["admin"])}
            return self
        copy_database(t["db"], self.db)
        self.passwords["admin"] = t["password"]
        self._write_session("admin", t["token"])
        self.sessions["admin"] = dict(t["session"])
        return self

    def _session_file(self, login):
        name = hashlib.sha256(os.path.realpath(self.db).encode()).hexdigest()[:32]
        return os.path.join(self.state_dir(login), "fxledger", "session-" + name)

    def _token(self, login):
        with open(self._session_file(login), encoding="utf-8") as f:
            for line in f:
                if line.startswith("token "):
                    return line.split()[1]
        return None

    def _write_session(self, login, token):
        """The session file the program would have written (its format:
        docs/security.md)."""
        p = self._session_file(login)
        os.makedirs(os.path.dirname(p), mode=0o700, exist_ok=True)
        fd = os.open(p, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
        with os.fdopen(fd, "w", encoding="utf-8") as f:
            f.write("fxledger session v1\ndatabase %s\nlogin %s\ntoken %s\n"
                    % (os.path.realpath(self.db), login, token))


class FxlTestCase(unittest.TestCase):
    """Gives each test a fresh initialised database as self.fx."""

    def setUp(self):
        self.fx = Fxl().init()

    def tearDown(self):
        self.fx.close()

    def assertFailsUnchanged(self, *args, expect_code=None, expect_in=None, **kw):
        """The command fails, prints a one-line error, and writes nothing."""
        if kw.get("login", True):
            self.fx.ensure_session(kw.get("user"), kw.get("now"))
        before = self.fx.digest()
        r = self.fx.run(*args, **kw)
        self.assertNotEqual(r.returncode, 0, "expected failure: %s\n%s" % (args, r.stdout))
        if expect_code is not None:
            self.assertEqual(r.returncode, expect_code, r.stderr)
        self.assertTrue(r.stderr.startswith("fxledger: error: "), r.stderr)
        if expect_in:
            self.assertIn(expect_in, r.stderr)
        self.assertEqual(self.fx.digest(), before, "database changed by a failed command")
        return r


def main():
    unittest.main(verbosity=2)
