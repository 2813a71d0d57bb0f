/* Loads the results of a period grouped by site, technique, energy, point and
 * detector, and hands each group's deviations to src/core/stats.c. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/period_stats.h"
#include "store/grow.h"
#include "store/stmt.h"

static const struct {
    const char *name;
    unsigned bit;
} by_names[] = {
    {"site", FXL_PS_SITE},
    {"technique", FXL_PS_TECHNIQUE},
    {"energy", FXL_PS_ENERGY},
    {"point", FXL_PS_POINT},
    {"detector", FXL_PS_DETECTOR},
};
#define NBY (sizeof by_names / sizeof by_names[0])

int fxl_ps_parse_by(fxl_ctx *ctx, unsigned *out, const char *text)
{
    const char *p = text;
    unsigned by = 0;
    size_t i;

    if (!text || !*text)
        return fxl_fail(ctx, FXL_EINVAL, "grouping '' must be a comma-separated list of site, "
                        "technique, energy, point, detector (or all)");
    while (*p) {
        size_t len = strcspn(p, ",");
        int found = 0;

        if (len == 3 && strncmp(p, "all", 3) == 0) {
            by |= FXL_PS_ALL;
            found = 1;
        }
        for (i = 0; i < NBY && !found; i++)
            if (strlen(by_names[i].name) == len && strncmp(p, by_names[i].name, len) == 0) {
                by |= by_names[i].bit;
                found = 1;
            }
        if (!found)
            return fxl_fail(ctx, FXL_EINVAL, "grouping key '%.*s%s' must be one of site, "
                            "technique, energy, point, detector, all", (int)(len > 40 ? 40 : len),
                            p, len > 40 ? "..." : "");
        p += len;
        if (*p == ',')
            p++;
    }
    *out = by;
    return 0;
}

void fxl_ps_format_by(char *out, size_t n, unsigned by)
{
    size_t i, used = 0;

    if (n == 0)
        return;
    out[0] = '\0';
    for (i = 0; i < NBY; i++)
        if (by & by_names[i].bit)
            used += (size_t)snprintf(out + (used < n ? used : n - 1), used < n ? n - used : 1,
                                     "%s%s", used ? "," : "", by_names[i].name);
    if (!by)
        snprintf(out, n, "none");
}

/* A group while its rows stream in. */
typedef struct ps_build {
    fxl_ctx *ctx;
    fxl_period_stats *ps;
    size_t cap_groups;
    fxl_ps_group *g;          /* the group being filled, or NULL */
    size_t cap_series;
    size_t cap_ids;
    struct {
        double tol, act;
        size_t count;
    } levels[16];
    size_t nlevels, levels_other;
} ps_build;

static int finish_group(ps_build *b)
{
    fxl_ps_group *g = b->g;
    double *scratch = NULL;
    size_t i, best = 0;
    int rc = 0;

    if (!g)
        return 0;
    b->g = NULL;
    g->tolerance_pct = g->action_pct = NAN;
    g->summary.mean = g->summary.sd = g->summary.median = NAN;
    g->summary.p05 = g->summary.p95 = g->summary.min = g->summary.max = NAN;
    g->imr.centre = g->imr.mr_mean = g->imr.ucl = g->imr.lcl = g->imr.mr_ucl = NAN;
    fxl_stats_suggest_levels(&g->suggestion, NULL);
    for (i = 0; i < b->nlevels; i++)
        if (b->levels[i].count > b->levels[best].count)
            best = i;
    if (b->nlevels > 0) {
        g->tolerance_pct = b->levels[best].tol;
        g->action_pct = b->levels[best].act;
    }
    g->level_variants = b->nlevels + b->levels_other;
    if (g->n > 0) {
        if (!(scratch = malloc(g->n * sizeof *scratch))) {
            rc = fxl_fail(b->ctx, FXL_EIO, "out of memory computing statistics");
            goto cleanup;
        }
        if ((rc = fxl_stats_summarize(&g->summary, g->series, g->n, scratch)) != 0 ||
            (rc = fxl_imr_limits(&g->imr, g->series, g->n)) != 0) {
            rc = fxl_fail(b->ctx, FXL_EINVAL, "internal: a stored deviation is not a number");
            goto cleanup;
        }
        fxl_stats_suggest_levels(&g->suggestion, &g->summary);
    }
    b->ps->total += g->n;
    b->ps->total_not_judged += g->n_not_judged;
cleanup:
    free(scratch);
    return rc;
}

static int same_keys(const fxl_ps_group *g, const char *site, const char *tech, const char *mod,
                     double energy, const char *point, const char *det, const char *serial)
{
    return strcmp(g->site, site) == 0 && strcmp(g->technique, tech) == 0 &&
           strcmp(g->modality, mod) == 0 &&
           ((isnan(g->energy) && isnan(energy)) || g->energy == energy) &&
           strcmp(g->point, point) == 0 && strcmp(g->detector, det) == 0 &&
           strcmp(g->detector_serial, serial) == 0;
}

static int add_level(ps_build *b, double tol, double act)
{
    size_t i;

    if (isnan(tol) || isnan(act))
        return 0;
    for (i = 0; i < b->nlevels; i++)
        if (b->levels[i].tol == tol && b->levels[i].act == act) {
            b->levels[i].count++;
            return 0;
        }
    if (b->nlevels < sizeof b->levels / sizeof b->levels[0]) {
        b->levels[b->nlevels].tol = tol;
        b->levels[b->nlevels].act = act;
        b->levels[b->nlevels++].count = 1;
    } else {
        b->levels_other++;   /* counted as a variant, never the most used */
    }
    return 0;
}

int fxl_period_stats_compute(fxl_ctx *ctx, fxl_period_stats *out, const char *from,
                             const char *to, unsigned by)
{
    char sql[2000];
    fxl_stmt s = FXL_STMT_INIT;
    ps_build b;
    int rc;

    memset(&b, 0, sizeof b);
    b.ctx = ctx;
    b.ps = out;
    snprintf(out->from, sizeof out->from, "%s", from ? from : "");
    snprintf(out->to, sizeof out->to, "%s", to ? to : "");
    out->by = by & FXL_PS_ALL;
    if (!from || !to || strcmp(from, to) >= 0)
        return fxl_fail(ctx, FXL_EINVAL, "period '%s' to '%s' must end after it starts",
                        from ? from : "", to ? to : "");
    snprintf(sql, sizeof sql,
             "SELECT %s, %s, %s, %s, %s, %s, %s, m.verdict, m.deviation_pct, m.tolerance_pct, "
             "       m.action_pct, m.id "
             "FROM measurements m JOIN fractions f ON f.id = m.fraction_id %s%s%s%s"
             "WHERE f.treated_at >= :from AND f.treated_at < :to "
             "  AND NOT EXISTS (SELECT 1 FROM measurements s WHERE s.supersedes_id = m.id) "
             "ORDER BY 1, 2, 3, 4, 5, 6, 7, f.treated_at, m.id",
             (by & FXL_PS_SITE) ? "p.site" : "''",
             (by & FXL_PS_TECHNIQUE) ? "p.technique" : "''",
             (by & FXL_PS_ENERGY) ? "b.modality" : "''",
             (by & FXL_PS_ENERGY) ? "b.energy" : "NULL",
             (by & FXL_PS_POINT) ? "fl.point" : "''",
             (by & FXL_PS_DETECTOR) ? "d.label" : "''",
             (by & FXL_PS_DETECTOR) ? "d.serial" : "''",
             /* Only the tables the grouping reads are joined (a lookup per
              * row each); every reference is NOT NULL and kept. */
             (by & (FXL_PS_SITE | FXL_PS_TECHNIQUE)) ? "JOIN plans p ON p.id = f.plan_id " : "",
             (by & (FXL_PS_ENERGY | FXL_PS_POINT)) ? "JOIN fields fl ON fl.id = m.field_id " : "",
             (by & FXL_PS_ENERGY) ? "JOIN beams b ON b.id = fl.beam_id " : "",
             (by & FXL_PS_DETECTOR) ? "JOIN detectors d ON d.id = m.detector_id " : "");
    if ((rc = fxl_stmt_prepare(&s, ctx, sql)) != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":from", from);
    fxl_stmt_bind_text(&s, ":to", to);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        const char *site = fxl_stmt_text(&s, 0), *tech = fxl_stmt_text(&s, 1);
        const char *mod = fxl_stmt_text(&s, 2), *point = fxl_stmt_text(&s, 4);
        const char *det = fxl_stmt_text(&s, 5), *serial = fxl_stmt_text(&s, 6);
        const char *verdict = fxl_stmt_text(&s, 7);
        double energy = fxl_stmt_double_opt(&s, 3), dev = fxl_stmt_double_opt(&s, 8);
        fxl_ps_group *g;
        int judged;

        if (!b.g || !same_keys(b.g, site, tech, mod, energy, point, det, serial)) {
            if ((rc = finish_group(&b)) != 0)
                goto cleanup;
            if ((rc = fxl_grow(ctx, (void **)&out->groups, &b.cap_groups, out->ngroups,
                               sizeof *out->groups, "computing statistics")) != 0)
                goto cleanup;
            g = &out->groups[out->ngroups++];
            memset(g, 0, sizeof *g);
            snprintf(g->site, sizeof g->site, "%s", site);
            snprintf(g->technique, sizeof g->technique, "%s", tech);
            snprintf(g->modality, sizeof g->modality, "%s", mod);
            g->energy = energy;
            snprintf(g->point, sizeof g->point, "%s", point);
            snprintf(g->detector, sizeof g->detector, "%s", det);
            snprintf(g->detector_serial, sizeof g->detector_serial, "%s", serial);
            b.g = g;
            b.cap_series = b.cap_ids = 0;
            b.nlevels = b.levels_other = 0;
        }
        g = b.g;
        judged = (strcmp(verdict, "within_tolerance") == 0 ||
                  strcmp(verdict, "outside_tolerance") == 0 ||
                  strcmp(verdict, "outside_action") == 0) && isfinite(dev);
        if (!judged) {
            g->n_not_judged++;
            continue;
        }
        if ((rc = fxl_grow(ctx, (void **)&g->series, &b.cap_series, g->n, sizeof *g->series,
                           "computing statistics")) != 0 ||
            (rc = fxl_grow(ctx, (void **)&g->ids, &b.cap_ids, g->n, sizeof *g->ids,
                           "computing statistics")) != 0)
            goto cleanup;
        g->series[g->n] = dev;
        g->ids[g->n] = fxl_stmt_int(&s, 11);
        g->n++;
        if (strcmp(verdict, "within_tolerance") != 0)
            g->n_outside_tol++;
        if (strcmp(verdict, "outside_action") == 0)
            g->n_outside_action++;
        add_level(&b, fxl_stmt_double_opt(&s, 9), fxl_stmt_double_opt(&s, 10));
    }
    if (rc == 0)
        rc = finish_group(&b);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

void fxl_period_stats_release(fxl_period_stats *ps)
{
    size_t i;

    if (!ps)
        return;
    for (i = 0; i < ps->ngroups; i++) {
        free(ps->groups[i].series);
        free(ps->groups[i].ids);
    }
    free(ps->groups);
    ps->groups = NULL;
    ps->ngroups = 0;
}
