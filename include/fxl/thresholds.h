/* Threshold sets: tolerance and action levels scoped by site, technique,
 * modality, energy, measured point and detector kind, versioned by effective
 * date. Matching rule and defaults: docs/levels.md. */
#ifndef FXL_THRESHOLDS_H
#define FXL_THRESHOLDS_H

#include <stdint.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* What a measurement is, for choosing its threshold set. NULL / NaN fields
 * are unknown and match only sets that leave that scope open. */
typedef struct fxl_scope {
    const char *site;
    const char *technique;
    const char *modality;       /* "photon" or "electron" */
    double energy;              /* MV or MeV */
    const char *point;          /* "entrance" or "exit" */
    const char *detector_kind;  /* schema kind, e.g. "photon_diode" */
} fxl_scope;

/* The threshold set chosen for a measurement. */
typedef struct fxl_threshold_choice {
    int64_t set_id;             /* threshold_sets.id, 0 if none applies */
    char name[65];
    int version;
    fxl_levels levels;          /* levels.present == 0 if none applies */
} fxl_threshold_choice;

/* Chooses the threshold set in force at time `at` (stored form) for `scope`:
 * per set name the latest version with effective_from <= at; inactive
 * versions drop out; among the sets whose every non-NULL scope column equals
 * the scope's value, the one with the most scope columns set wins. No match
 * gives set_id 0 and levels.present 0 (never an error). */
int fxl_thresholds_choose(fxl_ctx *ctx, fxl_threshold_choice *out, const fxl_scope *scope,
                          const char *at);

#endif
