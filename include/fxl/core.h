/* fxledger core: pure computation with no I/O and no SQLite. Interpolation in
 * correction tables, equivalent square, temperature correction, reading to
 * dose, deviation and the verdict for one measurement. Formulas and sources:
 * docs/physics.md. Units: doses cGy, lengths cm, angles degrees, temperatures
 * degC, temperature coefficients as a fraction per degC (0.003 = 0.3 %/degC). */
#ifndef FXL_CORE_H
#define FXL_CORE_H

#include <stddef.h>

/* ---- interpolation ------------------------------------------------------ */

/* Linear interpolation in a table of n points with strictly increasing xs.
 * x outside [xs[0], xs[n-1]] is FXL_ERANGE: tables are never extrapolated.
 * A one-point table answers only at its own x. FXL_EINVAL for n == 0, xs not
 * strictly increasing or a non-finite x. */
int fxl_interp_linear(double *out_y, const double *xs, const double *ys,
                      size_t n, double x);

/* Exact lookup for discrete parameters (wedge angle, tray): the point whose x
 * is within 1e-6 of x, else FXL_ERANGE. */
int fxl_lookup_exact(double *out_y, const double *xs, const double *ys,
                     size_t n, double x);

/* ---- small formulas ----------------------------------------------------- */

/* Equivalent square of an X x Y rectangle, 4A/P = 2XY/(X+Y) (Sterling). */
double fxl_equiv_square_cm(double x_cm, double y_cm);

/* CF_T = 1 / (1 + a (T - T_cal)), a in fraction per degC. */
double fxl_temp_correction(double coeff_per_c, double temp_c, double temp_cal_c);

/* Mean and sample standard deviation (n - 1 denominator) of n values; sd is
 * 0 for n == 1. FXL_EINVAL for n == 0 or a non-finite value. */
int fxl_mean_sd(double *out_mean, double *out_sd, const double *v, size_t n);

/* Deviation of measured from expected, percent: (D - D_exp) / D_exp x 100. */
double fxl_deviation_pct(double measured_cgy, double expected_cgy);

/* ---- reading to dose ---------------------------------------------------- */

typedef enum {
    FXL_CF_FIELD_SIZE = 0,  /* parameter: equivalent square, cm (continuous) */
    FXL_CF_SSD,             /* parameter: SSD, cm (continuous) */
    FXL_CF_WEDGE,           /* parameter: nominal wedge angle, deg, 0 = open (discrete) */
    FXL_CF_TRAY,            /* parameter: 0 = no tray, 1 = tray (discrete) */
    FXL_CF_ANGLE,           /* parameter: beam incidence on the detector, deg (continuous) */
    FXL_CF_THICKNESS,       /* exit only: patient (phantom) thickness, cm (continuous) */
    FXL_CF_SDD,             /* exit only: source-to-detector distance, cm (continuous) */
    FXL_CF_COUNT
} fxl_cf_param;

/* "field_size", "ssd", "wedge", "tray", "angle", "thickness", "sdd" (the
 * names in the schema). */
const char *fxl_cf_name(fxl_cf_param p);
int fxl_cf_parse(fxl_cf_param *out, const char *name);
/* 1 for wedge and tray (exact match), 0 for the interpolated parameters. */
int fxl_cf_is_discrete(fxl_cf_param p);
/* 1 when parameter p corrects a reading at this measured point: entrance
 * field_size, ssd, wedge, tray, angle; exit field_size, thickness, sdd,
 * wedge, tray, angle (an exit diode never takes the entrance SSD factor;
 * docs/physics.md). exit: 0 entrance, 1 exit. */
int fxl_cf_applies(fxl_cf_param p, int exit);

/* A correction table borrowed from the caller; n == 0 means none commissioned. */
typedef struct fxl_factor_table {
    const double *x;
    const double *factor;
    size_t n;
} fxl_factor_table;

/* Reasons attached to a result, in plain words, most important first. */
#define FXL_REASONS_MAX 8
#define FXL_REASON_LEN 200
typedef struct fxl_reasons {
    int n;
    char text[FXL_REASONS_MAX][FXL_REASON_LEN];
} fxl_reasons;
#define FXL_REASONS_INIT {0}
void fxl_reasons_add(fxl_reasons *r, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

typedef struct fxl_dose_input {
    double reading;                  /* detector unit (normally nC) */
    double background;               /* M_0, same unit; usually 0 */
    int exit;                        /* 0 entrance, 1 exit: which parameters apply
                                        (fxl_cf_applies) */
    double factor_n;                 /* calibration factor, cGy per unit */
    double param[FXL_CF_COUNT];      /* the field's value of each parameter */
    double ref[FXL_CF_COUNT];        /* the calibration's reference condition */
    fxl_factor_table table[FXL_CF_COUNT];
    double temp_coeff_per_c;         /* detector's a, fraction per degC */
    double temp_c;                   /* temperature at measurement */
    double temp_cal_c;               /* temperature at calibration */
    const char *reading_unit;        /* for reason texts, e.g. "nC"; may be NULL */
} fxl_dose_input;

typedef struct fxl_dose_result {
    int evaluable;                   /* 1 if dose_cgy holds a result */
    double cf[FXL_CF_COUNT];         /* each factor used (NaN if it failed or does
                                        not apply to the point) */
    double cf_temp;
    double dose_cgy;                 /* NaN unless evaluable */
    fxl_reasons reasons;             /* why not evaluable */
} fxl_dose_result;

/* D = (M - M_0) x N x (product of the factors that apply to the point) x CF_T:
 * entrance CF_fs CF_ssd CF_wedge CF_tray CF_angle, exit CF_fs CF_thickness
 * CF_sdd CF_wedge CF_tray CF_angle.
 * A parameter without a table gets CF = 1 only when it equals the reference
 * condition (within 1e-6); otherwise, and for any value outside its table,
 * the result is not evaluable with a reason naming the parameter and the
 * commissioned range. Always returns 0; the outcome is in *out. */
int fxl_dose_from_reading(fxl_dose_result *out, const fxl_dose_input *in);

/* ---- the verdict -------------------------------------------------------- */

typedef enum {
    FXL_VERDICT_WITHIN = 0,
    FXL_VERDICT_OUTSIDE_TOLERANCE,
    FXL_VERDICT_OUTSIDE_ACTION,
    FXL_VERDICT_NOT_EVALUABLE,
    FXL_VERDICT_IMPLAUSIBLE
} fxl_verdict;

/* Schema name ("within_tolerance", ...) and words for people ("within
 * tolerance", ...). */
const char *fxl_verdict_name(fxl_verdict v);
const char *fxl_verdict_label(fxl_verdict v);
int fxl_verdict_parse(fxl_verdict *out, const char *name);
/* What the therapist should do next, in one or two plain sentences. */
const char *fxl_verdict_guidance(fxl_verdict v);
/* The guidance for a gross deviation (fxl_judgement.gross): re-read the
 * electrometer and check the unit first; a confirmed reading stands; hold
 * treatment and call the physicist. */
const char *fxl_gross_guidance(void);

/* Largest absolute floor a threshold set may carry, cGy (docs/levels.md): a
 * floor is for detector noise on small doses, a few tenths of a cGy to a few
 * cGy; a larger one would pass whole small-dose fields unjudged. A stored
 * floor above it is used as this value. */
#define FXL_FLOOR_MAX_CGY 5.0
/* Largest action level any threshold set may carry, percent (schema). */
#define FXL_ACTION_MAX_PCT 50.0

typedef struct fxl_levels {
    int present;          /* 0: no threshold set applies */
    double tolerance_pct;
    double action_pct;
    double floor_cgy;     /* |D - D_exp| at or below this is within tolerance */
} fxl_levels;

/* Everything the verdict depends on, loaded by the store. */
typedef struct fxl_judge_input {
    double reading;              /* as entered */
    int detector_in_service;     /* 0 if retired or out for service */
    const char *detector_status; /* for the reason text, e.g. "retired" */
    int calibration_found;       /* a calibration for detector, beam and point */
    int calibration_valid;       /* ... valid on the treatment date */
    const char *calibration_valid_until;  /* for the reason text */
    fxl_dose_result dose;        /* from fxl_dose_from_reading (if calibrated) */
    double expected_dose_cgy;    /* NaN or <= 0 when missing */
    fxl_levels levels;
    double implausible_pct;      /* plausibility bound: |deviation| above it is a
                                    gross deviation (default 50) */
    const char *reading_unit;    /* for reason texts, e.g. "nC"; may be NULL */
} fxl_judge_input;

typedef struct fxl_judgement {
    fxl_verdict verdict;
    int gross;                   /* 1: beyond the plausibility bound (or measured/
                                    expected outside 0.1..10); verdict is then
                                    outside the action level */
    double deviation_pct;        /* rounded to 0.01 %; NaN when not computed */
    fxl_reasons reasons;
} fxl_judgement;

/* Judges one measurement. Order: implausible reading (<= 0 or not finite;
 * the store refuses those at input, so only a caller bypassing it sees
 * this); not evaluable (detector not in service, no calibration or expired,
 * dose not evaluable, expected dose missing); gross deviation (|dev| above
 * the plausibility bound or measured/expected outside 0.1..10): outside the
 * action level with gross = 1, whatever the levels; not evaluable when no
 * levels apply; then |dev| <= tolerance, or |D - D_exp| <= floor (capped at
 * FXL_FLOOR_MAX_CGY) with |dev| <= action, is within tolerance, |dev| <=
 * action is outside tolerance, above is outside the action level. A
 * deviation exactly at a level counts as inside that level; the comparison is
 * made on the deviation rounded to 0.01 %, the precision shown to users. */
void fxl_judge(fxl_judgement *out, const fxl_judge_input *in);

#endif
