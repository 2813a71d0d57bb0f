/* Cross-calibration of a detector against a calibrated ion chamber for one
 * beam and one measured point (entrance or exit): N = D_chamber / mean
 * reading, in cGy per reading unit (AAPM TG-62; ESTRO Booklet 5). Never
 * edited: a newer calibration supersedes. */
#ifndef FXL_CALIBRATIONS_H
#define FXL_CALIBRATIONS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

#define FXL_CALIB_READINGS_MAX 100
#define FXL_CALIB_TEMP_DEFAULT_C 20.0   /* assumed room temperature when not given */
#define FXL_CALIB_SSD_DEFAULT_CM 100.0
#define FXL_CALIB_FIELD_DEFAULT_CM 10.0
#define FXL_CALIB_CHAMBER_DOSE_MAX_CGY 2000.0
#define FXL_CALIB_VALID_DAYS_MAX 3650
/* Acceptance limits used when the settings are not stored (docs/equipment.md):
 * readings SD as % of their mean, change of N against the previous
 * calibration of the same detector, beam and point, and difference of a
 * first calibration from the detector's nominal sensitivity. */
#define FXL_CALIB_SD_LIMIT_PCT_DEFAULT 1
#define FXL_CALIB_CHANGE_LIMIT_PCT_DEFAULT 3
#define FXL_CALIB_NOMINAL_LIMIT_PCT_DEFAULT 10

/* The acceptance checks a physicist may confirm (fxl_calib_spec.confirm),
 * by the names the CLI option takes: "sd", "n-change", "nominal". */
#define FXL_CALIB_CONFIRM_SD 1
#define FXL_CALIB_CONFIRM_N_CHANGE 2
#define FXL_CALIB_CONFIRM_NOMINAL 4
/* Parses "sd,n-change" into the bits above; FXL_EINVAL for an unknown name. */
int fxl_calib_confirm_parse(int *out, const char *names);

/* What fxl_calib_add writes. */
typedef struct fxl_calib_spec {
    const char *serial;            /* detector, must exist and not be retired */
    const char *machine;
    const char *beam;
    const char *point;             /* "entrance" or "exit" */
    double chamber_dose_cgy;       /* > 0, at most FXL_CALIB_CHAMBER_DOSE_MAX_CGY */
    const double *readings;        /* n readings, each > 0, detector unit; borrowed */
    size_t n_readings;             /* 1..FXL_CALIB_READINGS_MAX */
    double temp_c;                 /* 10..45, NaN = FXL_CALIB_TEMP_DEFAULT_C */
    double ssd_cm;                 /* 50..200, NaN = 100 */
    double field_size_cm;          /* 1..50 (equivalent square), NaN = 10 */
    double ref_thickness_cm;       /* exit only: phantom thickness of the set-up,
                                      0 < t <= 60 cm, NaN or 0 = not given */
    int confirm;                   /* FXL_CALIB_CONFIRM_* bits: the physicist
                                      confirms these failed acceptance checks */
    int valid_days;                /* 1..FXL_CALIB_VALID_DAYS_MAX; 0 = default */
    const char *valid_until;       /* stored form, or NULL; exclusive with valid_days */
    const char *calibrated_at;     /* stored form, or NULL = now; not in the future */
    const char *chamber;           /* free text (chamber and electrometer), or NULL */
    const char *notes;             /* free text, or NULL */
} fxl_calib_spec;

/* One calibration as stored, with names resolved. */
typedef struct fxl_calibration {
    int64_t id;
    char serial[65];
    char reading_unit[8];
    char machine[65];
    char beam[33];
    char point[9];
    char calibrated_at[FXL_TIME_LEN];
    char valid_until[FXL_TIME_LEN];
    double chamber_dose_cgy;
    int n;
    double mean;                   /* detector unit */
    double sd;                     /* sample SD (n - 1), detector unit; 0 for n == 1 */
    double factor_cgy_per_unit;
    double temp_c, ssd_cm, field_size_cm;
    double ref_thickness_cm;       /* exit reference phantom thickness, NaN if none */
    char confirmed_change[400];    /* the acceptance checks confirmed, "" if none */
    char chamber[201];
    char notes[501];
    char user[65];
    char readings_json[4096];      /* the readings as stored (JSON array) */
    /* derived at the moment listed: "current" (latest for detector, beam and
     * point, still valid), "expired" (latest, past valid_until) or
     * "superseded" (a later one exists). */
    char state[12];
    double previous_factor;        /* N of the calibration it superseded, NaN if none */
} fxl_calibration;

/* Validates everything before writing, computes mean, SD and N, writes the
 * calibration and its audit row in one transaction (physicist or admin).
 * Acceptance checks (settings calibration_sd_limit_pct,
 * calibration_change_limit_pct, calibration_nominal_limit_pct): a readings
 * SD above its limit, a change of N against the previous calibration of the
 * same detector, beam and point above its limit, or (first calibration) an N
 * off the nominal 1 / sensitivity by more than its limit is refused with
 * FXL_EINVAL naming the values, unless the failed check is named in
 * spec->confirm and the acting user is a physicist; the confirmation is then
 * stored with the row (confirmed_change) and its audit row.
 * Validity: valid_until when given (end of that day if a bare date), else
 * valid_days, else setting 'calibration_interval_days', else
 * FXL_CALIBRATION_INTERVAL_DAYS_DEFAULT (fxl/settings.h). On success *out
 * (may be NULL) holds the stored row, state and previous_factor included. */
int fxl_calib_add(fxl_ctx *ctx, fxl_calibration *out, const fxl_calib_spec *spec);

/* Calibrations of one detector (serial) or of all (serial NULL), newest
 * first; state evaluated at `at` (NULL = now). Heap array, free(). */
int fxl_calib_list(fxl_ctx *ctx, fxl_calibration **out, size_t *n, const char *serial,
                   const char *at);

#endif
