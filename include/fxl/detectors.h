/* In vivo detectors: their properties, an append-only status history
 * (in service, out for service, retired) and the dose accumulated since their
 * latest calibration. Units: temperature coefficient as a fraction per degC
 * (0.003 = 0.3 %/degC), sensitivity in reading unit per cGy, doses cGy. */
#ifndef FXL_DETECTORS_H
#define FXL_DETECTORS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Accepted range of the temperature coefficient, fraction per degC. Typical
 * diodes are 0.001 to 0.005 (common practice); the bound refuses a value typed
 * in percent by mistake above 2 %/degC. */
#define FXL_TEMP_COEFF_MAX 0.02

/* What fxl_detector_add writes. Optional numbers are NaN, optional text NULL. */
typedef struct fxl_detector_spec {
    const char *serial;            /* 1 to 64 characters, unique */
    const char *label;             /* 1 to 64 characters */
    const char *kind;              /* photon_diode, electron_diode, small_field_diode,
                                      mosfet, osl, tld, other */
    const char *reading_unit;      /* nC (NULL = nC), pC, mV, count, cGy */
    double sensitivity;            /* reading unit per cGy, > 0, or NaN */
    double temp_coeff_per_c;       /* -FXL_TEMP_COEFF_MAX..FXL_TEMP_COEFF_MAX; NaN = not
                                      given: refused for a diode kind, 0 otherwise */
    const char *buildup;           /* free text, up to 200 characters, or NULL */
    double dose_limit_cgy;         /* accumulated-dose limit for recalibration, or NaN */
} fxl_detector_spec;

/* Adds a detector (physicist or admin) and its first status row, in service
 * from now. A taken serial is FXL_ECONFLICT. *out_id may be NULL. */
int fxl_detector_add(fxl_ctx *ctx, int64_t *out_id, const fxl_detector_spec *spec);

typedef struct fxl_detector {
    int64_t id;
    char serial[65];
    char label[65];
    char kind[24];
    char reading_unit[8];
    double sensitivity;            /* NaN when not given */
    double temp_coeff_per_c;
    char buildup[201];             /* "" when not given */
    double dose_limit_cgy;         /* NaN when not given */
    char created_at[FXL_TIME_LEN];
    /* derived at the moment asked about: */
    char status[16];               /* in_service, out_for_service, retired */
    char status_since[FXL_TIME_LEN];   /* "" when no status row */
    char status_reason[201];
    char last_calibrated_at[FXL_TIME_LEN];  /* "" when never calibrated */
    double accumulated_dose_cgy;   /* since last_calibrated_at (all time if never) */
    int64_t measurement_count;     /* measurements counted in accumulated_dose_cgy */
} fxl_detector;

/* Status, latest calibration and accumulated dose are evaluated at `at`
 * (stored form; NULL = now). Accumulated dose: the sum of corrected_dose_cgy
 * of this detector's measurements treated after its latest calibration (any
 * beam, any point) and not superseded by an amendment; 0 when none. */
int fxl_detector_get(fxl_ctx *ctx, fxl_detector *out, const char *serial, const char *at);

/* Every detector, ordered by serial; *out is a heap array owned by the caller
 * (free()). */
int fxl_detector_list(fxl_ctx *ctx, fxl_detector **out, size_t *n, const char *at);

/* detectors.id of `serial`, FXL_ENOTFOUND if unknown. */
int fxl_detector_find(fxl_ctx *ctx, int64_t *out_id, const char *serial);

typedef struct fxl_detector_status_row {
    int64_t id;
    char status[16];
    char effective_at[FXL_TIME_LEN];
    char reason[201];
    char user[65];                 /* login of who recorded it */
    char created_at[FXL_TIME_LEN];
} fxl_detector_status_row;

/* The status history of a detector, oldest first; heap array, free(). */
int fxl_detector_status_history(fxl_ctx *ctx, fxl_detector_status_row **out, size_t *n,
                                const char *serial);

/* Appends a status row (physicist or admin). status: in_service,
 * out_for_service or retired; reason 1 to 200 characters, required;
 * effective_at in stored form or NULL for now, not in the future and not
 * before the latest row already recorded. Refused when the detector already
 * has that status, and after retirement (retired is final). */
int fxl_detector_set_status(fxl_ctx *ctx, const char *serial, const char *status,
                            const char *reason, const char *effective_at);

/* 1 if `kind` / `status` / `unit` is one the schema accepts. */
int fxl_detector_kind_valid(const char *kind);
/* 1 for photon_diode, electron_diode and small_field_diode. */
int fxl_detector_kind_is_diode(const char *kind);
int fxl_detector_status_valid(const char *status);
int fxl_detector_unit_valid(const char *unit);

#endif
