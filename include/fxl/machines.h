/* Treatment machines and their beams, with the beam data the independent
 * expected-dose model needs (d_max, reference dose per MU, normalisation
 * distance). Units: cm, cGy per MU; energy in MV (photon) or MeV (electron). */
#ifndef FXL_MACHINES_H
#define FXL_MACHINES_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Accepted ranges, checked before anything is written. */
#define FXL_SAD_CM_MIN 50.0
#define FXL_SAD_CM_MAX 200.0
#define FXL_ENERGY_MIN 0.1
#define FXL_ENERGY_MAX 50.0
#define FXL_DMAX_CM_MIN 0.1
#define FXL_DMAX_CM_MAX 9.9
#define FXL_DOSE_PER_MU_MIN 0.01       /* cGy per MU */
#define FXL_DOSE_PER_MU_MAX 10.0
#define FXL_NORM_DISTANCE_CM_MIN 50.0
#define FXL_NORM_DISTANCE_CM_MAX 200.0

typedef struct fxl_beam {
    int64_t id;
    int64_t machine_id;
    char machine[65];
    char name[33];                 /* e.g. "6X", "9E" */
    char modality[9];              /* "photon" or "electron" */
    double energy;                 /* MV or MeV */
    double dmax_cm;                /* NaN when not given */
    double ref_dose_cgy_per_mu;    /* NaN when not given */
    double norm_distance_cm;       /* NaN when not given */
    char created_at[FXL_TIME_LEN];
} fxl_beam;

typedef struct fxl_machine {
    int64_t id;
    char name[65];
    double sad_cm;
    char created_at[FXL_TIME_LEN];
    fxl_beam *beams;               /* owned by the list; see fxl_machine_list_free */
    size_t n_beams;
} fxl_machine;

/* Adds a machine (physicist or admin). name 1 to 64 characters; sad_cm within
 * FXL_SAD_CM_MIN..MAX. A taken name is FXL_ECONFLICT. *out_id may be NULL. */
int fxl_machine_add(fxl_ctx *ctx, int64_t *out_id, const char *name, double sad_cm);

/* What fxl_beam_add writes. Optional numbers are NaN when not given. */
typedef struct fxl_beam_spec {
    const char *machine;           /* machine name, must exist */
    const char *name;              /* 1 to 32 characters, unique per machine */
    const char *modality;          /* "photon" or "electron" */
    double energy;                 /* FXL_ENERGY_MIN..MAX */
    double dmax_cm;
    double ref_dose_cgy_per_mu;
    double norm_distance_cm;
} fxl_beam_spec;

/* Adds a beam to a machine (physicist or admin). */
int fxl_beam_add(fxl_ctx *ctx, int64_t *out_id, const fxl_beam_spec *spec);

/* Every machine with its beams, ordered by name. Free with
 * fxl_machine_list_free(list, n) (accepts NULL). */
int fxl_machine_list(fxl_ctx *ctx, fxl_machine **out, size_t *n);
void fxl_machine_list_free(fxl_machine *list, size_t n);

/* beams.id of beam `beam` of machine `machine`; FXL_ENOTFOUND with a message
 * naming which of the two is missing. */
int fxl_beam_find(fxl_ctx *ctx, int64_t *out_id, const char *machine, const char *beam);

#endif
