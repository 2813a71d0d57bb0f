/* Unit tests for the review queue (src/store/review.c) and the rules over
 * history in the database (src/store/rules_hook.c), on a temporary database
 * filled with invented fixture rows by SQL: each rule firing and not firing
 * at its boundary, one item per hit however often the rules run, the role
 * checks and state machine of the events, dispositions, listing order and
 * filters, and the links an amendment adds. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "fxl/audit.h"
#include "fxl/fxl.h"
#include "fxl/review.h"
#include "fxl/rules.h"
#include "fxl/users.h"
#include "store/ctx.h"
#include "sign_helper.h"
#include "store/review_store.h"
#include "store/rules_hook.h"

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
} fixture;

/* Invented department: users of every role, one beam, two diodes (D-1
 * calibrated 2026-10-01 valid to 2026-12-31 with a 1000 cGy dose limit; D-2
 * valid to 2026-11-16), one patient with a plan of an AP field (policy
 * first), a PA field (weekly) and a LAT field (every), levels 5 % / 8 %. */
static const char *const FIXTURE_SQL =
    "INSERT INTO users (id, login, full_name, role, created_at) VALUES "
    "  (2, 'tina', 'Tina Therapist', 'therapist', '2026-09-01T08:00:00Z'),"
    "  (3, 'phil', 'Phil Physicist', 'physicist', '2026-09-01T08:00:00Z'),"
    "  (4, 'otto', 'Otto Auditor', 'auditor', '2026-09-01T08:00:00Z');"
    "INSERT INTO machines (id, name, created_at) VALUES (1, 'LINAC-A', '2026-09-01T08:00:00Z');"
    "INSERT INTO beams (id, machine_id, name, modality, energy, dmax_cm, created_at) VALUES "
    "  (1, 1, '6X', 'photon', 6, 1.5, '2026-09-01T08:00:00Z');"
    "INSERT INTO detectors (id, serial, label, kind, reading_unit, dose_limit_cgy, created_at) VALUES "
    "  (1, 'D-1', 'Diode 1', 'photon_diode', 'nC', 1000, '2026-09-01T08:00:00Z'),"
    "  (2, 'D-2', 'Diode 2', 'photon_diode', 'nC', NULL, '2026-09-01T08:00:00Z');"
    "INSERT INTO calibrations (id, detector_id, beam_id, point, calibrated_at, valid_until, "
    "  chamber_dose_cgy, readings, reading_n, reading_mean, reading_sd, factor_cgy_per_unit, "
    "  temp_c, ssd_cm, field_size_cm, user_id, created_at) VALUES "
    "  (1, 1, 1, 'entrance', '2026-10-01T08:00:00Z', '2026-12-31T23:59:59Z', 100, '[10.0]', 1, 10.0, 0, "
    "   10.0, 20, 100, 10, 3, '2026-10-01T08:00:00Z'),"
    "  (2, 2, 1, 'entrance', '2026-10-01T08:00:00Z', '2026-11-16T23:59:59Z', 100, '[10.0]', 1, 10.0, 0, "
    "   10.0, 20, 100, 10, 3, '2026-10-01T08:00:00Z');"
    "INSERT INTO threshold_sets (id, name, version, effective_from, tolerance_pct, action_pct, "
    "  floor_cgy, user_id, created_at) VALUES "
    "  (1, 'all', 1, '2026-01-01T00:00:00Z', 5, 8, 0, 3, '2026-09-01T08:00:00Z');"
    "INSERT INTO patients (id, mrn, family_name, given_name, created_at) VALUES "
    "  (1, 'P-1', 'Example', 'Pat', '2026-10-01T08:00:00Z'),"
    "  (2, 'P-2', 'Sample', 'Sam', '2026-10-01T08:00:00Z');"
    "INSERT INTO plans (id, patient_id, label, site, technique, fractions, user_id, created_at) VALUES "
    "  (1, 1, 'PL1', 'pelvis', '3D', 25, 3, '2026-10-01T08:00:00Z'),"
    "  (2, 2, 'PL2', 'pelvis', '3D', 25, 3, '2026-10-01T08:00:00Z');"
    "INSERT INTO fields (id, plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, y_cm, "
    "  expected_dose_cgy, expected_source, policy) VALUES "
    "  (1, 1, 'AP', 1, 'entrance', 'ssd', 200, 100, 10, 10, 200, 'tps', 'first'),"
    "  (2, 1, 'PA', 1, 'entrance', 'ssd', 200, 100, 10, 10, 200, 'tps', 'weekly'),"
    "  (3, 1, 'LAT', 1, 'entrance', 'ssd', 200, 100, 10, 10, 200, 'tps', 'every'),"
    "  (4, 2, 'AP', 1, 'entrance', 'ssd', 200, 100, 10, 10, 200, 'tps', 'none');";

static void sql(fixture *f, const char *fmt, ...)
{
    char buf[2048], *err = NULL;
    va_list ap;

    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    if (sqlite3_exec(f->ctx->db, buf, NULL, NULL, &err) != SQLITE_OK) {
        print_error("SQL failed: %s\n%s\n", err, buf);
        sqlite3_free(err);
        fail();
    }
}

static int64_t count(fixture *f, const char *fmt, ...)
{
    char buf[1024];
    sqlite3_stmt *st = NULL;
    int64_t n = -1;
    va_list ap;

    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    if (sqlite3_prepare_v2(f->ctx->db, buf, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW)
        n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
    return n;
}

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    char *err = NULL;

    snprintf(f->dir, sizeof f->dir, "/tmp/fxl-review-XXXXXX");
    if (!mkdtemp(f->dir))
        return -1;
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    if (fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE) != 0 ||
        fxl_init_department(f->ctx, "Invented Department", "UTC", "admin", "A. Admin") != 0 ||
        test_sign_as(f->ctx, "admin") != 0)
        return -1;
    if (sqlite3_exec(f->ctx->db, FIXTURE_SQL, NULL, NULL, &err) != SQLITE_OK) {
        fprintf(stderr, "fixture: %s\n", err);
        sqlite3_free(err);
        return -1;
    }
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[160];

    test_sign_forget(f->ctx);
    fxl_close(f->ctx);
    snprintf(cmd, sizeof cmd, "rm -rf %s", f->dir);
    if (system(cmd) != 0)
        return -1;
    free(f);
    return 0;
}

static void as(fixture *f, const char *login)
{
    assert_int_equal(test_sign_as(f->ctx, login), 0);
}

/* Logs fraction `number` of plan `plan` at `at` (id = plan * 100 + number)
 * with measurements "field:detector:deviation" (deviation NaN = not
 * evaluable), then runs the rules hook in one transaction as the therapist. */
static int64_t log_fraction(fixture *f, int plan, int number, const char *at, const char *spec)
{
    int64_t fid = plan * 100 + number;
    char copy[256], *tok, *save = NULL;
    int rc;

    as(f, "tina");
    setenv("FXLEDGER_NOW", at, 1);
    assert_int_equal(fxl_begin(f->ctx), 0);
    sql(f, "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) "
           "VALUES (%lld, %d, %d, '%s', 2, '%s')", (long long)fid, plan, number, at, at);
    snprintf(copy, sizeof copy, "%s", spec);
    for (tok = strtok_r(copy, " ", &save); tok; tok = strtok_r(NULL, " ", &save)) {
        int field, det;
        double dev;
        if (sscanf(tok, "%d:%d:%lf", &field, &det, &dev) != 3)
            fail_msg("bad spec '%s'", tok);
        if (isfinite(dev))
            sql(f, "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, "
                   "temp_c, temp_entered, calibration_id, factor_n, corrected_dose_cgy, expected_dose_cgy, "
                   "deviation_pct, threshold_set_id, tolerance_pct, action_pct, floor_cgy, verdict, "
                   "user_id, created_at) VALUES (%lld, %d, %d, %.6f, 'nC', 32, 0, %d, 10, %.6f, 200, "
                   "%.4f, 1, 5, 8, 0, '%s', 2, '%s')",
                (long long)fid, field, det, 20.0 * (1 + dev / 100), 200.0 * (1 + dev / 100), det, dev,
                fabs(dev) <= 5 ? "within_tolerance" : fabs(dev) <= 8 ? "outside_tolerance" : "outside_action",
                at);
        else
            sql(f, "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, "
                   "temp_c, temp_entered, verdict, user_id, created_at) VALUES "
                   "(%lld, %d, %d, 20, 'nC', 32, 0, 'not_evaluable', 2, '%s')",
                (long long)fid, field, det, at);
    }
    rc = fxl_rules_after_record(f->ctx, fid);
    if (rc != 0)
        print_error("rules hook: %s\n", fxl_errmsg(f->ctx));
    assert_int_equal(rc, 0);
    assert_int_equal(fxl_commit(f->ctx), 0);
    return fid;
}

static int64_t items(fixture *f, const char *rule)
{
    return count(f, "SELECT count(*) FROM review_items WHERE rule = '%s'", rule);
}

static void assert_chain_ok(fixture *f)
{
    fxl_verify_report r;
    int rc = fxl_audit_verify(f->ctx, &r);

    if (rc != 0)
        print_error("verify: %s\n", fxl_errmsg(f->ctx));
    assert_int_equal(rc, 0);
}

/* ---- missing required measurement -------------------------------------- */

static void test_review_missing_first_fires_once(void **state)
{
    fixture *f = *state;

    /* Fraction 1 measures AP and LAT but not PA (weekly needs the first). */
    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "1:1:1.0 3:1:0.5");
    assert_int_equal(items(f, FXL_RULE_MISSING), 0);   /* the current fraction never counts */
    log_fraction(f, 1, 2, "2026-11-03T08:00:00Z", "1:1:0.5 3:1:0.5");
    assert_int_equal(items(f, FXL_RULE_MISSING), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule_key = 'field:2:fraction:1' "
                              "AND field_id = 2 AND patient_id = 1 AND severity = %d AND status = 'open'",
                           FXL_RULE_MISSING_SEVERITY), 1);
    /* One 'open' event signed by the logging therapist, one audit row. */
    assert_int_equal(count(f, "SELECT count(*) FROM review_events e JOIN review_items i ON i.id = e.item_id "
                              "WHERE i.rule = 'missing_measurement' AND e.kind = 'open' AND e.user_id = 2"), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log WHERE action = 'open' AND entity = 'review_items'"), 1);
    /* Fraction 3: the same miss is not raised again, even after closing it. */
    as(f, "phil");
    assert_int_equal(fxl_review_close(f->ctx, 1, "other", "noted"), 0);
    log_fraction(f, 1, 3, "2026-11-04T08:00:00Z", "1:1:0.5 3:1:0.5");
    assert_int_equal(items(f, FXL_RULE_MISSING), 1);
    assert_chain_ok(f);
}

static void test_review_missing_every_and_none(void **state)
{
    fixture *f = *state;

    /* LAT (every) measured at 1, missed at 2, fraction 3 never logged. */
    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "1:1:0 2:1:0 3:1:0");
    log_fraction(f, 1, 2, "2026-11-03T08:00:00Z", "1:1:0 2:1:0");
    assert_int_equal(items(f, FXL_RULE_MISSING), 0);
    log_fraction(f, 1, 4, "2026-11-05T08:00:00Z", "3:1:0");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule_key IN "
                              "('field:3:fraction:2', 'field:3:fraction:3')"), 2);
    assert_int_equal(items(f, FXL_RULE_MISSING), 2);
    /* Plan 2's field has policy none: never an item, whatever is missing. */
    log_fraction(f, 2, 5, "2026-11-05T09:00:00Z", "4:2:0");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE patient_id = 2"), 0);
}

static void test_review_missing_weekly_boundary(void **state)
{
    fixture *f = *state;

    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "1:1:0 2:1:0 3:1:0");
    for (int n = 2; n <= 5; n++) {
        char at[32];
        snprintf(at, sizeof at, "2026-11-0%dT08:00:00Z", n + 1);
        log_fraction(f, 1, n, at, "3:1:0");
    }
    /* Exactly 7 days after the PA measurement: on time. */
    log_fraction(f, 1, 6, "2026-11-09T17:00:00Z", "3:1:0");
    assert_int_equal(items(f, FXL_RULE_MISSING), 0);
    /* 8 days: the weekly PA measurement due by 2026-11-09 is missing. */
    log_fraction(f, 1, 7, "2026-11-10T08:00:00Z", "2:1:0 3:1:0");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule_key = 'field:2:due:2026-11-09'"), 1);
    assert_int_equal(items(f, FXL_RULE_MISSING), 1);
    /* A week setting of 10 days would not have fired: checked on a second field
     * next time through the setting only being read, not cached. */
    sql(f, "INSERT INTO settings (key, value) VALUES ('weekly_interval_days', '10')");
    log_fraction(f, 1, 8, "2026-11-19T08:00:00Z", "3:1:0");    /* 9 days after 11-10 */
    assert_int_equal(items(f, FXL_RULE_MISSING), 1);
    log_fraction(f, 1, 9, "2026-11-21T08:00:00Z", "3:1:0");    /* 11 days */
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule_key = 'field:2:due:2026-11-20'"), 1);
}

/* ---- calibration due / expired ------------------------------------------ */

static void test_review_calibration_due_and_expired(void **state)
{
    fixture *f = *state;

    /* D-2 valid until 2026-11-16: on 2026-11-01 there are 15 days left (ok with
     * the default 14), on 2026-11-02 14 days (due). */
    log_fraction(f, 2, 1, "2026-11-01T08:00:00Z", "4:2:0");
    assert_int_equal(items(f, FXL_RULE_CALIB_DUE), 0);
    log_fraction(f, 2, 2, "2026-11-02T08:00:00Z", "4:2:0");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule = 'calibration_due' "
                              "AND rule_key = 'calibration:2' AND detector_id = 2 AND patient_id IS NULL "
                              "AND severity = %d", FXL_RULE_CALIB_DUE_SEVERITY), 1);
    log_fraction(f, 2, 3, "2026-11-03T08:00:00Z", "4:2:0");
    assert_int_equal(items(f, FXL_RULE_CALIB_DUE), 1);     /* once per calibration */
    /* Valid until 23:59:59 on the 16th; expired on the 17th. */
    log_fraction(f, 2, 4, "2026-11-16T23:59:59Z", "4:2:0");
    assert_int_equal(items(f, FXL_RULE_CALIB_EXPIRED), 0);
    log_fraction(f, 2, 5, "2026-11-17T00:00:00Z", "4:2:NAN");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule = 'calibration_expired' "
                              "AND rule_key = 'calibration:2' AND severity = %d",
                           FXL_RULE_CALIB_EXPIRED_SEVERITY), 1);
    /* D-1 (valid to the end of December) never was due. */
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE detector_id = 1"), 0);
    assert_chain_ok(f);
}

/* ---- accumulated dose ----------------------------------------------------- */

static void test_review_dose_limit_boundary(void **state)
{
    fixture *f = *state;

    /* D-1 limit 1000 cGy. Readings of exactly 200 cGy each. */
    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "1:1:0");
    log_fraction(f, 1, 2, "2026-11-03T08:00:00Z", "3:1:0");
    log_fraction(f, 1, 3, "2026-11-04T08:00:00Z", "3:1:0");
    /* Neither a measurement before the calibration nor a superseded one counts. */
    sql(f, "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) VALUES "
           "(150, 1, 20, '2026-09-20T08:00:00Z', 2, '2026-09-20T08:00:00Z');"
           "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, deviation_pct, verdict, user_id, created_at) VALUES "
           "(150, 3, 1, 20, 'nC', 32, 0, 500, 0, 'within_tolerance', 2, '2026-09-20T08:00:00Z');"
           "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, deviation_pct, verdict, supersedes_id, amend_reason, "
           "user_id, created_at) SELECT 103, 3, 1, 20, 'nC', 32, 0, 200, 0, 'within_tolerance', "
           "max(id), 'invented amendment', 2, '2026-11-04T09:00:00Z' FROM measurements "
           "WHERE fraction_id = 103");
    log_fraction(f, 1, 4, "2026-11-05T08:00:00Z", "3:1:0");
    log_fraction(f, 1, 5, "2026-11-06T08:00:00Z", "3:1:0");
    /* 5 x 200 = 1000 cGy counted: exactly the limit, not over. */
    assert_int_equal(items(f, FXL_RULE_DOSE_LIMIT), 0);
    log_fraction(f, 1, 6, "2026-11-07T08:00:00Z", "3:1:0.1");
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule = 'dose_limit' AND "
                              "rule_key = 'detector:1:calibration:1' AND detector_id = 1"), 1);
    log_fraction(f, 1, 7, "2026-11-08T08:00:00Z", "3:1:0");
    assert_int_equal(items(f, FXL_RULE_DOSE_LIMIT), 1);
}

static void test_review_dose_limit_not_inflated_by_gross_results(void **state)
{
    fixture *f = *state;

    /* D-1 limit 1000 cGy. A reading typed in pC for nC (a factor 1000:
     * 200000 cGy against 200 cGy expected) is a gross deviation; it adds its
     * planned 200 cGy, not 200000 cGy (docs/rules.md). An old implausible
     * row counts the same way. 200 + 200 + 200 = 600 cGy: under the limit. */
    sql(f, "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) VALUES "
           "(150, 1, 20, '2026-11-02T08:00:00Z', 2, '2026-11-02T08:00:00Z');"
           "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, expected_dose_cgy, deviation_pct, verdict, gross, user_id, "
           "created_at) VALUES (150, 3, 1, 20000, 'nC', 32, 0, 200000, 200, 99900, 'outside_action', 1, "
           "2, '2026-11-02T08:00:00Z'), (150, 1, 1, 20000, 'nC', 32, 0, 200000, 200, 99900, "
           "'implausible', 0, 2, '2026-11-02T08:00:00Z')");
    log_fraction(f, 1, 2, "2026-11-03T08:00:00Z", "3:1:0");
    assert_int_equal(items(f, FXL_RULE_DOSE_LIMIT), 0);
    /* two more plausible 200 cGy results: 1000 cGy, at the limit; a third is over */
    log_fraction(f, 1, 3, "2026-11-04T08:00:00Z", "3:1:0 1:1:0");
    assert_int_equal(items(f, FXL_RULE_DOSE_LIMIT), 0);
    log_fraction(f, 1, 4, "2026-11-05T08:00:00Z", "3:1:0");
    assert_int_equal(items(f, FXL_RULE_DOSE_LIMIT), 1);
}

/* ---- detector drift (standardised CUSUM) ---------------------------------- */

/* The index (0-based) at which the standardised CUSUM of docs/rules.md first
 * exceeds h = 5.5 spreads (k = 0.5, start-up 10, spread = average moving
 * range / 1.128 with a 0.2 % floor, z limited to +/- h/2), or -1: the
 * formula written out again, independently of src/core/drift.c. */
static int first_signal(const double *x, int n)
{
    double mr = 0, hi = 0, lo = 0;
    int i;

    for (i = 1; i < n; i++) {
        double sig, z;
        mr += fabs(x[i] - x[i - 1]);
        if (i < 10)
            continue;
        sig = fmax(mr / i / 1.128, 0.2);
        z = fmax(-2.75, fmin(2.75, x[i] / sig));
        hi = fmax(0, hi + z - 0.5);
        lo = fmax(0, lo - z - 0.5);
        if (hi > 5.5 || lo > 5.5)
            return i;
    }
    return -1;
}

static void test_review_drift_opens_item_on_detector(void **state)
{
    fixture *f = *state;
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    double x[40];
    int64_t id;
    int i, fr1 = 0, fr2 = 0, first;

    /* Ten start-up results alternating +1/-1 % across two patients (same
     * detector, beam and point), then +3 % every time: within tolerance
     * each time, but a drift of 3 / 1.77 = 1.7 spreads. */
    for (i = 0; i < 40; i++)
        x[i] = i < 10 ? (i % 2 ? -1.0 : 1.0) : 3.0;
    first = first_signal(x, 40);
    assert_true(first > 10 && first < 20);
    for (i = 0; i <= first; i++) {
        char at[32], spec[32];
        snprintf(at, sizeof at, "2026-11-%02dT%02d:00:00Z", 2 + i / 8, 8 + i % 8);
        snprintf(spec, sizeof spec, "%d:1:%.1f", i % 2 ? 4 : 3, x[i]);
        log_fraction(f, i % 2 ? 2 : 1, i % 2 ? ++fr2 : ++fr1, at, spec);
        assert_int_equal(items(f, FXL_RULE_DRIFT), i == first ? 1 : 0);
    }
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE rule = 'detector_drift' AND "
                              "detector_id = 1 AND patient_id IS NULL AND field_id IS NULL AND "
                              "measurement_id IS NULL AND severity = %d AND rule_key LIKE "
                              "'detector:1:beam:1:point:entrance:since:%%'", FXL_RULE_DRIFT_SEVERITY), 1);
    id = count(f, "SELECT id FROM review_items WHERE rule = 'detector_drift'");
    /* Showing it gives the series' deviations with the standardised sums. */
    as(f, "otto");
    assert_int_equal(fxl_queue_show(f->ctx, &d, id), 0);
    assert_int_equal(d.trend_is_detector, 1);
    assert_int_equal(d.n_trend, first + 1);
    assert_true(d.trend[first].cusum_high > 5.5);
    assert_true(d.trend[first - 1].cusum_high <= 5.5);
    assert_true(isnan(d.trend[9].sigma_pct));
    assert_string_equal(d.trend[1].mrn, "P-2");
    assert_string_equal(d.trend_series, "LINAC-A 6X entrance");
    fxl_review_detail_release(&d);
    /* Still drifting: no second item while the first exists. */
    log_fraction(f, 1, ++fr1, "2026-11-20T08:00:00Z", "3:1:3.0");
    assert_int_equal(items(f, FXL_RULE_DRIFT), 1);
    /* Closing restarts the chart: a new start-up of ten results first. */
    as(f, "phil");
    setenv("FXLEDGER_NOW", "2026-11-20T12:00:00Z", 1);
    assert_int_equal(fxl_review_close(f->ctx, id, "detector fault", "replaced cable"), 0);
    for (i = 0; i <= first; i++) {
        char at[32], spec[32];
        snprintf(at, sizeof at, "2026-11-%02dT%02d:00:00Z", 21 + i / 8, 8 + i % 8);
        snprintf(spec, sizeof spec, "3:1:%.1f", x[i]);
        log_fraction(f, 1, ++fr1, at, spec);
        assert_int_equal(items(f, FXL_RULE_DRIFT), i == first ? 2 : 1);
    }
    assert_chain_ok(f);
}

static void test_review_drift_ignores_superseded_and_not_evaluable(void **state)
{
    fixture *f = *state;
    fxl_drift_point *pts = NULL;
    char since[FXL_TIME_LEN];
    size_t n = 0;
    int i;

    /* A not-evaluable reading and a superseded one are not in the series;
     * the amendment is. */
    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "3:1:2.0");
    log_fraction(f, 1, 2, "2026-11-03T08:00:00Z", "3:1:2.0 1:1:NAN");
    log_fraction(f, 1, 3, "2026-11-04T08:00:00Z", "3:1:30.0");
    sql(f, "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, deviation_pct, verdict, supersedes_id, amend_reason, "
           "user_id, created_at) SELECT 103, 3, 1, 20.4, 'nC', 32, 0, 204, 2.0, 'within_tolerance', id, "
           "'typed 26 for 20.4', 2, '2026-11-04T09:00:00Z' FROM measurements WHERE deviation_pct = 30");
    /* a gross result (beyond the plausibility bound) is not a drift either */
    sql(f, "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) VALUES "
           "(104, 1, 4, '2026-11-05T08:00:00Z', 2, '2026-11-05T08:00:00Z');"
           "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, expected_dose_cgy, deviation_pct, verdict, gross, user_id, "
           "created_at) VALUES (104, 3, 1, 32, 'nC', 32, 0, 320, 200, 60, 'outside_action', 1, 2, "
           "'2026-11-05T08:00:00Z')");
    assert_int_equal(fxl_drift_series(f->ctx, &pts, &n, since, 1, 1, "entrance"), 0);
    assert_int_equal(n, 3);
    assert_string_equal(since, "2026-10-01T08:00:00Z");
    for (i = 0; i < 3; i++)
        assert_true(fabs(pts[i].deviation_pct - 2.0) < 1e-9);
    free(pts);
    /* an exit series of the same detector is another series */
    assert_int_equal(fxl_drift_series(f->ctx, &pts, &n, since, 1, 1, "exit"), 0);
    assert_int_equal(n, 0);
    free(pts);
}

static void test_review_bad_setting_refuses_logging(void **state)
{
    fixture *f = *state;
    int64_t before = count(f, "SELECT count(*) FROM review_items");
    int rc;

    sql(f, "INSERT INTO settings (key, value) VALUES ('cusum_k_sd', 'abc')");
    as(f, "tina");
    assert_int_equal(fxl_begin(f->ctx), 0);
    sql(f, "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) "
           "VALUES (101, 1, 1, '2026-11-02T08:00:00Z', 2, '2026-11-02T08:00:00Z')");
    rc = fxl_rules_after_record(f->ctx, 101);
    fxl_rollback(f->ctx);
    assert_int_equal(rc, FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "cusum_k_sd"));
    assert_non_null(strstr(fxl_errmsg(f->ctx), "'abc'"));
    assert_int_equal(count(f, "SELECT count(*) FROM review_items"), before);
    assert_int_equal(count(f, "SELECT count(*) FROM fractions"), 0);
}

/* ---- events, roles, state machine ----------------------------------------- */

/* An item on fraction 1 of P-1 (outside tolerance) opened as record would. */
static int64_t open_result_item(fixture *f, int severity, const char *at)
{
    fxl_review_open_spec spec;
    int64_t id = 0;
    char summary[64];

    as(f, "tina");
    setenv("FXLEDGER_NOW", at, 1);
    memset(&spec, 0, sizeof spec);
    snprintf(summary, sizeof summary, "invented result item, severity %d", severity);
    spec.rule = "result";
    spec.severity = severity;
    spec.patient_id = 1;
    spec.field_id = 1;
    spec.detector_id = 1;
    spec.summary = summary;
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_review_open_item(f->ctx, &id, &spec), 0);
    assert_int_equal(fxl_commit(f->ctx), 0);
    assert_true(id > 0);
    return id;
}

static void test_review_therapist_cannot_close(void **state)
{
    fixture *f = *state;
    int64_t id = open_result_item(f, 2, "2026-11-02T08:00:00Z");
    int64_t audit = count(f, "SELECT count(*) FROM audit_log");

    as(f, "tina");
    assert_int_equal(fxl_review_close(f->ctx, id, "set-up error", NULL), FXL_EPERM);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "closing a review item needs the role physicist or admin"));
    assert_non_null(strstr(fxl_errmsg(f->ctx), "'tina' is therapist"));
    assert_int_equal(fxl_review_reopen(f->ctx, id, "why"), FXL_EPERM);
    /* Nothing written. */
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events WHERE item_id = %lld", (long long)id), 1);
    /* A therapist may acknowledge and comment. */
    assert_int_equal(fxl_review_acknowledge(f->ctx, id, "placement re-checked"), 0);
    assert_int_equal(fxl_review_comment(f->ctx, id, "re-measure tomorrow"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE id = %lld AND status = 'acknowledged'",
                           (long long)id), 1);
    /* An auditor only reads. */
    as(f, "otto");
    assert_int_equal(fxl_review_comment(f->ctx, id, "looks fine"), FXL_EPERM);
    assert_int_equal(fxl_review_acknowledge(f->ctx, id, NULL), FXL_EPERM);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit + 2);
}

static void test_review_close_reopen_state_machine(void **state)
{
    fixture *f = *state;
    int64_t id = open_result_item(f, 3, "2026-11-02T08:00:00Z");
    fxl_review_detail d = FXL_REVIEW_DETAIL_INIT;
    int64_t audit;

    as(f, "phil");
    setenv("FXLEDGER_NOW", "2026-11-03T10:00:00Z", 1);
    assert_int_equal(fxl_review_reopen(f->ctx, id, "not closed"), FXL_ECONFLICT);
    assert_int_equal(fxl_review_close(f->ctx, id, "no such thing", NULL), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "clinically accepted"));
    assert_int_equal(fxl_review_close(f->ctx, id, NULL, NULL), FXL_EINVAL);
    /* Case does not matter; the list's spelling is stored. */
    assert_int_equal(fxl_review_close(f->ctx, id, "Set-Up Error", "SSD 2 cm short, corrected"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events WHERE item_id = %lld AND kind = 'close' "
                              "AND disposition = 'set-up error' AND user_id = 3", (long long)id), 1);
    audit = count(f, "SELECT count(*) FROM audit_log");
    assert_int_equal(fxl_review_close(f->ctx, id, "other", NULL), FXL_ECONFLICT);
    assert_int_equal(fxl_review_acknowledge(f->ctx, id, NULL), FXL_ECONFLICT);
    assert_int_equal(fxl_review_reopen(f->ctx, id, NULL), FXL_EINVAL);   /* reason required */
    assert_int_equal(fxl_review_reopen(f->ctx, id, "   "), FXL_EINVAL);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit);
    assert_int_equal(fxl_review_reopen(f->ctx, id, "physician asked for a phantom check"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE id = %lld AND status = 'open'",
                           (long long)id), 1);
    assert_int_equal(fxl_review_comment(f->ctx, 999, "x"), FXL_ENOTFOUND);

    assert_int_equal(fxl_queue_show(f->ctx, &d, id), 0);
    assert_int_equal(d.n_events, 3);
    assert_string_equal(d.events[0].kind, "open");
    assert_string_equal(d.events[0].user, "tina");
    assert_string_equal(d.events[1].kind, "close");
    assert_string_equal(d.events[1].disposition, "set-up error");
    assert_string_equal(d.events[1].user, "phil");
    assert_string_equal(d.events[1].at, "2026-11-03T10:00:00Z");
    assert_string_equal(d.events[2].kind, "reopen");
    assert_string_equal(d.item.status, "open");
    assert_int_equal(d.item.age_days, 1);
    fxl_review_detail_release(&d);

    /* Admin may close too. */
    as(f, "admin");
    assert_int_equal(fxl_review_close(f->ctx, id, "clinically accepted", NULL), 0);
    assert_chain_ok(f);
}

static void test_review_configured_dispositions(void **state)
{
    fixture *f = *state;
    fxl_disposition_list l;
    int64_t id = open_result_item(f, 2, "2026-11-02T08:00:00Z");

    assert_int_equal(fxl_disposition_list_parse(&l, " a ,, b c ,"), 0);
    assert_int_equal(l.n, 2);
    assert_string_equal(l.name[0], "a");
    assert_string_equal(l.name[1], "b c");
    assert_int_equal(fxl_disposition_list_parse(&l, ""), 0);
    assert_int_equal(l.n, 0);

    assert_int_equal(fxl_review_dispositions(f->ctx, &l), 0);
    assert_int_equal(l.n, 8);                      /* the default list */
    assert_string_equal(l.name[0], "set-up error");
    assert_string_equal(l.name[7], "other");

    sql(f, "INSERT INTO settings (key, value) VALUES ('dispositions', 'entry error, machine output')");
    assert_int_equal(fxl_review_dispositions(f->ctx, &l), 0);
    assert_int_equal(l.n, 2);
    as(f, "phil");
    assert_int_equal(fxl_review_close(f->ctx, id, "other", NULL), FXL_EINVAL);
    assert_int_equal(fxl_review_close(f->ctx, id, "machine output", NULL), 0);
}

static void test_review_list_order_and_filters(void **state)
{
    fixture *f = *state;
    fxl_queue_filter q;
    fxl_review_item *it = NULL;
    size_t n = 0;
    int64_t a = open_result_item(f, 2, "2026-11-01T08:00:00Z");
    int64_t b = open_result_item(f, 4, "2026-11-02T08:00:00Z");
    int64_t c = open_result_item(f, 2, "2026-10-30T08:00:00Z");
    int64_t d = open_result_item(f, 4, "2026-10-31T08:00:00Z");

    setenv("FXLEDGER_NOW", "2026-11-03T08:00:00Z", 1);
    as(f, "otto");   /* an auditor reads */
    memset(&q, 0, sizeof q);
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 4);
    /* severity first (4 before 2), then oldest first */
    assert_int_equal(it[0].id, d);
    assert_int_equal(it[1].id, b);
    assert_int_equal(it[2].id, c);
    assert_int_equal(it[3].id, a);
    assert_int_equal(it[0].age_days, 3);
    assert_string_equal(it[0].mrn, "P-1");
    assert_string_equal(it[0].detector, "D-1");
    assert_string_equal(it[0].field, "AP");
    free(it);

    q.min_severity = 3;
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 2);
    free(it);
    q.min_severity = 0;
    q.since = "2026-11-01";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 2);
    free(it);
    q.since = NULL;

    as(f, "phil");
    assert_int_equal(fxl_review_close(f->ctx, b, "other", NULL), 0);
    assert_int_equal(fxl_review_acknowledge(f->ctx, a, NULL), 0);
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 3);                        /* default: open + acknowledged */
    free(it);
    q.status_mask = FXL_QUEUE_CLOSED;
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 1);
    assert_int_equal(it[0].id, b);
    assert_string_equal(it[0].disposition, "other");
    free(it);
    q.status_mask = FXL_QUEUE_ACKNOWLEDGED;
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 1);
    assert_int_equal(it[0].id, a);
    free(it);
    q.status_mask = FXL_QUEUE_ALL;
    q.mrn = "P-2";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 0);
    q.mrn = "NOPE";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), FXL_ENOTFOUND);
    q.mrn = NULL;
    q.detector = "D-2";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 0);
    q.detector = "D-1";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
    assert_int_equal(n, 4);
    free(it);
    q.since = "yesterday";
    assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), FXL_EINVAL);
}

/* ---- amendments ----------------------------------------------------------- */

static void test_review_amendment_links_items(void **state)
{
    fixture *f = *state;
    fxl_review_open_spec spec;
    int64_t old_m, new_m, old_item, new_item = 0;

    log_fraction(f, 1, 1, "2026-11-02T08:00:00Z", "1:1:-9.0");
    old_m = count(f, "SELECT id FROM measurements WHERE deviation_pct = -9");
    memset(&spec, 0, sizeof spec);
    spec.rule = "result";
    spec.severity = 4;
    spec.measurement_id = old_m;
    spec.summary = "outside action level, deviation -9.00 %";
    as(f, "tina");
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_review_open_item(f->ctx, &old_item, &spec), 0);
    assert_int_equal(fxl_commit(f->ctx), 0);

    /* The amendment as record writes it, then the link, in one transaction. */
    assert_int_equal(fxl_begin(f->ctx), 0);
    sql(f, "INSERT INTO measurements (fraction_id, field_id, detector_id, reading, reading_unit, temp_c, "
           "temp_entered, corrected_dose_cgy, deviation_pct, verdict, supersedes_id, amend_reason, "
           "user_id, created_at) VALUES (101, 1, 1, 19.8, 'nC', 32, 0, 198, -1.0, 'within_tolerance', "
           "%lld, 'typed 17.6 for 19.8', 2, '2026-11-02T09:00:00Z')", (long long)old_m);
    new_m = count(f, "SELECT max(id) FROM measurements");
    assert_int_equal(fxl_review_follow_amendment(f->ctx, old_m, new_m), 0);
    assert_int_equal(fxl_review_follow_amendment(f->ctx, old_m, new_m), 0);   /* idempotent */
    assert_int_equal(fxl_commit(f->ctx), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events WHERE item_id = %lld AND kind = 'comment' "
                              "AND comment LIKE 'superseded by measurement #%lld: typed 17.6 for 19.8; new "
                              "result: within tolerance, deviation -1.00 %%'",
                           (long long)old_item, (long long)new_m), 1);
    /* The item stays open for the physicist. */
    assert_int_equal(count(f, "SELECT count(*) FROM review_items WHERE id = %lld AND status = 'open'",
                           (long long)old_item), 1);
    /* The listing shows the link. */
    {
        fxl_queue_filter q;
        fxl_review_item *it = NULL;
        size_t n = 0;
        memset(&q, 0, sizeof q);
        assert_int_equal(fxl_queue_list(f->ctx, &it, &n, &q), 0);
        assert_int_equal(n, 1);
        assert_int_equal(it[0].superseded_by, new_m);
        free(it);
    }
    /* A new item for the new measurement gets the back-link. */
    spec.measurement_id = new_m;
    spec.severity = 2;
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_review_open_item(f->ctx, &new_item, &spec), 0);
    assert_int_equal(fxl_review_follow_amendment(f->ctx, old_m, new_m), 0);
    assert_int_equal(fxl_commit(f->ctx), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events WHERE item_id = %lld AND kind = 'comment' "
                              "AND comment LIKE 'supersedes measurement #%lld%%'", (long long)new_item,
                           (long long)old_m), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events WHERE item_id = %lld AND kind = 'comment'",
                           (long long)old_item), 1);
    assert_int_equal(fxl_review_follow_amendment(f->ctx, new_m, old_m), FXL_ENOTFOUND);
    assert_chain_ok(f);
}

static void test_review_open_item_dedupes_by_key(void **state)
{
    fixture *f = *state;
    fxl_review_open_spec spec;
    int64_t id1 = 0, id2 = -1;

    memset(&spec, 0, sizeof spec);
    spec.rule = FXL_RULE_DRIFT;
    spec.rule_key = "detector:1:since:start";
    spec.severity = 3;
    spec.detector_id = 1;
    spec.summary = "invented";
    as(f, "tina");
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_review_open_item(f->ctx, &id1, &spec), 0);
    assert_int_equal(fxl_review_open_item(f->ctx, &id2, &spec), 0);
    spec.severity = 0;
    assert_int_equal(fxl_review_open_item(f->ctx, NULL, &spec), FXL_EINVAL);
    assert_int_equal(fxl_commit(f->ctx), 0);
    assert_true(id1 > 0);
    assert_int_equal(id2, 0);
    assert_int_equal(items(f, FXL_RULE_DRIFT), 1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_review_missing_first_fires_once, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_missing_every_and_none, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_missing_weekly_boundary, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_calibration_due_and_expired, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_dose_limit_boundary, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_dose_limit_not_inflated_by_gross_results, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_review_drift_opens_item_on_detector, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_drift_ignores_superseded_and_not_evaluable, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_bad_setting_refuses_logging, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_therapist_cannot_close, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_close_reopen_state_machine, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_configured_dispositions, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_list_order_and_filters, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_amendment_links_items, setup, teardown),
        cmocka_unit_test_setup_teardown(test_review_open_item_dedupes_by_key, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
