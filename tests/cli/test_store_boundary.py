"""Only src/store knows the database engine (DEVELOPERS.md, docs/deployment.md
"A second store back end"): no SQLite header, type, function or constant
above it, so that a PostgreSQL store behind the same include/fxl interface
would leave cli/, web/, report/, io/ and core/ unchanged. A plain scan of the
sources; comments may name SQLite, code may not."""
import os
import re
import unittest

from fxlcli import SRC, main

ABOVE_STORE = ["include", "src/cli", "src/report", "src/web", "src/io", "src/core", "src/clock"]
ENGINE = re.compile(r"\bsqlite3\w*|\bSQLITE_\w+|<sqlite3\.h>")


def code_only(text):
    """The C text without comments and string literals."""
    text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
    text = re.sub(r"//[^\n]*", " ", text)
    return re.sub(r'"(?:\\.|[^"\\\n])*"', '""', text)


class StoreBoundary(unittest.TestCase):
    def test_no_engine_identifier_above_store(self):
        found, scanned = [], 0
        for top in ABOVE_STORE:
            for dirpath, _, files in os.walk(os.path.join(SRC, top)):
                for name in files:
                    if not name.endswith((".c", ".h", ".cpp")):
                        continue
                    path = os.path.join(dirpath, name)
                    with open(path, encoding="utf-8") as f:
                        code = code_only(f.read())
                    scanned += 1
                    for m in ENGINE.finditer(code):
                        found.append("%s: %s" % (os.path.relpath(path, SRC), m.group(0)))
        self.assertGreater(scanned, 50)
        self.assertEqual(found, [])

    def test_the_scan_would_see_a_leak(self):
        self.assertTrue(ENGINE.search(code_only("static sqlite3_stmt *st; /* ok */")))
        self.assertTrue(ENGINE.search(code_only("#include <sqlite3.h>\n")))
        self.assertFalse(ENGINE.search(code_only('/* sqlite3 */ puts("sqlite3_open");')))


if __name__ == "__main__":
    main()
