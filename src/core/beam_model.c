/* The independent expected-dose model: table lookups without extrapolation,
 * the TG-71 formalism run backwards for the entrance and exit points, and the
 * cross-check of a planning-system value. Formulas and sources in
 * docs/expected-dose.md. Pure computation. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/beam_model.h"
#include "fxl/core.h"
#include "fxl/fxl.h"

/* Same tolerance as the one-parameter lookups in interp.c: a value within
 * this of a table point is that point. */
#define SAME_X 1e-6

/* ---- tables ------------------------------------------------------------- */

static int axis_valid(const double *x, size_t n)
{
    size_t i;

    if (!x || n == 0)
        return 0;
    for (i = 0; i < n; i++) {
        if (!isfinite(x[i]))
            return 0;
        if (i > 0 && !(x[i] > x[i - 1]))
            return 0;
    }
    return 1;
}

int fxl_table1_check(const fxl_table1 *t)
{
    size_t i;

    if (!t || !axis_valid(t->x, t->n) || !t->y)
        return FXL_EINVAL;
    for (i = 0; i < t->n; i++)
        if (!isfinite(t->y[i]))
            return FXL_EINVAL;
    return 0;
}

int fxl_grid_check(const fxl_grid *g)
{
    size_t i;

    if (!g || !axis_valid(g->x, g->nx) || !axis_valid(g->y, g->ny) || !g->v)
        return FXL_EINVAL;
    for (i = 0; i < g->nx * g->ny; i++)
        if (!isfinite(g->v[i]))
            return FXL_EINVAL;
    return 0;
}

int fxl_table1_interp(double *out, const fxl_table1 *t, double x)
{
    if (!t)
        return FXL_EINVAL;
    return fxl_interp_linear(out, t->x, t->y, t->n, x);
}

/* Finds the cell of x on one axis: *i and the fraction *f towards i + 1
 * (f == 0 on a table point, and then i + 1 is never read). */
static int locate(size_t *i, double *f, const double *ax, size_t n, double x)
{
    size_t k;

    if (x < ax[0] - SAME_X || x > ax[n - 1] + SAME_X)
        return FXL_ERANGE;
    for (k = 0; k < n; k++) {
        if (fabs(x - ax[k]) <= SAME_X) {
            *i = k;
            *f = 0;
            return 0;
        }
    }
    for (k = 0; k + 1 < n; k++) {
        if (x > ax[k] && x < ax[k + 1]) {
            *i = k;
            *f = (x - ax[k]) / (ax[k + 1] - ax[k]);
            return 0;
        }
    }
    return FXL_ERANGE;  /* not reached for a valid axis */
}

int fxl_interp_bilinear(double *out, const fxl_grid *g, double x, double y)
{
    size_t i, j, i1, j1;
    double fx, fy, v00, v10, v01, v11;
    int rc;

    if (!out || fxl_grid_check(g) != 0 || !isfinite(x) || !isfinite(y))
        return FXL_EINVAL;
    if ((rc = locate(&i, &fx, g->x, g->nx, x)) != 0)
        return rc;
    if ((rc = locate(&j, &fy, g->y, g->ny, y)) != 0)
        return rc;
    i1 = fx > 0 ? i + 1 : i;
    j1 = fy > 0 ? j + 1 : j;
    v00 = g->v[j * g->nx + i];
    v10 = g->v[j * g->nx + i1];
    v01 = g->v[j1 * g->nx + i];
    v11 = g->v[j1 * g->nx + i1];
    *out = (1 - fx) * (1 - fy) * v00 + fx * (1 - fy) * v10 + (1 - fx) * fy * v01 + fx * fy * v11;
    return 0;
}

/* ---- beam data ---------------------------------------------------------- */

static void table1_free(fxl_table1 *t)
{
    free(t->x);
    free(t->y);
    t->x = t->y = NULL;
    t->n = 0;
}

static void grid_free(fxl_grid *g)
{
    free(g->x);
    free(g->y);
    free(g->v);
    g->x = g->y = g->v = NULL;
    g->nx = g->ny = 0;
}

void fxl_beam_model_init(fxl_beam_model *m)
{
    if (!m)
        return;
    memset(m, 0, sizeof *m);
    m->energy = m->sad_cm = m->dmax_cm = NAN;
    m->ref_dose_cgy_per_mu = m->ref_distance_cm = m->ref_field_cm = NAN;
    m->tray_factor = NAN;
    m->pdd_ssd_cm = NAN;
    m->depth_kind = FXL_DEPTH_TMR;
}

void fxl_beam_model_release(fxl_beam_model *m)
{
    if (!m)
        return;
    table1_free(&m->sc);
    table1_free(&m->sp);
    table1_free(&m->scp);
    table1_free(&m->wedge);
    grid_free(&m->tmr);
    grid_free(&m->pdd);
    fxl_beam_model_init(m);
}

/* ---- single lookups ------------------------------------------------------ */

int fxl_model_sc(double *out, const fxl_beam_model *m, double rc_cm)
{
    if (!out || !m || m->output_combined || m->sc.n == 0)
        return FXL_EINVAL;
    return fxl_table1_interp(out, &m->sc, rc_cm);
}

int fxl_model_sp(double *out, const fxl_beam_model *m, double rd_cm)
{
    if (!out || !m || m->output_combined || m->sp.n == 0)
        return FXL_EINVAL;
    return fxl_table1_interp(out, &m->sp, rd_cm);
}

int fxl_model_scp(double *out, const fxl_beam_model *m, double rc_cm, double rd_cm)
{
    double sc, sp;
    int rc;

    if (!out || !m)
        return FXL_EINVAL;
    if (m->output_combined) {
        if (m->scp.n == 0)
            return FXL_EINVAL;
        return fxl_table1_interp(out, &m->scp, rd_cm);
    }
    if ((rc = fxl_model_sc(&sc, m, rc_cm)) != 0 || (rc = fxl_model_sp(&sp, m, rd_cm)) != 0)
        return rc;
    *out = sc * sp;
    return 0;
}

int fxl_model_wedge(double *out, const fxl_beam_model *m, double wedge_deg)
{
    if (!out || !m || !isfinite(wedge_deg))
        return FXL_EINVAL;
    if (fabs(wedge_deg) <= SAME_X) {
        *out = 1.0;  /* open field */
        return 0;
    }
    if (m->wedge.n == 0)
        return FXL_EINVAL;
    return fxl_lookup_exact(out, m->wedge.x, m->wedge.y, m->wedge.n, wedge_deg);
}

int fxl_model_tray(double *out, const fxl_beam_model *m, int tray)
{
    if (!out || !m || (tray != 0 && tray != 1))
        return FXL_EINVAL;
    if (tray == 0) {
        *out = 1.0;
        return 0;
    }
    if (!isfinite(m->tray_factor))
        return FXL_EINVAL;
    *out = m->tray_factor;
    return 0;
}

int fxl_model_tmr(double *out, double *out_pdd_pct, const fxl_beam_model *m,
                  double depth_cm, double rd_cm)
{
    double f, r, rm, pdd, sp_m, sp_d;
    int rc;

    if (out_pdd_pct)
        *out_pdd_pct = NAN;
    if (!out || !m || !isfinite(depth_cm) || !isfinite(rd_cm))
        return FXL_EINVAL;
    if (m->depth_kind == FXL_DEPTH_TMR) {
        if (m->tmr.nx == 0)
            return FXL_EINVAL;
        return fxl_interp_bilinear(out, &m->tmr, rd_cm, depth_cm);
    }
    /* PDD to TMR (Khan, The Physics of Radiation Therapy, chapter on
     * TMR; from memory): the PDD belongs to the surface field r that
     * diverges to r_d at depth d, the inverse-square term moves the
     * normalisation from d_max to the point, and the S_p ratio swaps the
     * scatter of the field at d_max for that of the field at d. */
    if (m->pdd.nx == 0 || m->output_combined || !isfinite(m->pdd_ssd_cm) || !isfinite(m->dmax_cm))
        return FXL_EINVAL;
    f = m->pdd_ssd_cm;
    r = rd_cm * f / (f + depth_cm);
    rm = r * (f + m->dmax_cm) / f;
    if ((rc = fxl_interp_bilinear(&pdd, &m->pdd, r, depth_cm)) != 0)
        return rc;
    if ((rc = fxl_model_sp(&sp_m, m, rm)) != 0 || (rc = fxl_model_sp(&sp_d, m, rd_cm)) != 0)
        return rc;
    if (out_pdd_pct)
        *out_pdd_pct = pdd;
    *out = pdd / 100.0 * ((f + depth_cm) / (f + m->dmax_cm)) * ((f + depth_cm) / (f + m->dmax_cm)) *
           sp_m / sp_d;
    return 0;
}

/* ---- expected dose -------------------------------------------------------- */

void fxl_model_input_init(fxl_model_input *in)
{
    if (!in)
        return;
    memset(in, 0, sizeof *in);
    in->point = FXL_MODEL_ENTRANCE;
    in->setup = FXL_MODEL_SETUP_SSD;
    in->mu = in->ssd_cm = in->iso_depth_cm = NAN;
    in->x_cm = in->y_cm = in->field_eqsq_cm = NAN;
    in->wedge_deg = 0;
    in->tray = 0;
    in->thickness_cm = NAN;
}

static void result_init(fxl_model_result *r, const fxl_model_input *in)
{
    memset(r, 0, sizeof *r);
    r->point = in->point;
    r->setup = in->setup;
    r->dose_cgy = r->mu = r->ref_dose_cgy_per_mu = r->ref_distance_cm = NAN;
    r->sad_cm = r->dmax_cm = r->ssd_cm = r->depth_cm = r->spd_cm = NAN;
    r->rc_cm = r->rd_cm = r->sc = r->sp = r->scp = r->tmr = r->pdd_pct = NAN;
    r->inverse_square = r->wedge_factor = r->tray_factor = NAN;
}

/* A range of a table for reason texts: "4 to 30 cm". */
static void range_text(char *buf, size_t size, const double *x, size_t n, const char *unit)
{
    if (n == 0)
        snprintf(buf, size, "none");
    else
        snprintf(buf, size, "%g to %g %s", x[0], x[n - 1], unit);
}

/* The beam constants every result needs. 0 if usable, else reasons added. */
static int check_beam(fxl_model_result *r, const fxl_beam_model *m)
{
    int ok = 1;

    if (strcmp(m->modality, "photon") != 0) {
        fxl_reasons_add(&r->reasons, "beam '%s': the independent model covers photon beams only", m->beam);
        return -1;
    }
    if (!(m->ref_dose_cgy_per_mu > 0) || !isfinite(m->ref_dose_cgy_per_mu)) {
        fxl_reasons_add(&r->reasons, "beam '%s' has no reference dose per MU", m->beam);
        ok = 0;
    }
    if (!(m->ref_distance_cm > 0) || !isfinite(m->ref_distance_cm)) {
        fxl_reasons_add(&r->reasons, "beam '%s' has no normalisation distance (SSD0 + d0)", m->beam);
        ok = 0;
    }
    if (!(m->sad_cm > 0) || !isfinite(m->sad_cm)) {
        fxl_reasons_add(&r->reasons, "beam '%s' has no source-axis distance", m->beam);
        ok = 0;
    }
    if (!(m->dmax_cm > 0) || !isfinite(m->dmax_cm)) {
        fxl_reasons_add(&r->reasons, "beam '%s' has no d_max", m->beam);
        ok = 0;
    }
    return ok ? 0 : -1;
}

/* The field's own numbers; 0 if usable, else reasons added. */
static int check_input(fxl_model_result *r, const fxl_beam_model *m, const fxl_model_input *in,
                       double *ssd)
{
    int ok = 1, ssd_ok = 1;

    if (!(in->mu > 0) || !isfinite(in->mu)) {
        fxl_reasons_add(&r->reasons, "MU '%g' must be > 0", in->mu);
        ok = 0;
    }
    *ssd = in->ssd_cm;
    if (in->setup == FXL_MODEL_SETUP_ISO && !isfinite(*ssd) && isfinite(in->iso_depth_cm)) {
        if (!(in->iso_depth_cm > 0) || in->iso_depth_cm >= m->sad_cm) {
            fxl_reasons_add(&r->reasons, "isocentre depth '%g' cm must be > 0 and < the SAD %g cm",
                            in->iso_depth_cm, m->sad_cm);
            ok = ssd_ok = 0;
        } else {
            *ssd = m->sad_cm - in->iso_depth_cm;  /* skin on the axis above the isocentre */
        }
    } else if (in->setup == FXL_MODEL_SETUP_ISO && isfinite(*ssd) && isfinite(in->iso_depth_cm) &&
               fabs(*ssd + in->iso_depth_cm - m->sad_cm) > 0.5) {
        /* Both given: they must describe the same geometry. 0.5 cm is the
         * spread of a set-up SSD read off the optical distance indicator. */
        fxl_reasons_add(&r->reasons,
                        "SSD %g cm and isocentre depth %g cm do not add up to the SAD %g cm (within 0.5 cm)",
                        *ssd, in->iso_depth_cm, m->sad_cm);
        ok = ssd_ok = 0;
    }
    if (ssd_ok && (!isfinite(*ssd) || *ssd < 50 || *ssd > 200)) {
        fxl_reasons_add(&r->reasons, "SSD '%g' cm must be 50 to 200 cm", *ssd);
        ok = 0;
    }
    if (!isfinite(in->x_cm) || !isfinite(in->y_cm) || in->x_cm <= 0 || in->y_cm <= 0 ||
        in->x_cm > 50 || in->y_cm > 50) {
        fxl_reasons_add(&r->reasons, "field size '%g x %g' cm must be > 0 and <= 50 cm each way",
                        in->x_cm, in->y_cm);
        ok = 0;
    }
    if (isfinite(in->field_eqsq_cm) && !(in->field_eqsq_cm > 0 && in->field_eqsq_cm <= 50)) {
        fxl_reasons_add(&r->reasons, "shaped-field equivalent square '%g' cm must be > 0 and <= 50 cm",
                        in->field_eqsq_cm);
        ok = 0;
    }
    if (in->point == FXL_MODEL_EXIT) {
        if (!isfinite(in->thickness_cm)) {
            fxl_reasons_add(&r->reasons, "exit dose needs the patient thickness on the beam axis");
            ok = 0;
        } else if (!(in->thickness_cm > 2 * m->dmax_cm) || in->thickness_cm > 60) {
            /* The exit point sits d_max before the exit surface; it must lie
             * beyond the entrance build-up region. */
            fxl_reasons_add(&r->reasons, "thickness '%g' cm must be > 2 x d_max (%g cm) and <= 60 cm",
                            in->thickness_cm, 2 * m->dmax_cm);
            ok = 0;
        }
    }
    return ok ? 0 : -1;
}

static void output_factors(fxl_model_result *r, const fxl_beam_model *m)
{
    char range[64];
    int rc;

    r->output_combined = m->output_combined;
    if (m->output_combined) {
        rc = fxl_model_scp(&r->scp, m, r->rc_cm, r->rd_cm);
        if (rc != 0) {
            r->scp = NAN;
            range_text(range, sizeof range, m->scp.x, m->scp.n, "cm");
            fxl_reasons_add(&r->reasons, "field size %.2f cm is outside the output-factor table of beam '%s' (%s)",
                            r->rd_cm, m->beam, range);
        }
        return;
    }
    if (fxl_model_sc(&r->sc, m, r->rc_cm) != 0) {
        r->sc = NAN;
        range_text(range, sizeof range, m->sc.x, m->sc.n, "cm");
        fxl_reasons_add(&r->reasons, "collimator field %.2f cm is outside the S_c table of beam '%s' (%s)",
                        r->rc_cm, m->beam, range);
    }
    if (fxl_model_sp(&r->sp, m, r->rd_cm) != 0) {
        r->sp = NAN;
        range_text(range, sizeof range, m->sp.x, m->sp.n, "cm");
        fxl_reasons_add(&r->reasons, "field size %.2f cm at the point is outside the S_p table of beam '%s' (%s)",
                        r->rd_cm, m->beam, range);
    }
    if (isfinite(r->sc) && isfinite(r->sp))
        r->scp = r->sc * r->sp;
}

static void depth_factor(fxl_model_result *r, const fxl_beam_model *m)
{
    const fxl_grid *g;
    char xr[64], yr[64];
    int rc;

    if (r->point == FXL_MODEL_ENTRANCE) {
        r->tmr = 1.0;  /* TMR(d_max, r) = 1 by definition of the TMR */
        return;
    }
    rc = fxl_model_tmr(&r->tmr, &r->pdd_pct, m, r->depth_cm, r->rd_cm);
    if (rc == 0)
        return;
    r->tmr = NAN;
    r->pdd_pct = NAN;
    if (rc == FXL_EINVAL && m->depth_kind == FXL_DEPTH_PDD && m->output_combined) {
        fxl_reasons_add(&r->reasons, "beam '%s' has PDD data and combined output factors: the PDD to TMR "
                        "conversion needs S_p (give S_c and S_p, or a TMR table)", m->beam);
        return;
    }
    g = m->depth_kind == FXL_DEPTH_TMR ? &m->tmr : &m->pdd;
    if (g->nx == 0) {
        fxl_reasons_add(&r->reasons, "beam '%s' has no %s table", m->beam,
                        m->depth_kind == FXL_DEPTH_TMR ? "TMR" : "PDD");
        return;
    }
    range_text(xr, sizeof xr, g->x, g->nx, "cm");
    range_text(yr, sizeof yr, g->y, g->ny, "cm");
    fxl_reasons_add(&r->reasons, "depth %.2f cm, field %.2f cm is outside the %s table of beam '%s' "
                    "(depth %s, field %s)", r->depth_cm, r->rd_cm,
                    m->depth_kind == FXL_DEPTH_TMR ? "TMR" : "PDD", m->beam, yr, xr);
}

static void accessory_factors(fxl_model_result *r, const fxl_beam_model *m, const fxl_model_input *in)
{
    char list[120];
    size_t i, used = 0;

    if (fxl_model_wedge(&r->wedge_factor, m, in->wedge_deg) != 0) {
        r->wedge_factor = NAN;
        list[0] = '\0';
        for (i = 0; i < m->wedge.n && used + 16 < sizeof list; i++)
            used += (size_t)snprintf(list + used, sizeof list - used, "%s%g", i ? ", " : "", m->wedge.x[i]);
        fxl_reasons_add(&r->reasons, "wedge %g deg has no wedge factor for beam '%s' (commissioned: %s deg)",
                        in->wedge_deg, m->beam, m->wedge.n ? list : "none");
    }
    if (fxl_model_tray(&r->tray_factor, m, in->tray) != 0) {
        r->tray_factor = NAN;
        if (in->tray != 0 && in->tray != 1)
            fxl_reasons_add(&r->reasons, "tray '%d' must be 0 or 1", in->tray);
        else
            fxl_reasons_add(&r->reasons, "beam '%s' has no tray factor", m->beam);
    }
}

int fxl_model_expected(fxl_model_result *out, const fxl_beam_model *m, const fxl_model_input *in)
{
    double ssd = NAN, field;

    if (!out || !m || !in)
        return FXL_EINVAL;
    result_init(out, in);
    if (check_beam(out, m) != 0)
        return 0;
    out->mu = in->mu;
    out->ref_dose_cgy_per_mu = m->ref_dose_cgy_per_mu;
    out->ref_distance_cm = m->ref_distance_cm;
    out->sad_cm = m->sad_cm;
    out->dmax_cm = m->dmax_cm;
    if (check_input(out, m, in, &ssd) != 0)
        return 0;
    out->ssd_cm = ssd;
    /* Entrance: d_max below the skin. Exit: d_max before the exit surface,
     * i.e. t - d_max below the entrance skin (exit dosimetry geometry: ESTRO Booklet 1, from memory). */
    out->depth_cm = in->point == FXL_MODEL_ENTRANCE ? m->dmax_cm : in->thickness_cm - m->dmax_cm;
    out->spd_cm = ssd + out->depth_cm;
    /* Jaw positions are given in the isocentre plane, so the collimator
     * field is already at the SAD; the field at the point diverges with the
     * distance from the source (TG-71: r_c at the isocentre, r_d at the
     * point). */
    out->rc_cm = fxl_equiv_square_cm(in->x_cm, in->y_cm);
    field = isfinite(in->field_eqsq_cm) ? fmin(in->field_eqsq_cm, out->rc_cm) : out->rc_cm;
    out->rd_cm = field * out->spd_cm / m->sad_cm;
    out->inverse_square = (m->ref_distance_cm / out->spd_cm) * (m->ref_distance_cm / out->spd_cm);
    output_factors(out, m);
    depth_factor(out, m);
    accessory_factors(out, m, in);
    if (out->reasons.n > 0)
        return 0;
    out->dose_cgy = in->mu * m->ref_dose_cgy_per_mu * out->scp * out->tmr * out->inverse_square *
                    out->wedge_factor * out->tray_factor;
    if (!isfinite(out->dose_cgy) || !(out->dose_cgy > 0)) {
        out->dose_cgy = NAN;
        fxl_reasons_add(&out->reasons, "the model gave no positive finite dose");
        return 0;
    }
    out->computed = 1;
    return 0;
}

/* ---- cross-check ------------------------------------------------------------ */

const char *fxl_xcheck_name(fxl_xcheck_outcome o)
{
    switch (o) {
    case FXL_XCHECK_AGREES: return "agrees";
    case FXL_XCHECK_DISAGREES: return "disagrees";
    case FXL_XCHECK_NOT_CHECKED: return "not_checked";
    }
    return "unknown";
}

int fxl_model_crosscheck(fxl_crosscheck *out, double tps_cgy, const fxl_model_result *model,
                         double level_pct)
{
    if (!out || !model || !isfinite(level_pct) || !(level_pct > 0) || level_pct > 50)
        return FXL_EINVAL;
    memset(out, 0, sizeof *out);
    out->tps_cgy = tps_cgy;
    out->model_cgy = model->computed ? model->dose_cgy : NAN;
    out->deviation_pct = NAN;
    out->level_pct = level_pct;
    out->outcome = FXL_XCHECK_NOT_CHECKED;
    if (!isfinite(tps_cgy) || !(tps_cgy > 0)) {
        snprintf(out->summary, sizeof out->summary, "not cross-checked: no planning-system expected dose");
        return 0;
    }
    if (!model->computed) {
        snprintf(out->summary, sizeof out->summary, "not cross-checked: %.170s",
                 model->reasons.n ? model->reasons.text[0] : "the model gave no value");
        return 0;
    }
    /* Rounded to 0.01 % before comparing, as the verdict does, so that what
     * is shown is what was judged. */
    out->deviation_pct = round(fxl_deviation_pct(tps_cgy, out->model_cgy) * 100.0) / 100.0;
    if (fabs(out->deviation_pct) > level_pct) {
        out->outcome = FXL_XCHECK_DISAGREES;
        snprintf(out->summary, sizeof out->summary,
                 "planning-system expected dose %.1f cGy differs from the model's %.1f cGy by %+.2f %% "
                 "(level %.2f %%)", tps_cgy, out->model_cgy, out->deviation_pct, level_pct);
    } else {
        out->outcome = FXL_XCHECK_AGREES;
        snprintf(out->summary, sizeof out->summary,
                 "planning-system expected dose %.1f cGy agrees with the model's %.1f cGy (%+.2f %%, "
                 "level %.2f %%)", tps_cgy, out->model_cgy, out->deviation_pct, level_pct);
    }
    return 0;
}
