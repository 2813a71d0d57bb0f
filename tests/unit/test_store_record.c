/* Unit tests for the record path in src/store (record.c, record_load.c,
 * record_history.c) on a temporary database filled with invented fixture rows
 * by SQL: the snapshot columns, all-or-nothing writing, validation before
 * writing, the escalation rule over two fractions, amendments and history. */
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
#include "fxl/record.h"
#include "fxl/users.h"
#include "store/ctx.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
} fixture;

/* Invented department: one 6 MV beam, one photon diode calibrated at
 * N = 100 cGy / 10.0 nC = 10.0 cGy/nC (20 degC, SSD 100 cm, 10 x 10 cm),
 * field-size and SSD tables, levels 5 % / 8 %, one patient with a plan of two
 * entrance fields. */
static const char *const FIXTURE_SQL =
    "INSERT INTO users (login, full_name, role, created_at) VALUES "
    "  ('tina', 'Tina Therapist', 'therapist', '2026-09-01T08:00:00Z'),"
    "  ('otto', 'Otto Auditor', 'auditor', '2026-09-01T08:00:00Z');"
    "INSERT INTO machines (id, name, created_at) VALUES (1, 'LINAC-A', '2026-09-01T08:00:00Z');"
    "INSERT INTO beams (id, machine_id, name, modality, energy, dmax_cm, created_at) VALUES "
    "  (1, 1, '6X', 'photon', 6, 1.5, '2026-09-01T08:00:00Z');"
    "INSERT INTO detectors (id, serial, label, kind, reading_unit, temp_coeff_per_c, created_at) VALUES "
    "  (1, 'D-1', 'Diode 1', 'photon_diode', 'nC', 0.003, '2026-09-01T08:00:00Z'),"
    "  (2, 'D-2', 'Diode 2', 'photon_diode', 'nC', 0.003, '2026-09-01T08:00:00Z');"
    "INSERT INTO calibrations (detector_id, beam_id, point, calibrated_at, valid_until, "
    "  chamber_dose_cgy, readings, reading_n, reading_mean, reading_sd, factor_cgy_per_unit, "
    "  temp_c, ssd_cm, field_size_cm, user_id, created_at) VALUES "
    "  (1, 1, 'entrance', '2026-10-01T08:00:00Z', '2026-12-31T23:59:59Z', 100, '[10.0]', 1, 10.0, 0, "
    "   10.0, 20, 100, 10, 1, '2026-10-01T08:00:00Z'),"
    "  (2, 1, 'entrance', '2026-10-01T08:00:00Z', '2026-10-31T23:59:59Z', 100, '[10.0]', 1, 10.0, 0, "
    "   10.0, 20, 100, 10, 1, '2026-10-01T08:00:00Z');"
    "INSERT INTO correction_tables (id, detector_id, beam_id, parameter, effective_from, user_id, created_at) VALUES "
    "  (1, 1, 1, 'field_size', '2026-10-01T00:00:00Z', 1, '2026-10-01T08:00:00Z'),"
    "  (2, 1, 1, 'ssd', '2026-10-01T00:00:00Z', 1, '2026-10-01T08:00:00Z');"
    "INSERT INTO correction_points (table_id, x, factor) VALUES "
    "  (1, 5, 0.98), (1, 10, 1.00), (1, 20, 1.02), (2, 90, 0.99), (2, 100, 1.00), (2, 110, 1.01);"
    "INSERT INTO threshold_sets (id, name, version, effective_from, tolerance_pct, action_pct, "
    "  floor_cgy, user_id, created_at) VALUES "
    "  (1, 'all', 1, '2026-01-01T00:00:00Z', 5, 8, 0, 1, '2026-09-01T08:00:00Z');"
    "INSERT INTO patients (id, mrn, family_name, given_name, created_at) VALUES "
    "  (1, 'P-1', 'Example', 'Pat', '2026-10-01T08:00:00Z');"
    "INSERT INTO plans (id, patient_id, label, site, technique, fractions, user_id, created_at) VALUES "
    "  (1, 1, 'Pelvis v1', 'pelvis', '3D', 25, 1, '2026-10-01T08:00:00Z');"
    "INSERT INTO fields (id, plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, y_cm, "
    "  expected_dose_cgy, expected_source) VALUES "
    "  (1, 1, 'AP', 1, 'entrance', 'ssd', 200, 100, 10, 20, 200, 'tps'),"
    "  (2, 1, 'PA', 1, 'entrance', 'ssd', 180, 90, 10, 10, 180, 'tps');";

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    char *err = NULL;

    snprintf(f->dir, sizeof f->dir, "/tmp/fxlrecXXXXXX");
    assert_non_null(mkdtemp(f->dir));
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    assert_int_equal(fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE), 0);
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "admin", "Test Admin"), 0);
    if (sqlite3_exec(f->ctx->db, FIXTURE_SQL, NULL, NULL, &err) != SQLITE_OK) {
        print_error("fixture: %s\n", err);
        fail();
    }
    assert_int_equal(fxl_set_user(f->ctx, "tina"), 0);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[128];

    fxl_close(f->ctx);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    if (system(cmd) != 0)
        return -1;
    free(f);
    return 0;
}

static int64_t count(fixture *f, const char *sql)
{
    sqlite3_stmt *st = NULL;
    int64_t n = -1;

    if (sqlite3_prepare_v2(f->ctx->db, sql, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW)
        n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
    return n;
}

static double value(fixture *f, const char *sql)
{
    sqlite3_stmt *st = NULL;
    double v = NAN;

    if (sqlite3_prepare_v2(f->ctx->db, sql, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW &&
        sqlite3_column_type(st, 0) != SQLITE_NULL)
        v = sqlite3_column_double(st, 0);
    sqlite3_finalize(st);
    return v;
}

static fxl_reading_entry entry(const char *field, const char *detector, double reading, double temp_c)
{
    fxl_reading_entry e;

    fxl_reading_entry_init(&e);
    e.field = field;
    e.detector = detector;
    e.reading = reading;
    e.temp_c = temp_c;
    return e;
}

static fxl_record_request request(const fxl_reading_entry *e, size_t n, int fraction)
{
    fxl_record_request r;

    memset(&r, 0, sizeof r);
    r.mrn = "P-1";
    r.readings = e;
    r.n_readings = n;
    r.fraction = fraction;
    return r;
}

/* CF_fs for the AP field: equivalent square of 10 x 20 cm is 2XY/(X+Y) =
 * 13.333 cm (Sterling rule), linear between (10, 1.00) and (20, 1.02)
 * (physics: linear interpolation). */
static double ap_cf_fs(void)
{
    double eq = 2.0 * 10.0 * 20.0 / (10.0 + 20.0);
    return 1.00 + (eq - 10.0) / (20.0 - 10.0) * (1.02 - 1.00);
}

static void test_store_record_snapshot_columns_filled(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[] = {entry("AP", "D-1", 20.0, NAN), entry("PA", "D-1", 18.0, 20.0)};
    fxl_record_request req = request(e, 2, 0);
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    fxl_verify_report vr;
    int64_t audit_before = count(f, "SELECT count(*) FROM audit_log");
    /* D = M N CF_fs CF_ssd CF_wedge CF_tray CF_angle CF_T (AAPM TG-62), with
     * CF_T = 1 / (1 + a (T - T_cal)), a = 0.003/degC, T = skin default 32
     * degC (docs/settings.md), T_cal = 20 degC. */
    double cf_t = 1.0 / (1.0 + 0.003 * (32.0 - 20.0));
    double dose_ap = 20.0 * 10.0 * ap_cf_fs() * 1.0 * cf_t;
    /* PA: 10 x 10 cm is the reference field size; SSD 90 cm gives CF 0.99
     * from the table; T = T_cal gives CF_T = 1. */
    double dose_pa = 18.0 * 10.0 * 1.0 * 0.99;
    double dev_ap = round((dose_ap - 200.0) / 200.0 * 100.0 * 100.0) / 100.0;

    (void)state;
    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_int_equal(res.fraction_number, 1);
    assert_int_equal(res.n, 2);
    assert_near(res.items[0].corrected_dose_cgy, dose_ap, 1e-9);
    assert_near(res.items[0].cf[FXL_CF_FIELD_SIZE], ap_cf_fs(), 1e-12);
    assert_near(res.items[0].cf_temp, cf_t, 1e-12);
    assert_int_equal(res.items[0].temp_entered, 0);
    assert_near(res.items[0].deviation_pct, dev_ap, 1e-9);
    assert_near(res.items[1].corrected_dose_cgy, dose_pa, 1e-9);
    assert_int_equal(res.items[1].temp_entered, 1);

    /* The row as stored: every factor and the threshold used. */
    assert_int_equal(count(f, "SELECT count(*) FROM fractions"), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM measurements"), 2);
    assert_near(value(f, "SELECT factor_n FROM measurements WHERE field_id = 1"), 10.0, 1e-12);
    assert_near(value(f, "SELECT cf_field_size FROM measurements WHERE field_id = 1"), ap_cf_fs(), 1e-12);
    assert_near(value(f, "SELECT cf_ssd FROM measurements WHERE field_id = 1"), 1.0, 1e-12);
    assert_near(value(f, "SELECT cf_ssd FROM measurements WHERE field_id = 2"), 0.99, 1e-12);
    assert_near(value(f, "SELECT cf_wedge * cf_tray * cf_angle FROM measurements WHERE field_id = 1"), 1.0, 1e-12);
    assert_near(value(f, "SELECT cf_temp FROM measurements WHERE field_id = 1"), cf_t, 1e-12);
    assert_near(value(f, "SELECT corrected_dose_cgy FROM measurements WHERE field_id = 1"), dose_ap, 1e-9);
    assert_near(value(f, "SELECT expected_dose_cgy FROM measurements WHERE field_id = 1"), 200.0, 1e-12);
    assert_near(value(f, "SELECT deviation_pct FROM measurements WHERE field_id = 1"), dev_ap, 1e-9);
    assert_near(value(f, "SELECT temp_c FROM measurements WHERE field_id = 1"), 32.0, 1e-12);
    assert_int_equal(count(f, "SELECT temp_entered FROM measurements WHERE field_id = 1"), 0);
    assert_int_equal(count(f, "SELECT calibration_id FROM measurements WHERE field_id = 1"), 1);
    assert_int_equal(count(f, "SELECT threshold_set_id FROM measurements WHERE field_id = 1"), 1);
    assert_near(value(f, "SELECT tolerance_pct + 100 * action_pct FROM measurements WHERE field_id = 1"),
                5 + 800, 1e-12);
    assert_int_equal(count(f, "SELECT count(*) FROM measurements WHERE json_valid(reasons) "
                              "AND json_type(reasons) = 'array' AND json_array_length(reasons) >= 1"), 2);
    assert_int_equal(count(f, "SELECT user_id FROM measurements LIMIT 1"), fxl_user_id(f->ctx));
    /* Audit: the fraction and each measurement (plus queue items, if any). */
    assert_true(count(f, "SELECT count(*) FROM audit_log") >= audit_before + 3);
    assert_int_equal(fxl_audit_verify(f->ctx, &vr), 0);
    fxl_record_result_release(&res);
}

static void test_store_record_second_measurement_failing_writes_nothing(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[] = {entry("AP", "D-1", 20.0, NAN), entry("PA", "D-1", 18.0, NAN)};
    fxl_record_request req = request(e, 2, 0);
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    int64_t audit_before = count(f, "SELECT count(*) FROM audit_log");

    /* An injected failure on the second measurement row. */
    assert_int_equal(sqlite3_exec(f->ctx->db,
                                  "CREATE TRIGGER fail_second BEFORE INSERT ON measurements "
                                  "WHEN (SELECT count(*) FROM measurements) >= 1 "
                                  "BEGIN SELECT RAISE(ABORT, 'injected failure'); END;",
                                  NULL, NULL, NULL),
                     SQLITE_OK);
    assert_int_not_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "injected failure"));
    assert_int_equal(res.fraction_id, 0);
    assert_int_equal(res.n, 0);
    assert_int_equal(count(f, "SELECT count(*) FROM fractions"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM measurements"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_items"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit_before);
    assert_int_equal(sqlite3_get_autocommit(f->ctx->db), 1);  /* no transaction left open */

    /* Without the fault the same request goes through. */
    assert_int_equal(sqlite3_exec(f->ctx->db, "DROP TRIGGER fail_second", NULL, NULL, NULL), SQLITE_OK);
    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM measurements"), 2);
    fxl_record_result_release(&res);
}

static void expect_refused(fixture *f, const fxl_record_request *req, int code, const char *needle)
{
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    int64_t audit_before = count(f, "SELECT count(*) FROM audit_log");
    int rc = fxl_record_fraction(f->ctx, &res, req);

    if (rc != code || !strstr(fxl_errmsg(f->ctx), needle)) {
        print_error("rc %d (wanted %d), message '%s' (wanted '%s')\n", rc, code, fxl_errmsg(f->ctx),
                    needle);
        fail();
    }
    assert_int_equal(count(f, "SELECT count(*) FROM fractions"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit_before);
}

static void test_store_record_invalid_input_writes_nothing(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[2];
    fxl_record_request req;

    e[0] = entry("AP", "D-1", -3.2, NAN);
    req = request(e, 1, 0);
    expect_refused(f, &req, FXL_EINVAL, "reading '-3.2' for field 'AP' must be > 0 nC");
    e[0] = entry("AP", "D-1", 0.0, NAN);
    expect_refused(f, &req, FXL_EINVAL, "must be > 0 nC");
    e[0] = entry("AP", "D-1", 20.0, 46.0);
    expect_refused(f, &req, FXL_EINVAL, "must be 10 to 45 degC");
    e[0] = entry("LAT", "D-1", 20.0, NAN);
    expect_refused(f, &req, FXL_ENOTFOUND, "unknown field 'LAT'");
    e[0] = entry("AP", "D-9", 20.0, NAN);
    expect_refused(f, &req, FXL_ENOTFOUND, "unknown detector 'D-9'");
    e[0] = entry("AP", "D-1", 20.0, NAN);
    e[1] = entry("AP", "D-2", 20.0, NAN);
    req = request(e, 2, 0);
    expect_refused(f, &req, FXL_EINVAL, "given twice");
    req = request(e, 1, 26);
    expect_refused(f, &req, FXL_EINVAL, "must be 1 to 25");
    req = request(e, 1, 0);
    req.mrn = "P-404";
    expect_refused(f, &req, FXL_ENOTFOUND, "unknown patient 'P-404'");
    req = request(e, 1, 0);
    req.plan = "Breast";
    expect_refused(f, &req, FXL_ENOTFOUND, "unknown plan 'Breast'");
    req = request(e, 1, 0);
    req.treated_at = "2026-11-03";
    expect_refused(f, &req, FXL_EINVAL, "in the future");
    req.treated_at = "yesterday";
    expect_refused(f, &req, FXL_EINVAL, "not valid");

    /* An auditor may not log. */
    assert_int_equal(fxl_set_user(f->ctx, "otto"), 0);
    req = request(e, 1, 0);
    expect_refused(f, &req, FXL_EPERM, "therapist");
}

static void test_store_record_duplicate_fraction_names_it(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[] = {entry("AP", "D-1", 20.0, 20.0)};
    fxl_record_request req = request(e, 1, 3);
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    int64_t rows;

    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    fxl_record_result_release(&res);
    rows = count(f, "SELECT count(*) FROM audit_log");
    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "fraction 3 of plan 'Pelvis v1' is already logged"));
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), rows);
    /* The default number follows the highest logged. */
    req.fraction = 0;
    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_int_equal(res.fraction_number, 4);
    fxl_record_result_release(&res);
}

static void test_store_record_two_consecutive_outside_escalate(void **state)
{
    fixture *f = *state;
    /* At T = T_cal: D = M x 10.0 x CF_fs(13.33 cm) (TG-62 formula). A reading
     * of 21.0 nC gives 211.4 cGy, +5.70 % against 200 cGy: beyond 5 %,
     * within 8 %. */
    double dose = 21.0 * 10.0 * ap_cf_fs();
    double dev = (dose - 200.0) / 200.0 * 100.0;
    fxl_reading_entry e[] = {entry("AP", "D-1", 21.0, 20.0)};
    fxl_record_request req = request(e, 1, 0);
    fxl_record_result r1 = FXL_RECORD_RESULT_INIT, r2 = FXL_RECORD_RESULT_INIT;
    fxl_record_result r3 = FXL_RECORD_RESULT_INIT;

    assert_true(dev > 5.0 && dev < 8.0);
    assert_int_equal(fxl_record_fraction(f->ctx, &r1, &req), 0);
    assert_int_equal(r1.items[0].verdict, FXL_VERDICT_OUTSIDE_TOLERANCE);
    assert_int_equal(r1.items[0].escalated, 0);
    assert_int_equal(count(f, "SELECT severity FROM review_items WHERE rule = 'result'"), 2);

    assert_int_equal(fxl_record_fraction(f->ctx, &r2, &req), 0);
    assert_int_equal(r2.items[0].verdict, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(r2.items[0].escalated, 1);
    assert_non_null(strstr(r2.items[0].reasons.text[0], "two consecutive"));
    assert_int_equal(count(f, "SELECT max(severity) FROM review_items WHERE rule = 'result'"), 4);
    assert_int_equal(count(f, "SELECT count(*) FROM review_events e JOIN review_items i ON i.id = e.item_id WHERE e.kind = 'open' AND i.rule = 'result'"), 2);

    /* Opposite sign at the next fraction (19.0 nC: -4.3 % would be within,
     * so 18.0 nC: 181.2 cGy, -9.4 %): action on its own, not escalated. */
    e[0] = entry("AP", "D-1", 18.0, 20.0);
    assert_int_equal(fxl_record_fraction(f->ctx, &r3, &req), 0);
    assert_int_equal(r3.items[0].verdict, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(r3.items[0].escalated, 0);
    fxl_record_result_release(&r1);
    fxl_record_result_release(&r2);
    fxl_record_result_release(&r3);
}

static void test_store_record_not_evaluable_is_logged_with_reason(void **state)
{
    fixture *f = *state;
    /* D-2's calibration ended on 2026-10-31; treatment is 2026-11-02. */
    fxl_reading_entry e[] = {entry("PA", "D-2", 18.0, 20.0)};
    fxl_record_request req = request(e, 1, 0);
    fxl_record_result res = FXL_RECORD_RESULT_INIT;

    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_int_equal(res.items[0].verdict, FXL_VERDICT_NOT_EVALUABLE);
    assert_non_null(strstr(res.items[0].reasons.text[0], "calibration expired on 2026-10-31"));
    assert_true(isnan(res.items[0].corrected_dose_cgy));
    assert_true(isnan(value(f, "SELECT corrected_dose_cgy FROM measurements")));
    assert_int_equal(count(f, "SELECT severity FROM review_items WHERE rule = 'result'"), 3);
    fxl_record_result_release(&res);
}

static void test_store_record_amend_supersedes_and_history_marks(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[] = {entry("AP", "D-1", 2.0, 20.0)};  /* a tenth: unit slip */
    fxl_record_request req = request(e, 1, 0);
    /* a gross deviation is outside the action level (critical), re-read first */
    fxl_record_result res = FXL_RECORD_RESULT_INIT, am = FXL_RECORD_RESULT_INIT;
    fxl_amend_request a;
    fxl_history_query q = {"P-1", NULL, NULL};
    fxl_history_row *rows = NULL;
    size_t n = 0;
    int64_t first;

    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    assert_int_equal(res.items[0].verdict, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(res.items[0].gross, 1);
    first = res.items[0].measurement_id;

    fxl_amend_request_init(&a);
    a.measurement_id = first;
    a.reading = 20.0;
    a.reason = "";
    assert_int_equal(fxl_record_amend(f->ctx, &am, &a), FXL_EINVAL);
    a.reason = "decimal point misread";
    assert_int_equal(fxl_record_amend(f->ctx, &am, &a), 0);
    assert_int_equal(am.n, 1);
    assert_int_equal(am.fraction_id, res.fraction_id);
    assert_int_equal(am.items[0].supersedes_id, first);
    assert_int_equal(am.items[0].verdict, FXL_VERDICT_WITHIN);
    /* Kept the original's entered temperature: CF_T = 1 at T_cal. */
    assert_near(am.items[0].corrected_dose_cgy, 20.0 * 10.0 * ap_cf_fs(), 1e-9);
    assert_int_equal(count(f, "SELECT count(*) FROM measurements"), 2);
    assert_int_equal(count(f, "SELECT count(*) FROM fractions"), 1);
    /* The superseded row's queue item stays open and is linked by a comment
     * (rules over history, run in the same transaction). */
    assert_int_equal(count(f, "SELECT count(*) FROM review_items i JOIN measurements m "
                              "ON m.id = i.measurement_id WHERE m.supersedes_id IS NULL "
                              "AND i.rule = 'result' AND i.status = 'open'"), 1);
    assert_true(count(f, "SELECT count(*) FROM review_events e JOIN review_items i ON i.id = e.item_id "
                         "JOIN measurements m ON m.id = i.measurement_id "
                         "WHERE m.supersedes_id IS NULL AND e.kind = 'comment'") >= 1);
    /* A superseded row cannot be amended again. */
    fxl_record_result_release(&am);
    assert_int_equal(fxl_record_amend(f->ctx, &am, &a), FXL_ECONFLICT);
    assert_int_equal(am.n, 0);

    assert_int_equal(fxl_history_list(f->ctx, &rows, &n, &q), 0);
    assert_int_equal(n, 2);
    assert_int_equal(rows[0].measurement_id, first);
    assert_int_equal(rows[0].superseded_by, rows[1].measurement_id);
    assert_int_equal(rows[1].supersedes_id, first);
    assert_string_equal(rows[1].amend_reason, "decimal point misread");
    assert_int_equal(rows[0].verdict, FXL_VERDICT_OUTSIDE_ACTION);
    assert_int_equal(rows[0].gross, 1);
    assert_int_equal(rows[1].gross, 0);
    free(rows);
    q.field = "LAT";
    assert_int_equal(fxl_history_list(f->ctx, &rows, &n, &q), FXL_ENOTFOUND);
    fxl_record_result_release(&res);
    fxl_record_result_release(&am);
}

static void test_store_record_plan_defaults(void **state)
{
    fixture *f = *state;
    fxl_reading_entry e[] = {entry("PA", "D-2", 18.0, 20.0)};
    fxl_record_request req = request(e, 1, 0);
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    fxl_record_plan info;

    assert_int_equal(fxl_record_plan_load(f->ctx, &info, "P-1", NULL), 0);
    assert_int_equal(info.next_fraction, 1);
    assert_int_equal(info.n_fields, 2);
    assert_string_equal(info.last_detector, "");
    assert_near(info.skin_temp_c, 32.0, 1e-12);
    fxl_record_plan_release(&info);

    assert_int_equal(fxl_record_fraction(f->ctx, &res, &req), 0);
    fxl_record_result_release(&res);
    assert_int_equal(fxl_record_plan_load(f->ctx, &info, "P-1", NULL), 0);
    assert_int_equal(info.next_fraction, 2);
    assert_string_equal(info.fields[0].last_detector, "");
    assert_string_equal(info.fields[1].last_detector, "D-2");
    assert_string_equal(info.last_detector, "D-2");
    fxl_record_plan_release(&info);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_store_record_snapshot_columns_filled, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_record_second_measurement_failing_writes_nothing,
                                        setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_record_invalid_input_writes_nothing, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_record_duplicate_fraction_names_it, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_record_two_consecutive_outside_escalate, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_store_record_not_evaluable_is_logged_with_reason, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_store_record_amend_supersedes_and_history_marks, setup,
                                        teardown),
        cmocka_unit_test_setup_teardown(test_store_record_plan_defaults, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
