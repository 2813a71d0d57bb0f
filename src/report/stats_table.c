/* The period statistics table and its definitions, for the statistics and
 * the monthly reports. */
#include "report/stats_table.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "report/table.h"

#define DASH "\xE2\x80\x93"

void rpt_ps_group_name(char *out, size_t n, const fxl_ps_group *g)
{
    size_t used = 0;
    char part[200];
    int k;

    out[0] = '\0';
    for (k = 0; k < 5; k++) {
        part[0] = '\0';
        if (k == 0 && g->site[0])
            snprintf(part, sizeof part, "%s", g->site);
        if (k == 1 && g->technique[0])
            snprintf(part, sizeof part, "%s", g->technique);
        if (k == 2 && g->modality[0])
            snprintf(part, sizeof part, "%g %s", g->energy,
                     strcmp(g->modality, "electron") == 0 ? "MeV" : "MV");
        if (k == 3 && g->point[0])
            snprintf(part, sizeof part, "%s", g->point);
        if (k == 4 && g->detector[0])
            snprintf(part, sizeof part, "%s (%s)", g->detector, g->detector_serial);
        if (!part[0] || used >= n)
            continue;
        used += (size_t)snprintf(out + used, n - used, "%s%s", used ? " / " : "", part);
    }
    if (!out[0])
        snprintf(out, n, "all results");
}

static void num(char *out, size_t n, double v, const char *f)
{
    if (isfinite(v))
        snprintf(out, n, f, v);
    else
        snprintf(out, n, DASH);
}

static const rpt_col cols[] = {
    {"Group", 190, RPT_LEFT},          {"n", 28, RPT_RIGHT},
    {"Mean %", 40, RPT_RIGHT},         {"SD %", 36, RPT_RIGHT},
    {"Median %", 42, RPT_RIGHT},       {"P5 %", 38, RPT_RIGHT},
    {"P95 %", 38, RPT_RIGHT},          {"Outside tol.", 48, RPT_RIGHT},
    {"Outside action", 48, RPT_RIGHT}, {"I-MR limits %", 74, RPT_RIGHT},
    {"Levels in force %", 62, RPT_RIGHT}, {"Suggested % (not applied)", 70, RPT_RIGHT}};
#define NCOLS ((int)(sizeof cols / sizeof cols[0]))

/* Portrait pages: the same without the I-MR column (column 9), headers that
 * fit their width without breaking a word. */
static const rpt_col compact_cols[] = {
    {"Group", 112, RPT_LEFT},         {"n", 24, RPT_RIGHT},
    {"Mean %", 34, RPT_RIGHT},        {"SD %", 30, RPT_RIGHT},
    {"Median %", 38, RPT_RIGHT},      {"P5 %", 32, RPT_RIGHT},
    {"P95 %", 32, RPT_RIGHT},         {"Outside tolerance", 50, RPT_RIGHT},
    {"Outside action", 50, RPT_RIGHT}, {"In force %", 52, RPT_RIGHT},
    {"Suggested %", 58, RPT_RIGHT}};
#define NCOMPACT ((int)(sizeof compact_cols / sizeof compact_cols[0]))

void rpt_ps_table(rpt_doc *d, const fxl_period_stats *ps, const char *caption)
{
    rpt_table t;
    char c[NCOLS][160];
    const char *cells[NCOLS];
    int compact = rpt_table_width(cols, NCOLS) > d->right - d->left;
    size_t i;
    int k, j;

    if (compact)
        rpt_table_begin(&t, d, compact_cols, NCOMPACT, 7, 3, caption);
    else
        rpt_table_begin(&t, d, cols, NCOLS, 7, 3, caption);
    if (ps->ngroups == 0)
        rpt_table_note(&t, "no results in this period");
    for (i = 0; i < ps->ngroups; i++) {
        const fxl_ps_group *g = &ps->groups[i];

        rpt_ps_group_name(c[0], sizeof c[0], g);
        if (g->n_not_judged) {
            size_t l = strlen(c[0]);
            snprintf(c[0] + l, sizeof c[0] - l, "; %zu not judged", g->n_not_judged);
        }
        snprintf(c[1], sizeof c[1], "%zu", g->n);
        num(c[2], sizeof c[2], g->n ? g->summary.mean : NAN, "%+.2f");
        num(c[3], sizeof c[3], g->summary.sd, "%.2f");
        num(c[4], sizeof c[4], g->n ? g->summary.median : NAN, "%+.2f");
        num(c[5], sizeof c[5], g->n ? g->summary.p05 : NAN, "%+.2f");
        num(c[6], sizeof c[6], g->n ? g->summary.p95 : NAN, "%+.2f");
        if (g->n) {
            snprintf(c[7], sizeof c[7], "%zu (%.1f %%)", g->n_outside_tol,
                     100.0 * (double)g->n_outside_tol / (double)g->n);
            snprintf(c[8], sizeof c[8], "%zu (%.1f %%)", g->n_outside_action,
                     100.0 * (double)g->n_outside_action / (double)g->n);
        } else {
            snprintf(c[7], sizeof c[7], DASH);
            snprintf(c[8], sizeof c[8], DASH);
        }
        if (isfinite(g->imr.ucl))
            snprintf(c[9], sizeof c[9], "%+.3f / %+.3f; MR %.3f", g->imr.lcl, g->imr.ucl,
                     g->imr.mr_ucl);
        else
            snprintf(c[9], sizeof c[9], DASH);
        if (isfinite(g->tolerance_pct))
            snprintf(c[10], sizeof c[10], "%g / %g%s", g->tolerance_pct, g->action_pct,
                     g->level_variants > 1 ? " (most used)" : "");
        else
            snprintf(c[10], sizeof c[10], "none");
        if (g->suggestion.offered)
            snprintf(c[11], sizeof c[11], "%.1f / %.1f", g->suggestion.tolerance_pct,
                     g->suggestion.action_pct);
        else
            snprintf(c[11], sizeof c[11], "too few results");
        for (k = 0, j = 0; k < NCOLS; k++)
            if (!compact || k != 9)
                cells[j++] = c[k];
        rpt_table_row(&t, cells, NULL);
    }
    rpt_table_end(&t);
}

void rpt_ps_definitions(rpt_doc *d)
{
    char text[1400];

    snprintf(text, sizeof text,
             "Definitions. n counts the current (not superseded) results judged against levels; "
             "not evaluable and implausible results carry no deviation and are counted apart. "
             "SD is the sample standard deviation (n \xE2\x88\x92 1). P5 and P95 are the 5th and "
             "95th percentiles by linear interpolation between the sorted values at position "
             "p \xC3\x97 (n \xE2\x88\x92 1) (the 'inclusive' method of Python's statistics module). "
             "Outside tol. counts results outside tolerance or outside the action level; the "
             "share is of n. I-MR limits: centre at the mean, individuals limits at mean "
             "\xC2\xB1 %.2f \xC3\x97 the average moving range, moving-range limit %.3f \xC3\x97 "
             "the average moving range (standard SPC constants; Pawlicki et al., Med. Phys. "
             "2005). Levels in force: tolerance / action used by these results (the pair used "
             "most often when they changed). Suggested: tolerance near 2 SD and action near 3 "
             "SD of the results, rounded up to 0.5 %% (from memory: a common rule), offered "
             "from %d results; a suggestion is never applied, and a mean away from zero is a "
             "systematic offset to investigate, not a reason to widen levels.",
             FXL_IMR_E2, FXL_IMR_D4, FXL_STATS_SUGGEST_MIN_N);
    rpt_paragraph(d, d->font, 7, d->left, d->right - d->left, text);
}
