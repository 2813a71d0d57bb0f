/* Unit tests for the independent expected-dose model (src/core/beam_model.c)
 * and the beam-data file (src/io/beam_json.c): bilinear interpolation without
 * extrapolation, the TG-71 check values of arithmetic of the published formula, the exit dose,
 * the PDD to TMR conversion against a textbook MU example, reasons when a
 * value cannot be computed, the planning-system cross-check, and the file
 * format's refusals. Beam data here are invented. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "fxl/beam_json.h"
#include "fxl/beam_model.h"
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

/* tests/data/<rel>, found from this file's own path. */
static void data_path(char *buf, size_t size, const char *rel)
{
    const char *self = __FILE__;
    const char *p = strstr(self, "unit/test_beam_model.c");

    assert_non_null(p);
    snprintf(buf, size, "%.*sdata/%s", (int)(p - self), self, rel);
}

static double *copy(const double *v, size_t n)
{
    double *d = malloc(n * sizeof *d);

    assert_non_null(d);
    memcpy(d, v, n * sizeof *d);
    return d;
}

static void set_table(fxl_table1 *t, const double *x, const double *y, size_t n)
{
    t->x = copy(x, n);
    t->y = copy(y, n);
    t->n = n;
}

static void set_grid(fxl_grid *g, const double *x, size_t nx, const double *y, size_t ny, const double *v)
{
    g->x = copy(x, nx);
    g->y = copy(y, ny);
    g->v = copy(v, nx * ny);
    g->nx = nx;
    g->ny = ny;
}

/* An invented 6 MV beam whose factors are flat where the TG-71 check case of
 * arithmetic of the published formula reads them: S_c = 1.02 at a 15 x 15 cm collimator
 * setting, S_p = 1.01 from 14 cm up, WF(45) = 0.72, TF = 0.97, D0' = 1.000
 * cGy/MU at 101.5 cm, d_max 1.5 cm. */
static void check_beam(fxl_beam_model *m)
{
    static const double sc_x[] = {5, 10, 15, 20}, sc_y[] = {0.98, 1.00, 1.02, 1.02};
    static const double sp_x[] = {5, 10, 14, 20}, sp_y[] = {0.98, 1.00, 1.01, 1.01};
    static const double w_x[] = {15, 30, 45, 60}, w_y[] = {0.90, 0.81, 0.72, 0.62};
    static const double t_x[] = {5, 10, 15, 20}, t_y[] = {1.5, 10, 20};
    static const double t_v[] = {
        1.000, 1.000, 1.000, 1.000,  /* 1.5 cm */
        0.780, 0.815, 0.830, 0.840,  /* 10 cm */
        0.540, 0.577, 0.600, 0.615,  /* 20 cm */
    };

    fxl_beam_model_init(m);
    strcpy(m->machine, "LINAC-T");
    strcpy(m->beam, "6X");
    strcpy(m->modality, "photon");
    m->energy = 6;
    m->sad_cm = 100;
    m->dmax_cm = 1.5;
    m->ref_dose_cgy_per_mu = 1.000;
    m->ref_distance_cm = 101.5;
    m->ref_field_cm = 10;
    set_table(&m->sc, sc_x, sc_y, 4);
    set_table(&m->sp, sp_x, sp_y, 4);
    set_table(&m->wedge, w_x, w_y, 4);
    m->tray_factor = 0.97;
    m->depth_kind = FXL_DEPTH_TMR;
    set_grid(&m->tmr, t_x, 4, t_y, 3, t_v);
}

static fxl_model_input entrance_input(double mu, double ssd, double side)
{
    fxl_model_input in;

    fxl_model_input_init(&in);
    in.mu = mu;
    in.ssd_cm = ssd;
    in.x_cm = in.y_cm = side;
    return in;
}

/* ---- bilinear interpolation -------------------------------------------------- */

static const double gx[] = {5, 10, 20}, gy[] = {0, 10};
static const double gv[] = {1, 2, 4, 3, 5, 9};  /* row y = 0, then row y = 10 */

static fxl_grid small_grid(void)
{
    fxl_grid g = {3, 2, (double *)gx, (double *)gy, (double *)gv};
    return g;
}

static void test_beam_model_bilinear_points_and_inside(void **state)
{
    fxl_grid g = small_grid();
    double v;

    (void)state;
    assert_int_equal(fxl_interp_bilinear(&v, &g, 5, 0), 0);
    assert_near(v, 1, 1e-12);
    assert_int_equal(fxl_interp_bilinear(&v, &g, 20, 10), 0);  /* far corner */
    assert_near(v, 9, 1e-12);
    assert_int_equal(fxl_interp_bilinear(&v, &g, 10, 10), 0);
    assert_near(v, 5, 1e-12);
    /* Edge y = 0 between x 10 and 20: 2 + 0.5 x 2 = 3 (arithmetic). */
    assert_int_equal(fxl_interp_bilinear(&v, &g, 15, 0), 0);
    assert_near(v, 3, 1e-12);
    /* Inside cell x 10..20, y 0..10 at (12.5, 4): corners 2, 4, 5, 9,
     * fx 0.25, fy 0.4: 0.75*0.6*2 + 0.25*0.6*4 + 0.75*0.4*5 + 0.25*0.4*9
     * = 0.9 + 0.6 + 1.5 + 0.9 = 3.9 (arithmetic). */
    assert_int_equal(fxl_interp_bilinear(&v, &g, 12.5, 4), 0);
    assert_near(v, 3.9, 1e-12);
}

static void test_beam_model_bilinear_no_extrapolation(void **state)
{
    fxl_grid g = small_grid();
    double v = -1;

    (void)state;
    assert_int_equal(fxl_interp_bilinear(&v, &g, 4.99, 5), FXL_ERANGE);
    assert_int_equal(fxl_interp_bilinear(&v, &g, 20.01, 5), FXL_ERANGE);
    assert_int_equal(fxl_interp_bilinear(&v, &g, 10, -0.01), FXL_ERANGE);
    assert_int_equal(fxl_interp_bilinear(&v, &g, 10, 10.01), FXL_ERANGE);
    assert_near(v, -1, 0);  /* untouched */
    /* A rounding error past the last point is the last point. */
    assert_int_equal(fxl_interp_bilinear(&v, &g, 20 + 1e-9, 10 + 1e-9), 0);
    assert_near(v, 9, 1e-12);
    assert_int_equal(fxl_interp_bilinear(&v, &g, NAN, 5), FXL_EINVAL);
}

static void test_beam_model_bilinear_single_column_and_bad_grid(void **state)
{
    static const double x1[] = {10}, y3[] = {0, 5, 10}, v3[] = {1.0, 0.8, 0.6};
    static const double xbad[] = {10, 5}, vbad[] = {1, 2, 3, 4};
    fxl_grid one = {1, 3, (double *)x1, (double *)y3, (double *)v3};
    fxl_grid bad = {2, 2, (double *)xbad, (double *)gy, (double *)vbad};
    double v;

    (void)state;
    assert_int_equal(fxl_interp_bilinear(&v, &one, 10, 7.5), 0);
    assert_near(v, 0.7, 1e-12);
    assert_int_equal(fxl_interp_bilinear(&v, &one, 10.5, 5), FXL_ERANGE);
    assert_int_equal(fxl_interp_bilinear(&v, &bad, 7, 5), FXL_EINVAL);
    assert_int_equal(fxl_grid_check(&bad), FXL_EINVAL);
}

/* ---- the TG-71 check values (arithmetic of the published formula) ---------------------------- */

static void test_beam_model_entrance_dose_tg71_check_value(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(200, 95, 15);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    in.wedge_deg = 45;
    in.tray = 1;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.sc, 1.02, 1e-12);
    assert_near(r.sp, 1.01, 1e-12);
    assert_near(r.wedge_factor, 0.72, 1e-12);
    assert_near(r.tray_factor, 0.97, 1e-12);
    assert_near(r.tmr, 1.0, 0);
    assert_near(r.depth_cm, 1.5, 1e-12);
    assert_near(r.spd_cm, 96.5, 1e-12);
    /* 200 x 1.000 x 1.02 x 1.01 x 0.72 x 0.97 x (101.5/96.5)^2 = 159.196 cGy:
     * arithmetic of the published formula, "TG-71 formalism" (AAPM TG-71, Gibbons et al.
     * 2014); checked by hand: 143.898336 x 1.106311 = 159.196. */
    assert_near(r.dose_cgy, 159.196, 0.0005);
    fxl_beam_model_release(&m);
}

static void test_beam_model_inverse_square_check_values(void **state)
{
    fxl_beam_model m;
    fxl_model_input in;
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    /* physics: (101.5/91.5)^2 = 1.230523 (arithmetic of the published formula). */
    in = entrance_input(100, 90, 10);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.inverse_square, 1.230523, 5e-7);
    /* physics: (101.5/111.5)^2 = 0.828671. */
    in = entrance_input(100, 110, 10);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_near(r.inverse_square, 0.828671, 5e-7);
    /* physics: isocentric normalisation, (100/91.5)^2 = 1.194422; the
     * isocentric set-up with the isocentre 10 cm deep puts the skin at 90. */
    m.ref_distance_cm = 100;
    fxl_model_input_init(&in);
    in.setup = FXL_MODEL_SETUP_ISO;
    in.mu = 100;
    in.iso_depth_cm = 10;
    in.x_cm = in.y_cm = 10;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.ssd_cm, 90, 1e-12);
    assert_near(r.inverse_square, 1.194422, 5e-7);
    /* Entrance dose is MU x D0' x S_c x S_p x ISQ: field 10 cm at SAD, 10 x
     * 91.5/100 = 9.15 cm at d_max, S_p = 0.98 + (4.15/5) x 0.02 = 0.9966. */
    assert_near(r.rd_cm, 9.15, 1e-12);
    assert_near(r.dose_cgy, 100 * 1.0 * 0.9966 * (100.0 / 91.5) * (100.0 / 91.5), 1e-9);
    fxl_beam_model_release(&m);
}

static void test_beam_model_isocentric_geometry_must_agree(void **state)
{
    fxl_beam_model m;
    fxl_model_input in;
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    fxl_model_input_init(&in);
    in.setup = FXL_MODEL_SETUP_ISO;
    in.mu = 100;
    in.x_cm = in.y_cm = 10;
    in.ssd_cm = 88;
    in.iso_depth_cm = 10;  /* 88 + 10 != 100 */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "do not add up to the SAD");
    in.ssd_cm = 90.3;      /* within 0.5 cm: the given SSD is used */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.ssd_cm, 90.3, 1e-12);
    fxl_beam_model_release(&m);
}

/* ---- exit dose --------------------------------------------------------------- */

static void test_beam_model_exit_dose_formula(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(150, 90, 10);
    fxl_model_result r;
    double sp, tmr, isq;

    (void)state;
    check_beam(&m);
    in.point = FXL_MODEL_EXIT;
    in.thickness_cm = 16.5;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    /* depth t - d_max = 15 cm, SPD 105 cm, r_d = 10 x 1.05 = 10.5 cm
     * (docs/physics.md). */
    assert_near(r.depth_cm, 15, 1e-12);
    assert_near(r.spd_cm, 105, 1e-12);
    assert_near(r.rd_cm, 10.5, 1e-12);
    assert_near(r.sc, 1.00, 1e-12);
    sp = 1.00 + (0.5 / 4) * 0.01;                          /* S_p(10.5) */
    /* TMR(15, 10.5): at depth 10: 0.815 + 0.1 x 0.015; at 20: 0.577 + 0.1 x
     * 0.023; halfway in depth (bilinear, arithmetic). */
    tmr = ((0.815 + 0.1 * 0.015) + (0.577 + 0.1 * 0.023)) / 2;
    isq = (101.5 / 105) * (101.5 / 105);
    assert_near(r.sp, sp, 1e-12);
    assert_near(r.tmr, tmr, 1e-12);
    assert_near(r.inverse_square, isq, 1e-12);
    assert_near(r.dose_cgy, 150 * 1.0 * 1.0 * sp * tmr * isq, 1e-9);
    assert_true(isnan(r.pdd_pct));
    fxl_beam_model_release(&m);
}

static void test_beam_model_exit_needs_thickness_in_range(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 90, 10);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    in.point = FXL_MODEL_EXIT;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "patient thickness");
    in.thickness_cm = 3.0;  /* not beyond 2 x d_max */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "must be > 2 x d_max");
    /* 30 cm: depth 28.5 cm lies past the 20 cm end of the TMR table. */
    in.thickness_cm = 30.0;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_true(isnan(r.dose_cgy));
    assert_reason(&r.reasons, "outside the TMR table");
    assert_reason(&r.reasons, "depth 1.5 to 20 cm");
    fxl_beam_model_release(&m);
}

/* A PDD beam: the exit point at 10 cm depth of an SSD 100 field equals the
 * TG-71 PDD calculation, so the MU that a textbook computes for 200 cGy at
 * 10 cm must give 200 cGy back. Textbook example (from memory; published sources (from memory)
 * section 7): 200 cGy at 10 cm, S_c 1.020, S_p 1.010, PDD 65.1 %, 1 cGy/MU
 * -> 298.2 MU. */
static void test_beam_model_pdd_conversion_textbook_mu(void **state)
{
    static const double sc_x[] = {10, 12, 20}, sc_y[] = {1.000, 1.020, 1.030};
    static const double sp_x[] = {10, 12.18, 13.2, 20}, sp_y[] = {1.000, 1.010, 1.013, 1.020};
    static const double p_x[] = {10, 12, 15}, p_y[] = {1.5, 5, 10, 15};
    static const double p_v[] = {
        100.0, 100.0, 100.0,
        86.0, 86.5, 87.0,
        64.5, 65.1, 65.9,
        47.0, 47.8, 48.9,
    };
    fxl_beam_model m;
    fxl_model_input in = entrance_input(298.2, 100, 12);
    fxl_model_result r;
    double tmr, pdd;

    (void)state;
    check_beam(&m);
    free(m.sc.x);
    free(m.sc.y);
    free(m.sp.x);
    free(m.sp.y);
    set_table(&m.sc, sc_x, sc_y, 3);
    set_table(&m.sp, sp_x, sp_y, 4);
    m.depth_kind = FXL_DEPTH_PDD;
    m.pdd_ssd_cm = 100;
    set_grid(&m.pdd, p_x, 3, p_y, 4, p_v);

    /* The conversion itself (Khan, from memory): field 13.2 cm at depth 10
     * comes from 12 cm at the surface, 12.18 cm at d_max. */
    assert_int_equal(fxl_model_tmr(&tmr, &pdd, &m, 10, 13.2), 0);
    assert_near(pdd, 65.1, 1e-9);
    assert_near(tmr, 0.651 * (110 / 101.5) * (110 / 101.5) * 1.010 / 1.013, 1e-9);

    in.point = FXL_MODEL_EXIT;
    in.thickness_cm = 11.5;  /* exit point at depth 10 cm */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.sc, 1.020, 1e-12);
    assert_near(r.pdd_pct, 65.1, 1e-9);
    /* 298.2 x 1.020 x 1.010 x 0.651 = 199.99: the textbook's 200 cGy within
     * the rounding of its 298.2 MU (0.05 MU = 0.034 cGy). */
    assert_near(r.dose_cgy, 200.0, 0.05);
    fxl_beam_model_release(&m);
}

/* ---- reasons, no extrapolation ------------------------------------------------ */

static void test_beam_model_outside_output_tables(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 100, 25);  /* S_c table ends at 20 */
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_true(isnan(r.dose_cgy));
    assert_reason(&r.reasons, "outside the S_c table of beam '6X' (5 to 20 cm)");
    assert_reason(&r.reasons, "outside the S_p table");
    /* the factors that could be computed are still reported */
    assert_near(r.inverse_square, 1.0, 1e-12);
    assert_near(r.wedge_factor, 1.0, 0);
    fxl_beam_model_release(&m);
}

static void test_beam_model_wedge_and_tray_not_commissioned(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 100, 10);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    in.wedge_deg = 20;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "wedge 20 deg has no wedge factor for beam '6X' (commissioned: 15, 30, 45, 60 deg)");
    in.wedge_deg = 0;
    in.tray = 1;
    m.tray_factor = NAN;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "has no tray factor");
    fxl_beam_model_release(&m);
}

static void test_beam_model_bad_inputs_and_beam(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(0, 40, -1);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "MU '0' must be > 0");
    assert_reason(&r.reasons, "SSD '40' cm must be 50 to 200 cm");
    assert_reason(&r.reasons, "field size '-1 x -1' cm");
    in = entrance_input(100, 100, 10);
    m.ref_dose_cgy_per_mu = NAN;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "no reference dose per MU");
    strcpy(m.modality, "electron");
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_reason(&r.reasons, "photon beams only");
    assert_int_equal(fxl_model_expected(NULL, &m, &in), FXL_EINVAL);
    fxl_beam_model_release(&m);
}

static void test_beam_model_shaped_field_uses_sp_not_sc(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 98.5, 15);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    in.field_eqsq_cm = 10;  /* MLC shapes a 10 cm field inside 15 cm jaws */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.rc_cm, 15, 1e-12);
    assert_near(r.sc, 1.02, 1e-12);      /* jaws */
    assert_near(r.rd_cm, 10, 1e-12);     /* 10 x 100/100 at SPD 100 */
    assert_near(r.sp, 1.00, 1e-12);
    assert_near(r.dose_cgy, 100 * 1.02 * 1.0 * (101.5 / 100) * (101.5 / 100), 1e-9);
    fxl_beam_model_release(&m);
}

static void test_beam_model_combined_output_factor(void **state)
{
    static const double x[] = {5, 10, 20}, y[] = {0.95, 1.00, 1.05};
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 98.5, 15);
    fxl_model_result r;

    (void)state;
    check_beam(&m);
    m.output_combined = 1;
    set_table(&m.scp, x, y, 3);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_true(isnan(r.sc) && isnan(r.sp));
    assert_near(r.scp, 1.025, 1e-12);  /* at r_d = 15 x 100/100 */
    /* PDD beam with combined factors cannot convert PDD to TMR */
    m.depth_kind = FXL_DEPTH_PDD;
    m.pdd_ssd_cm = 100;
    in.point = FXL_MODEL_EXIT;
    in.thickness_cm = 10;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_reason(&r.reasons, "conversion needs S_p");
    fxl_beam_model_release(&m);
}

/* ---- cross-check ----------------------------------------------------------------- */

static void test_beam_model_crosscheck_levels(void **state)
{
    fxl_model_result r;
    fxl_crosscheck x;

    (void)state;
    memset(&r, 0, sizeof r);
    r.computed = 1;
    r.dose_cgy = 100.0;
    /* a planning-system value 10 % off disagrees at the default 5 % */
    assert_int_equal(fxl_model_crosscheck(&x, 110.0, &r, FXL_MODEL_CROSSCHECK_PCT_DEFAULT), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_DISAGREES);
    assert_near(x.deviation_pct, 10.0, 1e-9);
    assert_non_null(strstr(x.summary, "+10.00 %"));
    assert_int_equal(fxl_model_crosscheck(&x, 90.0, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_DISAGREES);
    /* exactly at the level agrees; one hundredth beyond does not */
    assert_int_equal(fxl_model_crosscheck(&x, 105.0, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_AGREES);
    assert_int_equal(fxl_model_crosscheck(&x, 105.01, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_DISAGREES);
    assert_int_equal(fxl_model_crosscheck(&x, 102.0, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_AGREES);
    assert_string_equal(fxl_xcheck_name(x.outcome), "agrees");
    assert_int_equal(fxl_model_crosscheck(&x, 102.0, &r, 0), FXL_EINVAL);
}

static void test_beam_model_crosscheck_not_checked(void **state)
{
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 100, 30);  /* outside S_c */
    fxl_model_result r;
    fxl_crosscheck x;

    (void)state;
    check_beam(&m);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_false(r.computed);
    assert_int_equal(fxl_model_crosscheck(&x, 100.0, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_NOT_CHECKED);
    assert_non_null(strstr(x.summary, "not cross-checked"));
    assert_non_null(strstr(x.summary, "S_c table"));
    in = entrance_input(100, 100, 10);
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_int_equal(fxl_model_crosscheck(&x, NAN, &r, 5.0), 0);
    assert_int_equal(x.outcome, FXL_XCHECK_NOT_CHECKED);
    fxl_beam_model_release(&m);
}

/* ---- the beam-data file ------------------------------------------------------------ */

static void test_beam_model_file_parses_and_computes(void **state)
{
    char path[1024];
    fxl_beam_model m;
    fxl_model_input in = entrance_input(100, 100, 10);
    fxl_model_result r;
    char *json = NULL;

    (void)state;
    data_path(path, sizeof path, "beams/linac1_6x.json");
    assert_int_equal(fxl_beam_json_read(NULL, &m, path), 0);
    assert_string_equal(m.machine, "LINAC1");
    assert_string_equal(m.beam, "6X");
    assert_near(m.ref_distance_cm, 101.5, 0);
    assert_int_equal(m.sc.n, 8);
    assert_int_equal(m.tmr.nx, 6);
    assert_int_equal(m.tmr.ny, 7);
    assert_int_equal(m.wedge.n, 4);
    /* Reference-like conditions: 10 x 10 at SSD 100: the field at d_max is
     * 10.15 cm, S_p = 1 + (0.15/5) x 0.013 from the file's table. */
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    assert_near(r.dose_cgy, 100 * (1 + 0.03 * 0.013), 1e-9);
    /* Exit through 20 cm, jaws 8 x 12, isocentric with the isocentre 10 cm
     * deep, 45 deg wedge and a tray (arithmetic from the file's tables). */
    fxl_model_input_init(&in);
    in.point = FXL_MODEL_EXIT;
    in.setup = FXL_MODEL_SETUP_ISO;
    in.mu = 150;
    in.iso_depth_cm = 10;
    in.x_cm = 8;
    in.y_cm = 12;
    in.wedge_deg = 45;
    in.tray = 1;
    in.thickness_cm = 20;
    assert_int_equal(fxl_model_expected(&r, &m, &in), 0);
    assert_true(r.computed);
    {
        double rc = 2.0 * 8 * 12 / 20;                    /* 9.6, Sterling */
        double rd = rc * 108.5 / 100;                      /* 10.416 */
        double sc = 0.986 + (rc - 8) / 2 * 0.014;
        double sp = 1.000 + (rd - 10) / 5 * 0.013;
        double fx = (rd - 10) / 5, fy = (18.5 - 15) / 5;
        double t15 = 0.688 + fx * (0.711 - 0.688), t20 = 0.577 + fx * (0.602 - 0.577);
        double tmr = t15 + fy * (t20 - t15);
        double isq = (101.5 / 108.5) * (101.5 / 108.5);
        assert_near(r.rc_cm, rc, 1e-12);
        assert_near(r.rd_cm, rd, 1e-12);
        assert_near(r.tmr, tmr, 1e-12);
        assert_near(r.dose_cgy, 150 * sc * sp * tmr * isq * 0.720 * 0.970, 1e-9);
    }
    assert_int_equal(fxl_model_result_json(&json, &r), 0);
    assert_non_null(strstr(json, "\"point\":\"exit\""));
    assert_non_null(strstr(json, "\"setup\":\"isocentric\""));
    assert_non_null(strstr(json, "\"wedge_factor\":0.72"));
    assert_non_null(strstr(json, "\"pdd_pct\":null"));
    assert_non_null(strstr(json, "\"reasons\":[]"));
    free(json);
    fxl_beam_model_release(&m);
}

/* Parses `text` and expects a refusal whose message contains `needle`. */
static void refuse_at(const char *text, const char *needle, const char *file, int line)
{
    fxl_ctx *ctx = NULL;
    fxl_beam_model m;
    int rc;

    /* A context only to carry the message: an in-memory database. */
    if (fxl_open(&ctx, ":memory:", FXL_OPEN_CREATE) != 0) {
        print_error("cannot open an in-memory context\n");
        _fail(file, line);
    }
    rc = fxl_beam_json_parse(ctx, &m, text, strlen(text), "t.json");
    if (rc != FXL_EINVAL || !strstr(fxl_errmsg(ctx), needle)) {
        print_error("rc %d, message \"%s\", expected FXL_EINVAL with \"%s\"\n", rc, fxl_errmsg(ctx), needle);
        fxl_beam_model_release(&m);
        fxl_close(ctx);
        _fail(file, line);
    }
    if (m.sc.n != 0 || m.tmr.nx != 0 || m.sc.x != NULL) {
        print_error("a refused file left tables behind\n");
        _fail(file, line);
    }
    fxl_beam_model_release(&m);
    fxl_close(ctx);
}
#define assert_refused(text, needle) refuse_at((text), (needle), __FILE__, __LINE__)

#define HEAD "{\"format\":\"fxledger-beam-data/1\",\"machine\":\"M\",\"beam\":\"6X\",\"modality\":\"photon\"," \
             "\"energy\":6,\"sad_cm\":100,\"dmax_cm\":1.5," \
             "\"reference\":{\"dose_cgy_per_mu\":1,\"distance_cm\":101.5,\"field_size_cm\":10},"
#define OF_OK "\"output_factors\":{\"field_size_cm\":[5,10,20],\"sc\":[0.97,1,1.03],\"sp\":[0.98,1,1.02]},"
#define TMR_OK "\"tmr\":{\"field_size_cm\":[5,10],\"depth_cm\":[1.5,10],\"values\":[[1,1],[0.8,0.82]]}"

static void test_beam_model_file_minimal_accepted(void **state)
{
    const char *text = HEAD OF_OK TMR_OK "}";
    fxl_beam_model m;

    (void)state;
    assert_int_equal(fxl_beam_json_parse(NULL, &m, text, strlen(text), "t.json"), 0);
    assert_true(isnan(m.tray_factor));
    assert_int_equal(m.wedge.n, 0);
    assert_near(m.tmr.v[3], 0.82, 0);
    fxl_beam_model_release(&m);
}

static void test_beam_model_file_refusals(void **state)
{
    (void)state;
    assert_refused(HEAD OF_OK TMR_OK, "ends too early");
    assert_refused(HEAD OF_OK TMR_OK ",\"colour\":1}", "unknown key 'colour'");
    assert_refused("{\"format\":\"fxledger-beam-data/9\"}", "is not 'fxledger-beam-data/1'");
    assert_refused("{\"format\":\"fxledger-beam-data/1\",\"machine\":\"M\",\"beam\":\"9E\",\"modality\":\"electron\"}",
                   "photon beams only");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,20,10],\"sc\":[0.97,1,1.03],\"sp\":[0.98,1,1.02]},"
                   TMR_OK "}", "must increase strictly");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,10,20],\"sc\":[0.97,1.05,1.08],\"sp\":[0.98,1,1.02]},"
                   TMR_OK "}", "sc is 1.05 at the reference field 10 cm: must be 1");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[12,20],\"sc\":[1,1.03],\"sp\":[1,1.02]},"
                   TMR_OK "}", "must include the reference field");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,10,20],\"sc\":[0.97,1,1.03],\"scp\":[0.98,1,1.02]},"
                   TMR_OK "}", "not both");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,10,20],\"sc\":[0.97,1],\"sp\":[0.98,1,1.02]},"
                   TMR_OK "}", "'sc' must hold 3 numbers");
    assert_refused(HEAD OF_OK "\"tmr\":{\"field_size_cm\":[5,10],\"depth_cm\":[1.5,10],\"values\":[[1,1]]}}",
                   "must be an array of 2 rows");
    assert_refused(HEAD OF_OK "\"tmr\":{\"field_size_cm\":[5,10],\"depth_cm\":[1.5,10],\"values\":[[1,1],[0.8,-0.1]]}}",
                   "row[1] '-0.1' is out of range");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,10,20],\"sc\":[0.97,1,1.03],\"sp\":[0.98,1,1.02]}}",
                   "exactly one depth-dose table");
    assert_refused(HEAD "\"output_factors\":{\"field_size_cm\":[5,10,20],\"scp\":[0.97,1,1.03]},"
                   "\"pdd\":{\"ssd_cm\":100,\"field_size_cm\":[5,10],\"depth_cm\":[1.5,10],\"values_pct\":[[100,100],[64,66]]}}",
                   "needs separate 'sc' and 'sp'");
    assert_refused(HEAD OF_OK "\"wedges\":[{\"angle_deg\":30,\"factor\":0.8},{\"angle_deg\":30,\"factor\":0.81}],"
                   TMR_OK "}", "angle 30 deg is given twice");
    assert_refused(HEAD OF_OK "\"tray_factor\":1.2," TMR_OK "}", "tray_factor '1.2' is out of range: must be 0.5 to 1");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_beam_model_bilinear_points_and_inside),
        cmocka_unit_test(test_beam_model_bilinear_no_extrapolation),
        cmocka_unit_test(test_beam_model_bilinear_single_column_and_bad_grid),
        cmocka_unit_test(test_beam_model_entrance_dose_tg71_check_value),
        cmocka_unit_test(test_beam_model_inverse_square_check_values),
        cmocka_unit_test(test_beam_model_isocentric_geometry_must_agree),
        cmocka_unit_test(test_beam_model_exit_dose_formula),
        cmocka_unit_test(test_beam_model_exit_needs_thickness_in_range),
        cmocka_unit_test(test_beam_model_pdd_conversion_textbook_mu),
        cmocka_unit_test(test_beam_model_outside_output_tables),
        cmocka_unit_test(test_beam_model_wedge_and_tray_not_commissioned),
        cmocka_unit_test(test_beam_model_bad_inputs_and_beam),
        cmocka_unit_test(test_beam_model_shaped_field_uses_sp_not_sc),
        cmocka_unit_test(test_beam_model_combined_output_factor),
        cmocka_unit_test(test_beam_model_crosscheck_levels),
        cmocka_unit_test(test_beam_model_crosscheck_not_checked),
        cmocka_unit_test(test_beam_model_file_parses_and_computes),
        cmocka_unit_test(test_beam_model_file_minimal_accepted),
        cmocka_unit_test(test_beam_model_file_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
