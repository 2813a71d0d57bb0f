/* Unit tests for src/core/dose.c and the formulas it uses: each correction
 * factor, the no-extrapolation rule, discrete exact match, a parameter with
 * no table at and away from the reference, temperature, equivalent square. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

static void assert_near_at(double got, double want, double eps, const char *expr,
                           const char *file, int line)
{
    if (!(fabs(got - want) <= eps)) {
        print_error("%s = %.9g, expected %.9g (+/- %g)\n", expr, got, want, eps);
        _fail(file, line);
    }
}
#define assert_near(got, want, eps) assert_near_at((got), (want), (eps), #got, __FILE__, __LINE__)

static void assert_reason_at(const fxl_reasons *r, const char *needle, const char *file, int line)
{
    int i;

    for (i = 0; i < r->n; i++)
        if (strstr(r->text[i], needle))
            return;
    print_error("no reason contains \"%s\"; reasons (%d):\n", needle, r->n);
    for (i = 0; i < r->n; i++)
        print_error("  %s\n", r->text[i]);
    _fail(file, line);
}
#define assert_reason(r, needle) assert_reason_at((r), (needle), __FILE__, __LINE__)

/* Invented commissioning data for one photon diode on one beam. */
static const double fs_x[] = {4.0, 10.0, 20.0, 30.0};        /* equivalent square, cm */
static const double fs_cf[] = {0.970, 1.000, 1.020, 1.030};
static const double ssd_x[] = {80.0, 90.0, 100.0, 110.0, 120.0};  /* cm */
static const double ssd_cf[] = {0.985, 0.992, 1.000, 1.006, 1.011};
static const double wd_x[] = {0.0, 15.0, 30.0, 60.0};        /* deg */
static const double wd_cf[] = {1.000, 1.012, 1.025, 1.048};
static const double tray_x[] = {0.0, 1.0};
static const double tray_cf[] = {1.000, 1.015};
static const double ang_x[] = {0.0, 15.0, 30.0, 45.0, 60.0};  /* deg */
static const double ang_cf[] = {1.000, 1.003, 1.008, 1.017, 1.034};

/* 20.0 nC at the reference condition (10 x 10 cm, SSD 100 cm, open, no tray,
 * normal incidence), at the calibration temperature, N = 10.0 cGy/nC, no
 * tables: 200.0 cGy. */
static fxl_dose_input reference_input(void)
{
    fxl_dose_input in;
    int i;

    memset(&in, 0, sizeof in);
    in.reading = 20.0;
    in.background = 0.0;
    in.factor_n = 10.0;
    in.param[FXL_CF_FIELD_SIZE] = in.ref[FXL_CF_FIELD_SIZE] = 10.0;
    in.param[FXL_CF_SSD] = in.ref[FXL_CF_SSD] = 100.0;
    in.param[FXL_CF_WEDGE] = in.ref[FXL_CF_WEDGE] = 0.0;
    in.param[FXL_CF_TRAY] = in.ref[FXL_CF_TRAY] = 0.0;
    in.param[FXL_CF_ANGLE] = in.ref[FXL_CF_ANGLE] = 0.0;
    for (i = 0; i < FXL_CF_COUNT; i++)
        in.table[i].n = 0;
    in.temp_coeff_per_c = 0.003;
    in.temp_c = 20.0;
    in.temp_cal_c = 20.0;
    in.reading_unit = "nC";
    return in;
}

static fxl_dose_input commissioned_input(void)
{
    fxl_dose_input in = reference_input();

    in.table[FXL_CF_FIELD_SIZE] = (fxl_factor_table){fs_x, fs_cf, 4};
    in.table[FXL_CF_SSD] = (fxl_factor_table){ssd_x, ssd_cf, 5};
    in.table[FXL_CF_WEDGE] = (fxl_factor_table){wd_x, wd_cf, 4};
    in.table[FXL_CF_TRAY] = (fxl_factor_table){tray_x, tray_cf, 2};
    in.table[FXL_CF_ANGLE] = (fxl_factor_table){ang_x, ang_cf, 5};
    return in;
}

static void assert_not_evaluable_at(const fxl_dose_result *r, const char *file, int line)
{
    if (r->evaluable || !isnan(r->dose_cgy) || r->reasons.n < 1) {
        print_error("expected not evaluable: evaluable %d, dose %g, %d reasons\n", r->evaluable,
                    r->dose_cgy, r->reasons.n);
        _fail(file, line);
    }
}
#define assert_not_evaluable(r) assert_not_evaluable_at((r), __FILE__, __LINE__)

static void test_dose_reference_conditions(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;
    int i;

    (void)state;
    assert_int_equal(fxl_dose_from_reading(&r, &in), 0);
    assert_int_equal(r.evaluable, 1);
    assert_int_equal(r.reasons.n, 0);
    /* physics: 20.0 nC x 10.0 cGy/nC x 1 x ... x 1 = 200.0 cGy */
    assert_near(r.dose_cgy, 200.0, 1e-9);
    for (i = 0; i < FXL_CF_COUNT; i++) {
        if (fxl_cf_applies((fxl_cf_param)i, 0))
            assert_near(r.cf[i], 1.0, 0);
        else  /* exit-only parameters are not factors of an entrance reading */
            assert_true(isnan(r.cf[i]));
    }
    assert_near(r.cf_temp, 1.0, 0);
}

static void test_dose_background_subtracted(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.reading = 20.5;
    in.background = 0.5;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: (20.5 - 0.5) nC x 10.0 cGy/nC = 200.0 cGy */
    assert_near(r.dose_cgy, 200.0, 1e-9);
}

static void test_dose_field_size_factor(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = 15.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: CF_fs(15) = 1.000 + 0.5 x 0.020 = 1.010; 200 x 1.010 = 202.0 cGy */
    assert_near(r.cf[FXL_CF_FIELD_SIZE], 1.010, 1e-12);
    assert_near(r.dose_cgy, 202.0, 1e-9);
}

static void test_dose_field_size_from_rectangle(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = fxl_equiv_square_cm(10.0, 20.0);
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* Sterling rule: 10 x 20 -> 13.333 cm; physics: CF = 1 + 0.3333 x 0.020 =
     * 1.0066667; 200 x 1.0066667 = 201.3333 cGy */
    assert_near(r.dose_cgy, 201.3333, 1e-4);
}

static void test_dose_ssd_factor(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_SSD] = 95.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: CF_ssd(95) = 0.992 + 0.5 x 0.008 = 0.996; 200 x 0.996 = 199.2 cGy */
    assert_near(r.cf[FXL_CF_SSD], 0.996, 1e-12);
    assert_near(r.dose_cgy, 199.2, 1e-9);
}

static void test_dose_wedge_factor(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_WEDGE] = 30.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: table value 1.025; 200 x 1.025 = 205.0 cGy */
    assert_near(r.cf[FXL_CF_WEDGE], 1.025, 0);
    assert_near(r.dose_cgy, 205.0, 1e-9);
}

static void test_dose_wedge_not_in_table(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_WEDGE] = 45.0;  /* between 30 and 60: never interpolated */
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_true(isnan(r.cf[FXL_CF_WEDGE]));
    assert_reason(&r.reasons, "wedge 45 deg is not in the commissioned wedge table (0, 15, 30, 60 deg)");
}

static void test_dose_tray_factor(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_TRAY] = 1.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: 200 x 1.015 = 203.0 cGy */
    assert_near(r.cf[FXL_CF_TRAY], 1.015, 0);
    assert_near(r.dose_cgy, 203.0, 1e-9);
}

static void test_dose_tray_not_in_table(void **state)
{
    static const double x[] = {0.0};
    static const double f[] = {1.000};
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.table[FXL_CF_TRAY] = (fxl_factor_table){x, f, 1};
    in.param[FXL_CF_TRAY] = 1.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_true(isnan(r.cf[FXL_CF_TRAY]));
    assert_reason(&r.reasons, "tray in the beam is not in the commissioned tray table (no tray)");
}

static void test_dose_angle_factor(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_ANGLE] = 50.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: CF(50) = 1.017 + (5/15) x 0.017 = 1.0226667; x 200 = 204.5333 cGy */
    assert_near(r.cf[FXL_CF_ANGLE], 1.0226667, 1e-7);
    assert_near(r.dose_cgy, 204.5333, 1e-4);
}

static void test_dose_temperature_factor(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.temp_c = 30.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* formula CF_T = 1/(1 + 0.003 x 10) = 0.970874 (docs/physics.md 1.2; arithmetic) */
    assert_near(r.cf_temp, 0.970874, 1e-6);
    /* physics: a 0.3 %/degC, T_cal 20, T 30, 200 cGy / 1.03 -> 194.175 cGy */
    assert_near(r.dose_cgy, 194.175, 5e-4);
}

static void test_dose_all_factors_together(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = 15.0;  /* 1.010 */
    in.param[FXL_CF_SSD] = 95.0;         /* 0.996 */
    in.param[FXL_CF_WEDGE] = 30.0;       /* 1.025 */
    in.param[FXL_CF_TRAY] = 1.0;         /* 1.015 */
    in.param[FXL_CF_ANGLE] = 0.0;        /* 1.000 */
    in.temp_c = 25.0;                    /* 1/(1 + 0.003 x 5) = 1/1.015 */
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: the tray 1.015 and CF_T 1/1.015 cancel; 200 x 1.010 x 0.996 x
     * 1.025 = 200 x 1.031109 = 206.2218 cGy */
    assert_near(r.dose_cgy, 206.2218, 1e-9);
}

static void test_dose_field_size_outside_table(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = 32.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_int_equal(r.reasons.n, 1);
    assert_string_equal(r.reasons.text[0],
                        "field size 32.0 cm is outside the commissioned table 4.0-30.0 cm; no "
                        "extrapolation");
    assert_true(isnan(r.cf[FXL_CF_FIELD_SIZE]));
    /* the factors that did work are still recorded */
    assert_near(r.cf[FXL_CF_SSD], 1.000, 0);
    assert_near(r.cf_temp, 1.0, 0);
}

static void test_dose_table_ends_inclusive(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = 4.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: 200 x 0.970 = 194.0 cGy */
    assert_near(r.dose_cgy, 194.0, 1e-9);
    in.param[FXL_CF_FIELD_SIZE] = 30.0;
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    /* physics: 200 x 1.030 = 206.0 cGy */
    assert_near(r.dose_cgy, 206.0, 1e-9);
}

static void test_dose_just_outside_both_ends(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_SSD] = 79.9;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "SSD 79.9 cm is outside the commissioned table 80.0-120.0 cm");
    in.param[FXL_CF_SSD] = 120.1;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "SSD 120.1 cm is outside the commissioned table 80.0-120.0 cm");
    in.param[FXL_CF_SSD] = 100.0;
    in.param[FXL_CF_ANGLE] = 60.5;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "beam angle 60.5 deg is outside the commissioned table 0.0-60.0 deg");
}

static void test_dose_no_table_at_reference(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_SSD] = 100.0 + 5e-7;  /* within 1e-6 of the reference */
    fxl_dose_from_reading(&r, &in);
    assert_int_equal(r.evaluable, 1);
    assert_near(r.cf[FXL_CF_SSD], 1.0, 0);
}

static void test_dose_no_table_away_from_reference(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_SSD] = 110.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_true(isnan(r.cf[FXL_CF_SSD]));
    assert_reason(&r.reasons, "no SSD correction table is commissioned");
    assert_reason(&r.reasons, "SSD 110.0 cm differs from the calibration reference (SSD 100.0 cm)");
    /* a small but real difference is not the reference either */
    in.param[FXL_CF_SSD] = 100.001;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    in = reference_input();
    in.param[FXL_CF_WEDGE] = 15.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "no wedge correction table is commissioned");
}

static void test_dose_every_failure_listed(void **state)
{
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_FIELD_SIZE] = 35.0;
    in.param[FXL_CF_WEDGE] = 45.0;
    in.factor_n = 0.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_int_equal(r.reasons.n, 3);
    assert_reason(&r.reasons, "no calibration factor");
    assert_reason(&r.reasons, "field size 35.0 cm");
    assert_reason(&r.reasons, "wedge 45 deg");
    assert_true(isnan(r.cf[FXL_CF_FIELD_SIZE]));
    assert_true(isnan(r.cf[FXL_CF_WEDGE]));
    assert_near(r.cf[FXL_CF_SSD], 1.0, 0);
}

static void test_dose_no_calibration_factor(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.factor_n = NAN;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "no calibration factor");
    in.factor_n = -10.0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    in.factor_n = INFINITY;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
}

static void test_dose_reading_not_above_background(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.reading = 0.5;
    in.background = 0.5;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "reading 0.5 nC minus background 0.5 nC is not above zero");
    in.reading = NAN;
    in.background = 0;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    in.reading = -3.2;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
}

static void test_dose_unknown_parameter_and_bad_table(void **state)
{
    static const double bad_x[] = {10.0, 4.0};
    static const double bad_f[] = {1.0, 0.97};
    fxl_dose_input in = commissioned_input();
    fxl_dose_result r;

    (void)state;
    in.param[FXL_CF_ANGLE] = NAN;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "beam angle of this field is not known");
    in = commissioned_input();
    in.table[FXL_CF_FIELD_SIZE] = (fxl_factor_table){bad_x, bad_f, 2};
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_reason(&r.reasons, "field size correction table is not usable");
}

static void test_dose_temperature_not_computable(void **state)
{
    fxl_dose_input in = reference_input();
    fxl_dose_result r;

    (void)state;
    in.temp_c = NAN;
    fxl_dose_from_reading(&r, &in);
    assert_not_evaluable(&r);
    assert_true(isnan(r.cf_temp));
    assert_reason(&r.reasons, "no temperature correction");
}

static void test_dose_temperature_formula(void **state)
{
    (void)state;
    /* formula (AAPM Report 87, from memory; docs/physics.md 1.2): 1/(1 + 0.003 x (30 - 20)) = 1/1.03 = 0.9708738 */
    assert_near(fxl_temp_correction(0.003, 30.0, 20.0), 0.9708738, 1e-7);
    /* formula: below T_cal the factor exceeds 1: 1/(1 - 0.003 x 5) = 1/0.985 = 1.0152284 */
    assert_near(fxl_temp_correction(0.003, 15.0, 20.0), 1.0152284, 1e-7);
    /* formula: a detector with no temperature dependence, 1/(1 + 0) = 1 */
    assert_near(fxl_temp_correction(0.0, 33.0, 20.0), 1.0, 0);
    assert_true(isnan(fxl_temp_correction(NAN, 30.0, 20.0)));
    assert_true(isnan(fxl_temp_correction(0.003, INFINITY, 20.0)));
    /* a coefficient that would make the denominator <= 0: 1 + (-0.05 x 25) < 0 */
    assert_true(isnan(fxl_temp_correction(-0.05, 45.0, 20.0)));
}

static void test_dose_equivalent_square(void **state)
{
    (void)state;
    /* Sterling rule: 2 x 10 x 20 / 30 = 13.333 cm (Sterling, Perry and Katz 1964; arithmetic) */
    assert_near(fxl_equiv_square_cm(10.0, 20.0), 13.333, 5e-4);
    /* Sterling rule: symmetric in X and Y */
    assert_near(fxl_equiv_square_cm(20.0, 10.0), 13.333, 5e-4);
    /* physics: a square is its own equivalent, 2 x 10 x 10 / 20 = 10 */
    assert_near(fxl_equiv_square_cm(10.0, 10.0), 10.0, 1e-12);
    /* Sterling rule arithmetic: 2 x 5 x 20 / 25 = 8.0 cm */
    assert_near(fxl_equiv_square_cm(5.0, 20.0), 8.0, 1e-12);
    assert_true(isnan(fxl_equiv_square_cm(0.0, 10.0)));
    assert_true(isnan(fxl_equiv_square_cm(-4.0, 10.0)));
    assert_true(isnan(fxl_equiv_square_cm(NAN, 10.0)));
}

static void test_dose_parameter_names(void **state)
{
    fxl_cf_param p = FXL_CF_COUNT;
    int i;

    (void)state;
    /* the schema's names (sql/001_schema.sql, correction_tables.parameter) */
    assert_string_equal(fxl_cf_name(FXL_CF_FIELD_SIZE), "field_size");
    assert_string_equal(fxl_cf_name(FXL_CF_SSD), "ssd");
    assert_string_equal(fxl_cf_name(FXL_CF_WEDGE), "wedge");
    assert_string_equal(fxl_cf_name(FXL_CF_TRAY), "tray");
    assert_string_equal(fxl_cf_name(FXL_CF_ANGLE), "angle");
    for (i = 0; i < FXL_CF_COUNT; i++) {
        assert_int_equal(fxl_cf_parse(&p, fxl_cf_name((fxl_cf_param)i)), 0);
        assert_int_equal(p, i);
    }
    assert_int_equal(fxl_cf_parse(&p, "gantry"), FXL_EINVAL);
    assert_int_equal(fxl_cf_parse(&p, ""), FXL_EINVAL);
    assert_int_equal(fxl_cf_parse(&p, NULL), FXL_EINVAL);
    assert_int_equal(fxl_cf_is_discrete(FXL_CF_WEDGE), 1);
    assert_int_equal(fxl_cf_is_discrete(FXL_CF_TRAY), 1);
    assert_int_equal(fxl_cf_is_discrete(FXL_CF_FIELD_SIZE), 0);
    assert_int_equal(fxl_cf_is_discrete(FXL_CF_SSD), 0);
    assert_int_equal(fxl_cf_is_discrete(FXL_CF_ANGLE), 0);
}

static void test_dose_reasons_capped(void **state)
{
    fxl_reasons r = FXL_REASONS_INIT;
    int i;

    (void)state;
    for (i = 0; i < FXL_REASONS_MAX + 3; i++)
        fxl_reasons_add(&r, "reason %d", i);
    assert_int_equal(r.n, FXL_REASONS_MAX);
    /* the first (most important) reasons are kept */
    assert_string_equal(r.text[0], "reason 0");
    assert_string_equal(r.text[FXL_REASONS_MAX - 1], "reason 7");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_dose_reference_conditions),
        cmocka_unit_test(test_dose_background_subtracted),
        cmocka_unit_test(test_dose_field_size_factor),
        cmocka_unit_test(test_dose_field_size_from_rectangle),
        cmocka_unit_test(test_dose_ssd_factor),
        cmocka_unit_test(test_dose_wedge_factor),
        cmocka_unit_test(test_dose_wedge_not_in_table),
        cmocka_unit_test(test_dose_tray_factor),
        cmocka_unit_test(test_dose_tray_not_in_table),
        cmocka_unit_test(test_dose_angle_factor),
        cmocka_unit_test(test_dose_temperature_factor),
        cmocka_unit_test(test_dose_all_factors_together),
        cmocka_unit_test(test_dose_field_size_outside_table),
        cmocka_unit_test(test_dose_table_ends_inclusive),
        cmocka_unit_test(test_dose_just_outside_both_ends),
        cmocka_unit_test(test_dose_no_table_at_reference),
        cmocka_unit_test(test_dose_no_table_away_from_reference),
        cmocka_unit_test(test_dose_every_failure_listed),
        cmocka_unit_test(test_dose_no_calibration_factor),
        cmocka_unit_test(test_dose_reading_not_above_background),
        cmocka_unit_test(test_dose_unknown_parameter_and_bad_table),
        cmocka_unit_test(test_dose_temperature_not_computable),
        cmocka_unit_test(test_dose_temperature_formula),
        cmocka_unit_test(test_dose_equivalent_square),
        cmocka_unit_test(test_dose_parameter_names),
        cmocka_unit_test(test_dose_reasons_capped),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
