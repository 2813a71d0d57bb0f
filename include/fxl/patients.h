/* Patients: medical record number (MRN) and name. A patient is added once and
 * never edited or deleted here; plans hang off it (fxl/plans.h). */
#ifndef FXL_PATIENTS_H
#define FXL_PATIENTS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

typedef struct fxl_patient {
    int64_t id;
    char mrn[65];
    char family_name[201];
    char given_name[201];         /* "" when not given */
    char birth_date[11];          /* 'YYYY-MM-DD', "" when not given */
    char created_at[FXL_TIME_LEN];
    int plans;                    /* number of plans (including replaced ones) */
    int fractions_logged;         /* fractions logged over all its plans */
} fxl_patient;

/* Adds a patient (therapist, physicist or admin), one transaction with an
 * audit row. mrn 1 to 64 printable characters without spaces at either end;
 * family_name 1 to 200 characters; given_name NULL or up to 200; birth_date
 * NULL or 'YYYY-MM-DD', not before 1900-01-01 and not after today. A taken MRN
 * is FXL_ECONFLICT. *out_id may be NULL. */
int fxl_patient_add(fxl_ctx *ctx, int64_t *out_id, const char *mrn, const char *family_name,
                    const char *given_name, const char *birth_date);

/* The patient with this MRN into *out; FXL_ENOTFOUND naming the MRN. */
int fxl_patient_get(fxl_ctx *ctx, fxl_patient *out, const char *mrn);

/* Every patient ordered by family name, given name and MRN. *out is malloc'ed
 * (free with free(); NULL when *n is 0). */
int fxl_patient_list(fxl_ctx *ctx, fxl_patient **out, size_t *n);

#endif
