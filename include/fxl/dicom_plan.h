/* Reading a DICOM RT Plan given in the DICOM JSON Model (PS3.18 Annex F), as
 * written by pydicom's Dataset.to_json_dict() or dcmtk's dcm2json, or as a
 * DICOM Part 10 file (PS3.10, through fxl/dicom_part10.h), into a
 * plain C struct: patient, plan label, fractions, dose per fraction, and per
 * treatment beam its name, number, radiation type, energy, angles, wedge,
 * blocks and tray, meterset, SSD, collimator openings and equivalent squares.
 * All or nothing: a plan with anything unsupported (arcs, modulated beams,
 * protons, ions, neutrons, several fraction groups, ...) or with a required
 * attribute missing is refused with a message naming what. Tags read, units
 * and refusals: docs/dicom-import.md. No database: the caller resolves
 * patient, machine and beam and imports. Units: cm, degrees, MU, cGy. */
#ifndef FXL_DICOM_PLAN_H
#define FXL_DICOM_PLAN_H

#include <stddef.h>

#include "fxl/core.h"
#include "fxl/fxl.h"

/* Most treatment beams in one plan. */
#define FXL_DICOM_BEAMS_MAX 64

typedef struct fxl_dicom_beam {
    int number;                  /* Beam Number (300A,00C0) */
    char name[65];               /* Beam Name (300A,00C2); "beam <number>" if absent */
    char machine[65];            /* Treatment Machine Name (300A,00B2); "" if absent */
    char radiation[9];           /* Radiation Type (300A,00C6): "PHOTON" or "ELECTRON" */
    char modality[9];            /* the same as fxledger names it: "photon", "electron" */
    char delivery[16];           /* Treatment Delivery Type (300A,00CE); "TREATMENT" if absent */
    double energy;               /* Nominal Beam Energy (300A,0114), MV or MeV */
    double gantry_deg;           /* Gantry Angle (300A,011E), 0 <= g < 360 */
    double collimator_deg;       /* Beam Limiting Device Angle (300A,0120); NaN if absent */
    double couch_deg;            /* Patient Support Angle (300A,0122); NaN if absent */
    double sad_cm;               /* Source-Axis Distance (300A,00B4), mm / 10; NaN if absent */
    double ssd_cm;               /* Source to Surface Distance (300A,0130) of the first
                                    control point, mm / 10 */
    double mu;                   /* Beam Meterset (300A,0086) from the fraction group */
    double beam_dose_cgy;        /* Beam Dose (300A,0084), Gy x 100, per fraction at
                                    the beam's dose specification point; NaN if absent */
    int wedge_count;             /* wedges in the beam (0 or 1; more are refused) */
    double wedge_deg;            /* Wedge Angle (300A,00D5); 0 when no wedge */
    char wedge_id[65];           /* Wedge ID (300A,00D4); "" when none */
    char wedge_type[17];         /* Wedge Type (300A,00D3): STANDARD, MOTORIZED, DYNAMIC */
    int block_count;             /* Number of Blocks (300A,00F0) */
    int tray;                    /* 1 if a photon beam carries blocks (on a tray) */
    char tray_id[65];            /* Block Tray ID (300A,00F5) of the first block; "" */
    char applicator_id[65];      /* Applicator ID (300A,0108) of the first applicator; "" */
    int bolus_count;             /* Number of Boli (300A,00ED) */
    double jaw_x_cm, jaw_y_cm;   /* jaw openings X2 - X1, Y2 - Y1 at the isocentre plane
                                    (from X/ASYMX, Y/ASYMY; from the MLC where a
                                    machine has no jaw in that direction) */
    double field_x_cm, field_y_cm; /* the opening after the MLC: the rectangle that
                                    bounds the open leaf pairs inside the jaws; the
                                    jaw opening when there is no MLC */
    int mlc;                     /* 1 if an MLC was read */
    double coll_eqsq_cm;         /* equivalent square of the jaws (Sterling), for S_c */
    double field_eqsq_cm;        /* equivalent square of field_x x field_y, for S_p */
} fxl_dicom_beam;

typedef struct fxl_dicom_plan {
    char sop_instance_uid[65];   /* (0008,0018); "" if absent */
    char patient_id[65];         /* Patient ID (0010,0020) */
    char patient_name[201];      /* Patient's Name (0010,0010), as written ("Family^Given") */
    char family_name[201];       /* its first component */
    char given_name[201];        /* its second component; "" if none */
    char label[65];              /* RT Plan Label (300A,0002) */
    char plan_name[65];          /* RT Plan Name (300A,0003); "" if absent */
    int fractions;               /* Number of Fractions Planned (300A,0078) */
    double dose_per_fraction_cgy;/* Target Prescription Dose (300A,0026) x 100 / fractions,
                                    from the one dose reference that has it; NaN if none */
    size_t n_beams;              /* treatment beams, in Beam Sequence order */
    fxl_dicom_beam *beams;       /* malloc'ed; freed by fxl_dicom_plan_release */
    fxl_reasons notes;           /* what was read but not taken (set-up beams skipped,
                                    several prescriptions, bolus, ...) */
} fxl_dicom_plan;

/* Parses `len` bytes of `text` holding one RT Plan in the DICOM JSON Model
 * (one data set object, or an array of exactly one). `source` names the file
 * in messages. On failure returns FXL_EINVAL with a one-line message in ctx
 * (ctx may be NULL) that names the unsupported feature or the missing or bad
 * attribute with its tag, and *out holds nothing (n_beams 0). On success
 * release *out with fxl_dicom_plan_release (also safe after failure). */
int fxl_dicom_plan_parse(fxl_ctx *ctx, fxl_dicom_plan *out, const char *text, size_t len,
                         const char *source);

/* Parses a DICOM Part 10 file held in data[0..len) (fxl/dicom_part10.h:
 * read with DCMTK, converted to UTF-8 and to the JSON Model) with the rules
 * of fxl_dicom_plan_parse; the same contract on failure and success. */
int fxl_dicom_plan_parse_part10(fxl_ctx *ctx, fxl_dicom_plan *out, const unsigned char *data, size_t len,
                                const char *source);

/* Reads and parses the file at `path` (FXL_EIO when it cannot be read): a
 * Part 10 file when it has the 128-byte preamble and "DICM", else the DICOM
 * JSON Model. At most 16 MiB. */
int fxl_dicom_plan_read(fxl_ctx *ctx, fxl_dicom_plan *out, const char *path);

void fxl_dicom_plan_release(fxl_dicom_plan *plan);

#endif
