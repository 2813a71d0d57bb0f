/* Store tests for patients, plan import and threshold sets on a temporary
 * database: versioning, the choice at different dates, most specific wins,
 * ties refused at save and reported at choice, role refusals, and nothing
 * written by a refused import. Every name and number here is invented. */
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
#include "fxl/patients.h"
#include "fxl/plan_json.h"
#include "fxl/plans.h"
#include "fxl/thresholds.h"
#include "fxl/users.h"
#include "store/ctx.h"
#include "sign_helper.h"

typedef struct fixture {
    char dir[64];
    char path[96];
    fxl_ctx *ctx;
} fixture;

static void sql(fxl_ctx *ctx, const char *text)
{
    char *err = NULL;
    if (sqlite3_exec(ctx->db, text, NULL, NULL, &err) != SQLITE_OK) {
        print_error("SQL failed: %s\n%s\n", err ? err : "?", text);
        sqlite3_free(err);
        fail();
    }
}

static int64_t count(fxl_ctx *ctx, const char *table)
{
    char q[128];
    sqlite3_stmt *st = NULL;
    int64_t n = -1;

    snprintf(q, sizeof q, "SELECT count(*) FROM %s", table);
    if (sqlite3_prepare_v2(ctx->db, q, -1, &st, NULL) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW)
        n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
    return n;
}

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);

    snprintf(f->dir, sizeof f->dir, "/tmp/fxl-store-plans-XXXXXX");
    if (!mkdtemp(f->dir))
        return -1;
    snprintf(f->path, sizeof f->path, "%s/test.db", f->dir);
    setenv("FXLEDGER_NOW", "2026-11-02T09:00:00Z", 1);
    if (fxl_open(&f->ctx, f->path, FXL_OPEN_CREATE) != 0 ||
        fxl_init_department(f->ctx, "Invented Department", NULL, "admin", "Test Admin") != 0 ||
        test_sign_as(f->ctx, "admin") != 0)
        return -1;
    /* Invented machine and beams, users of the other roles. */
    sql(f->ctx,
        "INSERT INTO machines (name, sad_cm, created_at) VALUES ('LINAC1', 100, '2026-01-01T00:00:00Z');"
        "INSERT INTO beams (machine_id, name, modality, energy, dmax_cm, created_at) VALUES "
        " (1, '6X', 'photon', 6, 1.5, '2026-01-01T00:00:00Z'),"
        " (1, '9E', 'electron', 9, 2.0, '2026-01-01T00:00:00Z');"
        "INSERT INTO users (login, full_name, role, created_at) VALUES "
        " ('ther', 'Invented Therapist', 'therapist', '2026-01-01T00:00:00Z'),"
        " ('phys', 'Invented Physicist', 'physicist', '2026-01-01T00:00:00Z');");
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    char p[128];

    test_sign_forget(f->ctx);
    fxl_close(f->ctx);
    snprintf(p, sizeof p, "%s-wal", f->path);
    unlink(p);
    snprintf(p, sizeof p, "%s-shm", f->path);
    unlink(p);
    unlink(f->path);
    rmdir(f->dir);
    free(f);
    return 0;
}

/* ---- threshold sets ------------------------------------------------------ */

static int save(fxl_ctx *ctx, const char *name, double tol, double act, const char *eff,
                const char *site, double energy, const char *point)
{
    fxl_threshold_change c;

    fxl_threshold_change_init(&c);
    c.name = name;
    c.tolerance_pct = tol;
    c.action_pct = act;
    c.effective_from = eff;
    c.site = site;
    c.energy = energy;
    c.point = point;
    return fxl_thresholds_save(ctx, NULL, &c);
}

static int deactivate(fxl_ctx *ctx, const char *name, const char *eff)
{
    fxl_threshold_change c;

    fxl_threshold_change_init(&c);
    c.name = name;
    c.deactivate = 1;
    c.effective_from = eff;
    return fxl_thresholds_save(ctx, NULL, &c);
}

static fxl_scope measurement(const char *site, double energy, const char *point)
{
    fxl_scope m = {site, "3D", "photon", energy, point, "photon_diode"};
    return m;
}

static void test_store_plans_levels_versioning(void **state)
{
    fixture *f = *state;
    fxl_threshold_change c;
    fxl_threshold_set saved, *list = NULL;
    size_t n = 0;

    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    /* The second version changes only the tolerance; the rest is kept. */
    fxl_threshold_change_init(&c);
    c.name = "default";
    c.tolerance_pct = 4;
    c.effective_from = "2026-06-01";
    assert_int_equal(fxl_thresholds_save(f->ctx, &saved, &c), 0);
    assert_int_equal(saved.version, 2);
    assert_true(fabs(saved.action_pct - 7) < 1e-12);
    assert_string_equal(saved.effective_from, "2026-06-01T00:00:00Z");
    assert_int_equal(count(f->ctx, "threshold_sets"), 2);

    assert_int_equal(fxl_thresholds_list(f->ctx, &list, &n, NULL, 1), 0);
    assert_int_equal(n, 2);
    assert_int_equal(list[0].version, 1);
    assert_true(fabs(list[0].tolerance_pct - 5) < 1e-12);   /* version 1 untouched */
    free(list);
    assert_int_equal(fxl_thresholds_list(f->ctx, &list, &n, "2026-03-01T00:00:00Z", 0), 0);
    assert_int_equal(n, 1);
    assert_int_equal(list[0].version, 1);
    free(list);
}

static void test_store_plans_choose_at_dates(void **state)
{
    fixture *f = *state;
    fxl_threshold_choice ch;
    fxl_scope m = measurement("Breast", 6, "entrance");

    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "default", 4, 6, "2026-06-01", NULL, NAN, NULL), 0);

    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2025-12-31T23:59:59Z"), 0);
    assert_int_equal(ch.set_id, 0);
    assert_int_equal(ch.levels.present, 0);
    assert_int_equal(ch.ambiguous, 0);
    assert_non_null(strstr(ch.reason, "no tolerance and action levels"));

    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-01-01T00:00:00Z"), 0);
    assert_int_equal(ch.version, 1);     /* in force from its effective time, inclusive */
    assert_true(fabs(ch.levels.tolerance_pct - 5) < 1e-12);

    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-05-31T23:59:59Z"), 0);
    assert_int_equal(ch.version, 1);
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-06-01T00:00:00Z"), 0);
    assert_int_equal(ch.version, 2);
    assert_int_equal(ch.levels.present, 1);
    assert_true(fabs(ch.levels.tolerance_pct - 4) < 1e-12);
    assert_true(fabs(ch.levels.action_pct - 6) < 1e-12);
    assert_string_equal(ch.name, "default");
    assert_string_equal(ch.reason, "");
}

static void test_store_plans_later_version_with_earlier_date(void **state)
{
    fixture *f = *state;
    fxl_threshold_choice ch;
    fxl_scope m = measurement("Breast", 6, "entrance");

    /* v2 is scheduled for June; v3, saved later, corrects the levels from
     * March. Until June v3 applies, from June the scheduled v2. */
    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "default", 4, 6, "2026-06-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "default", 4.5, 6.5, "2026-03-01", NULL, NAN, NULL), 0);
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-04-01T00:00:00Z"), 0);
    assert_int_equal(ch.version, 3);
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-07-01T00:00:00Z"), 0);
    assert_int_equal(ch.version, 2);
}

static void test_store_plans_most_specific_wins(void **state)
{
    fixture *f = *state;
    fxl_threshold_choice ch;
    fxl_scope m;
    const char *at = "2026-11-01T00:00:00Z";

    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "breast", 7, 10, "2026-01-01", "Breast", NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "breast-exit", 8, 10, "2026-01-01", "Breast", NAN, "exit"), 0);

    m = measurement("Breast", 6, "entrance");
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, at), 0);
    assert_string_equal(ch.name, "breast");
    m = measurement("breast", 6, "exit");   /* site case differs: still the breast sets */
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, at), 0);
    assert_string_equal(ch.name, "breast-exit");
    assert_true(fabs(ch.levels.tolerance_pct - 8) < 1e-12);
    m = measurement("Pelvis", 6, "exit");
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, at), 0);
    assert_string_equal(ch.name, "default");
    m = measurement(NULL, 6, "exit");       /* site unknown: only the catch-all matches */
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, at), 0);
    assert_string_equal(ch.name, "default");
}

static void test_store_plans_deactivated_set_drops_out(void **state)
{
    fixture *f = *state;
    fxl_threshold_choice ch;
    fxl_scope m = measurement("Breast", 6, "entrance");

    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "breast", 7, 10, "2026-01-01", "Breast", NAN, NULL), 0);
    assert_int_equal(deactivate(f->ctx, "breast", "2026-08-01"), 0);
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-07-31T00:00:00Z"), 0);
    assert_string_equal(ch.name, "breast");
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-08-01T00:00:00Z"), 0);
    assert_string_equal(ch.name, "default");
    /* deactivating a set that never existed is refused */
    assert_int_equal(deactivate(f->ctx, "nosuch", NULL), FXL_ENOTFOUND);
}

static void test_store_plans_tie_refused_identical_scope(void **state)
{
    fixture *f = *state;
    int64_t rows, audit;

    assert_int_equal(save(f->ctx, "breast", 7, 10, "2026-01-01", "Breast", NAN, NULL), 0);
    rows = count(f->ctx, "threshold_sets");
    audit = count(f->ctx, "audit_log");
    assert_int_equal(save(f->ctx, "breast-b", 6, 9, "2026-03-01", "BREAST", NAN, NULL), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "'breast'"));
    assert_non_null(strstr(fxl_errmsg(f->ctx), "more specific"));
    assert_int_equal(count(f->ctx, "threshold_sets"), rows);
    assert_int_equal(count(f->ctx, "audit_log"), audit);
    /* two catch-all sets tie as well */
    assert_int_equal(save(f->ctx, "default", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(save(f->ctx, "default2", 5, 7, "2027-01-01", NULL, NAN, NULL), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "'default'"));
}

static void test_store_plans_tie_refused_across_columns(void **state)
{
    fixture *f = *state;

    assert_int_equal(save(f->ctx, "breast", 7, 10, "2026-01-01", "Breast", NAN, NULL), 0);
    /* energy-only set: a 6 MV breast measurement would match both */
    assert_int_equal(save(f->ctx, "six", 4, 6, "2026-01-01", NULL, 6, NULL), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "site 'Breast', energy 6"));
    /* a more specific set for the intersection does not lift the refusal
     * (kept simple and sound), but a disjoint scope is fine */
    assert_int_equal(save(f->ctx, "pelvis", 4, 6, "2026-01-01", "Pelvis", NAN, NULL), 0);
    /* different specificity: no tie */
    assert_int_equal(save(f->ctx, "six-exit", 8, 10, "2026-01-01", NULL, 6, "exit"), 0);
}

static void test_store_plans_tie_depends_on_time_in_force(void **state)
{
    fixture *f = *state;

    /* 'old' is in force January to June, 'gap' June 10 to July 1, 'new'
     * from July 1: three catch-alls that never overlap in time. */
    assert_int_equal(save(f->ctx, "old", 5, 7, "2026-01-01", NULL, NAN, NULL), 0);
    assert_int_equal(deactivate(f->ctx, "old", "2026-06-01"), 0);
    assert_int_equal(save(f->ctx, "gap", 5, 7, "2026-06-10", NULL, NAN, NULL), 0);
    assert_int_equal(deactivate(f->ctx, "gap", "2026-07-01"), 0);
    assert_int_equal(save(f->ctx, "new", 4, 6, "2026-07-01", NULL, NAN, NULL), 0);
    /* a catch-all from May overlaps all three (the first found is named) */
    assert_int_equal(save(f->ctx, "may", 4, 6, "2026-05-01", NULL, NAN, NULL), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "would tie with set '"));
    /* a scoped set is more specific than the catch-alls: no tie */
    assert_int_equal(save(f->ctx, "may-breast", 4, 6, "2026-05-01", "Breast", NAN, NULL), 0);
    /* 'old' cannot come back while 'new' is in force */
    assert_int_equal(save(f->ctx, "old", 5, 7, "2026-09-01", NULL, NAN, NULL), FXL_ECONFLICT);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "set 'new'"));
    assert_int_equal(count(f->ctx, "threshold_sets"), 6);
}

static void test_store_plans_choose_reports_ambiguity(void **state)
{
    fixture *f = *state;
    fxl_threshold_choice ch;
    fxl_scope m = measurement("Breast", 6, "entrance");

    /* A tie the save check would refuse, written behind its back (e.g. by
     * an older version of the program): choose must not pick one. */
    sql(f->ctx,
        "INSERT INTO threshold_sets (name, version, effective_from, scope_site, tolerance_pct, "
        " action_pct, user_id, created_at) VALUES ('A', 1, '2026-01-01T00:00:00Z', 'Breast', 5, 7, 1, "
        " '2026-01-01T00:00:00Z');"
        "INSERT INTO threshold_sets (name, version, effective_from, scope_energy, tolerance_pct, "
        " action_pct, user_id, created_at) VALUES ('B', 1, '2026-01-01T00:00:00Z', 6, 3, 4, 1, "
        " '2026-01-01T00:00:00Z');");
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-02-01T00:00:00Z"), 0);
    assert_int_equal(ch.ambiguous, 1);
    assert_int_equal(ch.set_id, 0);
    assert_int_equal(ch.levels.present, 0);
    assert_string_equal(ch.name, "A");
    assert_string_equal(ch.other_name, "B");
    assert_string_equal(ch.reason, "ambiguous action levels (sets A and B)");
    /* outside the intersection the choice is clear */
    m.energy = 10;
    assert_int_equal(fxl_thresholds_choose(f->ctx, &ch, &m, "2026-02-01T00:00:00Z"), 0);
    assert_int_equal(ch.ambiguous, 0);
    assert_string_equal(ch.name, "A");
}

static void test_store_plans_levels_refusals(void **state)
{
    fixture *f = *state;
    fxl_threshold_change c;

    assert_int_equal(save(f->ctx, "x", 7, 5, NULL, NULL, NAN, NULL), FXL_EINVAL);   /* action < tolerance */
    assert_non_null(strstr(fxl_errmsg(f->ctx), "must be >= the tolerance"));
    assert_int_equal(save(f->ctx, "x", 5, 5, NULL, NULL, NAN, NULL), 0);            /* equal is allowed */
    fxl_threshold_change_init(&c);
    c.name = "y";
    c.tolerance_pct = 5;
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), FXL_EINVAL);           /* new set, no action */
    c.action_pct = 7;
    c.site = "Pelvis";
    c.point = "midline";
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), FXL_EINVAL);
    c.point = NULL;
    c.detector_kind = "ion_chamber";
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), FXL_EINVAL);
    c.detector_kind = NULL;
    c.effective_from = "2026-02-30";
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), FXL_EINVAL);
    c.effective_from = NULL;
    assert_int_equal(test_sign_as(f->ctx, "ther"), 0);
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), FXL_EPERM);
    assert_int_equal(test_sign_as(f->ctx, "phys"), 0);
    assert_int_equal(fxl_thresholds_save(f->ctx, NULL, &c), 0);
    assert_int_equal(count(f->ctx, "threshold_sets"), 2);
}

/* ---- patients and plans ---------------------------------------------------- */

static const char *plan_text =
    "{\"format\": \"fxledger-plan/1\", \"comment\": \"invented\", \"patient_mrn\": \"T-1\","
    " \"label\": \"P1\", \"site\": \"Breast\", \"technique\": \"3D\", \"fractions\": 15,"
    " \"dose_per_fraction_cgy\": 267, \"fields\": ["
    " {\"name\": \"MED\", \"machine\": \"LINAC1\", \"beam\": \"%s\", \"setup\": \"isocentric\","
    "  \"mu\": 130, \"ssd_cm\": 91, \"x_cm\": 8, \"y_cm\": 20, \"wedge_deg\": 15, \"tray\": false,"
    "  \"gantry_deg\": 300, \"incidence_deg\": 10, \"policy\": \"first\", \"points\": ["
    "  {\"point\": \"entrance\", \"expected_dose_cgy\": 140.5, \"expected_source\": \"tps\"},"
    "  {\"point\": \"exit\", \"expected_dose_cgy\": 70, \"expected_source\": \"manual\", \"thickness_cm\": %s}]}]}";

static int parse(fxl_ctx *ctx, fxl_plan_spec *spec, const char *beam, const char *thickness)
{
    char text[2048];
    snprintf(text, sizeof text, plan_text, beam, thickness);
    return fxl_plan_json_parse(ctx, spec, text, strlen(text), "test.json");
}

static void test_store_plans_patient_add_and_refusals(void **state)
{
    fixture *f = *state;
    fxl_patient p;

    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-1", "Invented", "Pat", "1970-05-06"), 0);
    assert_int_equal(fxl_patient_get(f->ctx, &p, "T-1"), 0);
    assert_string_equal(p.birth_date, "1970-05-06");
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-1", "Other", NULL, NULL), FXL_ECONFLICT);
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-2", "Later", NULL, "2026-11-03"), FXL_EINVAL);
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "", "X", NULL, NULL), FXL_EINVAL);
    assert_int_equal(fxl_patient_get(f->ctx, &p, "T-2"), FXL_ENOTFOUND);
    assert_int_equal(test_sign_as(f->ctx, "ther"), 0);       /* therapists may add patients */
    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-3", "Invented", NULL, NULL), 0);
    assert_int_equal(count(f->ctx, "patients"), 2);
}

static void test_store_plans_import_and_read_back(void **state)
{
    fixture *f = *state;
    fxl_plan_spec spec;
    fxl_plan plan;
    int64_t id = 0;

    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-1", "Invented", NULL, NULL), 0);
    assert_int_equal(parse(f->ctx, &spec, "6X", "20"), 0);
    assert_int_equal(fxl_plan_import(f->ctx, &id, &spec), 0);
    assert_true(id > 0);
    assert_int_equal(count(f->ctx, "fields"), 2);       /* one row per measured point */
    assert_int_equal(fxl_plan_get(f->ctx, &plan, "T-1", "P1"), 0);
    assert_int_equal(plan.n_fields, 2);
    assert_string_equal(plan.fields[1].point, "exit");
    assert_true(fabs(plan.fields[1].thickness_cm - 20) < 1e-12);
    assert_true(isnan(plan.fields[0].thickness_cm));
    assert_true(fabs(plan.fields[0].incidence_deg - 10) < 1e-12);
    assert_int_equal(plan.fields[0].tray, 0);
    assert_string_equal(plan.fields[0].modality, "photon");
    fxl_plan_release(&plan);
    /* the same label again is refused; a replacement with a new label is not */
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_ECONFLICT);
    snprintf(spec.label, sizeof spec.label, "P2");
    snprintf(spec.replaces, sizeof spec.replaces, "P1");
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), 0);
    assert_int_equal(fxl_plan_get(f->ctx, &plan, "T-1", "P1"), 0);
    assert_string_equal(plan.replaced_by_label, "P2");
    fxl_plan_release(&plan);
    /* P1 cannot be replaced a second time */
    snprintf(spec.label, sizeof spec.label, "P3");
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_ECONFLICT);
    fxl_plan_spec_release(&spec);
    assert_int_equal(fxl_audit_verify(f->ctx, &(fxl_verify_report){0}), 0);
}

static void test_store_plans_refused_import_writes_nothing(void **state)
{
    fixture *f = *state;
    fxl_plan_spec spec;
    int64_t plans, fields, audit;

    assert_int_equal(fxl_patient_add(f->ctx, NULL, "T-1", "Invented", NULL, NULL), 0);
    plans = count(f->ctx, "plans");
    fields = count(f->ctx, "fields");
    audit = count(f->ctx, "audit_log");

    assert_int_equal(parse(f->ctx, &spec, "10X", "20"), 0);       /* no such beam */
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_ENOTFOUND);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "beam '10X'"));
    fxl_plan_spec_release(&spec);
    assert_int_equal(parse(f->ctx, &spec, "9E", "20"), 0);        /* exit point on electrons */
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_EINVAL);
    fxl_plan_spec_release(&spec);
    assert_int_equal(parse(f->ctx, &spec, "6X", "1.2"), 0);       /* thinner than d_max 1.5 cm */
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "d_max"));
    snprintf(spec.mrn, sizeof spec.mrn, "NOBODY");
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_ENOTFOUND);
    snprintf(spec.mrn, sizeof spec.mrn, "T-1");
    spec.fields[0].mu = -5;                                          /* a library caller's bad value */
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_EINVAL);
    spec.fields[0].mu = 130;
    assert_int_equal(test_sign_as(f->ctx, "ther"), 0);
    assert_int_equal(fxl_plan_import(f->ctx, NULL, &spec), FXL_EPERM);
    fxl_plan_spec_release(&spec);

    assert_int_equal(count(f->ctx, "plans"), plans);
    assert_int_equal(count(f->ctx, "fields"), fields);
    assert_int_equal(count(f->ctx, "audit_log"), audit);
}

static void test_store_plans_parser_paths_and_positions(void **state)
{
    fixture *f = *state;
    fxl_plan_spec spec;
    const char *bad = "{\n  \"format\": \"fxledger-plan/1\",\n  \"label\": \"P1\" \"site\": 1\n}";
    const char *cut = "{\n  \"format\": \"fxledger-plan/1\",\n  \"fields\": [";

    assert_int_equal(parse(f->ctx, &spec, "6X", "-3"), FXL_EINVAL);
    assert_string_equal(fxl_errmsg(f->ctx),
                        "plan field 'MED' exit point thickness_cm '-3' must be > 0 and <= 60 cm "
                        "(at fields[0].points[1].thickness_cm in 'test.json')");
    assert_int_equal(fxl_plan_json_parse(f->ctx, &spec, bad, strlen(bad), "b.json"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "line 3, column 17"));
    assert_int_equal(fxl_plan_json_parse(f->ctx, &spec, cut, strlen(cut), "c.json"), FXL_EINVAL);
    assert_non_null(strstr(fxl_errmsg(f->ctx), "ends too early"));
    assert_int_equal(fxl_plan_json_parse(f->ctx, &spec, "", 0, "e.json"), FXL_EINVAL);
    fxl_plan_spec_release(&spec);
}

#define T(fn) cmocka_unit_test_setup_teardown(fn, setup, teardown)

int main(void)
{
    const struct CMUnitTest tests[] = {
        T(test_store_plans_levels_versioning),
        T(test_store_plans_choose_at_dates),
        T(test_store_plans_later_version_with_earlier_date),
        T(test_store_plans_most_specific_wins),
        T(test_store_plans_deactivated_set_drops_out),
        T(test_store_plans_tie_refused_identical_scope),
        T(test_store_plans_tie_refused_across_columns),
        T(test_store_plans_tie_depends_on_time_in_force),
        T(test_store_plans_choose_reports_ambiguity),
        T(test_store_plans_levels_refusals),
        T(test_store_plans_patient_add_and_refusals),
        T(test_store_plans_import_and_read_back),
        T(test_store_plans_refused_import_writes_nothing),
        T(test_store_plans_parser_paths_and_positions),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
