"""The rules over history that `record` runs cost what the fraction costs,
not the detector's history (issue 16, docs/performance.md): SQLite's own
EXPLAIN QUERY PLAN (Python's sqlite3, on a database made by fxledger init
through the harness) for each statement, read from the C source itself so
the test checks the program's SQL and not a copy.

FXL_PLAN_SOURCE=path/to/rules_hook.c points the test at another version of
the file (the old one must fail: docs/performance.md says how that was
checked). The database has no sqlite_stat1 (fxledger never runs ANALYZE),
so the plans are the ones the program gets in service."""
import glob
import os
import re
import sqlite3

from fxlcli import FxlTestCase, main

ROOT = os.path.normpath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
SOURCE = os.environ.get("FXL_PLAN_SOURCE") or os.path.join(ROOT, "src", "store", "rules_hook.c")
# the kept state of the rules (issue 16, change 20); absent in older versions
STATE_SOURCE = os.environ.get("FXL_PLAN_STATE") or os.path.join(ROOT, "src", "store", "rule_state.c")

TOKEN = re.compile(r'"((?:[^"\\]|\\.)*)"|([A-Za-z_][A-Za-z_0-9]*)|(/\*.*?\*/)|(\s+)|(\))', re.S)


def string_macros(source=None):
    """Simple string #defines of the headers (FXL_RULE_DRIFT and the like)
    and of the source file itself."""
    out = {}
    for h in glob.glob(os.path.join(ROOT, "include", "fxl", "*.h")) + \
            glob.glob(os.path.join(ROOT, "src", "store", "*.h")) + ([source] if source else []):
        for m in re.finditer(r'^#define\s+(\w+)\s+"([^"]*)"\s*$', open(h).read(), re.M):
            out[m.group(1)] = m.group(2)
    return out


def function_macros(source=None):
    """One-argument #defines made of string literals and the argument
    (FXL_SQL_DOSE_COUNTED(m) of src/store/dose_counted.h, or of the source
    file itself): name -> (argument name, body tokens)."""
    out = {}
    for h in glob.glob(os.path.join(ROOT, "src", "store", "*.h")) + ([source] if source else []):
        text = open(h).read().replace("\\\n", " ")
        for m in re.finditer(r'^#define\s+(\w+)\((\w+)\)\s+(.*)$', text, re.M):
            out[m.group(1)] = (m.group(2), re.findall(r'"((?:[^"\\]|\\.)*)"|(\w+)', m.group(3)))
    return out


def expand(name, argument, fmacros):
    param, body = fmacros[name]
    return "".join(lit if ident == "" else (argument if ident == param else "")
                   for lit, ident in body)


def statements(function, source=None):
    """Each SQL text prepared (fxl_stmt_prepare, or fxl_stmt_prepare_cached
    for a statement the connection keeps) in the body of `function` of
    `source` (SOURCE by default), in order: the concatenated string literals
    and string macros up to the closing parenthesis."""
    source = source or SOURCE
    text = open(source).read()
    m = re.search(r"^(?:static\s+)?int\s+" + re.escape(function) + r"\s*\(", text, re.M)
    if not m:
        raise AssertionError("%s not found in %s" % (function, source))
    end = text.find("\n}\n", m.end())
    body = text[m.end():end]
    macros, fmacros = string_macros(source), function_macros(source)
    out = []
    for p in re.finditer(r"fxl_stmt_prepare(?:_cached)?\(&\w+,\s*ctx,", body):
        pos, sql = p.end(), []
        while True:
            t = TOKEN.match(body, pos)
            if not t:
                raise AssertionError("unexpected text in %s near %r" % (function, body[pos:pos + 40]))
            pos = t.end()
            if t.group(1) is not None:
                sql.append(t.group(1).encode().decode("unicode_escape"))
            elif t.group(2) in fmacros:
                call = re.match(r'\s*\(\s*"([^"]*)"\s*\)', body[pos:])
                if not call:
                    raise AssertionError("cannot read the call of %s in %s" % (t.group(2), function))
                sql.append(expand(t.group(2), call.group(1), fmacros))
                pos += call.end()
            elif t.group(2):
                if t.group(2) not in macros:
                    raise AssertionError("unknown macro %s in %s" % (t.group(2), function))
                sql.append(macros[t.group(2)])
            elif t.group(5):
                break
        out.append("".join(sql))
    return out


def has_function(function):
    return re.search(r"^(?:static\s+)?int\s+" + re.escape(function) + r"\s*\(", open(SOURCE).read(),
                     re.M) is not None


PARAMS = {"through": 1, "upto": 9, "cal": "", "settings": "", "fr": 1, "patient": 1, "d": 1, "all": 0, "b": 1, "p": "entrance", "since": "", "key": "k",
          "at": "2026-01-01T00:00:00Z", "asof": "2026-01-01T00:00:00Z", "warn": 0.8}


class QueryPlanTest(FxlTestCase):
    @classmethod
    def setUpClass(cls):
        from fxlcli import Fxl
        cls.fxc = Fxl()
        cls.fxc.init()
        cls.con = sqlite3.connect(cls.fxc.db)

    @classmethod
    def tearDownClass(cls):
        cls.con.close()
        cls.fxc.close()

    def plan(self, sql):
        names = set(re.findall(r":(\w+)", sql))
        rows = self.con.execute("EXPLAIN QUERY PLAN " + sql, {k: PARAMS[k] for k in names})
        return [r[3] for r in rows]

    def assertNoFullScan(self, plan):
        for line in plan:
            # a SCAN of a table (not of a materialised subquery) reads all of it
            self.assertNotRegex(line, r"^SCAN (measurements|fractions|m|fr|n|calibrations|c2?)\b",
                                "\n".join(plan))

    def assertCovered(self, plan):
        """The detector's rows since the restart point come from the
        covering history index alone (sql/014): one index entry per row, no
        page of measurements read for each (docs/performance.md, change 18)."""
        self.assertTrue([ln for ln in plan if re.match(
            r"SEARCH m USING COVERING INDEX measurements_by_detector_history "
            r"\(detector_id=\? AND created_at>\?\)", ln)], "\n".join(plan))

    def uses(self, plan, alias, index):
        lines = [ln for ln in plan if re.match(r"SEARCH %s USING .*INDEX %s \(" % (alias, index), ln)]
        self.assertTrue(lines, "%s not searched through %s:\n%s" % (alias, index, "\n".join(plan)))
        return lines

    def test_calibration_due_uses_the_fractions_index(self):
        [sql] = statements("rule_calibration")
        plan = self.plan(sql)
        # the fraction's measurements, not the detector's whole history
        self.uses(plan, "m", "measurements_by_fraction")
        self.assertFalse([ln for ln in plan if "measurements_by_detector" in ln], "\n".join(plan))
        # the latest calibration of the series: the index to its last column
        self.uses(plan, "c2", r"calibrations_by_detector")
        self.assertTrue([ln for ln in plan if "calibrations_by_detector (detector_id=? AND "
                         "beam_id=? AND point=?)" in ln], "\n".join(plan))
        self.assertNoFullScan(plan)

    def test_drift_series_of_the_fraction_use_the_fractions_index(self):
        [sql] = statements("rule_drift")
        plan = self.plan(sql)
        self.uses(plan, "m", "measurements_by_fraction")
        self.assertFalse([ln for ln in plan if "measurements_by_detector" in ln], "\n".join(plan))
        self.assertNoFullScan(plan)

    def test_drift_rule_reads_only_the_deviations_since_the_restart(self):
        if os.path.exists(STATE_SOURCE):
            # since issue 16, change 20: the chart is read again in full
            # only when its kept state cannot be continued
            [devs] = statements("drift_read_all", STATE_SOURCE)
            [since] = [q for q in statements("drift_since") if ":b" in q]
        elif has_function("drift_deviations"):
            [devs] = statements("drift_deviations")
            # the text for one series (the other is the whole detector's,
            # for the review screen)
            [since] = [q for q in statements("drift_since") if ":b" in q]
        else:   # the version before issue 16: the rule read fxl_drift_series
            [since, devs] = statements("fxl_drift_series")
        plan = self.plan(devs)
        # the deviation (and its order) read; no patient, plan or name joined
        self.assertRegex(devs, r"^SELECT (fr\.treated_at, )?m\.deviation_pct FROM")
        for table in ("patients", "plans"):
            self.assertNotIn(table, devs)
        # the rows after the restart point, found by the detector's index
        self.uses(plan, "m", r"measurements_by_detector\w*")
        self.assertTrue([ln for ln in plan if "detector_id=? AND created_at>?" in ln],
                        "\n".join(plan))
        self.assertNoFullScan(plan)
        self.assertCovered(plan)

        plan = self.plan(since)
        # the latest calibration of the one series, and the drift items of
        # that series by their key's prefix
        self.assertTrue([ln for ln in plan if "calibrations_by_detector (detector_id=? AND "
                         "beam_id=? AND point=?)" in ln], "\n".join(plan))
        self.assertTrue([ln for ln in plan if re.search(
            r"review_items_by_rule_key \(rule=\? AND rule_key>\? AND rule_key<\?\)", ln)],
            "\n".join(plan))
        self.assertNoFullScan(plan)

    def test_dose_limit_rule_reads_only_since_the_calibration(self):
        if os.path.exists(STATE_SOURCE):
            [sql] = statements("dose_read_all", STATE_SOURCE)
        else:
            [sql] = statements("rule_dose_limit")
        plan = self.plan(sql)
        # the detector's rows written after its latest calibration
        self.assertTrue([ln for ln in plan if re.match(
            r"SEARCH m USING .*INDEX measurements_by_detector\w* \(detector_id=\? AND created_at>\?\)",
            ln)], "\n".join(plan))
        self.assertNoFullScan(plan)
        self.assertCovered(plan)

    def test_kept_state_reads_only_the_rows_since(self):
        """Continuing a kept sum or chart (src/store/rule_state.c) reads the
        rows written after its through_id by the primary key - the
        fraction's own, not the detector's history - and the amendments
        among them the same way."""
        for function in ("dose_read_since", "drift_read_since", "amended_since"):
            [sql] = statements(function, STATE_SOURCE)
            plan = self.plan(sql)
            alias = "s" if function == "amended_since" else "m"
            self.assertTrue([ln for ln in plan if re.match(
                r"SEARCH %s USING INTEGER PRIMARY KEY \(rowid>\?\)" % alias, ln)],
                function + ":\n" + "\n".join(plan))
            self.assertFalse([ln for ln in plan if "measurements_by_" in ln],
                             function + ":\n" + "\n".join(plan))
            self.assertNoFullScan(plan)

    def test_detector_view_reads_only_since_the_calibration(self):
        """detector show / list: the dose accumulated since the latest
        calibration comes from the rows after it, not the whole history."""
        source = os.environ.get("FXL_PLAN_DETECTORS") or os.path.join(ROOT, "src", "store",
                                                                      "detectors.c")
        sql = [q for q in statements("load_derived", source) if "sum(" in q]
        self.assertEqual(len(sql), 1, sql)
        plan = self.plan(sql[0])
        self.assertTrue([ln for ln in plan if re.match(
            r"SEARCH m USING .*INDEX measurements_by_detector\w* \(detector_id=\? AND created_at>\?\)",
            ln)], "\n".join(plan))
        self.assertNoFullScan(plan)

    def test_patient_report_signatures_start_from_the_patient(self):
        """The per-patient report's signatures: the patient's review items
        and plans, then their signatures by row; never all the signatures
        of one kind (issue 16)."""
        source = os.environ.get("FXL_PLAN_REPORT") or os.path.join(ROOT, "src", "store",
                                                                   "report_query.c")
        [sql] = statements("fxl_rq_patient_signatures_each", source)
        plan = self.plan(sql)
        self.uses(plan, "i", "review_items_by_patient")
        self.uses(plan, "p", r"sqlite_autoindex_plans_1")
        self.assertEqual(len([ln for ln in plan if "signatures_by_row (entity=? AND entity_id=?)" in ln]),
                         2, "\n".join(plan))
        self.assertFalse([ln for ln in plan if re.match(r"SCAN (i|e|g|p)\b", ln)], "\n".join(plan))

    def report_source(self):
        return os.environ.get("FXL_PLAN_REPORT") or os.path.join(ROOT, "src", "store", "report_query.c")

    def test_monthly_queue_starts_from_open_items_and_later_events(self):
        """The monthly report's queue as of the month's end: the items not
        closed now and the items with an event after that time, never every
        item ever opened (issue 16, sql/013)."""
        [sql] = statements("fxl_rq_queue_open_each", self.report_source())
        plan = self.plan(sql)
        self.uses(plan, "c", "review_items_by_status")
        self.uses(plan, "l", "review_events_by_time")
        self.assertFalse([ln for ln in plan if re.match(r"SCAN (i|c|l|e)\b", ln)], "\n".join(plan))

    def test_detectors_near_limit_find_each_calibration_once(self):
        """The monthly report's detectors near their dose limit: the latest
        calibration once per detector, then the detector's rows since it by
        the index (not a calibration lookup per measurement)."""
        [sql] = statements("fxl_rq_detectors_near_limit_each", self.report_source())
        plan = self.plan(sql)
        self.assertEqual(len([ln for ln in plan if "calibrations_by_detector" in ln]), 1,
                         "\n".join(plan))
        self.assertTrue([ln for ln in plan if re.match(
            r"SEARCH m USING .*INDEX measurements_by_detector\w* \(detector_id=\? AND created_at>\?\)",
            ln)], "\n".join(plan))
        self.assertNoFullScan(plan)

    def test_prefix_range_equals_substr(self):
        """The key range that lets the index find a series' drift items
        selects exactly the keys the substr test selects (SQLite's bytewise
        text comparison; ';' follows ':' in ASCII)."""
        key = "detector:1:beam:2:point:entrance"
        keys = [key + ":since:start", key + ":since:2026-01-01T00:00:00Z", key, key + ";",
                key + "x:since:start", "detector:1:beam:2:point:exit:since:start",
                "detector:1:beam:22:point:entrance:since:start", key + ":", key + ":\u00e9"]
        got = {}
        for k in keys:
            a, b = self.con.execute(
                "SELECT (:k >= :key || ':' AND :k < :key || ';'), "
                "substr(:k, 1, length(:key) + 1) = :key || ':'", {"k": k, "key": key}).fetchone()
            got[k] = (a, b)
            self.assertEqual(a, b, k)
        self.assertEqual(sum(a for a, _ in got.values()), 4)


if __name__ == "__main__":
    main()
