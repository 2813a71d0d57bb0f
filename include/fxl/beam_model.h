/* fxledger independent expected-dose model: the AAPM TG-71 monitor-unit
 * formalism run backwards, for photon beams. Beam data per machine and beam
 * (output factors, wedge and tray factors, TMR or PDD tables), bilinear
 * interpolation without extrapolation, the expected entrance dose at d_max
 * (SSD and isocentric set-ups), the expected exit dose at d_max before the
 * exit surface, and the cross-check of a planning-system value. Pure
 * computation: no I/O, no SQLite. Formalism and sources: docs/expected-dose.md;
 * the beam-data file: docs/format-beam-data.md (parser in fxl/beam_json.h).
 * Units: cm, cGy, cGy per MU, degrees; PDD in percent. */
#ifndef FXL_BEAM_MODEL_H
#define FXL_BEAM_MODEL_H

#include <stddef.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* ---- tables ------------------------------------------------------------- */

/* A one-parameter table with strictly increasing x; owns both arrays. */
typedef struct fxl_table1 {
    size_t n;
    double *x;
    double *y;
} fxl_table1;

/* A two-parameter table: v at (x[i], y[j]) is v[j * nx + i] (one row per y).
 * x and y strictly increasing; owns all three arrays. For depth-dose tables x
 * is the side of the equivalent square (cm) and y the depth (cm). */
typedef struct fxl_grid {
    size_t nx, ny;
    double *x;
    double *y;
    double *v;
} fxl_grid;

/* FXL_EINVAL unless the table is usable: n >= 1, finite values, x strictly
 * increasing (and for the grid the same for y, with nx * ny values). */
int fxl_table1_check(const fxl_table1 *t);
int fxl_grid_check(const fxl_grid *g);

/* Linear interpolation in a one-parameter table (fxl_interp_linear). */
int fxl_table1_interp(double *out, const fxl_table1 *t, double x);

/* Bilinear interpolation in g at (x, y). A point outside the table in either
 * direction (beyond 1e-6 of the first or last point) is FXL_ERANGE: nothing is
 * extrapolated. A grid with one column answers only at its own x (linear in
 * y), and likewise for one row. FXL_EINVAL for an unusable grid or a
 * non-finite x or y. */
int fxl_interp_bilinear(double *out, const fxl_grid *g, double x, double y);

/* ---- beam data ---------------------------------------------------------- */

typedef enum {
    FXL_DEPTH_TMR = 0,   /* tissue-maximum ratios tabulated directly */
    FXL_DEPTH_PDD        /* percentage depth doses at one SSD, converted to TMR */
} fxl_depth_kind;

/* The beam data of one photon beam of one machine. Filled by
 * fxl_beam_json_parse (fxl/beam_json.h); owns its tables; release with
 * fxl_beam_model_release. */
typedef struct fxl_beam_model {
    char machine[65];              /* machines.name */
    char beam[33];                 /* beams.name, e.g. "6X" */
    char modality[9];              /* "photon" (the only modality modelled) */
    double energy;                 /* nominal, MV */
    double sad_cm;                 /* source-axis distance */
    double dmax_cm;                /* depth of maximum dose, reference field */
    double ref_dose_cgy_per_mu;    /* D0': dose per MU at the reference point */
    double ref_distance_cm;        /* SSD0 + d0: 101.5 for SSD 100 + d_max 1.5,
                                      100 for isocentric normalisation */
    double ref_field_cm;           /* reference field side (normally 10) */
    int output_combined;           /* 1: S_cp only (scp); 0: S_c (sc) and S_p (sp) */
    fxl_table1 sc;                 /* S_c vs collimator equivalent square at SAD */
    fxl_table1 sp;                 /* S_p vs equivalent square at the point */
    fxl_table1 scp;                /* combined output factor (when output_combined) */
    fxl_table1 wedge;              /* nominal wedge angle (deg) -> wedge factor,
                                      exact match; n == 0 when no wedge */
    double tray_factor;            /* NaN when no tray is commissioned */
    fxl_depth_kind depth_kind;
    fxl_grid tmr;                  /* depth_kind TMR: x equivalent square at the
                                      point (cm), y depth (cm), TMR */
    fxl_grid pdd;                  /* depth_kind PDD: x equivalent square at the
                                      surface (cm), y depth (cm), PDD (%) */
    double pdd_ssd_cm;             /* SSD at which the PDD table was measured */
    char source[201];              /* free text: where the data come from */
} fxl_beam_model;

/* Sets every number to NaN and every table to empty. */
void fxl_beam_model_init(fxl_beam_model *m);
/* Frees the tables and re-initialises; accepts NULL. */
void fxl_beam_model_release(fxl_beam_model *m);

/* ---- single lookups ------------------------------------------------------ */
/* Each returns 0 with the factor in *out, FXL_ERANGE outside the commissioned
 * table, or FXL_EINVAL when the beam has no such table. */

/* S_c at the collimator equivalent square r_c (cm, projected to the SAD). */
int fxl_model_sc(double *out, const fxl_beam_model *m, double rc_cm);
/* S_p at the equivalent square r_d of the field at the point (cm). */
int fxl_model_sp(double *out, const fxl_beam_model *m, double rd_cm);
/* Combined S_c x S_p: the product of the two tables, or the S_cp table (then
 * evaluated at r_d; see docs/expected-dose.md). */
int fxl_model_scp(double *out, const fxl_beam_model *m, double rc_cm, double rd_cm);
/* Wedge factor for a nominal angle (0 = open = 1, exact match otherwise). */
int fxl_model_wedge(double *out, const fxl_beam_model *m, double wedge_deg);
/* Tray factor (tray 0: 1; tray 1: the commissioned factor). */
int fxl_model_tray(double *out, const fxl_beam_model *m, int tray);

/* TMR at depth d (cm) for the equivalent square r_d at that depth (cm). For a
 * PDD beam the TMR is converted (Khan; docs/expected-dose.md):
 *   TMR(d, r_d) = PDD(d, r, f)/100 x ((f + d)/(f + d_max))^2 x S_p(r_m)/S_p(r_d)
 * with f the PDD's SSD, r = r_d f/(f + d), r_m = r (f + d_max)/f; *out_pdd_pct
 * (may be NULL) receives the PDD used, NaN for a TMR beam. Needs S_p, so a
 * PDD beam with only combined output factors is FXL_EINVAL. */
int fxl_model_tmr(double *out, double *out_pdd_pct, const fxl_beam_model *m,
                  double depth_cm, double rd_cm);

/* ---- expected dose -------------------------------------------------------- */

typedef enum { FXL_MODEL_ENTRANCE = 0, FXL_MODEL_EXIT } fxl_model_point;
typedef enum { FXL_MODEL_SETUP_SSD = 0, FXL_MODEL_SETUP_ISO } fxl_model_setup;

typedef struct fxl_model_input {
    fxl_model_point point;
    fxl_model_setup setup;
    double mu;                     /* monitor units, > 0 */
    double ssd_cm;                 /* source-skin distance on the central axis;
                                      for an isocentric set-up NaN means
                                      SAD - iso_depth_cm */
    double iso_depth_cm;           /* isocentric: depth of the isocentre below
                                      the entrance skin; NaN if not given */
    double x_cm, y_cm;             /* collimator (jaw) opening projected to the
                                      SAD (the isocentre plane) */
    double field_eqsq_cm;          /* equivalent square of the shaped field
                                      (MLC, blocks) at the SAD; NaN = the jaws */
    double wedge_deg;              /* nominal angle, 0 = open */
    int tray;                      /* 0 or 1 */
    double thickness_cm;           /* patient thickness on the beam axis (exit) */
} fxl_model_input;

/* Sets every number to NaN, point entrance, set-up SSD, wedge 0, tray 0. */
void fxl_model_input_init(fxl_model_input *in);

/* The expected dose and every factor that made it. */
typedef struct fxl_model_result {
    int computed;                  /* 1 if dose_cgy holds a result */
    fxl_model_point point;
    fxl_model_setup setup;
    double dose_cgy;               /* NaN unless computed */
    double mu;
    double ref_dose_cgy_per_mu;    /* D0' */
    double ref_distance_cm;        /* SSD0 + d0 */
    double sad_cm;
    double dmax_cm;
    double ssd_cm;                 /* as used (isocentric: SAD - depth if derived) */
    double depth_cm;               /* d_max (entrance) or t - d_max (exit) */
    double spd_cm;                 /* source-point distance SSD + depth */
    double rc_cm;                  /* collimator equivalent square at the SAD */
    double rd_cm;                  /* field equivalent square at the point */
    int output_combined;           /* 1: scp is the combined table's value */
    double sc, sp;                 /* NaN when combined */
    double scp;                    /* S_c x S_p as used */
    double tmr;                    /* 1 for the entrance point (d = d_max) */
    double pdd_pct;                /* PDD behind a converted TMR; NaN otherwise */
    double inverse_square;         /* (SSD0 + d0)^2 / SPD^2 */
    double wedge_factor;
    double tray_factor;
    fxl_reasons reasons;           /* why not computed */
} fxl_model_result;

/* Expected dose at the point of `in` from the beam data `m`:
 *   D = MU x D0' x S_c(r_c) x S_p(r_d) x TMR(depth, r_d)
 *       x ((SSD0 + d0)/(SSD + depth))^2 x WF x TF
 * depth = d_max at the entrance (TMR = 1), t - d_max at the exit;
 * r_d = r_field x (SSD + depth)/SAD. Every factor computed is filled even when
 * a later one fails; a missing or out-of-range input or table value leaves
 * computed 0 with reasons naming it and the commissioned range. Returns 0,
 * or FXL_EINVAL only for NULL pointers. */
int fxl_model_expected(fxl_model_result *out, const fxl_beam_model *m,
                       const fxl_model_input *in);

/* ---- cross-check of a planning-system value --------------------------------- */

/* Default level for the disagreement between a planning-system expected dose
 * and the model, percent (docs/expected-dose.md explains the choice). */
#define FXL_MODEL_CROSSCHECK_PCT_DEFAULT 5.0

typedef enum {
    FXL_XCHECK_AGREES = 0,         /* |deviation| <= level */
    FXL_XCHECK_DISAGREES,          /* |deviation| > level: open a queue item */
    FXL_XCHECK_NOT_CHECKED         /* the model gave no value, or no TPS value */
} fxl_xcheck_outcome;

typedef struct fxl_crosscheck {
    fxl_xcheck_outcome outcome;
    double tps_cgy;
    double model_cgy;              /* NaN when the model gave none */
    double deviation_pct;          /* (TPS - model)/model x 100, rounded to 0.01 */
    double level_pct;
    char summary[FXL_REASON_LEN];  /* one line for the queue item or the listing */
} fxl_crosscheck;

/* Compares a planning-system expected dose with the model result. A deviation
 * exactly at the level agrees (the comparison is on the rounded deviation, as
 * for the verdict). level_pct must be > 0 and <= 50, else FXL_EINVAL. */
int fxl_model_crosscheck(fxl_crosscheck *out, double tps_cgy, const fxl_model_result *model,
                         double level_pct);

const char *fxl_xcheck_name(fxl_xcheck_outcome o);  /* "agrees", "disagrees", "not_checked" */

#endif
