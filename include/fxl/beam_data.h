/* Beam data of the independent expected-dose model in the database: loading
 * a beam-data file (docs/format-beam-data.md) onto its machine and beam as a
 * new version with an effective date, and listing the versions. A version is
 * never edited or deleted; the one in force at a moment is the latest whose
 * effective date is not after it. The model itself: fxl/beam_model.h; how it
 * is used at plan import: docs/expected-dose.md. */
#ifndef FXL_BEAM_DATA_H
#define FXL_BEAM_DATA_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Largest difference accepted between a beam-data file and the machine and
 * beam it is loaded onto (the file must describe that beam). */
#define FXL_BEAM_DATA_LENGTH_TOL_CM 0.05      /* SAD, d_max, normalisation distance */
#define FXL_BEAM_DATA_DOSE_TOL_REL 0.001      /* reference dose per MU, relative */

/* One stored version. */
typedef struct fxl_beam_data_info {
    int64_t id;                        /* beam_data.id */
    int64_t beam_id;
    char machine[65];
    char beam[33];
    double energy;                     /* MV */
    char effective_from[FXL_TIME_LEN];
    char sha256[65];                   /* of the file as loaded */
    char source[201];                  /* the file's "source" text, "" if none */
    char loaded_by[65];
    char created_at[FXL_TIME_LEN];
    int in_force;                      /* 1: the version in force now */
} fxl_beam_data_info;

/* Loads the beam-data file at `path` (physicist or admin) as a new version
 * for the machine and beam the file names, effective from `effective`
 * ('YYYY-MM-DD' or a full UTC time; NULL = now). Everything is checked before
 * anything is written: the file (fxl_beam_json_parse), that the machine and
 * beam exist, that the beam is a photon beam of the file's energy, and that
 * the file's SAD, d_max, reference dose per MU and normalisation distance
 * agree with what the machine and beam already state (within the tolerances
 * above). A second version with the same effective date for the same beam is
 * FXL_ECONFLICT. One transaction with an audit row. *out (may be NULL)
 * receives what was stored. */
int fxl_beam_data_load(fxl_ctx *ctx, fxl_beam_data_info *out, const char *path,
                       const char *effective);

/* Every stored version, of one machine (NULL: every machine), ordered by
 * machine, beam and effective date. FXL_ENOTFOUND for an unknown machine.
 * *out is malloc'ed (free with free(); NULL when *n is 0). */
int fxl_beam_data_list(fxl_ctx *ctx, fxl_beam_data_info **out, size_t *n, const char *machine);

#endif
