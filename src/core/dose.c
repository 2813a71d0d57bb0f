/* Reading to dose: the calibration factor times every correction factor,
 * each looked up in its commissioned table (never extrapolated), and the
 * reasons in plain words when a dose cannot be given. docs/physics.md. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* A parameter without a table is accepted only at the reference condition,
 * to this precision (the same as a table point match in interp.c). */
#define AT_REFERENCE 1e-6

static const struct {
    const char *name;   /* schema name */
    const char *words;  /* for people */
    const char *unit;
    int discrete;
} cf_info[FXL_CF_COUNT] = {
    [FXL_CF_FIELD_SIZE] = {"field_size", "field size", "cm", 0},
    [FXL_CF_SSD] = {"ssd", "SSD", "cm", 0},
    [FXL_CF_WEDGE] = {"wedge", "wedge", "deg", 1},
    [FXL_CF_TRAY] = {"tray", "tray", "", 1},
    [FXL_CF_ANGLE] = {"angle", "beam angle", "deg", 0},
    [FXL_CF_THICKNESS] = {"thickness", "patient thickness", "cm", 0},
    [FXL_CF_SDD] = {"sdd", "source-to-detector distance", "cm", 0},
};

int fxl_cf_applies(fxl_cf_param p, int exit)
{
    switch (p) {
    case FXL_CF_SSD: return !exit;
    case FXL_CF_THICKNESS:
    case FXL_CF_SDD: return exit;
    case FXL_CF_FIELD_SIZE:
    case FXL_CF_WEDGE:
    case FXL_CF_TRAY:
    case FXL_CF_ANGLE: return 1;
    default: return 0;
    }
}

const char *fxl_cf_name(fxl_cf_param p)
{
    if ((int)p < 0 || p >= FXL_CF_COUNT)
        return "unknown";
    return cf_info[p].name;
}

int fxl_cf_parse(fxl_cf_param *out, const char *name)
{
    int i;

    if (!out || !name)
        return FXL_EINVAL;
    for (i = 0; i < FXL_CF_COUNT; i++) {
        if (strcmp(name, cf_info[i].name) == 0) {
            *out = (fxl_cf_param)i;
            return 0;
        }
    }
    return FXL_EINVAL;
}

int fxl_cf_is_discrete(fxl_cf_param p)
{
    if ((int)p < 0 || p >= FXL_CF_COUNT)
        return 0;
    return cf_info[p].discrete;
}

void fxl_reasons_add(fxl_reasons *r, const char *fmt, ...)
{
    va_list ap;

    /* Reasons come most important first; past the limit the rest are
     * dropped rather than overwriting what is already there. */
    if (!r || !fmt || r->n < 0 || r->n >= FXL_REASONS_MAX)
        return;
    va_start(ap, fmt);
    vsnprintf(r->text[r->n], FXL_REASON_LEN, fmt, ap);
    va_end(ap);
    r->n++;
}

/* "field size 32.0 cm", "wedge 45 deg", "no tray": one value in words. */
static void value_words(char *buf, size_t size, fxl_cf_param p, double v)
{
    if (p == FXL_CF_TRAY) {
        if (fabs(v) <= AT_REFERENCE)
            snprintf(buf, size, "no tray");
        else if (fabs(v - 1) <= AT_REFERENCE)
            snprintf(buf, size, "tray in the beam");
        else
            snprintf(buf, size, "tray setting %g", v);
    } else if (p == FXL_CF_WEDGE) {
        if (fabs(v) <= AT_REFERENCE)
            snprintf(buf, size, "open field (wedge 0 deg)");
        else
            snprintf(buf, size, "wedge %g deg", v);
    } else {
        snprintf(buf, size, "%s %.1f %s", cf_info[p].words, v, cf_info[p].unit);
    }
}

/* The commissioned points of a discrete table: "0, 15, 30, 60 deg" or "no
 * tray". Long lists end in "...". */
static void discrete_list(char *buf, size_t size, fxl_cf_param p, const fxl_factor_table *t)
{
    size_t i, used = 0;

    buf[0] = '\0';
    for (i = 0; i < t->n; i++) {
        char item[40];
        int w;

        if (p == FXL_CF_TRAY)
            value_words(item, sizeof item, p, t->x[i]);
        else
            snprintf(item, sizeof item, "%g", t->x[i]);
        if (used + strlen(item) + 8 >= size) {
            snprintf(buf + used, size - used, ", ...");
            return;
        }
        w = snprintf(buf + used, size - used, "%s%s", i ? ", " : "", item);
        used += (size_t)w;
    }
    if (p != FXL_CF_TRAY && used + 5 < size)
        snprintf(buf + used, size - used, " %s", cf_info[p].unit);
}

/* One correction factor: 0 and *cf set, or -1 with a reason added. */
static int correction_factor(double *cf, fxl_reasons *reasons, fxl_cf_param p, int exit,
                             double value, double ref, const fxl_factor_table *t)
{
    const char *words = cf_info[p].words;
    const char *pt = exit ? "exit " : "";
    char val[64];
    int rc;

    *cf = NAN;
    if (!isfinite(value)) {
        fxl_reasons_add(reasons, "the %s of this field is not known; no %s correction can be applied",
                        words, words);
        return -1;
    }
    value_words(val, sizeof val, p, value);
    if (t->n == 0) {
        char refw[64];

        if (isfinite(ref) && fabs(value - ref) <= AT_REFERENCE) {
            *cf = 1.0;
            return 0;
        }
        if (!isfinite(ref)) {
            fxl_reasons_add(reasons,
                            "no %s%s correction table is commissioned for this detector and beam, "
                            "and the calibration's reference %s is not known",
                            pt, words, words);
            return -1;
        }
        value_words(refw, sizeof refw, p, ref);
        fxl_reasons_add(reasons,
                        "no %s%s correction table is commissioned for this detector and beam; "
                        "%s differs from the calibration reference (%s)",
                        pt, words, val, refw);
        return -1;
    }
    if (cf_info[p].discrete)
        rc = fxl_lookup_exact(cf, t->x, t->factor, t->n, value);
    else
        rc = fxl_interp_linear(cf, t->x, t->factor, t->n, value);
    if (rc == FXL_ERANGE) {
        *cf = NAN;
        if (cf_info[p].discrete) {
            char list[120];

            discrete_list(list, sizeof list, p, t);
            fxl_reasons_add(reasons,
                            "%s is not in the commissioned %s table (%s); %s values must match "
                            "exactly",
                            val, words, list, words);
        } else if (t->n == 1) {
            fxl_reasons_add(reasons,
                            "%s is outside the commissioned table (%.1f %s only); no extrapolation",
                            val, t->x[0], cf_info[p].unit);
        } else {
            fxl_reasons_add(reasons,
                            "%s is outside the commissioned table %.1f-%.1f %s; no extrapolation",
                            val, t->x[0], t->x[t->n - 1], cf_info[p].unit);
        }
        return -1;
    }
    if (rc != 0) {
        *cf = NAN;
        fxl_reasons_add(reasons,
                        "the %s correction table is not usable (its points must be finite, "
                        "with strictly increasing %s); a physicist must fix it",
                        words, words);
        return -1;
    }
    if (!isfinite(*cf) || !(*cf > 0)) {
        fxl_reasons_add(reasons, "the %s correction factor %g for %s is not a positive number",
                        words, *cf, val);
        *cf = NAN;
        return -1;
    }
    return 0;
}

int fxl_dose_from_reading(fxl_dose_result *out, const fxl_dose_input *in)
{
    const char *unit;
    double net, product = 1.0;
    int ok = 1, i;

    memset(out, 0, sizeof *out);
    out->dose_cgy = NAN;
    out->cf_temp = NAN;
    for (i = 0; i < FXL_CF_COUNT; i++)
        out->cf[i] = NAN;
    if (!in) {
        fxl_reasons_add(&out->reasons, "no measurement was given");
        return 0;
    }
    unit = in->reading_unit && *in->reading_unit ? in->reading_unit : "(detector units)";

    net = in->reading - in->background;
    if (!isfinite(in->reading) || !isfinite(in->background) || !(net > 0)) {
        fxl_reasons_add(&out->reasons,
                        "reading %g %s minus background %g %s is not above zero; no dose can be "
                        "computed",
                        in->reading, unit, in->background, unit);
        ok = 0;
    }
    if (!isfinite(in->factor_n) || !(in->factor_n > 0)) {
        fxl_reasons_add(&out->reasons,
                        "no calibration factor is available for this detector and beam");
        ok = 0;
    }
    /* Every factor is evaluated even after a failure so that the reasons
     * list every problem at once, not one per attempt. */
    for (i = 0; i < FXL_CF_COUNT; i++) {
        if (!fxl_cf_applies((fxl_cf_param)i, in->exit))
            continue;  /* stays NaN: not a factor of this point */
        if (correction_factor(&out->cf[i], &out->reasons, (fxl_cf_param)i, in->exit, in->param[i],
                              in->ref[i], &in->table[i]) != 0)
            ok = 0;
        else
            product *= out->cf[i];
    }
    out->cf_temp = fxl_temp_correction(in->temp_coeff_per_c, in->temp_c, in->temp_cal_c);
    if (!isfinite(out->cf_temp)) {
        fxl_reasons_add(&out->reasons,
                        "no temperature correction can be made (coefficient %g per degC, "
                        "skin %g degC, calibration %g degC)",
                        in->temp_coeff_per_c, in->temp_c, in->temp_cal_c);
        out->cf_temp = NAN;
        ok = 0;
    }
    if (!ok)
        return 0;
    /* D = (M - M_0) N CF_fs CF_ssd CF_wedge CF_tray CF_angle CF_T at entrance
     * (AAPM Report 87 / TG-62; ESTRO Booklet 5); at exit the thickness and
     * source-to-detector distance factors replace the SSD factor (ESTRO
     * Booklet 1, IAEA HHR 8, from memory). */
    out->dose_cgy = net * in->factor_n * product * out->cf_temp;
    if (!isfinite(out->dose_cgy)) {
        out->dose_cgy = NAN;
        fxl_reasons_add(&out->reasons, "the corrected dose is not a finite number");
        return 0;
    }
    out->evaluable = 1;
    return 0;
}
