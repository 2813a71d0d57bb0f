"""fxledger audit list / show: the audit trail read through the program, with
filters by user, action, entity and period, checked against the audit_log
table read with Python's sqlite3. The users and times are invented."""
import json
import sqlite3

from fxlcli import FxlTestCase, main


class AuditViewTest(FxlTestCase):
    def setUp(self):
        super().setUp()
        fx = self.fx
        fx.ok("user", "add", "qa", "--name", "Invented Auditor", "--role", "auditor",
              now="2026-10-30T08:00:00Z")
        fx.ok("user", "add", "phys", "--name", "Dr Invented Physicist", "--role", "physicist",
              now="2026-11-02T08:00:00Z")
        fx.ok("machine", "add", "Linac-T", user="phys", now="2026-11-03T08:00:00Z")

    def db(self, where="1", args=()):
        con = sqlite3.connect(self.fx.db)
        rows = con.execute("SELECT id, at, user, action, entity, entity_id, content, prev_hash, "
                           "hash FROM audit_log WHERE %s ORDER BY id" % where, args).fetchall()
        con.close()
        return rows

    def listing(self, *args):
        self.fx.ensure_session("qa")     # a login is an audit row: before the digest
        before = self.fx.digest()
        out = self.fx.json("audit", "list", *args, user="qa")
        self.assertEqual(self.fx.digest(), before, "reading the audit trail changed the database")
        return out

    def test_list_everything_in_chain_order(self):
        out = self.listing()
        rows = self.db()
        self.assertEqual([r["id"] for r in out], [r[0] for r in rows])
        for got, want in zip(out, rows):
            self.assertEqual((got["at"], got["user"], got["action"], got["entity"]), want[1:5])
            self.assertEqual(got["entity_id"], want[5])
            self.assertEqual(got["content_text"], want[6])
            self.assertEqual(got["content"], json.loads(want[6]))
            self.assertEqual((got["prev_hash"], got["hash"]), want[7:9])
        # the chain as listed links up: each row names the hash of the one before
        for a, b in zip(out, out[1:]):
            self.assertEqual(b["prev_hash"], a["hash"])

    def test_filters(self):
        by_user = self.listing("--who", "phys")
        self.assertTrue(by_user)
        self.assertEqual([r["id"] for r in by_user], [r[0] for r in self.db("user = 'phys'")])
        self.assertEqual({r["user_name"] for r in by_user}, {"Dr Invented Physicist"})
        users = self.listing("--entity", "users", "--action", "create")
        self.assertEqual([r["content"]["login"] for r in users][-2:], ["qa", "phys"])
        one = users[-1]
        self.assertEqual([r["id"] for r in self.listing("--entity", "users", "--action", "create",
                                                        "--id", str(one["entity_id"]))], [one["id"]])
        october = self.listing("--month", "2026-10")
        self.assertTrue(october and len(october) < len(self.db()))
        self.assertEqual([r["id"] for r in october],
                         [r[0] for r in self.db("at >= '2026-10-01' AND at < '2026-11-01'")])
        self.assertEqual([r["id"] for r in self.listing("--from", "2026-11-03", "--to", "2026-11-03")],
                         [r[0] for r in self.db("at >= '2026-11-03' AND at < '2026-11-04'")])
        last2 = self.listing("--limit", "2")
        self.assertEqual([r["id"] for r in last2], [r[0] for r in self.db()][-2:])
        self.assertEqual(self.listing("--who", "nobody"), [])

    def test_text_and_show(self):
        r = self.fx.ok("audit", "list", "--entity", "machines", user="qa")
        self.assertIn("phys", r.stdout)
        self.assertIn("machines #", r.stdout)
        self.assertIn("1 row", r.stdout)
        row = self.db("entity = 'machines'")[0]
        s = self.fx.ok("audit", "show", str(row[0]), user="qa").stdout
        self.assertIn("phys (Dr Invented Physicist)", s)
        self.assertIn(row[7], s)       # previous hash
        self.assertIn(row[8], s)       # own hash
        self.assertIn(row[6], s)       # content as hashed
        j = self.fx.json("audit", "show", str(row[0]), user="qa")
        self.assertEqual(j["hash"], row[8])

    def test_refusals(self):
        self.assertFailsUnchanged("audit", "show", "99999", user="qa", expect_code=2,
                                  expect_in="audit row 99999 not found")
        self.assertFailsUnchanged("audit", "show", "abc", user="qa", expect_code=2)
        self.assertFailsUnchanged("audit", "list", "--limit", "0", user="qa", expect_code=2)
        self.assertFailsUnchanged("audit", "list", "--month", "2026-13", user="qa", expect_code=2)
        self.assertFailsUnchanged("audit", "list", "--colour", "red", user="qa", expect_code=1)


if __name__ == "__main__":
    main()
