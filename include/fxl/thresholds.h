/* Threshold sets: tolerance and action levels scoped by site, technique,
 * modality, energy, measured point and detector kind, versioned by effective
 * date. Matching rule and defaults: docs/levels.md. */
#ifndef FXL_THRESHOLDS_H
#define FXL_THRESHOLDS_H

#include <stddef.h>
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
    /* Added: two sets in force matched equally specifically. Then set_id is
     * 0, levels.present 0, name holds one set and other_name the other. */
    int ambiguous;
    char other_name[65];
    /* Why levels.present is 0, in words for the record's reasons, e.g.
     * "ambiguous action levels (sets A and B)" or "no tolerance and action
     * levels apply to this measurement"; "" when a set was chosen. */
    char reason[200];
} fxl_threshold_choice;

/* Chooses the threshold set in force at time `at` (stored form) for `scope`:
 * per set name the latest version with effective_from <= at; inactive
 * versions drop out; among the sets whose every non-NULL scope column equals
 * the scope's value, the one with the most scope columns set wins. No match
 * gives set_id 0 and levels.present 0 (never an error).
 * "Latest version" means the greatest effective_from, and among versions of
 * one name with the same effective_from the highest version number. Site and
 * technique compare case-insensitively; energy within 1e-6. Two matching sets
 * with equal specificity are a tie: no levels, ambiguous = 1, both names
 * given and reason filled (never an error either). `at` NULL means now.
 * Returns 0, or a negative FXL_E code only for a database failure. */
int fxl_thresholds_choose(fxl_ctx *ctx, fxl_threshold_choice *out, const fxl_scope *scope,
                          const char *at);

/* ---- saving and listing sets ------------------------------------------ */

/* Accepted ranges (percent and cGy). The schema allows floors up to 50 cGy
 * (older sets); a new version is refused above FXL_FLOOR_MAX_CGY (core.h). */
#define FXL_LEVEL_PCT_MAX 50.0
#define FXL_FLOOR_CGY_MAX FXL_FLOOR_MAX_CGY

/* One stored version of a threshold set. String scope columns are "" when
 * open; energy is NaN when open. */
typedef struct fxl_threshold_set {
    int64_t id;
    char name[65];
    int version;
    char effective_from[FXL_TIME_LEN];
    int active;
    char site[65];
    char technique[65];
    char modality[16];
    double energy;
    char point[16];
    char detector_kind[32];
    double tolerance_pct;
    double action_pct;
    double floor_cgy;
    char created_by[65];        /* login of the user who saved it */
    char created_at[FXL_TIME_LEN];
} fxl_threshold_set;

/* A borrowed view of a set's scope (pointers into *set, NULL when open). */
void fxl_threshold_set_scope(fxl_scope *out, const fxl_threshold_set *set);

/* What a new version changes. Numbers NaN and strings NULL keep the previous
 * version's value (a new name needs tolerance_pct and action_pct; floor
 * defaults to 0 cGy). A scope string "" opens that column (match any);
 * clear_energy opens the energy column. Initialise with
 * fxl_threshold_change_init. */
typedef struct fxl_threshold_change {
    const char *name;
    double tolerance_pct;
    double action_pct;
    double floor_cgy;
    const char *site;
    const char *technique;
    const char *modality;       /* "photon" or "electron" */
    double energy;              /* > 0 and <= 50 MV or MeV */
    int clear_energy;
    const char *point;          /* "entrance" or "exit" */
    const char *detector_kind;
    const char *effective_from; /* stored form; NULL means now */
    int deactivate;             /* save an inactive version (the set drops out) */
} fxl_threshold_change;

void fxl_threshold_change_init(fxl_threshold_change *chg);

/* Saves a new version of set chg->name (version = previous + 1; no row is
 * ever edited), physicist or admin only, one transaction with an audit row.
 * Refuses: action below tolerance, values out of range, an unknown modality,
 * point or detector kind, and a tie: an active version of another set in
 * force at some time the new version is, equally specific and compatible
 * (some measurement could match both) - FXL_ECONFLICT naming the other set
 * and what to do. On success *out (may be NULL) holds the saved row. */
int fxl_thresholds_save(fxl_ctx *ctx, fxl_threshold_set *out, const fxl_threshold_change *chg);

/* The versions in force at `at` (NULL: now), active ones only, ordered by
 * name; or with all_versions every stored row ordered by name and version
 * (`at` ignored). *out is malloc'ed (free with free(); NULL when n is 0). */
int fxl_thresholds_list(fxl_ctx *ctx, fxl_threshold_set **out, size_t *n, const char *at,
                        int all_versions);

#endif
