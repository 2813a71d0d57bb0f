/* Patients: medical record number (MRN) and name. A patient is added once and
 * never deleted; a mistyped MRN, name or birth date is corrected by a
 * physicist or admin with a reason, and every correction stays in the
 * patient's history (append-only, docs/patients.md). Plans hang off it
 * (fxl/plans.h). */
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


/* Longest reason of a correction, characters. */
#define FXL_PATIENT_REASON_MAX 500

/* A correction: NULL members are left as they are; given_name "" and
 * birth_date "" clear the value. */
typedef struct fxl_patient_correction {
    const char *mrn;              /* new MRN */
    const char *family_name;
    const char *given_name;
    const char *birth_date;       /* 'YYYY-MM-DD' or "" */
    const char *reason;           /* required, 1..FXL_PATIENT_REASON_MAX characters */
} fxl_patient_correction;

/* Corrects patient `mrn` (physicist or admin): validated as in
 * fxl_patient_add (a new MRN already taken is FXL_ECONFLICT; nothing
 * changed is FXL_EINVAL), then ONE transaction writes one correction row per
 * changed item (old value, new value, reason, who, when), the patient's
 * current identity and an audit row carrying old and new values. Plans,
 * fractions and measurements keep pointing at the same patient. */
int fxl_patient_correct(fxl_ctx *ctx, const char *mrn, const fxl_patient_correction *c);

/* One correction as listed, oldest first. */
typedef struct fxl_patient_change {
    int64_t id;
    char item[16];                /* "mrn", "family_name", "given_name", "birth_date" */
    char old_value[201];          /* "" when it was empty */
    char new_value[201];
    char reason[FXL_PATIENT_REASON_MAX + 1];
    char user[65];
    char at[FXL_TIME_LEN];
} fxl_patient_change;

/* The corrections of the patient now known as `mrn` (or once known so: an
 * old MRN finds the patient too), oldest first. *out is a heap array
 * (free()), NULL when *n is 0. Any role may read. */
int fxl_patient_history(fxl_ctx *ctx, fxl_patient_change **out, size_t *n, const char *mrn);

#endif
