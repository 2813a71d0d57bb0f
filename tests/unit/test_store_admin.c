/* Unit tests for the equipment side of src/store and src/io: users,
 * settings, machines and beams, detectors and their status history,
 * cross-calibrations and correction tables. Each test runs on a fresh
 * temporary database; all data is invented. */
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

#include "fxl/calibrations.h"
#include "fxl/corrections.h"
#include "fxl/detectors.h"
#include "fxl/fxl.h"
#include "fxl/machines.h"
#include "fxl/settings.h"
#include "fxl/users.h"
#include "store/audit.h"
#include "store/ctx.h"
#include "store/seal.h"
#include "sign_helper.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.12g, expected %.12g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void assert_msg_at(fxl_ctx *ctx, const char *needle, const char *file, int line)
{
    if (!strstr(fxl_errmsg(ctx), needle)) {
        print_error("message \"%s\" does not contain \"%s\"\n", fxl_errmsg(ctx), needle);
        _fail(file, line);
    }
}
#define assert_msg(ctx, needle) assert_msg_at((ctx), (needle), __FILE__, __LINE__)

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);

    snprintf(f->dir, sizeof f->dir, "/tmp/fxladmXXXXXX");
    assert_non_null(mkdtemp(f->dir));
    snprintf(f->path, sizeof f->path, "%s/t.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    assert_int_equal(fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE), 0);
    assert_int_equal(fxl_init_department(f->ctx, "Invented", "UTC", "admin", "Test Admin"), 0);
    assert_int_equal(test_sign_as(f->ctx, "admin"), 0);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char cmd[128];

    test_sign_forget(f->ctx);
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

static void exec_sql(fixture *f, const char *sql)
{
    char *err = NULL;

    if (sqlite3_exec(f->ctx->db, sql, NULL, NULL, &err) != SQLITE_OK) {
        print_error("fixture SQL: %s\n", err);
        sqlite3_free(err);
        fail();
    }
}

/* An invented machine with one 6 MV beam, a physicist and a therapist. */
static void add_basics(fixture *f)
{
    fxl_beam_spec b = {"LINAC-A", "6X", "photon", 6, 1.5, 1.0, 101.5};

    assert_int_equal(fxl_user_add(f->ctx, NULL, "phil", "Phil Physicist", FXL_ROLE_PHYSICIST), 0);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "tina", "Tina Therapist", FXL_ROLE_THERAPIST), 0);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "otto", "Otto Auditor", FXL_ROLE_AUDITOR), 0);
    assert_int_equal(test_sign_as(f->ctx, "phil"), 0);
    assert_int_equal(fxl_machine_add(f->ctx, NULL, "LINAC-A", 100), 0);
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &b), 0);
}

static fxl_detector_spec diode(const char *serial)
{
    fxl_detector_spec d;

    memset(&d, 0, sizeof d);
    d.serial = serial;
    d.label = "Diode";
    d.kind = "photon_diode";
    d.reading_unit = "nC";
    d.sensitivity = NAN;
    d.temp_coeff_per_c = 0.003;
    d.dose_limit_cgy = NAN;
    return d;
}

static fxl_calib_spec calib(const char *serial, const double *readings, size_t n)
{
    fxl_calib_spec c;

    memset(&c, 0, sizeof c);
    c.serial = serial;
    c.machine = "LINAC-A";
    c.beam = "6X";
    c.point = "entrance";
    c.chamber_dose_cgy = 100.0;
    c.readings = readings;
    c.n_readings = n;
    c.temp_c = 21.5;
    c.ssd_cm = c.field_size_cm = c.ref_thickness_cm = NAN;
    return c;
}

/* ---- users ----------------------------------------------------------------- */

static void test_store_admin_user_add_list_deactivate(void **state)
{
    fixture *f = *state;
    fxl_user *users = NULL;
    size_t n = 0;
    int64_t id = 0;

    assert_int_equal(fxl_user_add(f->ctx, &id, "phil", "Phil Physicist", FXL_ROLE_PHYSICIST), 0);
    assert_true(id > 0);
    assert_int_equal(fxl_user_list(f->ctx, &users, &n), 0);
    assert_int_equal(n, 2);
    assert_string_equal(users[1].login, "phil");
    assert_int_equal(users[1].role, FXL_ROLE_PHYSICIST);
    assert_int_equal(users[1].active, 1);
    free(users);

    assert_int_equal(fxl_user_deactivate(f->ctx, "phil"), 0);
    assert_int_equal(count(f, "SELECT active FROM users WHERE login = 'phil'"), 0);
    assert_int_equal(fxl_user_deactivate(f->ctx, "phil"), FXL_ECONFLICT);
    /* a deactivated user can no longer act */
    assert_int_equal(test_sign_as(f->ctx, "phil"), FXL_EPERM);
    assert_int_equal(test_sign_as(f->ctx, "admin"), 0);
    /* audit: init (2 rows) + create + deactivate + its signature */
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), 5);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log WHERE action = 'deactivate' "
                              "AND content LIKE '%\"login\":\"phil\"%'"), 1);
}

static void test_store_admin_user_refusals(void **state)
{
    fixture *f = *state;

    assert_int_equal(fxl_user_add(f->ctx, NULL, "bad login", "X", FXL_ROLE_THERAPIST), FXL_EINVAL);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "x", "", FXL_ROLE_THERAPIST), FXL_EINVAL);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "admin", "Again", FXL_ROLE_ADMIN), FXL_ECONFLICT);
    /* the acting admin cannot deactivate themselves, nor the last admin go */
    assert_int_equal(fxl_user_deactivate(f->ctx, "admin"), FXL_EINVAL);
    assert_int_equal(fxl_user_deactivate(f->ctx, "nobody"), FXL_ENOTFOUND);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "phil", "Phil Physicist", FXL_ROLE_PHYSICIST), 0);
    assert_int_equal(test_sign_as(f->ctx, "phil"), 0);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "tina", "Tina", FXL_ROLE_THERAPIST), FXL_EPERM);
    assert_int_equal(fxl_user_deactivate(f->ctx, "admin"), FXL_EPERM);
    assert_int_equal(count(f, "SELECT count(*) FROM users"), 2);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), 3);
}

/* ---- settings -------------------------------------------------------------- */

static void test_store_admin_setting_ranges(void **state)
{
    fixture *f = *state;
    char buf[64];
    long v = 0;

    /* boundaries of the accepted ranges */
    assert_int_equal(fxl_setting_validate(f->ctx, "skin_temp_c", "10"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "skin_temp_c", "45"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "skin_temp_c", "9.9"), FXL_EINVAL);
    assert_msg(f->ctx, "10 to 45 degC");
    assert_int_equal(fxl_setting_validate(f->ctx, "skin_temp_c", "45.1"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "skin_temp_c", "warm"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "implausible_pct", "5"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "implausible_pct", "4.99"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "implausible_pct", "100"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "implausible_pct", "101"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_timeout_s", "1"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_timeout_s", "300"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_timeout_s", "0"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_timeout_s", "301"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_timeout_s", "2.5"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "calibration_due_days", "-1"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "department", ""), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "alert_command", ""), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "timezone", "UTC"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "timezone", "../etc/passwd"), FXL_EINVAL);
    /* keys read by the rules over history and the review queue */
    assert_int_equal(fxl_setting_validate(f->ctx, "weekly_interval_days", "7"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "weekly_interval_days", "61"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "cusum_h_pct", "0.05"), FXL_EINVAL);
    assert_int_equal(fxl_setting_validate(f->ctx, "cusum_target_pct", "-20"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "dispositions", "set-up error, other"), 0);
    assert_int_equal(fxl_setting_validate(f->ctx, "colour", "blue"), FXL_EINVAL);
    assert_msg(f->ctx, "unknown setting 'colour'");

    assert_int_equal(fxl_setting_change(f->ctx, "skin_temp_c", "33.5"), 0);
    assert_int_equal(fxl_setting_get(f->ctx, "skin_temp_c", buf, sizeof buf), 0);
    assert_string_equal(buf, "33.5");
    assert_int_equal(fxl_setting_change(f->ctx, "skin_temp_c", "50"), FXL_EINVAL);
    assert_int_equal(fxl_setting_get(f->ctx, "skin_temp_c", buf, sizeof buf), 0);
    assert_string_equal(buf, "33.5");

    assert_int_equal(fxl_setting_get_int(f->ctx, &v, "calibration_interval_days", 90), 0);
    assert_int_equal(v, 90);
    assert_int_equal(fxl_user_add(f->ctx, NULL, "tina", "Tina", FXL_ROLE_THERAPIST), 0);
    assert_int_equal(test_sign_as(f->ctx, "tina"), 0);
    assert_int_equal(fxl_setting_change(f->ctx, "skin_temp_c", "30"), FXL_EPERM);
}

/* ---- machines and beams ------------------------------------------------------ */

static void test_store_admin_machine_and_beams(void **state)
{
    fixture *f = *state;
    fxl_beam_spec e9 = {"LINAC-A", "9E", "electron", 9, NAN, NAN, NAN};
    fxl_beam_spec dup = {"LINAC-A", "6X", "photon", 6, NAN, NAN, NAN};
    fxl_beam_spec nomachine = {"LINAC-Z", "6X", "photon", 6, NAN, NAN, NAN};
    fxl_beam_spec badenergy = {"LINAC-A", "99X", "photon", 60, NAN, NAN, NAN};
    fxl_beam_spec badmod = {"LINAC-A", "P", "proton", 6, NAN, NAN, NAN};
    fxl_machine *list = NULL;
    size_t n = 0;
    int64_t id = 0;

    add_basics(f);
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &e9), 0);
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &dup), FXL_ECONFLICT);
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &nomachine), FXL_ENOTFOUND);
    assert_msg(f->ctx, "unknown machine 'LINAC-Z'");
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &badenergy), FXL_EINVAL);
    assert_int_equal(fxl_beam_add(f->ctx, NULL, &badmod), FXL_EINVAL);
    assert_int_equal(fxl_machine_add(f->ctx, NULL, "LINAC-A", 100), FXL_ECONFLICT);
    assert_int_equal(fxl_machine_add(f->ctx, NULL, "LINAC-B", 20), FXL_EINVAL);

    assert_int_equal(fxl_machine_list(f->ctx, &list, &n), 0);
    assert_int_equal(n, 1);
    assert_int_equal(list[0].n_beams, 2);
    assert_string_equal(list[0].beams[0].name, "6X");
    assert_near(list[0].beams[0].norm_distance_cm, 101.5, 1e-9);
    assert_true(isnan(list[0].beams[1].dmax_cm));
    fxl_machine_list_free(list, n);
    assert_int_equal(fxl_beam_find(f->ctx, &id, "LINAC-A", "9E"), 0);
    assert_int_equal(fxl_beam_find(f->ctx, &id, "LINAC-A", "18X"), FXL_ENOTFOUND);

    assert_int_equal(test_sign_as(f->ctx, "tina"), 0);
    assert_int_equal(fxl_machine_add(f->ctx, NULL, "LINAC-C", 100), FXL_EPERM);
    assert_int_equal(count(f, "SELECT count(*) FROM machines"), 1);
    assert_int_equal(count(f, "SELECT count(*) FROM beams"), 2);
}

/* ---- detectors ---------------------------------------------------------------- */

static void test_store_admin_detector_add_and_refusals(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    fxl_detector got;

    add_basics(f);
    d.dose_limit_cgy = 50000;
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", NULL), 0);
    assert_string_equal(got.status, "in_service");
    assert_string_equal(got.reading_unit, "nC");
    assert_near(got.temp_coeff_per_c, 0.003, 1e-12);
    assert_near(got.accumulated_dose_cgy, 0, 0);
    assert_string_equal(got.last_calibrated_at, "");

    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_ECONFLICT);
    d = diode("D-1002");
    d.kind = "ion_chamber";
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_EINVAL);
    d = diode("D-1002");
    d.temp_coeff_per_c = 0.3;  /* percent typed as a fraction */
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_EINVAL);
    assert_msg(f->ctx, "0.3 %/degC");
    d = diode("D-1002");
    d.reading_unit = "Gy";
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_EINVAL);

    d = diode("D-1003");
    assert_int_equal(test_sign_as(f->ctx, "tina"), 0);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_EPERM);
    assert_int_equal(test_sign_as(f->ctx, "otto"), 0);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), FXL_EPERM);
    assert_int_equal(count(f, "SELECT count(*) FROM detectors"), 1);
}

static void test_store_admin_detector_status_history(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    fxl_detector_status_row *hist = NULL;
    fxl_detector got;
    size_t n = 0;
    int64_t audit_before;

    add_basics(f);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "out_for_service", "cable repair",
                                             "2026-11-02T09:00:00Z"), 0);
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", NULL), 0);
    assert_string_equal(got.status, "out_for_service");
    /* the same status again, a change dated before the last one, no reason */
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "out_for_service", "again", NULL),
                     FXL_ECONFLICT);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "in_service", "back",
                                             "2026-10-01T00:00:00Z"), FXL_EINVAL);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "in_service", "", NULL), FXL_EINVAL);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "in_service", "future",
                                             "2026-12-01T00:00:00Z"), FXL_EINVAL);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "broken", "x", NULL), FXL_EINVAL);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "in_service", "repaired", NULL), 0);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "retired", "worn out", NULL), 0);
    /* retirement is final */
    audit_before = count(f, "SELECT count(*) FROM audit_log");
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "in_service", "oops", NULL), FXL_EINVAL);
    assert_msg(f->ctx, "retirement is final");
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log"), audit_before);

    assert_int_equal(fxl_detector_status_history(f->ctx, &hist, &n, "D-1001"), 0);
    assert_int_equal(n, 4);
    assert_string_equal(hist[0].status, "in_service");
    assert_string_equal(hist[1].status, "out_for_service");
    assert_string_equal(hist[1].reason, "cable repair");
    assert_string_equal(hist[3].status, "retired");
    assert_string_equal(hist[3].user, "phil");
    free(hist);
    /* status as of a moment before the retirement */
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", "2026-11-01T00:00:00Z"), 0);
    assert_string_equal(got.status, "in_service");
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log WHERE action = 'retire'"), 1);
    /* history rows cannot be edited */
    assert_int_not_equal(sqlite3_exec(f->ctx->db, "UPDATE detector_status SET reason = 'x'", NULL,
                                      NULL, NULL), SQLITE_OK);
}

/* ---- calibrations ------------------------------------------------------------- */

static void test_store_admin_calib_factor_mean_sd(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    static const double r1[] = {10.01, 10.03, 9.98};
    static const double r2[] = {20.12, 20.05, 20.09, 20.15, 20.07};
    fxl_calib_spec c = calib("D-1001", r1, 3);
    fxl_calibration out, out2;

    add_basics(f);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    c.calibrated_at = "2026-10-01T08:00:00Z";
    assert_int_equal(fxl_calib_add(f->ctx, &out, &c), 0);
    /* Python 3 statistics.mean / statistics.stdev of 10.01, 10.03, 9.98 */
    assert_near(out.mean, 10.006666666666666, 1e-12);
    assert_near(out.sd, 0.025166114784235295, 1e-12);
    /* N = 100 / mean (TG-62 cross-calibration arithmetic) */
    assert_near(out.factor_cgy_per_unit, 9.993337774816789, 1e-10);
    assert_int_equal(out.n, 3);
    assert_string_equal(out.valid_until, "2026-12-30T08:00:00Z");  /* 90 days, the default */
    assert_string_equal(out.state, "current");
    assert_true(isnan(out.previous_factor));
    assert_near(out.temp_c, 21.5, 1e-12);
    assert_near(out.ssd_cm, 100, 0);
    assert_near(out.field_size_cm, 10, 0);

    c = calib("D-1001", r2, 5);
    c.chamber_dose_cgy = 200.0;
    c.valid_days = 30;
    assert_int_equal(fxl_calib_add(f->ctx, &out2, &c), 0);
    /* Python 3 statistics of 20.12, 20.05, 20.09, 20.15, 20.07; N = 200 / mean */
    assert_near(out2.mean, 20.096, 1e-12);
    assert_near(out2.sd, 0.039749213828703, 1e-12);
    assert_near(out2.factor_cgy_per_unit, 9.952229299363058, 1e-10);
    assert_near(out2.previous_factor, 9.993337774816789, 1e-10);
    assert_string_equal(out2.calibrated_at, "2026-11-02T09:00:00Z");
    assert_string_equal(out2.valid_until, "2026-12-02T09:00:00Z");
    assert_int_equal(count(f, "SELECT count(*) FROM calibrations"), 2);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log WHERE entity = 'calibrations'"), 2);
}

static void test_store_admin_calib_validity_and_listing(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    static const double r[] = {10.0};
    fxl_calib_spec c = calib("D-1001", r, 1);
    fxl_calibration out, *list = NULL;
    size_t n = 0;

    add_basics(f);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    assert_int_equal(fxl_setting_change(f->ctx, "calibration_interval_days", "30"), 0);
    c.calibrated_at = "2026-09-01T08:00:00Z";
    assert_int_equal(fxl_calib_add(f->ctx, &out, &c), 0);
    assert_string_equal(out.valid_until, "2026-10-01T08:00:00Z");
    assert_string_equal(out.state, "expired");
    assert_near(out.sd, 0, 0);  /* n == 1 */

    c.calibrated_at = "2026-10-20T08:00:00Z";
    c.valid_until = "2027-01-31T23:59:59Z";
    assert_int_equal(fxl_calib_add(f->ctx, &out, &c), 0);
    assert_int_equal(fxl_calib_list(f->ctx, &list, &n, "D-1001", NULL), 0);
    assert_int_equal(n, 2);
    assert_string_equal(list[0].state, "current");
    assert_string_equal(list[1].state, "superseded");
    free(list);
    assert_int_equal(fxl_calib_list(f->ctx, &list, &n, "D-9999", NULL), FXL_ENOTFOUND);
}

static void test_store_admin_calib_refusals(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    static const double r[] = {10.01, 10.03, 9.98};
    static const double bad[] = {10.01, -1.0};
    fxl_calib_spec c;

    add_basics(f);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    c = calib("D-1001", bad, 2);
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    assert_msg(f->ctx, "must be > 0 nC");
    c = calib("D-1001", r, 3);
    c.beam = "18X";
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_ENOTFOUND);
    c = calib("D-1001", r, 3);
    c.point = "midline";
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    c = calib("D-1001", r, 3);
    c.valid_days = 30;
    c.valid_until = "2027-01-01T23:59:59Z";
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    c = calib("D-1001", r, 3);
    c.valid_until = "2026-11-01T23:59:59Z";  /* before the calibration */
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    c = calib("D-1001", r, 3);
    c.calibrated_at = "2026-11-03T00:00:00Z";  /* future */
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    c = calib("D-1001", r, 3);
    c.temp_c = 50;
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    c = calib("D-1001", r, 3);
    assert_int_equal(test_sign_as(f->ctx, "tina"), 0);
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EPERM);
    assert_int_equal(test_sign_as(f->ctx, "phil"), 0);
    assert_int_equal(fxl_detector_set_status(f->ctx, "D-1001", "retired", "worn out", NULL), 0);
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), FXL_EINVAL);
    assert_msg(f->ctx, "retired");
    assert_int_equal(count(f, "SELECT count(*) FROM calibrations"), 0);
}

/* ---- accumulated dose ----------------------------------------------------------- */

static void test_store_admin_accumulated_dose_since_calibration(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    static const double r[] = {10.0};
    fxl_calib_spec c = calib("D-1001", r, 1);
    fxl_detector got;

    add_basics(f);
    d.dose_limit_cgy = 1000;
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    c.calibrated_at = "2026-10-10T08:00:00Z";
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), 0);
    /* Invented fractions: one before the calibration (not counted), two
     * after it; one reading of the second amended (counted once, as its
     * replacement); one not evaluable (no dose). */
    exec_sql(f,
             "INSERT INTO patients (id, mrn, family_name, created_at) VALUES (1, 'P-1', 'Example', "
             "  '2026-10-01T08:00:00Z');"
             "INSERT INTO plans (id, patient_id, label, site, technique, fractions, user_id, created_at) "
             "  VALUES (1, 1, 'v1', 'pelvis', '3D', 25, 1, '2026-10-01T08:00:00Z');"
             "INSERT INTO fields (id, plan_id, name, beam_id, point, setup, mu, ssd_cm, x_cm, y_cm) "
             "  VALUES (1, 1, 'AP', 1, 'entrance', 'ssd', 200, 100, 10, 10);"
             "INSERT INTO fractions (id, plan_id, number, treated_at, user_id, created_at) VALUES "
             "  (1, 1, 1, '2026-10-05T08:00:00Z', 1, '2026-10-05T08:00:00Z'),"
             "  (2, 1, 2, '2026-10-12T08:00:00Z', 1, '2026-10-12T08:00:00Z'),"
             "  (3, 1, 3, '2026-10-13T08:00:00Z', 1, '2026-10-13T08:00:00Z');"
             "INSERT INTO measurements (id, fraction_id, field_id, detector_id, reading, reading_unit, "
             "  temp_c, temp_entered, corrected_dose_cgy, verdict, supersedes_id, amend_reason, user_id, "
             "  created_at) VALUES "
             "  (1, 1, 1, 1, 20, 'nC', 32, 1, 200.0, 'within_tolerance', NULL, NULL, 1, '2026-10-05T08:00:00Z'),"
             "  (2, 2, 1, 1, 20, 'nC', 32, 1, 210.0, 'within_tolerance', NULL, NULL, 1, '2026-10-12T08:00:00Z'),"
             "  (3, 2, 1, 1, 19, 'nC', 32, 1, 190.5, 'within_tolerance', 2, 'typo', 1, '2026-10-12T09:00:00Z'),"
             "  (4, 3, 1, 1, 20, 'nC', 32, 1, 199.5, 'within_tolerance', NULL, NULL, 1, '2026-10-13T08:00:00Z'),"
             "  (5, 3, 1, 1, 20, 'nC', 32, 1, NULL, 'not_evaluable', NULL, NULL, 1, '2026-10-13T08:05:00Z');");
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", NULL), 0);
    /* arithmetic: 190.5 + 199.5 */
    assert_near(got.accumulated_dose_cgy, 390.0, 1e-9);
    assert_int_equal(got.measurement_count, 2);
    assert_string_equal(got.last_calibrated_at, "2026-10-10T08:00:00Z");
    /* before the calibration: everything treated so far (200.0) */
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", "2026-10-06T00:00:00Z"), 0);
    assert_near(got.accumulated_dose_cgy, 200.0, 1e-9);
    /* a new calibration resets it */
    c.calibrated_at = "2026-10-20T08:00:00Z";
    assert_int_equal(fxl_calib_add(f->ctx, NULL, &c), 0);
    assert_int_equal(fxl_detector_get(f->ctx, &got, "D-1001", NULL), 0);
    assert_near(got.accumulated_dose_cgy, 0.0, 0);
}

/* ---- correction tables ---------------------------------------------------------- */

static const char GOOD_FILE[] =
    "{\"format\": \"fxledger-corrections\", \"version\": 1, \"detector\": \"D-1001\",\n"
    " \"source\": \"invented\",\n"
    " \"tables\": [\n"
    "  {\"machine\": \"LINAC-A\", \"beam\": \"6X\", \"parameter\": \"field_size\",\n"
    "   \"effective_from\": \"2026-10-15\",\n"
    "   \"points\": [{\"x\": 5, \"factor\": 1.012}, {\"x\": 10, \"factor\": 1.0},\n"
    "              {\"x\": 20, \"factor\": 0.991}]},\n"
    "  {\"machine\": \"LINAC-A\", \"beam\": \"6X\", \"parameter\": \"tray\",\n"
    "   \"effective_from\": \"2026-10-15T12:00:00Z\", \"source\": \"tray check\",\n"
    "   \"points\": [{\"x\": 0, \"factor\": 1.0}, {\"x\": 1, \"factor\": 1.004}]}\n"
    " ]}\n";

static int parse_text(fixture *f, fxl_corr_file *out, const char *text)
{
    return fxl_corr_file_parse(f->ctx, out, "test.json", text, strlen(text));
}

/* GOOD_FILE with the first occurrence of `from` replaced by `to`. */
static int parse_variant(fixture *f, const char *from, const char *to)
{
    char buf[2048];
    const char *at = strstr(GOOD_FILE, from);
    fxl_corr_file file = FXL_CORR_FILE_INIT;
    int rc;

    assert_non_null(at);
    snprintf(buf, sizeof buf, "%.*s%s%s", (int)(at - GOOD_FILE), GOOD_FILE, to, at + strlen(from));
    rc = parse_text(f, &file, buf);
    fxl_corr_file_release(&file);
    return rc;
}

static void test_store_admin_corrections_parse(void **state)
{
    fixture *f = *state;
    fxl_corr_file file = FXL_CORR_FILE_INIT;
    char truncated[sizeof GOOD_FILE];

    assert_int_equal(parse_text(f, &file, GOOD_FILE), 0);
    assert_string_equal(file.detector, "D-1001");
    assert_int_equal(file.n_tables, 2);
    assert_string_equal(file.tables[0].effective_from, "2026-10-15T00:00:00Z");
    assert_string_equal(file.tables[0].source, "invented");
    assert_string_equal(file.tables[1].source, "tray check");
    assert_int_equal(file.tables[0].n_points, 3);
    assert_near(file.tables[0].points[2].factor, 0.991, 0);
    fxl_corr_file_release(&file);

    assert_int_equal(parse_variant(f, "{\"x\": 10, \"factor\": 1.0}", "{\"x\": 5, \"factor\": 1.0}"),
                     FXL_EINVAL);
    assert_msg(f->ctx, "x must increase strictly");
    assert_int_equal(parse_variant(f, "1.012", "2.0"), FXL_EINVAL);
    assert_msg(f->ctx, "factor '2'");
    assert_int_equal(parse_variant(f, "1.012", "0.5"), FXL_EINVAL);
    assert_int_equal(parse_variant(f, "1.012", "0.5001"), 0);
    assert_int_equal(parse_variant(f, "\"field_size\"", "\"collimator\""), FXL_EINVAL);
    assert_msg(f->ctx, "parameter 'collimator'");
    assert_int_equal(parse_variant(f, "2026-10-15\"", "2026-02-30\""), FXL_EINVAL);
    assert_msg(f->ctx, "effective_from '2026-02-30'");
    assert_int_equal(parse_variant(f, "{\"x\": 1, \"factor\": 1.004}", "{\"x\": 2, \"factor\": 1.004}"),
                     FXL_EINVAL);
    assert_int_equal(parse_variant(f, "\"points\": [{\"x\": 5", "\"pionts\": [{\"x\": 5"), FXL_EINVAL);
    assert_msg(f->ctx, "unknown key 'pionts'");
    assert_int_equal(parse_variant(f, "\"version\": 1", "\"version\": 2"), FXL_EINVAL);
    /* malformed: a missing comma on line 4 */
    assert_int_equal(parse_variant(f, "\"6X\", \"parameter\"", "\"6X\" \"parameter\""), FXL_EINVAL);
    assert_msg(f->ctx, "line 4");
    /* truncated */
    memcpy(truncated, GOOD_FILE, 200);
    truncated[200] = '\0';
    assert_int_equal(parse_text(f, &file, truncated), FXL_EINVAL);
    assert_msg(f->ctx, "ends too early");
}

static void test_store_admin_corrections_store_and_list(void **state)
{
    fixture *f = *state;
    fxl_detector_spec d = diode("D-1001");
    fxl_corr_file file = FXL_CORR_FILE_INIT;
    fxl_corr_table *list = NULL, t;
    int64_t *ids = NULL;
    size_t n = 0;

    add_basics(f);
    assert_int_equal(fxl_detector_add(f->ctx, NULL, &d), 0);
    assert_int_equal(parse_text(f, &file, GOOD_FILE), 0);

    /* refused for a therapist, nothing written */
    assert_int_equal(test_sign_as(f->ctx, "tina"), 0);
    assert_int_equal(fxl_corr_store(f->ctx, &ids, &file), FXL_EPERM);
    assert_int_equal(test_sign_as(f->ctx, "phil"), 0);
    /* an unknown beam in the second table: nothing of the first is written */
    snprintf(file.tables[1].beam, sizeof file.tables[1].beam, "18X");
    assert_int_equal(fxl_corr_store(f->ctx, &ids, &file), FXL_ENOTFOUND);
    assert_int_equal(count(f, "SELECT count(*) FROM correction_tables"), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM correction_points"), 0);
    snprintf(file.tables[1].beam, sizeof file.tables[1].beam, "6X");

    assert_int_equal(fxl_corr_store(f->ctx, &ids, &file), 0);
    assert_non_null(ids);
    assert_int_equal(count(f, "SELECT count(*) FROM correction_tables"), 2);
    assert_int_equal(count(f, "SELECT count(*) FROM correction_points"), 5);
    assert_int_equal(count(f, "SELECT count(*) FROM audit_log WHERE action = 'load'"), 2);
    assert_int_equal(fxl_corr_get(f->ctx, &t, ids[0], NULL), 0);
    assert_int_equal(t.n_points, 3);
    assert_near(t.points[0].x, 5, 0);
    assert_near(t.points[0].factor, 1.012, 0);
    assert_int_equal(t.in_force, 1);
    fxl_corr_table_release(&t);
    free(ids);
    ids = NULL;

    /* the same file again: conflict, nothing written */
    assert_int_equal(fxl_corr_store(f->ctx, &ids, &file), FXL_ECONFLICT);
    assert_int_equal(count(f, "SELECT count(*) FROM correction_tables"), 2);
    /* a newer version supersedes the field-size table */
    snprintf(file.tables[0].effective_from, sizeof file.tables[0].effective_from,
             "2026-11-01T00:00:00Z");
    snprintf(file.tables[1].effective_from, sizeof file.tables[1].effective_from,
             "2026-11-01T00:00:00Z");
    assert_int_equal(fxl_corr_store(f->ctx, NULL, &file), 0);
    fxl_corr_file_release(&file);
    assert_int_equal(fxl_corr_list(f->ctx, &list, &n, "D-1001", NULL), 0);
    assert_int_equal(n, 4);
    assert_string_equal(list[0].parameter, "field_size");
    assert_int_equal(list[0].in_force, 0);
    assert_int_equal(list[1].in_force, 1);
    assert_near(list[1].x_min, 5, 0);
    assert_near(list[1].x_max, 20, 0);
    fxl_corr_list_free(list, n);
    /* points cannot be edited */
    assert_int_not_equal(sqlite3_exec(f->ctx->db, "UPDATE correction_points SET factor = 1.1", NULL,
                                      NULL, NULL), SQLITE_OK);
    assert_int_equal(fxl_corr_get(f->ctx, &t, 999, NULL), FXL_ENOTFOUND);
}

/* Row seals follow the transaction (store/seal.c): a row written inside a
 * rolled-back transaction is not sealed by the next audit row, and a row
 * marked twice in one transaction (the update hook and an explicit mark,
 * as a correction table's points do) gets exactly one seal. Machines are
 * never updated (sql/001), so the writes here are inserts. */
static void test_store_admin_seal_marks_follow_transaction(void **state)
{
    fixture *f = *state;
    cJSON *content = cJSON_CreateObject();
    int64_t before, audit_id;

    assert_non_null(content);
    add_basics(f);
    before = count(f, "SELECT count(*) FROM row_seals WHERE tbl = 'machines'");
    assert_true(before >= 1);

    assert_int_equal(fxl_begin(f->ctx), 0);
    exec_sql(f, "INSERT INTO machines (name, sad_cm, created_at) VALUES ('LINAC-R', 100, '2026-11-02T09:00:00Z')");
    assert_true(fxl_seal_has_pending(f->ctx));
    fxl_rollback(f->ctx);
    assert_false(fxl_seal_has_pending(f->ctx));
    assert_int_equal(fxl_begin(f->ctx), 0);
    assert_int_equal(fxl_audit_append(f->ctx, "test", "machines", 0, content), 0);
    assert_int_equal(fxl_commit(f->ctx), 0);
    assert_int_equal(count(f, "SELECT count(*) FROM row_seals WHERE tbl = 'machines'"), before);

    assert_int_equal(fxl_begin(f->ctx), 0);
    exec_sql(f, "INSERT INTO machines (name, sad_cm, created_at) VALUES ('LINAC-T', 100, '2026-11-02T09:00:00Z')");
    assert_int_equal(fxl_seal_mark(f->ctx, "machines", sqlite3_last_insert_rowid(f->ctx->db)), 0);
    assert_int_equal(fxl_audit_append(f->ctx, "test", "machines", 0, content), 0);
    assert_int_equal(fxl_commit(f->ctx), 0);
    audit_id = count(f, "SELECT max(id) FROM audit_log");
    assert_int_equal(count(f, "SELECT count(*) FROM row_seals WHERE tbl = 'machines'"), before + 1);
    {
        char sql[160];
        snprintf(sql, sizeof sql, "SELECT count(*) FROM row_seals WHERE audit_id = %lld", (long long)audit_id);
        assert_int_equal(count(f, sql), 1);
    }
    assert_false(fxl_seal_has_pending(f->ctx));
    cJSON_Delete(content);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_store_admin_user_add_list_deactivate, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_user_refusals, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_setting_ranges, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_machine_and_beams, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_detector_add_and_refusals, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_detector_status_history, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_calib_factor_mean_sd, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_calib_validity_and_listing, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_calib_refusals, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_accumulated_dose_since_calibration, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_corrections_parse, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_corrections_store_and_list, setup, teardown),
        cmocka_unit_test_setup_teardown(test_store_admin_seal_marks_follow_transaction, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
