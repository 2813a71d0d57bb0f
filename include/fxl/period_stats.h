/* Statistics of the in vivo results of a period, grouped by any of site,
 * technique, energy, point and detector, for the physicist's periodic
 * review of the levels (docs/statistics.md). Reads the database only; the
 * numbers come from src/core/stats.c. Nothing here changes a level: the
 * suggestion is shown beside the levels in force, for a physicist to weigh. */
#ifndef FXL_PERIOD_STATS_H
#define FXL_PERIOD_STATS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"
#include "fxl/stats.h"

/* Grouping keys, combined with |. */
#define FXL_PS_SITE 1u
#define FXL_PS_TECHNIQUE 2u
#define FXL_PS_ENERGY 4u       /* modality and nominal energy */
#define FXL_PS_POINT 8u        /* entrance / exit */
#define FXL_PS_DETECTOR 16u
#define FXL_PS_ALL 31u

/* Parses a comma-separated list of "site", "technique", "energy", "point",
 * "detector" (or "all"); FXL_EINVAL (message in ctx) for anything else. */
int fxl_ps_parse_by(fxl_ctx *ctx, unsigned *out, const char *text);
/* "site,technique,..." for a mask, in the fixed order above. */
void fxl_ps_format_by(char *out, size_t n, unsigned by);

typedef struct fxl_ps_group {
    /* Keys; those not in the grouping are "" (energy NaN). */
    char site[72];
    char technique[40];
    char modality[16];
    double energy;            /* MV or MeV by modality */
    char point[16];
    char detector[72];        /* label */
    char detector_serial[72];

    size_t n;                 /* results judged against levels (the statistics' n) */
    size_t n_not_judged;      /* not evaluable or implausible: no deviation */
    size_t n_outside_tol;     /* verdict outside tolerance or outside action */
    size_t n_outside_action;  /* verdict outside action */
    fxl_stats_summary summary;
    fxl_imr imr;              /* over the results in order of treatment */
    fxl_level_suggestion suggestion;
    double tolerance_pct;     /* levels in force: the pair used most often, NaN if none */
    double action_pct;
    size_t level_variants;    /* distinct (tolerance, action) pairs used */
    double *series;           /* n deviations (%) in order of treatment; owned */
    int64_t *ids;             /* n measurement ids, same order; owned */
} fxl_ps_group;

typedef struct fxl_period_stats {
    char from[FXL_TIME_LEN];  /* UTC bounds [from, to) of treatment times */
    char to[FXL_TIME_LEN];
    unsigned by;
    fxl_ps_group *groups;     /* ordered by the keys */
    size_t ngroups;
    size_t total;             /* judged results over all groups */
    size_t total_not_judged;
} fxl_period_stats;

#define FXL_PERIOD_STATS_INIT {{0}, {0}, 0, NULL, 0, 0, 0}

/* Current (not superseded) measurements whose fraction was treated in
 * [from, to) (stored UTC times), grouped by `by` (0 = one group). Groups
 * with only not-evaluable results are kept (n == 0, no summary). Returns 0
 * or a negative FXL_E code; release with fxl_period_stats_release either
 * way. */
int fxl_period_stats_compute(fxl_ctx *ctx, fxl_period_stats *out, const char *from,
                             const char *to, unsigned by);
void fxl_period_stats_release(fxl_period_stats *ps);

#endif
